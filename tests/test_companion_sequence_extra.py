"""A user's dwarf sequence with absolute magnitudes in extra bands (``abs_<band id>`` columns, e.g. MKO L').

The built-in sequence has no L' or M' (the published table gives WISE W1/W2, and no documented
W1 -> L' conversion is bundled); a user's own table can add them. The L' values below are a
SYNTHETIC test column (W1 of the bundled table plus a made-up slope in type), not a conversion.
"""

from __future__ import annotations

import math
from importlib import resources

import numpy as np
import pytest

from motes.companion import ClassifySettings, classify, load_dwarf_sequence, photometry_from_magnitudes
from motes.companion.sequence import read_dwarf_sequence_file
from motes.errors import InputError


def _synthetic_lp(code: float, w1: float) -> float:
    """Synthetic L' absolute magnitude (test data only): W1 - 0.02 mag per subtype after M0."""
    return w1 - 0.02 * max(code - 60.0, 0.0)


def _write_sequence(path, extra="abs_mko_lp", value=None):
    """The bundled table with one extra column appended (cells '-' where W1 is missing)."""
    from motes.companion import type_code

    builtin = load_dwarf_sequence()
    text = resources.files("motes.data").joinpath("dwarf_sequence.txt").read_text(encoding="utf-8")
    out, seen_columns = [], False
    for line in text.splitlines():
        if not line.strip() or line.startswith("#"):
            out.append(line)
        elif not seen_columns:
            out.append(f"{line} {extra}")
            seen_columns = True
        else:
            label = line.split()[0]
            code = type_code(label)
            w1 = float(builtin.value("wise_w1", code))
            cell = "-" if not math.isfinite(w1) else f"{_synthetic_lp(code, w1) if value is None else value:.3f}"
            out.append(f"{line} {cell}")
    path.write_text("\n".join(out) + "\n", encoding="utf-8")
    return path


def test_an_extra_band_column_is_read_and_interpolated(tmp_path):
    seq = read_dwarf_sequence_file(_write_sequence(tmp_path / "seq_lp.txt"))
    assert "mko_lp" in seq.bands and seq.extra_bands == ("mko_lp",)
    w1 = float(seq.value("wise_w1", 75.0))
    assert float(seq.value("mko_lp", 75.0)) == pytest.approx(_synthetic_lp(75.0, w1), abs=0.02)
    # no value where W1 has none (the column is '-' there): nothing is extrapolated
    assert math.isnan(float(seq.value("mko_lp", 85.0)))
    assert np.isfinite(seq.absolute_magnitudes([70.0], ["mko_lp"])).all()


def test_classify_uses_the_users_lp_column(tmp_path):
    path = _write_sequence(tmp_path / "seq_lp.txt")
    seq = read_dwarf_sequence_file(path)
    d, code = 20.0, 72.0                      # an L2 at 20 pc, J H Ks and L'
    mu = 5 * math.log10(d / 10)
    mags = {b: (float(seq.value(b, code)) + mu, 0.05) for b in ("2mass_j", "2mass_h", "2mass_ks", "mko_lp")}
    phot = photometry_from_magnitudes(mags, distance_pc=d, distance_pc_error=0.1, name="L2 with Lp")
    result = classify(phot, ClassifySettings(mode="distance", sequence_file=str(path), blackbody="never"))
    ranking = next(r for r in result.rankings if r.kind == "sequence")
    assert "mko_lp" in ranking.bands
    assert abs(result.estimate.median - code) <= 1.0
    # the built-in sequence has no L': the band is left out (blackbodies refused, so no ranking uses it)
    builtin = classify(phot, ClassifySettings(mode="distance", blackbody="never"))
    assert "mko_lp" not in next(r for r in builtin.rankings if r.kind == "sequence").bands


@pytest.mark.parametrize("column, message", [
    ("abs_mko_lq", "abs_mko_lq"),            # not a band motes knows
    ("abs_2mass_j", "derived from the standard columns"),
    ("lp_abs", "abs_<band id>"),             # not an abs_ column
])
def test_bad_extra_columns_are_refused_naming_file_and_line(tmp_path, column, message):
    path = _write_sequence(tmp_path / "bad.txt", extra=column, value=10.0)
    with pytest.raises(InputError, match=message) as info:
        read_dwarf_sequence_file(path)
    assert "bad.txt" in str(info.value) and "line" in str(info.value)
