"""The built-in dwarf sequence, spectral-type codes and the template grid."""

from __future__ import annotations

import numpy as np
import pytest

from motes.companion import SEQUENCE_BANDS, load_dwarf_sequence, type_code, type_label
from motes.companion.sequence import read_dwarf_sequence
from motes.errors import InputError
from motes.photometry import get_band, top_hat_band


@pytest.fixture(scope="module")
def seq():
    return load_dwarf_sequence()


def test_type_codes_round_trip():
    for label in ("G2", "K7", "M0", "M4.5", "L0", "L9.5", "T0", "T8"):
        assert type_label(type_code(label)) == label
    assert type_code("M9") + 1 == type_code("L0")  # one subtype across the class boundary
    assert type_code("M5.5V") == type_code("M5.5")
    assert type_code("L3.5pec") == 73.5
    for bad in ("X3", "M", "L1+L3", "M5.5-6", ""):
        with pytest.raises(InputError):
            type_code(bad)


def test_covers_m0_to_t8_in_the_near_infrared(seq):
    lo, hi = seq.code_range
    assert lo <= type_code("M0") and hi >= type_code("T8")
    for band in ("2mass_j", "2mass_h", "2mass_ks"):
        b_lo, b_hi = seq.band_range(band)
        assert b_lo <= 60 and b_hi >= 88, band
    # the published sequence gives Ks - W1 only to T2: W1 and W2 stop there (nothing invented)
    for band in ("wise_w1", "wise_w2"):
        b_lo, b_hi = seq.band_range(band)
        assert b_lo <= 60 and b_hi == type_code("T2"), band
    assert "2024.05.15" in seq.header and "Pecaut & Mamajek 2013, ApJS 208, 9" in seq.citation


def test_interpolation_is_continuous_and_passes_through_rows(seq):
    # masses are tabulated by the published sequence to L3 only (none invented beyond)
    assert seq.band_range("mass")[1] == type_code("L3") and np.isnan(seq.value("mass", "L3.1"))
    for q in ("2mass_j", "2mass_ks", "teff", "mass"):
        codes = np.linspace(60, min(88, seq.band_range(q)[1]), 2801)
        values = seq.value(q, codes)
        assert np.all(np.isfinite(values)), q
        # no jumps: neighbouring points 0.01 subtype apart differ by far less than a subtype's change
        assert np.max(np.abs(np.diff(values))) < 0.05 * (np.nanmax(values) - np.nanmin(values)), q
        row = list(seq.labels).index("L2")
        assert seq.value(q, "L2") == pytest.approx(seq.columns[q][row], nan_ok=True)
    teff = seq.value("teff", np.linspace(60, 88, 2801))
    assert np.all(np.diff(teff) <= 1e-9), "Teff must fall with later type"


def test_no_extrapolation_outside_tabulated_rows(seq):
    lo, hi = seq.band_range("johnson_v")
    assert np.isnan(seq.value("johnson_v", hi + 0.5))
    assert np.isfinite(seq.value("johnson_v", hi))
    assert np.isnan(seq.value("2mass_j", seq.code_range[1] + 0.1))


def test_bolometric_correction_is_derived(seq):
    bc = seq.value("bc_ks", "M5")
    expected = 4.74 - 2.5 * seq.value("log_l", "M5") - seq.value("2mass_ks", "M5")
    assert bc == pytest.approx(expected)
    assert 1.5 < float(seq.value("bc_ks", "T8")) < 3.5 and 2.0 < float(seq.value("bc_ks", "M0")) < 3.0


def test_grid_uses_only_named_or_explicitly_mapped_bands(seq):
    user_k = top_hat_band("NIRC2.Kp", 2.12, 0.35)
    bands = [get_band("2mass_j"), user_k]
    plain = seq.grid(bands, step=0.5)
    assert plain.template_bands == ("2mass_j", "")
    assert np.isnan(plain.magnitudes[:, 1]).all()  # never substituted silently
    mapped = seq.grid(bands, {"NIRC2.Kp": "2mass_ks"}, step=0.5)
    assert mapped.template_bands == ("2mass_j", "2mass_ks")
    assert any("explicit user mapping" in n for n in mapped.notes)
    np.testing.assert_allclose(mapped.magnitudes[:, 1], seq.value("2mass_ks", mapped.type_code))
    with pytest.raises(InputError):
        seq.grid(bands, {"NIRC2.Kp": "NIRC2.Lp"})


def test_grid_steps_and_range(seq):
    grid = seq.grid([get_band("2mass_j")], step=0.1, code_range=(60, 88))
    assert grid.type_code[0] == 60 and grid.type_code[-1] == pytest.approx(88)
    assert np.allclose(np.diff(grid.type_code), 0.1)
    assert grid.absolute.all()
    assert set(SEQUENCE_BANDS) <= set(seq.columns)


def test_malformed_sequence_file_is_refused():
    with pytest.raises(InputError, match="columns"):
        read_dwarf_sequence("spt teff\nM0 3850\nM1 3600\n", "bad.txt")


# A user's own sequence table in the documented format (docs/companion.md, "Your own sequence"):
# format 1 (no m_ks column), invented numbers, a CITE section.
USER_SEQUENCE = """\
# my own mean dwarf sequence (invented numbers for this test)
# CITE
#   A. Author 2030, Journal 1, 1
#
spt  teff  log_l  mass   m_v  v_rc  v_ic  m_g  bp_rp  g_rp  m_j    j_h   h_ks  ks_w1  w1_w2
M0   3800  -1.2   0.6    -    -     -     -    -      -     6.0    0.60  0.20  0.10   0.00
M5   3000  -2.5   0.15   -    -     -     -    -      -     9.0    0.55  0.30  0.20   0.15
L0   2300  -3.6   0.08   -    -     -     -    -      -     11.8   0.75  0.50  0.35   0.25
L5   1700  -4.2   -      -    -     -     -    -      -     13.5   1.00  0.65  0.65   0.30
"""


def test_user_sequence_file_is_used_and_cited(tmp_path):
    from motes.companion import ClassifySettings, classify, photometry_from_magnitudes, read_dwarf_sequence_file

    path = tmp_path / "my_sequence.txt"
    path.write_text(USER_SEQUENCE)
    user = read_dwarf_sequence_file(path)
    assert user.citation == "A. Author 2030, Journal 1, 1" and user.labels == ("M0", "M5", "L0", "L5")
    # format 1: Ks from H - Ks
    assert float(user.value("2mass_ks", "M5")) == pytest.approx(9.0 - 0.55 - 0.30)
    mags = {b: (float(user.value(b, "L2")) + 2.0, 0.03) for b in ("2mass_j", "2mass_h", "2mass_ks", "wise_w1")}
    phot = photometry_from_magnitudes(mags, distance_pc=25.1189, distance_pc_error=0.1)
    result = classify(phot, ClassifySettings(mode="distance", sequence_file=str(path)))
    assert result.estimate.source == "dwarf sequence my_sequence.txt"
    assert abs(result.estimate.median - type_code("L2")) < 1.0
    from motes.report.run_citations import classification_citations

    # the sequence's CITE section is listed once, in what to cite for the run (not repeated in the notes)
    cited = {ref.topic: ref.text for ref in classification_citations(result)}
    assert cited["dwarf sequence"] == "A. Author 2030, Journal 1, 1"
    assert not any("cite" in n and "A. Author" in n for n in result.notes)
    builtin = classify(phot, ClassifySettings(mode="distance"))
    cited = {ref.topic: ref.text for ref in classification_citations(builtin)}
    assert cited["dwarf sequence"].startswith("Pecaut & Mamajek 2013, ApJS 208, 9")


def test_user_sequence_from_a_settings_file_via_the_cli(tmp_path, capsys):
    from motes.cli import main
    from motes.demo import companion as demo_companion

    demo_companion.write_inputs(tmp_path)
    (tmp_path / "tables").mkdir()
    (tmp_path / "tables" / "my_sequence.txt").write_text(USER_SEQUENCE.replace("# CITE\n#   A. Author 2030, Journal 1, 1\n", ""))
    (tmp_path / "classify.toml").write_text('[classify]\nsequence_file = "tables/my_sequence.txt"\n')
    code = main(["classify", str(tmp_path / demo_companion.TARGET_FILE), "--settings", str(tmp_path / "classify.toml"),
                 "--no-figures", "--output", str(tmp_path / "out")])
    out = capsys.readouterr().out
    assert code == 0
    assert "dwarf sequence my_sequence.txt" in out and "names nothing to cite" in out
    assert "mean dwarf sequence" not in out


def test_unreadable_user_sequence_names_the_file(tmp_path):
    from motes.companion import read_dwarf_sequence_file

    with pytest.raises(InputError, match="missing.txt"):
        read_dwarf_sequence_file(tmp_path / "missing.txt")
    bad = tmp_path / "bad.txt"
    bad.write_text(USER_SEQUENCE.replace("0.60  0.20", "0.60  x"))
    with pytest.raises(InputError, match="bad.txt"):
        read_dwarf_sequence_file(bad)
