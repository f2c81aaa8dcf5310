"""Reading targets: the documented format, user bands, and every bad-input case via the CLI."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from motes.cli import main
from motes.errors import BandError, InputError
from motes.photometry import (
    calibrate,
    gaussian_band,
    read_band_curve,
    read_target,
    top_hat_band,
)
from motes.report.photometry_text import format_photometry, write_photometry

TOML = """\
[companion]
name = "Test b"
photometry = "phot.csv"

[host]
name = "Test"
parallax_mas = [40.0, 0.1]
teff_k = 4500
[host.magnitudes]
"2mass_j" = [7.0, 0.02]
"2mass_ks" = [6.3, 0.02]
"sdss_i" = { mag = 9.2, error = 0.03 }

[bands.Lp]
shape = "top-hat"
centre_um = 3.75
width_um = 0.7

[bands.N31]
shape = "gaussian"
centre_um = 3.1
fwhm_um = 0.05

[bands.Kinst]
shape = "curve"
file = "kinst.txt"
wavelength_unit = "nm"
"""

CSV = """\
# comment lines are allowed
band,kind,value,error,unit,limit_sigma,note
2mass_j,contrast_mag,8.1,0.05,,,
2MASS_Ks,contrast_ratio,0.001,0.0001,,,lower-case name
Lp,contrast_mag,6.0,0.1,,,
N31,contrast_mag,6.5,0.2,,,
Kinst,contrast_mag,7.2,0.06,,,
wise_w2,flux,0.3,,mJy,5,
"""

CURVE = "# wavelength_unit: nm\n" + "\n".join(
    f"{w:.1f} {t:.3f}" for w, t in zip(np.linspace(1950, 2350, 41), np.r_[0, np.ones(39) * 0.8, 0])
) + "\n"


def _write(folder: Path, toml=TOML, table=CSV, table_name="phot.csv", curve=CURVE):
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "target.toml").write_text(toml)
    if table is not None:
        (folder / table_name).write_text(table)
    (folder / "kinst.txt").write_text(curve)
    return folder / "target.toml"


def test_documented_format_reads_and_calibrates(tmp_path):
    target = read_target(_write(tmp_path))
    assert target.name == "Test b"
    assert [m.band.name for m in target.measurements] == ["2mass_j", "2mass_ks", "Lp", "N31", "Kinst", "wise_w2"]
    assert target.host.magnitude_in(target.measurements[1].band).magnitude == 7.0 - 0.7
    assert target.bands["Kinst"].wavelength[0] == pytest.approx(1.95)  # nm -> um
    sdss = [m for m in target.host.magnitudes if m.band.name == "sdss_i"][0]
    assert sdss.system == "AB"  # SDSS magnitudes default to the band's catalogue system
    res = calibrate(target)
    synthesised = {r.band.name: r.host_synthesised for r in res.rows}
    assert synthesised == {"2mass_j": False, "2mass_ks": False, "Lp": True, "N31": True, "Kinst": True,
                           "wise_w2": False}
    pivots = [r.band.pivot_wavelength for r in res.rows]
    assert pivots == sorted(pivots)
    text = format_photometry(res)
    assert "distance modulus" in text and "NOT included" in text
    written = write_photometry(res, tmp_path / "out", csv=True)
    assert [p.name for p in written] == ["test_b_photometry.ecsv", "test_b_photometry.csv"]
    from astropy.table import Table

    t = Table.read(written[0])
    assert t["flux"].unit == "Jy" and t.meta["distance_modulus_error"] == pytest.approx(res.distance_modulus_error)


def test_ecsv_table_reads_like_csv(tmp_path):
    from astropy.table import MaskedColumn, Table

    t = Table()
    t["band"] = ["2mass_j", "wise_w2"]
    t["kind"] = ["contrast_mag", "flux"]
    t["value"] = [8.1, 0.3]
    t["error"] = MaskedColumn([0.05, 0.0], mask=[False, True])
    t["unit"] = MaskedColumn(["", "mJy"], mask=[True, False])
    t["limit_sigma"] = MaskedColumn([0.0, 5.0], mask=[True, False])
    path = _write(tmp_path, toml=TOML.replace("phot.csv", "phot.ecsv"), table=None)
    t.write(tmp_path / "phot.ecsv", format="ascii.ecsv")
    target = read_target(path)
    assert target.measurements[1].is_limit and target.measurements[1].unit == "mJy"
    assert not target.measurements[0].is_limit


# --------------------------------------------------------------- user bands
def test_top_hat_and_gaussian_bands():
    th = top_hat_band("L", 3.75, 0.7)
    assert th.approximate and th.wavelength_min == pytest.approx(3.4 - 0.007)
    assert th.fwhm == pytest.approx(0.707, rel=1e-3)  # 1% linear edges on each side
    g = gaussian_band("N", 3.1, 0.05)
    assert g.approximate and g.fwhm == pytest.approx(0.05, rel=2e-3)
    assert g.pivot_wavelength == pytest.approx(3.1, rel=1e-4)
    with pytest.raises(BandError):
        top_hat_band("bad", 3.75, -0.7)
    with pytest.raises(BandError):
        gaussian_band("bad", 0.1, 0.09)  # reaches lambda <= 0


@pytest.mark.parametrize(
    "text, message",
    [
        ("1.0 0.5\nabc 0.3\n", "line 2"),
        ("1.0 0.5\n", "at least two rows"),
        ("1.0 0.5\n1.0 0.6\n1.2 0.1\n", "duplicated wavelengths"),
        ("1.0 0.5\n1.1\n", "two columns"),
        ("# wavelength_unit: parsec-ish\n1.0 0.5\n1.1 0.4\n", "not a length unit"),
        ("1.0 -0.5\n1.1 0.4\n", "throughput must be >= 0"),
        ("# response: bolometric\n1.0 0.5\n1.1 0.4\n", "response must be one of"),
    ],
)
def test_malformed_curve_files(tmp_path, text, message):
    path = tmp_path / "curve.txt"
    path.write_text(text)
    with pytest.raises(BandError, match=message) as info:
        read_band_curve(path)
    assert str(path) in str(info.value)


def test_curve_file_energy_response(tmp_path):
    path = tmp_path / "c.txt"
    path.write_text("# wavelength_unit: AA\n# response: energy\n20000 0\n21000 1\n22000 1\n23000 0\n")
    band = read_band_curve(path)
    assert band.response == "energy" and band.wavelength[0] == pytest.approx(2.0)


# --------------------------------------------------------------- bad input via the CLI
def _replace(text, old, new):
    assert old in text, old
    return text.replace(old, new)


BAD_CASES = {
    # name: (toml, table, expected file name, expected where/what fragments)
    "unknown band": (TOML, _replace(CSV, "2mass_j,", "2mass_jj,"), "phot.csv", ["row 1", "did you mean", "2mass_j"]),
    "missing error": (TOML, _replace(CSV, "8.1,0.05", "8.1,"), "phot.csv", ["row 1", "uncertainty"]),
    "negative error": (TOML, _replace(CSV, "8.1,0.05", "8.1,-0.05"), "phot.csv", ["row 1", "positive"]),
    "nan value": (TOML, _replace(CSV, "8.1,0.05", "nan,0.05"), "phot.csv", ["row 1", "NaN"]),
    "nan error": (TOML, _replace(CSV, "8.1,0.05", "8.1,NaN"), "phot.csv", ["row 1", "NaN"]),
    "non-numeric value": (TOML, _replace(CSV, "8.1,0.05", "eight,0.05"), "phot.csv", ["row 1", "expected a number"]),
    "duplicate band": (TOML, CSV + "2mass_j,vega_mag,15,0.1,,,\n", "phot.csv", ["row 7", "duplicate band"]),
    "unit does not parse": (TOML, _replace(CSV, ",mJy,", ",mJyy,"), "phot.csv", ["row 6", "does not parse"]),
    "unit not a flux": (TOML, _replace(CSV, ",mJy,", ",km,"), "phot.csv", ["row 6", "not a flux density"]),
    "flux without unit": (TOML, _replace(CSV, ",mJy,", ",,"), "phot.csv", ["row 6", "needs a unit"]),
    "unknown kind": (TOML, _replace(CSV, "contrast_mag,8.1", "contrast,8.1"), "phot.csv", ["row 1", "kind must be"]),
    "limit with error": (TOML, _replace(CSV, "0.3,,mJy,5", "0.3,0.1,mJy,5"), "phot.csv", ["row 6", "no error"]),
    "bad limit sigma": (TOML, _replace(CSV, "0.3,,mJy,5", "0.3,,mJy,-3"), "phot.csv", ["row 6", "limit_sigma"]),
    "negative flux": (TOML, CSV + "wise_w1,flux,-0.2,0.1,mJy,,\n", "phot.csv", ["row 7", "flux must be > 0"]),
    "zero ratio": (TOML, _replace(CSV, "0.001,0.0001", "0,0.0001"), "phot.csv", ["row 2", "must be > 0"]),
    "unit on a magnitude": (TOML, _replace(CSV, "8.1,0.05,,", "8.1,0.05,Jy,"), "phot.csv", ["row 1", "only flux rows"]),
    "too many cells": (TOML, _replace(CSV, "8.1,0.05,,,", "8.1,0.05,,,,x"), "phot.csv", ["row 1", "cells"]),
    "missing column": (TOML, "band,kind,value\n2mass_j,vega_mag,15.0\n", "phot.csv", ["header", "missing column(s) error"]),
    "empty table": (TOML, "band,kind,value,error\n", "phot.csv", ["no rows"]),
    "contrast without host magnitude": (
        _replace(TOML, "teff_k = 4500\n", ""), CSV, "phot.csv", ["row 3", "Lp", "teff_k"]),
    "contrast with no host magnitudes at all": (
        _replace(_replace(TOML, "teff_k = 4500\n", ""), '"2mass_j" = [7.0, 0.02]\n', ""),
        CSV, "phot.csv", ["row 1", "2mass_j"]),
    "parallax zero": (_replace(TOML, "[40.0, 0.1]", "[0.0, 0.1]"), CSV, "target.toml", ["[host] parallax_mas", "> 0"]),
    "parallax negative": (_replace(TOML, "[40.0, 0.1]", "[-1.5, 0.4]"), CSV, "target.toml", ["[host] parallax_mas"]),
    "parallax without error": (_replace(TOML, "[40.0, 0.1]", "40.0"), CSV, "target.toml", ["[host] parallax_mas"]),
    "negative host error": (_replace(TOML, "[7.0, 0.02]", "[7.0, -0.02]"), CSV, "target.toml", ["2mass_j", "> 0"]),
    "unknown host band": (_replace(TOML, '"2mass_j" =', '"2mass_q" ='), CSV, "target.toml", ["[host.magnitudes]", "2mass_q"]),
    "duplicate host band": (_replace(TOML, '"2mass_ks" = [6.3, 0.02]', '"2mass_ks" = [6.3, 0.02]\n"2MASS_KS" = [6.3, 0.02]'),
                            CSV, "target.toml", ["duplicate band"]),
    "malformed toml": (_replace(TOML, 'name = "Test b"', 'name = "Test b'), CSV, "target.toml", ["malformed TOML"]),
    "typo in a key": (_replace(TOML, "parallax_mas", "paralax_mas"), CSV, "target.toml", ["[host]", "paralax_mas"]),
    "missing host": (TOML[: TOML.index("[host]")], CSV, "target.toml", ["[host]"]),
    "missing table file": (_replace(TOML, "phot.csv", "nothere.csv"), CSV, "target.toml", ["[companion] photometry", "not found"]),
    "bad top-hat": (_replace(TOML, "width_um = 0.7", "width_um = -0.7"), CSV, "target.toml", ["[bands.Lp]", "width"]),
    "gaussian without fwhm": (_replace(TOML, "fwhm_um = 0.05", "width_um = 0.05"), CSV, "target.toml", ["[bands.N31]"]),
    "unknown shape": (_replace(TOML, 'shape = "gaussian"', 'shape = "lorentzian"'), CSV, "target.toml", ["[bands.N31] shape"]),
    "missing curve file": (_replace(TOML, "kinst.txt", "nope.txt"), CSV, "target.toml", ["[bands.Kinst] file", "not found"]),
    "bad counting": (TOML + '[settings]\ncounting = "bolometric"\n', CSV, "target.toml", ["[settings] counting"]),
    "reference band without host magnitude": (
        TOML + '[settings]\nsynthesis_reference_band = "2mass_h"\n', CSV, "target.toml",
        ["synthesis_reference_band", "2mass_h"]),
}


@pytest.mark.parametrize("case", list(BAD_CASES))
def test_bad_input_is_one_clear_line(case, tmp_path, capsys):
    toml, table, where_file, fragments = BAD_CASES[case]
    target = _write(tmp_path / "in", toml=toml, table=table)
    out = tmp_path / "out"
    rc = main(["photometry", str(target), "--output", str(out), "--csv"])
    captured = capsys.readouterr()
    assert rc == 2
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert "Traceback" not in captured.err
    assert where_file in lines[0]
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    assert not out.exists(), "nothing may be written on error"


def test_malformed_curve_file_via_cli(tmp_path, capsys):
    target = _write(tmp_path, curve="1950 0.1\nxx 0.2\n")
    rc = main(["photometry", str(target), "--output", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert rc == 2 and "kinst.txt" in err and "line 2" in err and len(err.strip().splitlines()) == 1


def test_missing_target_file(tmp_path, capsys):
    rc = main(["photometry", str(tmp_path / "none.toml")])
    err = capsys.readouterr().err
    assert rc == 2 and "none.toml" in err and "not found" in err


def test_malformed_ecsv(tmp_path, capsys):
    target = _write(tmp_path, toml=TOML.replace("phot.csv", "phot.ecsv"), table="# %ECSV 1.0\n# ---\n# bogus: [\n",
                    table_name="phot.ecsv")
    rc = main(["photometry", str(target), "--output", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert rc == 2 and "phot.ecsv" in err and "malformed ECSV" in err


def test_host_spectrum_not_covering_band(tmp_path, capsys):
    spec = "\n".join(f"{w:.2f} {w ** -4:.5e}" for w in np.arange(1.0, 3.0, 0.01))
    (tmp_path / "spec.txt").write_text(spec + "\n")
    toml = _replace(TOML, "teff_k = 4500\n", 'teff_k = 4500\nspectrum = { file = "spec.txt" }\n')
    target = _write(tmp_path, toml=toml)
    rc = main(["photometry", str(target), "--output", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert rc == 2 and "target.toml" in err and "[host.spectrum]" in err and "covers" in err
    assert not (tmp_path / "out").exists()


def test_host_spectrum_used_when_given(tmp_path):
    # a user spectrum identical to a 4500 K blackbody gives the blackbody's synthesised magnitude
    from motes.photometry import blackbody_flux_lambda

    wl = np.linspace(0.5, 6.0, 5501)
    (tmp_path / "spec.txt").write_text("\n".join(f"{w:.4f} {f:.8e}" for w, f in
                                                  zip(wl, blackbody_flux_lambda(wl, 4500.0))) + "\n")
    toml = _replace(TOML, "teff_k = 4500\n", 'spectrum = { file = "spec.txt", wavelength_unit = "um" }\n')
    with_spec = calibrate(read_target(_write(tmp_path, toml=toml))).row("Lp")
    with_bb = calibrate(read_target(_write(tmp_path / "bb"))).row("Lp")
    assert with_spec.host_mag == pytest.approx(with_bb.host_mag, abs=1e-4)
    assert any("spectrum (" in n for n in with_spec.notes)


def test_errors_are_value_errors_in_python(tmp_path):
    target = _write(tmp_path, table=_replace(CSV, "8.1,0.05", "8.1,-1"))
    with pytest.raises(ValueError):
        read_target(target)
    with pytest.raises(InputError) as info:
        read_target(target)
    assert info.value.where.startswith("row 1") and info.value.path.endswith("phot.csv")
    assert math.isfinite(0.0)
