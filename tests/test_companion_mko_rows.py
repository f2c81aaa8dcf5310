"""The sequence's MKO rows (T9.5-Y4) and the per-row J, H, K system (issue 11).

The bundled sequence gives 2MASS J, H, Ks for G0-T9 and MKO J, K for T9.5-Y4
(column ``jhk_sys``; why T9.5 counts as MKO is in the bundled file's header).
Nothing is converted between the systems: MKO measurements meet only the MKO
rows, 2MASS measurements only the 2MASS rows, and the output says so.
The photometry below is synthetic (the sequence's own values), not of real objects.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.companion import ClassifySettings, classify, load_dwarf_sequence, photometry_from_magnitudes, type_code
from motes.companion.sequence import read_dwarf_sequence
from motes.errors import InputError


@pytest.fixture(scope="module")
def seq():
    return load_dwarf_sequence()


def test_rows_carry_their_system(seq):
    assert seq.band_range("2mass_j") == (type_code("G0"), type_code("T9"))
    assert seq.band_range("2mass_ks") == (type_code("G0"), type_code("T9"))
    assert seq.band_range("mko_j") == (type_code("T9.5"), type_code("Y4"))
    assert seq.band_range("mko_k") == (type_code("T9.5"), type_code("Y2"))
    assert np.isnan(seq.band_range("mko_h")[0])          # the source gives no J - H for these rows
    assert np.isnan(seq.value("2mass_j", "Y0")) and np.isnan(seq.value("mko_j", "T9"))
    assert np.isnan(seq.value("bc_ks", "Y0"))            # BC_Ks is a 2MASS Ks quantity
    assert "jhk_sys" in seq.header and "Stephens & Leggett 2004" in seq.header


def test_a_synthetic_y_dwarf_in_mko_jhk_is_typed_y(seq):
    j, k = (float(seq.value(b, "Y1")) for b in ("mko_j", "mko_k"))
    mags = {"mko_j": (j + 2.0, 0.05), "mko_h": (j + 2.0, 0.05), "mko_k": (k + 2.0, 0.05)}  # H: no row has one
    result = classify(photometry_from_magnitudes(mags), ClassifySettings(mode="colours", blackbody="never"))
    est = result.estimate
    assert est.source == "mean dwarf sequence" and est.mode == "colours"
    assert est.reported >= type_code("Y0"), est.label
    assert all(lo >= type_code("T9.5") for lo, _, _ in est.intervals)
    assert set(result.ranking("sequence", "colours").bands) == {"mko_j", "mko_k"}
    assert any("rows G0-T9" in n and "not compared with the MKO measurements" in n for n in result.notes)
    assert any("mko_h used by no ranking" in n for n in result.notes)


def test_2mass_photometry_never_meets_the_mko_rows(seq):
    # a T9 dwarf in 2MASS J, H, Ks: the grid stops at the last 2MASS row, and the output says why
    mags = {b: (float(seq.value(b, "T9")) + 1.0, 0.05) for b in ("2mass_j", "2mass_h", "2mass_ks")}
    result = classify(photometry_from_magnitudes(mags), ClassifySettings(mode="colours"))
    ranking = result.ranking("sequence", "colours")
    assert ranking.grid["type_code"].max() == pytest.approx(type_code("T9"))
    assert any("rows T9.5-Y4 give J/H/K on the MKO system only" in n for n in result.notes)


def test_a_type_range_without_rows_in_the_observed_system_is_refused(seq):
    mags = {"mko_j": (20.0, 0.05), "mko_k": (20.5, 0.05)}
    with pytest.raises(InputError, match="holds no row on the mko system"):
        classify(photometry_from_magnitudes(mags), ClassifySettings(mode="colours", type_range=("M0", "L5")))


_HEAD = "spt teff log_l mass m_v v_rc v_ic m_g bp_rp g_rp m_j j_h h_ks m_ks ks_w1 w1_w2"
_ROW = "{spt} 500 - - - - - - - - {mj} - - {mk} {kw1} 3.0"


def test_user_file_with_the_system_column():
    text = "\n".join([_HEAD + " jhk_sys",
                      _ROW.format(spt="T8", mj=17.3, mk=16.9, kw1="-") + " 2mass",
                      _ROW.format(spt="Y0", mj=20.2, mk=21.0, kw1="-") + " MKO",
                      _ROW.format(spt="Y1", mj=22.7, mk=22.2, kw1="-") + " mko"])
    user = read_dwarf_sequence(text, "mine.txt")
    assert user.band_range("mko_j") == (90.0, 91.0) and user.band_range("2mass_j") == (88.0, 88.0)
    bad = text.replace(" MKO", " ukirt")
    with pytest.raises(InputError, match="jhk_sys must be one of 2mass, mko") as info:
        read_dwarf_sequence(bad, "mine.txt")
    assert "mine.txt" in str(info.value) and "line 3" in str(info.value)
    with pytest.raises(InputError, match="ks_w1 is 2MASS Ks - W1"):
        read_dwarf_sequence(text.replace("21.0 - 3.0 MKO", "21.0 0.5 3.0 MKO"), "mine.txt")


def test_format_2_files_may_still_give_mko_bands_as_extra_columns():
    text = "\n".join([_HEAD + " abs_mko_j",
                      _ROW.format(spt="T8", mj=17.3, mk=16.9, kw1="-") + " 17.0",
                      _ROW.format(spt="T9", mj=18.5, mk=18.6, kw1="-") + " 18.2"])
    user = read_dwarf_sequence(text, "old.txt")
    assert float(user.value("mko_j", "T8")) == pytest.approx(17.0)
    assert float(user.value("2mass_j", "T8")) == pytest.approx(17.3)
    assert user.bands.count("mko_j") == 1
    with pytest.raises(InputError, match="derived from the standard columns"):
        read_dwarf_sequence(text.replace(_HEAD, _HEAD + " jhk_sys").replace(" 17.0", " 2mass 17.0")
                            .replace(" 18.2", " 2mass 18.2"), "new.txt")


def test_ranked_table_has_no_row_for_a_type_the_grid_does_not_reach():
    # MKO J/K meet only the T9.5-Y rows: the T9.5 grid point lies on the T9/Y0 bin edge, and the
    # T9 bin holds no grid point of its own, so no 'T9' row may appear (it showed T9.5's values)
    seq = load_dwarf_sequence()
    mags = {b: (float(seq.value(b, "T9.5")), 0.05) for b in ("mko_j", "mko_k")}
    result = classify(photometry_from_magnitudes(mags, distance_pc=10.0, distance_pc_error=0.1))
    for ranking in (r for r in result.rankings if r.kind == "sequence"):
        labels = [row.label for row in ranking.rows]
        assert "T9" not in labels and labels[0] == "Y0", (ranking.mode, labels)
        assert sum(row.probability for row in ranking.rows) == pytest.approx(1.0, abs=1e-6)
