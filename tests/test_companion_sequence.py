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
    for band in ("2MASS.J", "2MASS.H", "2MASS.Ks", "WISE.W1", "WISE.W2"):
        b_lo, b_hi = seq.band_range(band)
        assert b_lo <= 60 and b_hi >= 88, band
    assert "FROM MEMORY" in seq.header and "Pecaut & Mamajek 2013" in seq.header


def test_interpolation_is_continuous_and_passes_through_rows(seq):
    codes = np.linspace(60, 88, 2801)
    for q in ("2MASS.J", "2MASS.Ks", "teff", "mass"):
        values = seq.value(q, codes)
        assert np.all(np.isfinite(values)), q
        # no jumps: neighbouring points 0.01 subtype apart differ by far less than a subtype's change
        assert np.max(np.abs(np.diff(values))) < 0.05 * (np.nanmax(values) - np.nanmin(values)), q
        row = list(seq.labels).index("L2")
        assert seq.value(q, "L2") == pytest.approx(seq.columns[q][row], nan_ok=True)
    teff = seq.value("teff", codes)
    assert np.all(np.diff(teff) <= 1e-9), "Teff must fall with later type"


def test_no_extrapolation_outside_tabulated_rows(seq):
    lo, hi = seq.band_range("Johnson.V")
    assert np.isnan(seq.value("Johnson.V", hi + 0.5))
    assert np.isfinite(seq.value("Johnson.V", hi))
    assert np.isnan(seq.value("2MASS.J", seq.code_range[1] + 0.1))


def test_bolometric_correction_is_derived(seq):
    bc = seq.value("bc_ks", "M5")
    expected = 4.74 - 2.5 * seq.value("log_l", "M5") - seq.value("2MASS.Ks", "M5")
    assert bc == pytest.approx(expected)
    assert 1.5 < float(seq.value("bc_ks", "T8")) < 3.5 and 2.0 < float(seq.value("bc_ks", "M0")) < 3.0


def test_grid_uses_only_named_or_explicitly_mapped_bands(seq):
    user_k = top_hat_band("NIRC2.Kp", 2.12, 0.35)
    bands = [get_band("2MASS.J"), user_k]
    plain = seq.grid(bands, step=0.5)
    assert plain.template_bands == ("2MASS.J", "")
    assert np.isnan(plain.magnitudes[:, 1]).all()  # never substituted silently
    mapped = seq.grid(bands, {"NIRC2.Kp": "2MASS.Ks"}, step=0.5)
    assert mapped.template_bands == ("2MASS.J", "2MASS.Ks")
    assert any("explicit user mapping" in n for n in mapped.notes)
    np.testing.assert_allclose(mapped.magnitudes[:, 1], seq.value("2MASS.Ks", mapped.type_code))
    with pytest.raises(InputError):
        seq.grid(bands, {"NIRC2.Kp": "NIRC2.Lp"})


def test_grid_steps_and_range(seq):
    grid = seq.grid([get_band("2MASS.J")], step=0.1, code_range=(60, 88))
    assert grid.type_code[0] == 60 and grid.type_code[-1] == pytest.approx(88)
    assert np.allclose(np.diff(grid.type_code), 0.1)
    assert grid.absolute.all()
    assert set(SEQUENCE_BANDS) <= set(seq.columns)


def test_malformed_sequence_file_is_refused():
    with pytest.raises(InputError, match="columns"):
        read_dwarf_sequence("spt teff\nM0 3850\nM1 3600\n", "bad.txt")
