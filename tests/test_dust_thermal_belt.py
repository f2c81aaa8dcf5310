"""Thermal emission of a belt (r_in to r_out, surface density Sigma ∝ r^p): exact path, fast path, fits.

External checks: blackbody grains follow T = 278 K (L/L_sun)^(1/4) (r/au)^(-1/2)
(common practice, no source) and the belt's SED is the Sigma-weighted integral of
blackbodies over r, by an independent scipy integration; the thermal luminosity
of a belt equals the starlight it absorbs. A belt of vanishing width is the
ring; the radial quadrature converges.
"""

from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from scipy import integrate

from motes.conventions import flam_to_fnu
from motes.dust.model.mixture import MixtureParameters
from motes.dust.model.thermal import belt_nodes, compute_thermal
from motes.errors import InputError
from motes.optics import thermal as th
from test_dust_thermal import THERMAL, _compute, _f_lambda, _write

BELT = THERMAL.replace("radius_au = 40.0", "radius_au = [20.0, 80.0]")


@pytest.fixture(scope="module")
def belt(tmp_path_factory):
    return _compute(_write(tmp_path_factory.mktemp("belt"), BELT))


# ------------------------------------------------------------------ radial nodes
@pytest.mark.parametrize("p", [-1.0, -1.5, 0.5, 1.0])
def test_belt_nodes_give_the_analytic_mean_radius(p):
    """Cross-section per annulus ∝ Sigma r dr ∝ r^(p+1) dr, so the cross-section-weighted mean radius
    is (p+2)/(p+3) (r_out^(p+3) - r_in^(p+3)) / (r_out^(p+2) - r_in^(p+2)) (p != -2, -3); Gauss-Legendre
    in ln r with 12 nodes integrates these smooth powers to rounding."""
    r_in, r_out = 30.0, 120.0
    r, share = belt_nodes(r_in, r_out, p, 12)
    expect = (p + 2) / (p + 3) * (r_out ** (p + 3) - r_in ** (p + 3)) / (r_out ** (p + 2) - r_in ** (p + 2))
    assert share.sum() == pytest.approx(1.0, rel=1e-14) and (share > 0).all()
    assert r_in < r.min() < r.max() < r_out
    assert float(np.sum(share * r)) == pytest.approx(expect, rel=1e-12)
    # a belt of zero width is a ring: one node with all the cross-section
    ring_r, ring_share = belt_nodes(60.0, 60.0, p, 12)
    assert ring_r.tolist() == [60.0] and ring_share.tolist() == [1.0]


def test_belt_nodes_refuse_bad_edges():
    with pytest.raises(InputError, match="0 < r_in <= r_out"):
        belt_nodes(80.0, 20.0, -1.0, 6)
    with pytest.raises(InputError, match="0 < r_in <= r_out"):
        belt_nodes(0.0, 20.0, -1.0, 6)
    for r_in, r_out in ((np.nan, 20.0), (10.0, np.inf), (-5.0, 20.0)):
        with pytest.raises(InputError, match="0 < r_in <= r_out"):
            belt_nodes(r_in, r_out, -1.0, 6)
    for p in (np.nan, np.inf):
        with pytest.raises(InputError, match="finite surface_density_index"):
            belt_nodes(20.0, 80.0, p, 6)
    for n in (0, -3, 2.5, 6.0, True, "6"):
        with pytest.raises(InputError, match="integer number of radial nodes >= 1"):
            belt_nodes(20.0, 80.0, -1.0, n)
    assert belt_nodes(20.0, 80.0, -1.0, np.int64(1))[0].size == 1


# ------------------------------------------------------------------ blackbody grains: an analytic belt
def test_blackbody_belt_sed_is_the_integral_of_blackbodies_over_radius():
    """Perfect absorbers (Q_abs = 1) in a belt 30-120 au with Sigma ∝ r^-1 around a 1 L_sun star.

    T(r) = T_1 (r/au)^(-1/2) with T_1 = (L_sun / (16 pi sigma_SB au^2))^(1/4) = 278.3 K (the 278 K rule,
    common practice, no source; T_1 from astropy's constants here, independent of motes' own). The belt's
    flux per unit of total cross-section is then F_nu = ∫ r^(p+1) B_nu(T(r)) dr / ∫ r^(p+1) dr / d^2,
    integrated by scipy quad in r. motes: the balance solver's temperatures at the belt's radial nodes
    (24) and thermal_flux_density with the nodes' cross-section shares (what compute_thermal does).
    Tolerance 1e-4: the solver matches T_bb to 1e-6, and B_nu moves by x = h nu / k T <= 25 times that
    at 24 um for the coldest grains (25 K at 120 au)."""
    grid = th.thermal_wavelength_grid()
    star, _ = th.stellar_luminosity_density(grid, 1.0, teff=5772.0)
    r_in, r_out, p = 30.0, 120.0, -1.0
    r, share = belt_nodes(r_in, r_out, p, 24)
    t = th.equilibrium_temperature(np.ones((1, grid.size)), grid, star, r)            # [1, R]
    t1 = ((const.L_sun / (16 * np.pi * const.sigma_sb * const.au**2)) ** 0.25).to_value(u.K)
    assert t1 == pytest.approx(278.3, abs=0.05)
    assert t[0] == pytest.approx(t1 * r**-0.5, rel=2e-6)
    assert t[0] == pytest.approx(278.0 * r**-0.5, rel=2e-3)               # the rounded rule
    lam = np.array([24.0, 70.0, 160.0, 850.0])
    d_pc = 10.0
    got = th.thermal_flux_density(np.ones((1, lam.size)), lam, t, share[None, :], d_pc)   # 1 au^2 in all

    def b_nu(lam_um, temp):                                                # Jy / sr, from astropy constants
        nu = (const.c / (lam_um * u.um)).to_value(u.Hz)
        x = (const.h * nu * u.Hz / (const.k_B * temp * u.K)).decompose().value
        return (2 * const.h * (nu * u.Hz) ** 3 / const.c**2 / np.expm1(x)).to_value(u.Jy)

    norm, _ = integrate.quad(lambda x: x ** (p + 1), r_in, r_out)
    scale = (u.au**2 / (d_pc * u.pc) ** 2).decompose().value
    for j, lam_j in enumerate(lam):
        num, err = integrate.quad(lambda x: x ** (p + 1) * b_nu(lam_j, t1 * x**-0.5), r_in, r_out,
                                  epsabs=0.0, epsrel=1e-10, limit=200)
        assert err < 1e-8 * abs(num)
        assert got[j] == pytest.approx(num / norm * scale, rel=1e-4), lam_j


# ------------------------------------------------------------------ exact path
def test_belt_of_vanishing_width_is_the_ring(tmp_path):
    """A belt 40-40.00004 au (width 1e-6 r) against the ring at 40 au: the two differ at first order in
    the width (the mean radius moves by half of it), measured 2e-6 in the band fluxes; tolerance 1e-5."""
    desc, mix, ring = _compute(_write(tmp_path, THERMAL))
    thin = compute_thermal(desc, mix, dataclasses.replace(ring.settings, radius_au=(40.0, 40.0 * (1 + 1e-6)),
                                                          surface_density_index=-1.0))
    assert thin.radii.size == ring.settings.radial_nodes
    assert thin.band_disk == pytest.approx(ring.band_disk, rel=1e-5)
    assert thin.fractional_luminosity == pytest.approx(ring.fractional_luminosity, rel=1e-5)
    assert thin.temperature[:, 0] == pytest.approx(ring.temperature[:, 0], rel=1e-5)
    assert thin.radius_ratio == pytest.approx(ring.radius_ratio, rel=1e-5)


@pytest.mark.parametrize("edges, p, n, tol", [
    ((20.0, 80.0), -1.0, 6, 1e-6),      # measured 2.0e-9 (4 nodes: 8e-6)
    ((20.0, 80.0), -2.0, 6, 1e-6),      # measured 1.0e-8 (4 nodes: 1e-4)
    ((20.0, 80.0), 1.0, 6, 1e-6),       # measured 2.9e-9
    ((10.0, 200.0), -1.0, 8, 1e-6),     # measured 2.3e-8 (6 nodes: 4.5e-6, 4 nodes: 9.8e-4)
])
def test_radial_quadrature_converges(belt, edges, p, n, tol):
    """Band fluxes with n Gauss nodes in ln r against 32: the integrand is smooth in ln r, so the
    error falls exponentially with n (measured values beside each case)."""
    desc, mix, res = belt
    settings = dataclasses.replace(res.settings, radius_au=edges, surface_density_index=p)
    ref = compute_thermal(desc, mix, dataclasses.replace(settings, radial_nodes=32))
    got = compute_thermal(desc, mix, dataclasses.replace(settings, radial_nodes=n))
    assert np.max(np.abs(got.band_disk / ref.band_disk - 1)) < tol
    assert got.fractional_luminosity == pytest.approx(ref.fractional_luminosity, rel=tol)


def test_belt_is_the_cross_section_weighted_sum_of_rings(belt):
    """Optically thin: the belt's band fluxes and L_dust are the sum of rings at its radial nodes, each
    with its node's share of the cross-section (same grains everywhere). Tolerance 1e-12 (rounding)."""
    desc, mix, res = belt
    total = np.zeros(len(res.band_names))
    l_dust = 0.0
    for r, share in zip(*belt_nodes(20.0, 80.0, -1.0, res.settings.radial_nodes)):
        ring = compute_thermal(desc, mix, dataclasses.replace(
            res.settings, radius_au=(float(r),), surface_density_index=None,
            cross_section_au2=res.cross_section_au2 * share))
        total += ring.band_disk
        l_dust += ring.fractional_luminosity
    assert res.band_disk == pytest.approx(total, rel=1e-12)
    assert res.fractional_luminosity == pytest.approx(l_dust, rel=1e-12)
    assert res.node_cross_section.sum() == pytest.approx(res.cross_section_au2, rel=1e-12)
    assert res.mean_radius == pytest.approx(50.0, rel=1e-12)     # p = -1: (r_in + r_out) / 2


def test_belt_reradiates_what_it_absorbs(belt):
    """The belt's thermal luminosity (F_nu at its flux nodes, exact Mie Q_abs on an independent
    wavelength grid of 1200 points over 2 um - 2 cm, integrated over frequency, times 4 pi d^2) equals
    L_dust from the starlight absorbed at its temperature nodes. Tolerance 1% as for the ring
    (test_dust_thermal: interpolation of T between the size nodes, two size quadratures); measured
    0.19% while writing the test."""
    desc, mix, res = belt
    assert res.flux_temperature.shape == res.flux_cross_section.shape == (res.flux_sizes.size, res.radii.size)
    lam = np.geomspace(2.0, 2e4, 1200)
    fnu = flam_to_fnu(_f_lambda(desc, mix, res, lam), lam)
    nu = const.c.to_value(u.um / u.s) / lam
    d = (15.0 * u.pc).to_value(u.m)
    l_thermal = 4 * np.pi * d**2 * np.trapezoid(fnu[::-1] * 1e-26, nu[::-1]) / const.L_sun.to_value(u.W)
    assert l_thermal == pytest.approx(res.fractional_luminosity * res.luminosity, rel=0.01)


def test_ice_flag_sees_the_belts_warm_inner_edge(tmp_path):
    """Belt 8-80 au with 2 radial nodes (13.0 and 49.3 au): the warmest grains at the nodes stay below
    110 K, but at the inner edge (8 au; T_bb = 98 K, the small carbon-bearing grains ~124 K) they
    exceed it; the flag must say so, at 8 au."""
    thermal = BELT.replace("radius_au = [20.0, 80.0]", "radius_au = [8.0, 80.0]\nradial_nodes = 2")
    desc, mix, res = _compute(_write(tmp_path, thermal))
    assert res.radii.size == 2 and res.temperature.max() < 110.0
    flags = [f for f in res.flags if "'ice' above its sublimation temperature 110 K" in f]
    assert len(flags) == 1 and "at 8 au" in flags[0], flags


def test_default_surface_density_index_and_bad_belts(tmp_path):
    from motes.dust.model.mixture import read_mixture_file
    from motes.dust.model.thermal import read_thermal_settings
    from motes.parameters import PARAMETERS

    path = _write(tmp_path, BELT)
    desc, _ = read_mixture_file(path)
    assert read_thermal_settings(path, desc).surface_density_index == PARAMETERS["surface_density_index"].default
    for thermal, match in (
            (BELT.replace("[20.0, 80.0]", "[80.0, 20.0]"), r"\[thermal\] radius_au.*r_in < r_out"),
            (BELT + "\nsurface_density_index = 12.0", r"\[thermal\] surface_density_index.*\[-10, 10\]"),
            (BELT.replace("[20.0, 80.0]", "[0.001, 80.0]"), r"\[thermal\] radius_au.*sublimation radius")):
        with pytest.raises(InputError, match=match) as info:
            _compute(_write(tmp_path, thermal))
        assert "mix.toml" in str(info.value)


def test_cli_prints_and_draws_a_belt(tmp_path, capsys):
    from motes.cli import main

    path = _write(tmp_path, BELT)
    out = tmp_path / "out"
    assert main(["optics", str(path), "--output", str(out)]) == 0
    text = capsys.readouterr().out
    assert "belt 20-80 au, surface density ∝ r^-1" in text
    assert "radius / blackbody radius" in text and "(cross-section-weighted mean radius)" in text
    assert (out / "mix_thermal.png").stat().st_size > 10_000
    from astropy.table import Table

    temps = Table.read(out / "mix_grain_temperatures.ecsv")
    assert sum(c.startswith("T_") for c in temps.colnames) == 12                 # one column per radial node


# ------------------------------------------------------------------ fast path and joint fits
REPO = Path(__file__).resolve().parents[1]
EXAMPLE = REPO / "examples" / "joint_ring"
RING_PRIOR = 'ring_radius = { prior = "uniform", lower = 30.0, upper = 90.0 }'


@pytest.fixture(scope="module")
def table_cache(request):
    """Lookup tables in ``$MOTES_CACHE_DIR`` when set, else pytest's cache folder (as the joint tests)."""
    import os

    mp = pytest.MonkeyPatch()
    if not os.environ.get("MOTES_CACHE_DIR"):
        mp.setenv("MOTES_CACHE_DIR", str(request.config.cache.mkdir("motes-tables")))
    yield
    mp.undo()


def _belt_example(folder: Path, nlive: int = 25, belt: str = "belt_au = [45.0, 75.0]", replace=()) -> Path:
    """The joint example (examples/joint_ring) with its ring radius replaced by a fixed belt."""
    for f in ("colours.csv", "sed.csv"):
        shutil.copy(EXAMPLE / f, folder / f)
    text = (EXAMPLE / "joint_fit.toml").read_text().replace("nlive = 100", f"nlive = {nlive}")
    assert RING_PRIOR in text and "[thermal]\n" in text
    text = text.replace(RING_PRIOR, "").replace("[thermal]\n", f"[thermal]\n{belt}\n")
    for old, new in replace:
        assert old in text, old
        text = text.replace(old, new)
    path = folder / "joint_fit.toml"
    path.write_text(text)
    return path


def test_fit_description_with_a_belt(tmp_path):
    from motes.dust.fit.spec import read_fit_description

    spec = read_fit_description(_belt_example(tmp_path, belt="belt_au = [45.0, 75.0]\nsurface_density_index = -1.5"))
    t = spec.thermal
    assert t.ring_radius is None and t.belt_au == (45.0, 75.0) and t.surface_density_index == -1.5
    assert t.radial_nodes == 6
    assert t.geometry == "belt 45-75 au (fixed edges), surface density ∝ r^-1.5"
    assert "ring_radius" not in spec.parameter_space(spec.full_model).names
    from motes.dust.fit.joint_run import joint_notes

    notes = joint_notes(t)
    assert "belt 45-75 au (fixed edges, surface density ∝ r^-1.5" in notes[0] and "ring radius" not in notes[0]
    assert "cross-section-weighted mean radius" in notes[1]
    default = read_fit_description(_belt_example(tmp_path)).thermal
    assert default.surface_density_index == -1.0


@pytest.mark.parametrize("belt, replace, match, where", [
    ("belt_au = [75.0, 45.0]", (), "0 < r_in < r_out", "[thermal] belt_au"),
    ("belt_au = [45.0]", (), r"\[r_in, r_out\]", "[thermal] belt_au"),
    ("belt_au = [0.01, 75.0]", (), "inner edge is at 0.01 au, inside the sublimation radius", "[thermal] belt_au"),
    ("belt_au = [45.0, 75.0]", (("q = 3.5", "q = 3.5\nring_radius = 60.0"),), "not both", "[thermal] belt_au"),
    ("belt_au = [45.0, 75.0]\nsurface_density_index = 11.0", (), r"\[-10, 10\]",
     "[thermal] surface_density_index"),
    ("surface_density_index = -1.0", (), "is for a belt", "[thermal] surface_density_index"),
    ("radial_nodes = 4", (), "is for a belt", "[thermal] radial_nodes"),
    ("belt_au = [45.0, 75.0]\nradial_nodes = 1", (), "radial_nodes", "[thermal] radial_nodes"),
    # L = 1 L_sun: a blackbody grain is at 3 K (TEMPERATURE_RANGE[0]) at (278.33 / 3)^2 = 8608 au
    ("belt_au = [45.0, 1e6]", (), r"outer edge is at 1e\+06 au, beyond 8608 au.* colder than 3 K",
     "[thermal] belt_au"),
    ("", (("q = 3.5", 'q = 3.5\nring_radius = { prior = "uniform", lower = 30.0, upper = 2e4 }'),),
     r"ring radius reaches 20000 au, beyond 8608 au.*prior's upper bound", "[parameters] ring_radius"),
    ("", (("q = 3.5", "q = 3.5\nring_radius = 9000.0"),), "ring radius reaches 9000 au, beyond 8608 au",
     "[parameters] ring_radius"),
])
def test_bad_belt_fit_descriptions(tmp_path, belt, replace, match, where):
    from motes.dust.fit.run import FitRunSettings, run_fit

    path = _belt_example(tmp_path, belt=belt, replace=replace)
    out = tmp_path / "run"
    with pytest.raises(InputError, match=match) as info:
        run_fit(path, FitRunSettings(output=out, progress=False), echo=lambda *a: None)
    assert info.value.where == where and str(path) in str(info.value)
    assert not out.exists()


@pytest.fixture(scope="module")
def belt_problem(tmp_path_factory, table_cache):
    from motes.dust.fit.problem import ProblemHandle
    from motes.dust.fit.spec import read_fit_description

    spec = read_fit_description(_belt_example(tmp_path_factory.mktemp("belt_fit")))
    return spec, ProblemHandle(spec, spec.full_model).build()


def test_joint_problem_evaluates_the_belt(belt_problem):
    """The joint problem of a fixed belt: the thermal model is the belt, its fluxes are the
    cross-section-weighted sum of the ring's at the radial nodes for every point of a batch (the
    batching must not mix points and radii), the radius of r / r_bb is the mean radius, what is tied
    names the belt; ln L is finite."""
    from motes.dust.model.thermal_belt import ThermalBeltModel

    spec, problem = belt_problem
    model = problem.thermal_model
    assert isinstance(model, ThermalBeltModel) and model.belt_au == (45.0, 75.0)
    assert problem.space.names == ("fraction_silicate", "fraction_carbon", "porosity", "a_min")
    assert "belt 45-75 au (fixed edges, surface density ∝ r^-1" in problem.tied
    theta = np.array([[0.75, 0.25, 0.3, 3.0], [0.5, 0.5, 0.1, 1.5], [0.9, 0.1, 0.6, 8.0]])
    got = problem.thermal.model_fluxes(theta)
    p = problem.space.unpack(theta)
    expect = np.zeros_like(got)
    for r, share in zip(model.radii, model.shares):
        expect += share * model.ring.evaluate(p["fractions"], p["porosity"], p["a_min"], p["a_max"], p["q"], r)
    assert got == pytest.approx(expect, rel=1e-12)
    assert problem.thermal.radius(p) == pytest.approx(np.full(3, model.mean_radius), rel=1e-15)
    assert model.mean_radius == pytest.approx(60.0, rel=1e-12)                  # p = -1: (r_in + r_out) / 2
    assert np.isfinite(problem.ln_likelihood(theta)).all()
    with pytest.raises(InputError, match="radii are fixed"):
        model.evaluate(p["fractions"], p["porosity"], p["a_min"], p["a_max"], p["q"], 60.0)


def test_fast_belt_of_vanishing_width_is_the_fast_ring(belt_problem):
    from motes.dust.model.thermal_belt import ThermalBeltModel

    _, problem = belt_problem
    ring = problem.thermal_model.ring
    thin = ThermalBeltModel(ring, (60.0, 60.0 * (1 + 1e-6)), -1.0)
    f = np.array([[0.75, 0.25], [0.5, 0.5]])
    args = (f, [0.3, 0.1], [3.0, 1.5], 1000.0, 3.5)
    assert thin.evaluate(*args) == pytest.approx(ring.evaluate(*args, 60.0), rel=1e-5)


def test_fast_belt_takes_edges_as_a_quantity_and_refuses_a_non_pair(belt_problem):
    from motes.dust.model.thermal_belt import ThermalBeltModel

    ring = belt_problem[1].thermal_model.ring
    in_au = ThermalBeltModel(ring, [45.0, 75.0] * u.au)
    assert in_au.belt_au == (45.0, 75.0)
    in_km = ThermalBeltModel(ring, ([45.0, 75.0] * u.au).to(u.km))
    assert in_km.belt_au == pytest.approx((45.0, 75.0), rel=1e-12)
    assert in_km.radii == pytest.approx(ThermalBeltModel(ring, (45.0, 75.0)).radii, rel=1e-12)
    with pytest.raises(InputError, match="belt_au"):
        ThermalBeltModel(ring, [45.0, 75.0] * u.s)
    for bad in (60.0, (40.0, 60.0, 80.0), ("a", "b"), None):
        with pytest.raises(InputError, match=r"belt_au must be a pair \[r_in, r_out\]"):
            ThermalBeltModel(ring, bad)


@pytest.mark.slow
@pytest.mark.parametrize("edges, p", [((40.0, 80.0), -1.0), ((30.0, 120.0), -2.0), ((50.0, 70.0), 1.0)])
def test_fast_belt_within_two_percent_of_exact(belt_problem, edges, p):
    """The fast belt (6 radial nodes, the ring's fast machinery at each) against the exact path (12
    radial nodes) for three mixtures: the issue's 2% goal. Measured (issue 13) on the thermal test ring's
    materials (3 belts x 3 mixtures): worst 1.35% (WISE W4, a_min 0.8 um). Here the joint example's
    silica + carbon: measured worst 0.68% (SPIRE 500; on two belts x two mixtures of this test)."""
    from motes.dust.model.thermal import ThermalSettings
    from motes.dust.model.thermal_belt import ThermalBeltModel

    spec, problem = belt_problem
    ring = problem.thermal_model.ring
    model = ThermalBeltModel(ring, edges, p)
    desc = ring.description
    settings = ThermalSettings(edges, p, tuple(ring.bands), None, 1.0, ring.distance_pc, {})
    for fr, por, a_min in (((0.75, 0.25), 0.3, 3.0), ((0.5, 0.5), 0.1, 1.5), ((0.9, 0.1), 0.6, 8.0)):
        exact = compute_thermal(desc, MixtureParameters(fr, por, a_min, 3.5, 1000.0), settings)
        got = model.evaluate(np.array([fr]), por, a_min, 1000.0, 3.5)[0]
        assert np.max(np.abs(got / exact.band_disk - 1)) < 0.02, (fr, por, a_min, got / exact.band_disk - 1)


@pytest.mark.slow
def test_joint_fit_with_a_fixed_belt_end_to_end(tmp_path, table_cache):
    """``motes fit`` on the joint example with a fixed belt 45-75 au instead of the ring (25 live points):
    every output says it is a belt, what is tied names it, L_dust/L_star and r / r_bb come from the
    exact path of the belt at the best fit (its mean radius)."""
    from astropy.table import Table

    from motes.cli import main as cli_main

    path = _belt_example(tmp_path)
    out = tmp_path / "run"
    assert cli_main(["fit", str(path), "--output", str(out), "--quiet"]) == 0
    thermal = Table.read(out / "models" / "silicate+carbon" / "thermal.ecsv")
    meta = thermal.meta
    assert meta["belt_au"] == [45.0, 75.0] and meta["surface_density_index"] == -1.0
    assert meta["radius_au"] == pytest.approx(60.0, rel=1e-9) and "belt 45-75 au" in meta["tied"]
    assert meta["radius_kind"] == "cross-section-weighted mean radius of the belt"
    assert 3e-5 < meta["fractional_luminosity"] < 3e-4 and meta["radius_over_blackbody_radius"] > 1
    summary = (out / "summary.txt").read_text()
    for needle in ("belt 45-75 au (Σ ∝ r^-1, mean radius", "belt 45-75 au (fixed edges", "ice sublimation"):
        assert needle in summary, needle
    assert "ring_radius" not in Table.read(out / "models" / "silicate+carbon" / "samples.ecsv").colnames
    assert (out / "models" / "silicate+carbon" / "thermal_sed.png").is_file() or any(out.rglob("thermal_sed.png"))
