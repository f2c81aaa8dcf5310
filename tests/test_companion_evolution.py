"""Mass at an age: reading an evolutionary table, interpolating, inverting, propagating."""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from scipy.interpolate import LinearNDInterpolator, RegularGridInterpolator

from motes.cli import main
from motes.companion import mass_at_age, masses_at_age, photometry_from_magnitudes, read_evolution_table
from motes.demo import companion as demo_companion
from motes.errors import InputError
from motes.photometry import calibrate, read_target, standard_band_names

# band names are taken from the code (they are being renamed): two near-infrared bands
BANDS = [b for b in standard_band_names() if b.lower().startswith("2mass")][:2]
AGES = np.array([0.01, 0.03, 0.1, 0.3, 1.0, 3.0])          # Gyr
MASSES = np.geomspace(0.003, 0.2, 15)                       # M_sun


def _truth(name, age, mass):
    """A smooth invented model (not a physical one): magnitudes fall with mass, rise with age."""
    x, y = np.log10(age / 0.1), np.log10(mass / 0.01)
    return {"teff_k": 2000.0 * 10 ** (0.35 * y - 0.08 * x),
            "log_l_lsun": -4.0 + 1.9 * y - 0.5 * x + 0.1 * x * y,
            BANDS[0]: 11.0 + 2.0 * x - 5.0 * y + 0.4 * y**2 + 0.3 * x * y,
            BANDS[1]: 10.2 + 1.8 * x - 4.6 * y + 0.3 * y**2 + 0.2 * x * y}[name]


def _write(path, ages=AGES, masses=MASSES, mass_unit="msun", rows=None):
    lines = [f"# invented test model\nage_myr,mass_{mass_unit},teff_k,log_l_lsun,{BANDS[0]},{BANDS[1]}"]
    scale = 1047.57 if mass_unit == "mjup" else 1.0
    for a, m in rows if rows is not None else [(a, m) for a in ages for m in masses]:
        lines.append(f"{float(a) * 1e3!r},{float(m) * scale!r}," + ",".join(repr(float(_truth(n, a, m)))
                                                            for n in ("teff_k", "log_l_lsun", *BANDS)))
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def table(tmp_path):
    return read_evolution_table(_write(tmp_path / "model.csv"))


def test_reads_ages_masses_and_bands(tmp_path, table):
    assert table.age_range_gyr == pytest.approx((0.01, 3.0))
    assert table.bands == tuple(BANDS)
    in_mjup = read_evolution_table(_write(tmp_path / "mjup.csv", mass_unit="mjup"))
    np.testing.assert_allclose(in_mjup.log_masses[2], table.log_masses[2], atol=1e-12)


def test_interpolation_is_bilinear_in_log_age_and_log_mass(table, rng):
    # independent implementation of the same scheme: scipy's tensor-product linear interpolator
    grid = (np.log10(AGES), np.log10(MASSES))
    for name in ("teff_k", "log_l_lsun", BANDS[0]):
        values = np.array([[_truth(name, a, m) for m in MASSES] for a in AGES])
        rgi = RegularGridInterpolator(grid, values)
        la = rng.uniform(grid[0][0], grid[0][-1], 50)
        lm = rng.uniform(grid[1][0], grid[1][-1], 50)
        ours = [table.value(name, 10**a, 10**m) for a, m in zip(la, lm)]
        np.testing.assert_allclose(ours, rgi(np.stack([la, lm], 1)), rtol=1e-12, atol=1e-10)


def test_mass_inverts_the_interpolated_magnitude(table):
    values = np.array([[_truth(BANDS[0], a, m) for m in MASSES] for a in AGES])
    rgi = RegularGridInterpolator((np.log10(AGES), np.log10(MASSES)), values)
    for age, mass in ((0.05, 0.04), (0.1, 0.01), (1.7, 0.12), (3.0, 0.004)):
        mag = _truth(BANDS[0], age, mass)   # a magnitude inside the table at that age
        result = mass_at_age(table, BANDS[0], mag, 0.0, age, 0.0, np.random.default_rng(0), n_draws=10)
        assert rgi([[math.log10(age), math.log10(result.mass_msun)]])[0] == pytest.approx(mag, abs=1e-9)


def test_against_a_triangulation_on_a_fine_table(tmp_path, rng):
    ages, masses = np.geomspace(0.01, 3.0, 25), np.geomspace(0.003, 0.2, 40)
    fine = read_evolution_table(_write(tmp_path / "fine.csv", ages, masses))
    pts = np.array([(math.log10(a), math.log10(m)) for a in ages for m in masses])
    lnd = LinearNDInterpolator(pts, [_truth(BANDS[1], 10**a, 10**m) for a, m in pts])
    la, lm = rng.uniform(-1.9, 0.4, 40), rng.uniform(-2.4, -0.8, 40)
    ours = np.array([fine.value(BANDS[1], 10**a, 10**m) for a, m in zip(la, lm)])
    truth = _truth(BANDS[1], 10**la, 10**lm)
    # linear interpolation error <= (h_x^2 |f_xx| + 2 h_x h_y |f_xy| + h_y^2 |f_yy|) / 8 per cell; the model
    # has f_xx = 0, |f_xy| = 0.2, |f_yy| = 0.6 with h_x = 0.103, h_y = 0.0465 dex: bound 1.4e-3 mag
    bound = (2 * 0.103 * 0.0465 * 0.2 + 0.0465**2 * 0.6) / 8
    assert np.abs(ours - truth).max() < bound
    assert np.abs(ours - lnd(la, lm)).max() < 2 * bound     # two interpolants within the bound of each other


def test_isochrones_with_different_mass_ranges(tmp_path):
    rows = [(0.1, m) for m in MASSES[:10]] + [(0.3, m) for m in MASSES[3:]]
    table = read_evolution_table(_write(tmp_path / "ragged.csv", rows=rows))
    result = mass_at_age(table, BANDS[0], 10.0, 0.0, 0.2, 0.0, np.random.default_rng(0), n_draws=10)
    assert table.value(BANDS[0], 0.2, result.mass_msun) == pytest.approx(10.0, abs=1e-9)
    assert MASSES[3] <= result.mass_msun <= MASSES[9]


def test_monte_carlo_interval_matches_the_analytic_width(table, rng):
    age, mag, sigma = 0.1, 11.0, 0.05
    nominal = mass_at_age(table, BANDS[0], mag, 0.0, age, 0.0, rng, n_draws=10).mass_msun
    step = 1e-4
    slope = (table.value(BANDS[0], age, nominal * 10**step) - table.value(BANDS[0], age, nominal)) / step
    result = mass_at_age(table, BANDS[0], mag, sigma, age, 0.0, rng, n_draws=20000)
    lo, med, hi = np.log10(result.mass_interval)
    # small errors: log mass is Gaussian with sigma / |dM/dlog m|; 20000 draws give the
    # 16-84% half-width to ~1%; 3% tolerance
    assert (hi - lo) / 2 == pytest.approx(sigma / abs(slope), rel=0.03)
    assert med == pytest.approx(math.log10(nominal), abs=3 * sigma / abs(slope) / math.sqrt(20000) * 1.3)
    assert result.fraction_outside == 0.0
    with_age = mass_at_age(table, BANDS[0], mag, sigma, age, 0.03, rng, n_draws=4000)
    assert with_age.mass_interval[2] - with_age.mass_interval[0] > result.mass_interval[2] - result.mass_interval[0]


def test_quantities_and_the_photometry_route(table, rng):
    result = mass_at_age(table, BANDS[0], 11.0, 0.05, 100 * u.Myr, 20 * u.Myr, rng, n_draws=500)
    assert result.age_gyr == pytest.approx(0.1) and result.age_gyr_error == pytest.approx(0.02)
    with pytest.raises(InputError, match="age_gyr"):
        mass_at_age(table, BANDS[0], 11.0, 0.05, 100 * u.pc, 0.0, rng)
    phot = photometry_from_magnitudes({BANDS[0]: (11.0 + 2.5, 0.05), BANDS[1]: (10.5 + 2.5, 0.05)},
                                      distance_pc=10 ** 1.5)
    out = masses_at_age(table, phot, 0.1, 0.02, rng, n_draws=500)
    by_band = {r.band: r for r in out}      # rows come in wavelength order
    assert sorted(by_band) == sorted(BANDS)
    assert by_band[BANDS[0]].absolute_mag == pytest.approx(11.0)


@pytest.mark.parametrize("age, mag, message", [
    (5.0, 11.0, "covers ages 0.01-3 Gyr, not the requested 5 Gyr"),
    (0.005, 11.0, "covers ages"),
    (0.1, 25.0, "covers absolute magnitudes"),
    (0.1, -3.0, "covers absolute magnitudes"),
])
def test_refuses_what_the_table_does_not_cover(table, age, mag, message):
    with pytest.raises(InputError, match=message) as info:
        mass_at_age(table, BANDS[0], mag, 0.1, age, 0.0, np.random.default_rng(0))
    assert "model.csv" in str(info.value)


@pytest.mark.parametrize("text, where, words", [
    ("mass_msun,teff_k,X\n0.01,1000,10\n", "header", "age column"),
    ("age_gyr,mass_msun,teff_k\n0.1,0.01,1000\n0.1,0.02,1100\n", "header", "no band column"),
    ("age_gyr,mass_msun,not_a_band\n0.1,0.01,10\n", "header", "'not_a_band'"),
    ("age_gyr,mass_msun,{b}\n0.1,0.01,10\n0.1,0.02,nine\n", "row 2", "'{l}'"),
    ("age_gyr,mass_msun,{b}\n0.1,0.01,10\n0.1,-0.02,9\n", "row 2", "'mass_msun'"),
    ("age_gyr,mass_msun,{b}\n0.1,0.01,10\n0.1,0.01,9\n", "row 2", "repeat"),
    ("age_gyr,mass_msun,{b}\n0.1,0.01,10\n0.1,0.02,9\n0.3,0.02,9.5\n", "row 3", "at least two"),
])
def test_malformed_tables_are_refused(tmp_path, text, where, words):
    path = tmp_path / "bad.csv"
    path.write_text(text.format(b=BANDS[0], l=BANDS[0].lower()))
    with pytest.raises(InputError) as info:
        read_evolution_table(path)
    message = str(info.value)
    assert str(path) in message and where in message and words.format(l=BANDS[0].lower()) in message, message


# ------------------------------------------------------------------ motes classify --evolution
@pytest.fixture
def demo_target(tmp_path):
    folder = tmp_path / "demo"
    demo_companion.write_inputs(folder)
    return folder / demo_companion.TARGET_FILE


def _demo_table(target, path):
    """A table built around the demo companion's absolute magnitudes (its bands, as the code names them)."""
    phot = calibrate(read_target(target))
    bands = [r.band.name for r in phot.rows if not r.is_limit and r.band.name in standard_band_names()][:2]
    lines = ["age_gyr,mass_msun,teff_k,log_l_lsun," + ",".join(bands)]
    for a in (0.05, 0.1, 0.2):
        for m in np.geomspace(0.005, 0.08, 9):
            y = math.log10(m / 0.02)
            mags = [phot.row(b).absolute_mag - 5.0 * y + 2.0 * math.log10(a / 0.1) for b in bands]
            lines.append(f"{a},{m},{1500 * 10 ** (0.3 * y)},{-4 + 2 * y}," + ",".join(f"{v:.4f}" for v in mags))
    path.write_text("\n".join(lines) + "\n")
    return bands


def test_classify_with_evolution_adds_the_masses_and_changes_nothing_else(demo_target, tmp_path, capsys):
    bands = _demo_table(demo_target, tmp_path / "model.csv")
    base = ["classify", str(demo_target), "--no-figures", "--top", "3"]
    assert main([*base, "--output", str(tmp_path / "a")]) == 0
    plain = capsys.readouterr().out
    assert main([*base, "--output", str(tmp_path / "b"), "--evolution", str(tmp_path / "model.csv"),
                 "--age", "100:20 Myr"]) == 0
    with_masses = capsys.readouterr().out
    block = with_masses[with_masses.index("mass at an age:"):]
    block = block[:block.index("\n\n") + 2]
    assert "0.1 +- 0.02 Gyr" in block and all(f"  {b} " in block for b in bands)
    assert "mass 0.0200 M_sun" in block                  # the table puts the companion at 0.02 M_sun at 0.1 Gyr
    assert "mass at an age" not in plain
    cite = f"  - your data: evolutionary-model table {tmp_path / 'model.csv'} (cite where it comes from)\n"
    assert cite in with_masses                           # what the run used, in its list of what to cite
    assert (with_masses.replace(block, "").replace(cite, "")
            .replace(str(tmp_path / "b"), str(tmp_path / "a"))) == plain


@pytest.mark.parametrize("extra, message", [
    (["--age", "5:1 Gyr"], "covers ages"),
    ([], "go together"),
    (["--age", "0.1:0.02 Gyr", "--evolution", "missing.csv"], "cannot read"),
])
def test_classify_evolution_errors_exit_2_and_write_nothing(demo_target, tmp_path, capsys, extra, message):
    _demo_table(demo_target, tmp_path / "model.csv")
    out = tmp_path / "never"
    args = ["classify", str(demo_target), "--output", str(out)]
    if "--evolution" not in extra:
        args += ["--evolution", str(tmp_path / "model.csv")]
    code = main([*args, *extra])
    err = capsys.readouterr().err
    assert code == 2 and message in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not out.exists()
