"""Optical constants: reading, validation, interpolation, extrapolation, bundled files."""

from __future__ import annotations

import numpy as np
import pytest

from motes.errors import OpticalConstantsError
from motes.optics.constants import (
    MATERIALS_PATH_VARIABLE,
    VACUUM,
    Material,
    bundled_material_names,
    bundled_materials_folder,
    check_optical_constants,
    list_materials,
    load_material,
    read_optical_constants,
)

# A small synthetic material (values invented for the tests).
WL = np.array([0.5, 0.8, 1.0, 2.0, 3.0, 5.0])  # um
N = np.array([1.50, 1.48, 1.47, 1.45, 1.40, 1.30])
K = np.array([1e-6, 2e-6, 0.0, 1e-3, 0.3, 0.05])
HC_EV_UM = 1.239841984  # h c in eV um (CODATA 2018 exact constants)


def _write(path, rows, header=""):
    body = "".join(f"{float(a)!r} {float(b)!r} {float(c)!r}\n" for a, b, c in rows)
    path.write_text(header + body, encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "unit, coord",
    [
        ("um", WL),
        ("nm", WL * 1e3),
        ("angstrom", WL * 1e4),
        ("cm-1", 1e4 / WL),
        ("eV", HC_EV_UM / WL),
    ],
)
@pytest.mark.parametrize("via", ["header", "option"])
def test_every_wavelength_unit_reads_back(tmp_path, unit, coord, via):
    header = f"# wavelength_unit: {unit}\n" if via == "header" else ""
    path = _write(tmp_path / "m.dat", zip(coord, N, K), header)
    mat = read_optical_constants(path, wavelength_unit=None if via == "header" else unit)
    np.testing.assert_allclose(mat.wavelength, WL, rtol=1e-9)
    np.testing.assert_allclose(mat.n, N, rtol=0)
    np.testing.assert_allclose(mat.k, K, rtol=0)
    assert mat.wavelength_range == pytest.approx((0.5, 5.0), rel=1e-9)


@pytest.mark.parametrize("via", ["header", "option"])
def test_epsilon_columns_round_trip(tmp_path, via):
    # m = sqrt(eps): eps1 = n^2 - k^2, eps2 = 2 n k (Bohren & Huffman 1983, eq. 2.45)
    eps1, eps2 = N**2 - K**2, 2 * N * K
    header = "# columns: eps1 eps2\n" if via == "header" else ""
    path = _write(tmp_path / "e.dat", zip(WL, eps1, eps2), header)
    mat = read_optical_constants(path, columns=None if via == "header" else "eps1 eps2")
    np.testing.assert_allclose(mat.n, N, rtol=1e-12)
    np.testing.assert_allclose(mat.k, K, rtol=1e-9, atol=1e-15)


def test_metal_from_epsilon_keeps_k_positive(tmp_path):
    # eps1 < 0 (metal-like): n = 1, k = 3 -> eps = -8 + 6i
    path = _write(tmp_path / "metal.dat", [(1.0, -8.0, 6.0), (2.0, -8.0, 6.0)], "# columns: eps1 eps2\n")
    mat = read_optical_constants(path)
    np.testing.assert_allclose(mat.n + 1j * mat.k, [1 + 3j, 1 + 3j], rtol=1e-12)


def test_header_keys_give_name_density_and_provenance(tmp_path):
    header = ("# name: test_rock\n# material: invented rock\n# density: 3.3\n"
              "# density_source: invented\n# reference: Nobody (2000)\n# license: CC0\n"
              "# a plain comment: with a colon is just a comment\n")
    mat = read_optical_constants(_write(tmp_path / "r.dat", zip(WL, N, K), header))
    assert mat.name == "test_rock"
    assert mat.density == 3.3 and mat.density_source == "invented"
    assert "reference: Nobody (2000)" in mat.provenance and "license: CC0" in mat.provenance
    assert "plain comment" not in mat.provenance


def test_unsorted_file_is_sorted(tmp_path):
    order = [3, 0, 5, 1, 4, 2]  # non-overlapping single points in shuffled order are refused
    rows = list(zip(WL[::-1], N[::-1], K[::-1]))  # a descending file (one segment) is fine
    mat = read_optical_constants(_write(tmp_path / "d.dat", rows))
    np.testing.assert_array_equal(mat.wavelength, WL)
    # two non-overlapping tables pasted in the "wrong" order are fine too
    rows = list(zip(WL[3:], N[3:], K[3:])) + list(zip(WL[:3], N[:3], K[:3]))
    mat = read_optical_constants(_write(tmp_path / "b.dat", rows))
    np.testing.assert_array_equal(mat.k, K)
    # shuffled single points overlap each other's ranges: refused
    rows = [(WL[i], N[i], K[i]) for i in order]
    with pytest.raises(OpticalConstantsError, match="overlap"):
        read_optical_constants(_write(tmp_path / "s.dat", rows))


BAD_CASES = [
    ("malformed", "0.5 1.5 0.1\n0.6 1.5\n0.7 1.5 0.1\n", "line 2", "expected 3 numbers"),
    ("text", "0.5 1.5 0.1\n0.6 one 0.1\n0.7 1.5 0.1\n", "line 2", "not a number"),
    ("k<0", "0.5 1.5 0.1\n0.6 1.5 -0.1\n0.7 1.5 0.1\n", "line 2", "k must be >= 0"),
    ("n=0", "0.5 1.5 0.1\n0.6 0 0.1\n0.7 1.5 0.1\n", "line 2", "n must be > 0"),
    ("n<0", "0.5 1.5 0.1\n0.6 -1.2 0.1\n0.7 1.5 0.1\n", "line 2", "n must be > 0"),
    ("nan", "0.5 1.5 0.1\n0.6 nan 0.1\n0.7 1.5 0.1\n", "line 2", "non-finite"),
    ("inf", "0.5 1.5 0.1\n0.6 1.5 inf\n0.7 1.5 0.1\n", "line 2", "non-finite"),
    ("duplicate", "0.5 1.5 0.1\n0.6 1.5 0.1\n0.6 1.4 0.1\n", "line 3", "duplicated wavelength"),
    ("overlap", "0.5 1.5 0.1\n0.6 1.5 0.1\n0.7 1.5 0.1\n0.55 1.5 0.1\n0.8 1.5 0.1\n",
     "line 4", "overlap the range of lines 1-3"),
    ("zero wavelength", "0 1.5 0.1\n0.6 1.5 0.1\n", "line 1", "must be > 0"),
    ("unknown unit", "# wavelength_unit: furlong\n0.5 1.5 0.1\n0.6 1.5 0.1\n", "line 1",
     "unknown wavelength_unit 'furlong'"),
    ("typo key", "# wavelenght_unit: nm\n0.5 1.5 0.1\n0.6 1.5 0.1\n", "line 1", "did you mean 'wavelength_unit'"),
    ("unknown columns", "# columns: r i\n0.5 1.5 0.1\n0.6 1.5 0.1\n", "line 1", "unknown columns"),
    ("eps2<0", "# columns: eps1 eps2\n0.5 2.0 -0.1\n0.6 2.0 0.1\n", "line 2", "eps2 < 0"),
    ("too short", "# only a header\n0.5 1.5 0.1\n", None, "at least 2 data lines"),
    ("bad density", "# density: heavy\n0.5 1.5 0.1\n0.6 1.5 0.1\n", "line 1", "density must be a number"),
]


@pytest.mark.parametrize("label, text, where, message", BAD_CASES, ids=[c[0] for c in BAD_CASES])
def test_bad_files_are_refused_naming_file_and_line(tmp_path, label, text, where, message):
    path = tmp_path / "bad.dat"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(OpticalConstantsError) as info:
        read_optical_constants(path)
    text_msg = str(info.value)
    assert str(path) in text_msg and message in text_msg
    if where:
        assert f"{where}:" in text_msg
    material, problems, _ = check_optical_constants(path)
    assert material is None and any(message in p for p in problems)


def test_conflicting_unit_option_and_header(tmp_path):
    path = _write(tmp_path / "c.dat", zip(1e4 / WL, N, K), "# wavelength_unit: cm-1\n")
    with pytest.raises(OpticalConstantsError, match="header says wavelength_unit 'cm-1'"):
        read_optical_constants(path, wavelength_unit="nm")
    with pytest.raises(OpticalConstantsError, match="unknown wavelength_unit 'parsec'"):
        read_optical_constants(_write(tmp_path / "p.dat", zip(WL, N, K)), wavelength_unit="parsec")


def test_check_lists_every_problem_and_advice(tmp_path):
    path = tmp_path / "many.dat"
    path.write_text("0.5 1.5 -0.1\n0.6 nan 0.1\n0.7 1.5\n0.8 0 0.1\n", encoding="utf-8")
    material, problems, _ = check_optical_constants(path)
    assert material is None
    assert [p.split(":")[0] for p in problems] == ["line 1", "line 2", "line 3", "line 4"]
    with pytest.raises(OpticalConstantsError, match="and 3 more problems"):
        read_optical_constants(path)
    good = _write(tmp_path / "good.dat", zip(WL, N, K))
    material, problems, advice = check_optical_constants(good)
    assert material is not None and not problems
    assert any("density" in a for a in advice) and any("license" in a for a in advice)


def test_missing_file():
    with pytest.raises(OpticalConstantsError, match="no such file"):
        read_optical_constants("/nonexistent/motes/file.dat")


# ------------------------------------------------------------------ interpolation
def test_interpolation_n_linear_in_log_wavelength_and_k_log_log():
    mat = Material("t", WL, N, K)
    # midpoint in ln(lambda) between 2 and 3 um: sqrt(6) um
    m = mat.refractive_index(np.sqrt(6.0))
    assert m.real == pytest.approx((1.45 + 1.40) / 2, rel=1e-12)
    assert m.imag == pytest.approx(np.sqrt(1e-3 * 0.3), rel=1e-12)  # geometric mean
    # a bracketing k of 0 falls back to linear in ln(lambda): between 1 and 2 um
    m = mat.refractive_index(np.sqrt(2.0))
    assert m.imag == pytest.approx(0.5e-3, rel=1e-12)
    # tabulated points are returned exactly
    np.testing.assert_allclose(mat.refractive_index(WL), N + 1j * K, rtol=1e-12)


def test_power_law_k_is_reproduced_exactly():
    wl = np.geomspace(1, 10, 4)
    mat = Material("p", wl, np.full(4, 1.5), 1e-3 * wl**2.5)
    q = np.geomspace(1, 10, 37)
    np.testing.assert_allclose(mat.refractive_index(q).imag, 1e-3 * q**2.5, rtol=1e-10)


def test_quantity_wavelengths_are_accepted():
    import astropy.units as u

    mat = Material("t", WL, N, K)
    np.testing.assert_allclose(mat.refractive_index(2000 * u.nm), mat.refractive_index(2.0))


def test_outside_range_is_refused_unless_asked():
    from motes.photometry.bands import top_hat_band

    mat = Material("t", WL, N, K)
    band = top_hat_band("far", centre=8.0, width=1.0)  # 7.5-8.5 um, beyond the 5 um data
    with pytest.raises(OpticalConstantsError, match=r"outside the data of 't' \(0.5-5 um\)"):
        mat.refractive_index(band.wavelength)
    with pytest.raises(OpticalConstantsError, match="does not extrapolate"):
        mat.sample([0.4, 1.0])
    inside = mat.sample([0.6, 4.0])
    assert inside.notes == () and not inside.extrapolated.any()


def test_constant_extrapolation_is_flagged():
    mat = Material("t", WL, N, K, extrapolation="constant")
    s = mat.sample([0.1, 1.0, 9.0])
    np.testing.assert_array_equal(s.extrapolated, [True, False, True])
    np.testing.assert_allclose(s.m[[0, 2]], [N[0] + 1j * K[0], N[-1] + 1j * K[-1]])
    assert len(s.notes) == 1 and "'constant' rule" in s.notes[0] and "0.5-5 um" in s.notes[0]
    assert mat.extrapolation_notes([1.0, 2.0]) == ()


def test_loglog_extrapolation_continues_power_laws():
    wl = np.geomspace(1, 4, 9)
    mat = Material("p", wl, 2.0 * wl**0.1, 1e-2 * wl**-1.5, extrapolation="loglog")
    s = mat.sample([0.5, 8.0])
    np.testing.assert_allclose(s.m.real, 2.0 * np.array([0.5, 8.0]) ** 0.1, rtol=1e-10)
    np.testing.assert_allclose(s.m.imag, 1e-2 * np.array([0.5, 8.0]) ** -1.5, rtol=1e-10)
    assert s.extrapolated.all() and "'loglog' rule" in s.notes[0]


@pytest.mark.parametrize("rule", [None, "constant", "loglog"])
def test_scalar_wavelengths(rule):
    mat = Material("t", WL, N, K, extrapolation=rule)
    m = mat.refractive_index(2.0)
    assert np.ndim(m) == 0 and m == pytest.approx(N[3] + 1j * K[3])
    if rule is not None:
        s = mat.sample(9.0)
        assert s.extrapolated and s.notes == (
            f"optical constants of 't' extrapolated with the '{rule}' rule at 9 um (data cover 0.5-5 um)",)


def test_unknown_extrapolation_rule(tmp_path):
    with pytest.raises(OpticalConstantsError, match="extrapolation must be"):
        Material("t", WL, N, K, extrapolation="linear")
    with pytest.raises(OpticalConstantsError, match="extrapolation must be"):
        read_optical_constants(_write(tmp_path / "m.dat", zip(WL, N, K)), extrapolation="wild")


def test_vacuum_is_one_everywhere():
    np.testing.assert_array_equal(VACUUM.refractive_index([0.1, 1.0, 1e4]), 1.0 + 0j)
    assert VACUUM.density == 0.0


# ---------------------------------------------------------------- bundled and user
def test_bundled_materials_load_with_provenance_and_density():
    names = bundled_material_names()
    expected = {"water_ice_crystalline", "silica_amorphous", "carbon_amorphous", "iron",
                "magnetite", "methane_ice"}
    assert expected <= set(names)
    for name in names:
        path = bundled_materials_folder() / f"{name}.dat"
        assert path.stat().st_size < 200_000, f"{name} is larger than 200 KB"
        mat = load_material(name)
        lo, hi = mat.wavelength_range
        assert lo <= 0.4 and hi >= 5.0, f"{name} does not cover 0.4-5 um"
        assert np.isfinite(mat.density) and mat.density > 0 and mat.density_source
        for key in ("material:", "reference:", "database_entry:", "database_commit:", "license: CC0"):
            assert key in mat.provenance, f"{name} lacks {key}"


def test_bundled_densities_against_handbook_values():
    # Bulk densities [g cm^-3], all from memory (handbook values): ice Ih 0.917,
    # fused silica 2.20, iron 7.874, magnetite 5.17; solid CH4 ~0.49-0.52.
    expect = {"water_ice_crystalline": (0.917, 0.01), "silica_amorphous": (2.20, 0.03),
              "iron": (7.874, 0.01), "magnetite": (5.17, 0.05), "methane_ice": (0.50, 0.03)}
    for name, (value, tol) in expect.items():
        assert load_material(name).density == pytest.approx(value, abs=tol), name


def test_water_ice_bands():
    # Warren & Brandt (2008), JGR 113, D14220: the strong O-H stretch band of ice
    # peaks near 3.0-3.1 um with k of about 0.5-0.6, and weaker overtone bands sit
    # near 1.5 and 2.0 um (basic facts of the trade). The exported table peaks at
    # k = 0.625 (3.077 um), so the band is checked as 0.5-0.65.
    ice = load_material("water_ice_crystalline")
    w = np.geomspace(2.5, 3.6, 2000)
    k = ice.refractive_index(w).imag
    assert 3.0 <= w[k.argmax()] <= 3.12
    assert 0.5 <= k.max() <= 0.65
    for centre, trough_lo, trough_hi in ((1.5, 1.3, 1.75), (2.0, 1.75, 2.3)):
        wb = np.linspace(centre - 0.1, centre + 0.1, 201)
        peak = ice.refractive_index(wb).imag.max()
        troughs = ice.refractive_index([trough_lo, trough_hi]).imag
        assert peak > 3 * troughs.max(), f"no band near {centre} um"
        assert peak < 0.01 * k.max()  # weaker than the 3 um band by far


def test_user_folder_found_and_takes_precedence(tmp_path, monkeypatch):
    _write(tmp_path / "my_tholin.dat", zip(WL, N, K), "# material: invented tholin\n")
    _write(tmp_path / "iron.txt", zip(WL, N, K), "# material: my own iron\n")
    monkeypatch.setenv(MATERIALS_PATH_VARIABLE, str(tmp_path))
    entries = {(e.name, e.origin): e for e in list_materials()}
    assert ("my_tholin", "user") in entries
    assert entries[("iron", "bundled")].shadowed and not entries[("iron", "user")].shadowed
    assert "my own iron" in load_material("iron").provenance
    assert load_material("my_tholin").wavelength_range == (0.5, 5.0)


def test_unknown_material_suggests_names():
    with pytest.raises(OpticalConstantsError, match="did you mean 'water_ice_crystalline'"):
        load_material("water_ice_crystaline")
    with pytest.raises(OpticalConstantsError, match="no such file"):
        load_material("missing/folder/file.dat")


def test_load_material_passes_options(tmp_path):
    mat = load_material("iron", extrapolation="constant", density=7.0)
    assert mat.extrapolation == "constant" and mat.density == 7.0
    assert mat.density_source == "given by the caller"


# ------------------------------------------------------------------ command line
def test_cli_lists_bundled_and_user_materials(tmp_path, monkeypatch, capsys):
    from motes.cli import main

    _write(tmp_path / "my_tholin.dat", zip(WL, N, K), "# material: invented tholin\n# citation: Nobody 2000\n")
    (tmp_path / "broken.dat").write_text("0.5 1.5 -1\n0.6 1.5 0.1\n", encoding="utf-8")
    monkeypatch.setenv(MATERIALS_PATH_VARIABLE, str(tmp_path))
    assert main(["materials"]) == 0
    out = capsys.readouterr().out
    assert "water_ice_crystalline" in out and "Warren and Brandt 2008" in out
    assert "my_tholin" in out and "invented tholin - Nobody 2000" in out
    assert "broken" in out and "INVALID" in out and "k must be >= 0" in out
    assert "volume fractions of the solid" in out


def test_cli_check_good_and_bad_files(tmp_path, capsys):
    from motes.cli import main

    good = _write(tmp_path / "good.dat", zip(1e4 / WL, N, K), "# wavelength_unit: cm-1\n")
    png = tmp_path / "nk.png"
    assert main(["materials", "check", str(good), "--plot", str(png)]) == 0
    out = capsys.readouterr().out
    assert "OK" in out and "0.5 - 5 um" in out and png.stat().st_size > 0
    bad = tmp_path / "bad.dat"
    bad.write_text("0.5 1.5 0.1\n0.6 nan 0.1\n0.7 1.5 -0.1\n", encoding="utf-8")
    assert main(["materials", "check", str(bad)]) == 2
    captured = capsys.readouterr()
    assert "line 2: non-finite" in captured.out and "line 3: k must be >= 0" in captured.out
    assert "cannot be used" in captured.err
    plain = _write(tmp_path / "plain.dat", zip(WL * 1e3, N, K))
    assert main(["materials", "check", str(plain), "--wavelength-unit", "nm"]) == 0
    assert "0.5 - 5 um" in capsys.readouterr().out


def test_cli_show_prints_provenance(capsys, tmp_path):
    from motes.cli import main

    assert main(["materials", "show", "methane_ice", "--plot", str(tmp_path / "ch4.png")]) == 0
    out = capsys.readouterr().out
    assert "Martonchik" in out and "license: CC0" in out and (tmp_path / "ch4.png").is_file()
    assert main(["materials", "show", "no_such_material"]) == 2
    assert "unknown material" in capsys.readouterr().err
