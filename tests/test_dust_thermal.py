"""Thermal side of one mixture (motes.dust.model.thermal) and its ``motes optics`` output.

External check: an independent numerical integral (scipy quad over the exact Mie Q_abs)
of a band-averaged thermal flux. Bad input: one clear message, nothing written.
"""

from __future__ import annotations

import textwrap

import numpy as np
import pytest
from scipy import integrate

from motes.conventions import flam_to_fnu
from motes.dust.model.mixture import read_mixture_file
from motes.dust.model.thermal import compute_thermal, read_thermal_settings
from motes.errors import InputError
from motes.optics import thermal as th
from motes.optics.mixing import mix_refractive_index

BASE = """
[star]
teff = 5800.0
{luminosity}

[[materials]]
name = "silicate"
source = "silica_amorphous"
{silicate_rule}

[[materials]]
name = "ice"
source = "water_ice_crystalline"
extrapolation = "dielectric"

[[materials]]
name = "carbon"
source = "carbon_amorphous"
extrapolation = "conductor"

[model]
bands = ["2mass_h", "2mass_ks"]

[mixture]
fractions = {{ silicate = 0.5, ice = 0.3, carbon = 0.2 }}
porosity = 0.1
a_min = 2.0
a_max = 100.0
q = 3.5

[thermal]
{thermal}

[bands."mm_1.3"]
shape = "top-hat"
centre_um = 1300.0
width_um = 200.0
"""
THERMAL = """radius_au = 40.0
bands = ["wise_w3", "herschel-pacs_70", "mm_1.3"]
cross_section_au2 = 2.0
distance_pc = 15.0
sizes_per_efold = 3
flux_sizes_per_efold = 8"""


def _write(tmp_path, thermal=THERMAL, luminosity="luminosity = 1.0", silicate_rule='extrapolation = "dielectric"'):
    path = tmp_path / "mix.toml"
    path.write_text(BASE.format(thermal=thermal, luminosity=luminosity, silicate_rule=silicate_rule))
    return path


def _compute(path):
    desc, mix = read_mixture_file(path)
    settings = read_thermal_settings(path, desc)
    return desc, mix, compute_thermal(desc, mix, settings)


@pytest.fixture(scope="module")
def ring(tmp_path_factory):
    return _compute(_write(tmp_path_factory.mktemp("ring")))


def _f_lambda(desc, mix, res, lam):
    """Disk F_lambda [W m^-2 um^-1] at wavelengths ``lam`` with exact Mie Q_abs there."""
    lam = np.atleast_1d(np.asarray(lam, dtype=float))
    ind = np.array([m.refractive_index(lam) for m in desc.materials])
    m = mix_refractive_index(ind, np.asarray(mix.fractions)[:, None], mix.porosity)
    q = th.absorption_efficiency(m[None, :], res.flux_sizes[:, None], lam[None, :])
    fnu = th.thermal_flux_density(q, lam, res.flux_temperature, res.flux_cross_section, 15.0)
    return fnu / flam_to_fnu(1.0, lam)


# the Gaussian curve is tabulated (401 points): quad notices its tiny kinks as round-off; its error
# estimate is still checked below
@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")
def test_band_flux_against_an_independent_quad_integral(ring):
    """<F_lambda> = integral F_lambda w dlambda / integral w dlambda by scipy quad, with the exact Mie
    Q_abs at every wavelength quad asks for, against the model's 48 Gauss nodes per band.

    quad needs a smooth integrand: the top-hat mm band and a Gaussian band at 24 um (their
    curves are sampled finely enough that the kinks are below quad's tolerance). Tolerance
    1e-3: Gauss nodes of the band weight on a smooth spectrum; quad's error estimate < 1e-5."""
    from motes.photometry.bands import gaussian_band

    desc, mix, res = ring
    i = res.band_names.index("mm_1.3")
    gauss = gaussian_band("g24", 24.0, 5.0)
    settings = res.settings.__class__(**{**res.settings.__dict__, "bands": (res.settings.bands[i], gauss)})
    check = compute_thermal(desc, mix, settings)
    assert check.band_disk[0] == pytest.approx(res.band_disk[i], rel=1e-12)
    for j, band in enumerate((res.settings.bands[i], gauss)):
        lo, hi = band.wavelength_min, band.wavelength_max
        scale = 1.0 / float(_f_lambda(desc, mix, res, band.pivot_wavelength)[0])
        nz = np.flatnonzero(band.throughput > 0)
        kinks = band.wavelength[[nz[0], nz[-1]]]          # the top-hat's ramps
        num, err = integrate.quad(lambda x: float(_f_lambda(desc, mix, res, x)[0]) * scale * band.weight(x),
                                  lo, hi, points=kinks, limit=200, epsabs=0.0, epsrel=1e-6)
        den, _ = integrate.quad(lambda x: float(band.weight(x)), lo, hi, points=kinks, limit=200, epsabs=0.0,
                                epsrel=1e-8)
        assert abs(err) < 1e-5 * abs(num)
        expect = float(band.flux_lambda_to_fnu(num / den / scale))
        assert check.band_disk[j] == pytest.approx(expect, rel=1e-3), band.name


def test_band_flux_with_real_curves_against_a_dense_sum(ring):
    """W3 (silica's 9 um feature inside) and PACS 70 have tabulated, piecewise-linear curves:
    the independent integral is the trapezoid rule on every curve point refined 4x, with exact
    Mie Q_abs at each of those wavelengths. Tolerance 1e-3 (48 Gauss nodes per band)."""
    desc, mix, res = ring
    for name in ("wise_w3", "herschel-pacs_70"):
        i = res.band_names.index(name)
        band = res.settings.bands[i]
        lo, hi = band.wavelength_min, band.wavelength_max
        pts = band.wavelength[(band.wavelength >= lo) & (band.wavelength <= hi)]
        pts = pts[:: max(1, pts.size // 300)]
        fine = np.union1d(np.concatenate([np.linspace(a, b, 4, endpoint=False) for a, b in zip(pts, pts[1:])]), pts)
        w = band.weight(fine)
        mean = np.trapezoid(_f_lambda(desc, mix, res, fine) * w, fine) / np.trapezoid(w, fine)
        assert res.band_disk[i] == pytest.approx(float(band.flux_lambda_to_fnu(mean)), rel=1e-3), name


def test_fractional_luminosity_and_radius_ratio(ring):
    """For a ring, L_dust/L* = sigma_tot <Q_abs>_* / (4 pi r^2) (optically thin absorption)."""
    _, _, res = ring
    r_au = 40.0
    expect = np.sum(res.node_cross_section[:, 0] * res.q_abs_star) / (4 * np.pi * r_au**2)
    assert res.fractional_luminosity == pytest.approx(expect, rel=1e-10)
    assert res.radius_ratio == pytest.approx(r_au / res.blackbody_radius)
    assert res.blackbody_radius == pytest.approx(float(th.blackbody_radius(1.0, res.dust_temperature)))
    assert np.sum(res.node_cross_section) == pytest.approx(2.0)
    assert np.sum(res.flux_cross_section) == pytest.approx(2.0)
    assert res.excess[1] > 3                  # a far-infrared excess over the photosphere (7.9)
    assert np.isfinite(res.dust_mass_mearth) and res.dust_mass_mearth > 0


def test_interpolated_temperatures_match_a_direct_solve(ring):
    """The flux integrals use T interpolated in (ln a, ln T) between the temperature nodes;
    solving directly at the flux nodes must agree to 1% (T(a) is smooth: it averages Q_abs
    over the star's and the grain's spectra)."""
    desc, mix, res = ring
    grid = th.thermal_wavelength_grid(extra=np.concatenate([m.wavelength[m.wavelength > 2] for m in desc.materials]))
    ind = np.array([m.refractive_index(grid) for m in desc.materials])
    m = mix_refractive_index(ind, np.asarray(mix.fractions)[:, None], mix.porosity)
    pick = res.flux_sizes[::7]
    q = th.absorption_efficiency(m[None, :], pick[:, None], grid[None, :])
    star, _ = th.stellar_luminosity_density(grid, 1.0, teff=5800.0)
    direct = th.equilibrium_temperature(q, grid, star, 40.0)
    assert res.flux_temperature[::7, 0] == pytest.approx(direct, rel=0.01)


def test_ice_above_its_sublimation_temperature_is_flagged(tmp_path):
    thermal = THERMAL.replace("radius_au = 40.0", "radius_au = 3.0")
    _, _, res = _compute(_write(tmp_path, thermal))
    assert any("'ice' above its sublimation temperature 110 K" in f and "from memory" in f for f in res.flags)
    assert not any("'silicate'" in f for f in res.flags)


def test_user_sublimation_temperature_and_belt(tmp_path):
    thermal = THERMAL.replace("radius_au = 40.0", "radius_au = [20.0, 80.0]\nsurface_density_index = -1.0\n"
                              "sublimation_k = { silicate = 40.0 }\nradial_nodes = 4")
    _, _, res = _compute(_write(tmp_path, thermal))
    assert res.radii.size == 4 and res.temperature.shape == (res.sizes.size, 4)
    assert any("'silicate'" in f and "[thermal] sublimation_k" in f for f in res.flags)
    # cross-section per annulus ∝ Sigma r dr ∝ r^(p+1) dr: the weighted mean radius lies inside
    assert 20.0 < res.mean_radius < 80.0
    # colder outside
    assert (res.temperature[:, -1] < res.temperature[:, 0]).all()


@pytest.mark.parametrize("thermal, luminosity, rule, match", [
    (THERMAL, "luminosity = 1.0", "", r"\[\[materials\]\] #1 \(silicate\).*dielectric"),
    (THERMAL.replace("40.0", "0.0"), "luminosity = 1.0", 'extrapolation = "dielectric"',
     r"\[thermal\] radius_au.*positive"),
    (THERMAL.replace("40.0", "0.005"), "luminosity = 1.0", 'extrapolation = "dielectric"',
     r"\[thermal\] radius_au.*sublimation radius"),
    (THERMAL, "", 'extrapolation = "dielectric"', r"\[star\].*luminosity"),
    (THERMAL + "\ndust_mass_mearth = 0.1", "luminosity = 1.0", 'extrapolation = "dielectric"',
     "exactly one of dust_mass_mearth"),
    (THERMAL.replace("40.0", "[10.0, 50.0]") + "\nsurface_density_index = 11.0", "luminosity = 1.0",
     'extrapolation = "dielectric"', r"surface_density_index.*\[-10, 10\]"),
    (THERMAL + "\nring_radius = 3", "luminosity = 1.0", 'extrapolation = "dielectric"', "ring_radius"),
])
def test_bad_thermal_input_is_refused(tmp_path, thermal, luminosity, rule, match):
    path = _write(tmp_path, thermal, luminosity, rule)
    with pytest.raises(InputError, match=match) as info:
        _compute(path)
    assert "mix.toml" in str(info.value)


def test_loglog_rule_that_leaves_the_index_range_is_refused(tmp_path):
    """Iron's end slopes (n and k rising steeply towards 55.6 um), continued in log-log to 2 cm, pass
    n, k = 1e4; the thermal side refuses, naming the material and the rules that do not. (Silica served
    here while its data stopped at 30 um; since issue 13 it reaches 125 um and its log-log tail stays
    in range.)"""
    path = _write(tmp_path, silicate_rule='extrapolation = "loglog"')
    path.write_text(path.read_text().replace('source = "silica_amorphous"', 'source = "iron"'))
    with pytest.raises(InputError, match=r"#1 \(silicate\).*'loglog' rule takes.*\"dielectric\" or \"conductor\"") as info:
        _compute(path)
    assert "mix.toml" in str(info.value)


def test_cli_prints_and_writes_the_thermal_side(tmp_path, capsys):
    from motes.cli import main

    path = _write(tmp_path)
    out = tmp_path / "out"
    assert main(["optics", str(path), "--output", str(out)]) == 0
    text = capsys.readouterr().out
    assert "fractional luminosity L_dust/L*" in text and "radius / blackbody radius" in text
    assert "extrapolated with the 'dielectric' rule" in text and "no colour correction" in text
    for name in ("mix_thermal_bands.ecsv", "mix_grain_temperatures.ecsv", "mix_thermal.png", "mix_bands.ecsv"):
        assert (out / name).is_file()
    from astropy.table import Table

    t = Table.read(out / "mix_thermal_bands.ecsv")
    assert list(t["band"]) == ["wise_w3", "herschel-pacs_70", "mm_1.3"]
    assert any("dielectric" in n for n in t.meta["notes"])
    # every table records what produced it: version, mixing rule, geometry, star, grains, sizes
    import motes

    bands = Table.read(out / "mix_bands.ecsv")
    for table in (bands, t, Table.read(out / "mix_grain_temperatures.ecsv")):
        assert table.meta["motes_version"] == motes.__version__
        assert table.meta["mixing"].split()[0] in ("bruggeman", "maxwell-garnett", "maxwell_garnett")
        assert table.meta["star"].startswith("blackbody Teff = ") and table.meta["star"].endswith(" K")
        assert table.meta["grains"] == "spheres"
        assert table.meta["size_distribution"] == "power law dn/da ∝ a^-q, q = 3.5, from a_min = 2 um to a_max = 100 um"
        assert [s.split(":")[0] for s in table.meta["optical_constants"]] == list(bands.meta["materials"])
    assert bands.meta["phase_function"] in ("mie", "hg") and bands.meta["scattering_angles_deg"]
    assert "scattering_angles_deg" not in t.meta      # angles play no part in thermal emission


def test_cli_bad_thermal_input_writes_nothing(tmp_path, capsys):
    from motes.cli import main

    path = _write(tmp_path, silicate_rule="")
    out = tmp_path / "out"
    code = main(["optics", str(path), "--output", str(out)])
    assert code != 0
    assert "silicate" in capsys.readouterr().err
    assert not out.exists()


def test_mixture_without_thermal_table_is_unchanged(tmp_path):
    text = _write(tmp_path).read_text()
    path = tmp_path / "plain.toml"
    path.write_text(text.split("[thermal]")[0] + textwrap.dedent("""
        [bands."mm_1.3"]
        shape = "top-hat"
        centre_um = 1300.0
        width_um = 200.0
        """))
    desc, _ = read_mixture_file(path)
    assert read_thermal_settings(path, desc) is None


def test_example_ring_description_reads():
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "examples" / "icy_silicate_ring.toml"
    desc, _ = read_mixture_file(path)
    settings = read_thermal_settings(path, desc)
    assert settings.radius_au == (60.0,) and settings.dust_mass_mearth == 0.01
    assert [m.extrapolation for m in desc.materials] == ["dielectric", "dielectric", "conductor"]


def test_thermal_luminosity_of_the_flux_integrals_matches_l_dust(ring):
    """The band fluxes come from finer size nodes with interpolated temperatures; the luminosity
    they radiate (F_nu integrated over 2 um - 2 cm, exact Mie Q_abs there, times 4 pi d^2) must
    match L_dust from the absorbed starlight on the temperature nodes. Tolerance 1%: the
    interpolation of T and the two size quadratures (measured 0.17% while writing the test)."""
    desc, mix, res = ring
    lam = np.geomspace(2.0, 2e4, 1200)
    fnu = flam_to_fnu(_f_lambda(desc, mix, res, lam), lam)                      # Jy at 15 pc
    nu = 2.99792458e14 / lam
    d = 15.0 * 3.0856775814913673e16
    l_thermal = 4 * np.pi * d**2 * np.trapezoid(fnu[::-1] * 1e-26, nu[::-1]) / 3.828e26
    assert l_thermal == pytest.approx(res.fractional_luminosity * res.luminosity, rel=0.01)


def test_scattered_flux_ratio_of_the_same_grains(ring):
    """Optically thin scattering: F_sca / F* = sigma_tot R_b / r^2 (R_b per unit cross-section)."""
    from motes.report.thermal_text import scattered_flux_ratio

    _, _, res = ring
    r_b = np.array([1e-2, 3e-2])
    assert scattered_flux_ratio(res, r_b) == pytest.approx(2.0 * r_b / 40.0**2, rel=1e-12)


def test_user_star_spectrum_gives_the_blackbody_temperatures(tmp_path, ring):
    """A user spectrum that is the same 5800 K blackbody over 0.25-5 um: only its shape is used
    (normalised to [star] luminosity), continued as Rayleigh-Jeans beyond 5 um and zero below
    0.25 um, where a 5800 K blackbody has 1.2% of its flux. Temperatures within 1% (absorption
    efficiencies are larger in the ultraviolet, so the missing 1.2% weighs more than in T_bb:
    1.2%/4 ≈ 0.3% in T for a grey grain)."""
    from motes.photometry.spectra import blackbody_flux_lambda

    lam = np.geomspace(0.25, 5.0, 400)
    (tmp_path / "star.txt").write_text("# wavelength_um f_lambda\n" + "\n".join(
        f"{w:.6g} {f:.6g}" for w, f in zip(lam, 3.0 * blackbody_flux_lambda(lam, 5800.0))))
    text = _write(tmp_path).read_text().replace('teff = 5800.0', 'spectrum = "star.txt"')
    path = tmp_path / "mix.toml"
    path.write_text(text)
    _, _, res = _compute(path)
    assert res.temperature == pytest.approx(ring[2].temperature, rel=0.01)
    assert any("Rayleigh-Jeans" in n for n in res.notes) and any("starts at 0.25 um" in n for n in res.notes)


def test_printed_thermal_part_names_each_note_once_with_units(ring):
    """Issue 14: `motes optics` printed the Mie-spheres note twice (scattered and thermal parts)."""
    from motes.report.thermal_text import format_thermal

    _, _, res = ring
    assert format_thermal(res).count(res.notes[0]) == 1
    text = format_thermal(res, printed_notes=res.notes[:1])
    assert res.notes[0] not in text and all(n in text for n in res.notes[1:])
    assert "pivot [µm]" in text and "a [µm]" in text and " um" not in text.split("Note:")[0]
