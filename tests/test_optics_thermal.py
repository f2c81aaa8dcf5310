"""Thermal emission of grains: temperatures, spectra, extrapolation rules (motes.optics.thermal).

External checks (sources beside them):

* large perfect absorbers: T = 278 K (L/L_sun)^(1/4) (r / 1 au)^(-1/2)
  (common practice, no source; it follows from the energy balance of a blackbody);
* sign tests from T = T_bb (<Q_abs>_* / <Q_abs>_T)^(1/4): small absorbing grains
  (carbon, iron) hotter than a blackbody, grains transparent in the visible
  (silica, water ice) colder (GUIDE section 5; basic facts of the trade);
* the power law T ∝ r^(-2/(4+beta)) of grains with Q_abs ∝ lambda^-beta (derived below);
* energy conservation of an optically thin ring on an independent frequency grid;
* the ray-optics Q_abs of large spheres against exact Mie.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
from scipy import integrate

from motes.errors import InputError, ModelError
from motes.optics import thermal as th
from motes.optics.constants import load_material
from motes.optics.material import Material
from motes.photometry.spectra import blackbody_flux_lambda

GRID = th.thermal_wavelength_grid()
SUN_L, SUN_TEFF = 1.0, 5772.0          # IAU 2015 nominal solar Teff 5772 K (from memory)


@pytest.fixture(scope="module")
def sun():
    l_lam, notes = th.stellar_luminosity_density(GRID, SUN_L, teff=SUN_TEFF)
    assert notes == ()
    return l_lam


def _q(material_name, rule, radius):
    mat = load_material(material_name, extrapolation=rule)
    m = mat.refractive_index(GRID)
    return th.absorption_efficiency(m[None, :], np.atleast_1d(radius)[:, None], GRID[None, :])


# ------------------------------------------------------------------ Planck function and grids
def test_one_planck_function_and_stefan_boltzmann():
    """One Planck function (motes.planck, in the basement) serves optics and photometry."""
    assert th.planck_lambda is blackbody_flux_lambda
    # integral pi B_lambda dlambda = sigma T^4 on the grid (trapezoid in ln lambda converges fast)
    # what is missing is the tail beyond the grid's 2 cm end: (15 / pi^4) integral_0^x0 y^3/(e^y - 1) dy
    # of sigma T^4, with x0 = h c / (lambda_max k T) and the integral = x0^3/3 - x0^4/8 + x0^5/60 - ...
    for t in (3.0, 10.0, 100.0, 1000.0, 3000.0):
        x0 = 14387.77 / (GRID[-1] * t)
        tail = 15 / np.pi**4 * (x0**3 / 3 - x0**4 / 8 + x0**5 / 60)
        # 0.5% of the tail: the trapezoid's half-weighted end point (measured 0.25%)
        assert th.grid_coverage(GRID, t) == pytest.approx(1.0 - tail, abs=1e-12 + 5e-3 * tail)
    assert th.grid_coverage(GRID, 3.0) > 0.999      # the stated lower end of the solver's range


def test_planck_nu_is_b_lambda_times_lambda2_over_c():
    lam, t = 850.0, 30.0
    expect = (th.planck_lambda(lam, t) * u.W / u.m**2 / u.um * (lam * u.um) ** 2 / (3e8 * u.m / u.s)).to_value(u.Jy)
    assert th.planck_nu(lam, t) == pytest.approx(expect, rel=1e-3)   # c rounded to 3e8 here


# ------------------------------------------------------------------ large perfect absorbers
@pytest.mark.parametrize("lum, r", [(1.0, 1.0), (1.0, 30.0), (8.0, 70.0), (0.1, 5.0)])
def test_perfect_absorber_follows_278_K_rule(sun, lum, r):
    """T = 278 K (L/L_sun)^(1/4) (r/au)^(-1/2) (common practice, no source; energy balance of a blackbody).

    278 K is the rounded coefficient: with IAU L_sun = 3.828e26 W it is 278.3 K, so the rounded
    rule holds to 0.15%; the solver must match the exact balance to 1e-6.
    """
    l_lam = sun * lum
    t = th.equilibrium_temperature(np.ones((1, GRID.size)), GRID, l_lam, r)[0]
    assert t == pytest.approx(278.0 * lum**0.25 * r**-0.5, rel=2e-3)
    assert t == pytest.approx(float(th.blackbody_temperature(lum, r)), rel=1e-6)


def test_any_grey_grain_is_at_the_blackbody_temperature(sun):
    q = np.full((3, GRID.size), 1.0) * np.array([[1.0], [0.3], [0.01]])
    t = th.equilibrium_temperature(q, GRID, sun, [3.0, 100.0])
    # rel 1e-6: at 100 au (28 K) the grid's 2 cm end misses 9e-7 of sigma T^4, 2e-7 in T
    assert t == pytest.approx(np.broadcast_to(th.blackbody_temperature(1.0, [3.0, 100.0]), (3, 2)), rel=1e-6)


def test_large_absorbing_grain_is_near_blackbody(sun):
    """A 1 cm soot sphere is nearly grey: Q_abs ≈ 1 - R with a normal-incidence reflectance
    R = ((n-1)^2 + k^2)/((n+1)^2 + k^2) of 0.03 at 0.5 um (m ≈ 1.4 + 0.17i) and 0.2 at 30 um
    (m ≈ 2.6 + 0.34i), so T/T_bb ≈ (0.97/0.8)^(1/4) ≈ 1.05 at most."""
    q = _q("carbon_soot", "dielectric", 1e4)
    t = th.equilibrium_temperature(q, GRID, sun, 10.0)[0]
    assert 1.0 < t / float(th.blackbody_temperature(1.0, 10.0)) < 1.05


# ------------------------------------------------------------------ hotter / colder than a blackbody
@pytest.mark.parametrize("name, rule", [("carbon_amorphous", "conductor"), ("iron", "conductor"),
                                        ("carbon_soot", "dielectric")])
def test_small_absorbing_grains_run_hotter_than_a_blackbody(sun, name, rule):
    """T = T_bb (<Q>_*/<Q>_T)^(1/4): absorbing grains of 0.1 um absorb starlight well and emit
    badly at 10-100 um (x << 1 there), so T > T_bb (GUIDE section 5)."""
    q = _q(name, rule, 0.1)
    t = th.equilibrium_temperature(q, GRID, sun, 30.0)[0]
    t_bb = float(th.blackbody_temperature(1.0, 30.0))
    assert t > 1.3 * t_bb
    # and the Planck-mean form of the balance holds for the solved T
    q_star = float(q[0] @ (th.trapezoid_weights(GRID) * sun) / np.sum(th.trapezoid_weights(GRID) * sun))
    q_own = float(th.planck_mean_efficiency(q, GRID, t)[0])
    assert t == pytest.approx(t_bb * (q_star / q_own) ** 0.25, rel=1e-6)


@pytest.mark.parametrize("name, radius", [("silica_amorphous", 1.0), ("silica_amorphous", 10.0),
                                          ("water_ice_crystalline", 10.0)])
def test_grains_transparent_in_the_visible_run_colder(sun, name, radius):
    """Silica and ice barely absorb at 0.3-1 um (k ~ 1e-8) but emit in their infrared bands: T < T_bb.

    Ice needs sizes comparable to its emission wavelengths: sub-micron ice grains come out
    ~10% warmer than a blackbody here (measured), because they absorb the star's near-infrared
    light in the 1.5-3 um bands but emit with x << 1 at 50-100 um."""
    q = _q(name, "dielectric", radius)
    t = th.equilibrium_temperature(q, GRID, sun, 30.0)[0]
    assert t < 0.9 * float(th.blackbody_temperature(1.0, 30.0))


def test_power_law_emissivity_gives_the_analytic_radial_law(sun):
    """Q_abs = 1 below lambda0 = 1 um and (lambda0/lambda)^beta above it.

    Derivation: the absorbed power ``A(r) = integral Q L*_lambda dlambda / (16 pi r^2)`` is a
    constant over r^2. For T << h c / (k lambda0) (here T < 200 K, so h c / (lambda0 k T) > 70)
    the emission lies entirely at lambda >> lambda0, where
    ``E(T) = integral (lambda0/lambda)^beta pi B_lambda(T) dlambda``; substituting
    lambda = h c / (k T y) gives ``E = C lambda0^beta T^(4+beta)`` with a constant
    ``C = 2 pi k^(4+beta) / (h^(3+beta) c^(2+beta)) integral y^(3+beta)/(e^y - 1) dy``.
    So ``T^(4+beta) ∝ r^-2``, i.e. ``T ∝ r^(-2/(4+beta))``; at beta = 0 this is the
    blackbody's r^(-1/2).
    """
    lam0 = 1.0
    r = np.array([10.0, 40.0, 160.0])
    for beta in (0.0, 1.0, 2.0):
        q = np.where(GRID < lam0, 1.0, (lam0 / GRID) ** beta)[None, :]
        t = th.equilibrium_temperature(q, GRID, sun, r)[0]
        slope = np.diff(np.log(t)) / np.diff(np.log(r))
        assert slope == pytest.approx(-2.0 / (4.0 + beta), rel=1e-4)


def test_temperatures_vectorised_over_sizes_and_radii(sun):
    q = _q("silica_amorphous", "dielectric", np.array([0.1, 1.0, 10.0, 100.0]))
    t = th.equilibrium_temperature(q, GRID, sun, np.array([5.0, 50.0]))
    assert t.shape == (4, 2)
    for i in range(4):
        for j, r in enumerate((5.0, 50.0)):
            assert t[i, j] == pytest.approx(th.equilibrium_temperature(q[i:i + 1], GRID, sun, r)[0], rel=1e-10)
    # balance holds for every element
    a = th.absorbed_flux(q, GRID, sun, np.array([5.0, 50.0]))
    assert th.emitted_flux(q, GRID, t) == pytest.approx(a, rel=1e-9)


def test_quantities_at_the_boundary(sun):
    t1 = th.blackbody_temperature(1.0 * u.L_sun, 1.0 * u.AU)
    t2 = th.blackbody_temperature(3.828e26 * u.W, 1.495978707e8 * u.km)
    assert t1 == pytest.approx(t2, rel=1e-9)
    with pytest.raises(InputError, match="r_au"):
        th.blackbody_temperature(1.0, 1.0 * u.s)


# ------------------------------------------------------------------ energy conservation
def test_thin_ring_reradiates_what_it_absorbs(sun):
    """L_thermal = 4 pi d^2 integral F_nu dnu on an independent frequency grid equals the absorbed
    stellar luminosity. Tolerance 2e-3: the solver's grid (40 per decade plus silica's and carbon's
    own points above 2 um, at most 200 per decade) moves T by ~1e-4 against a grid 6x finer
    (measured while writing this test), i.e. ~5e-4 in T^4; Planck functions alone integrate to
    1e-9 on either grid."""
    sizes = np.array([0.2, 1.0, 5.0])
    mats = [load_material("silica_amorphous", extrapolation="dielectric"),
            load_material("carbon_amorphous", extrapolation="conductor")]
    from motes.optics.mixing import mix_refractive_index

    def m_eff(lam):
        ind = np.array([mat.refractive_index(lam) for mat in mats])
        return mix_refractive_index(ind, np.array([[0.7], [0.3]]), 0.1)

    grid = th.thermal_wavelength_grid(extra=np.concatenate([m.wavelength[m.wavelength > 2] for m in mats]))
    star, _ = th.stellar_luminosity_density(grid, SUN_L, teff=SUN_TEFF)
    q = th.absorption_efficiency(m_eff(grid)[None, :], sizes[:, None], grid[None, :])
    r = np.array([20.0, 45.0])
    t = th.equilibrium_temperature(q, grid, star, r)
    sigma = np.array([[1.0, 0.5], [2.0, 1.0], [0.3, 0.2]])               # au^2
    absorbed = float(np.sum(sigma * 1.495978707e11**2 * 4 * th.absorbed_flux(q, grid, star, r)))
    nu = np.geomspace(3e10, 3e15, 3201)                                   # Hz: 10 mm to 0.1 um
    lam = 2.99792458e14 / nu
    order = np.argsort(lam)
    q_nu = th.absorption_efficiency(m_eff(lam[order])[None, :], sizes[:, None], lam[order][None, :])
    d_pc = 10.0
    f_nu = th.thermal_flux_density(q_nu, lam[order], t, sigma, d_pc)[np.argsort(order)]   # Jy on nu grid
    d = d_pc * 3.0856775814913673e16
    emitted = 4 * np.pi * d**2 * integrate.simpson(f_nu * 1e-26, x=nu)
    assert emitted == pytest.approx(absorbed, rel=2e-3)


# ------------------------------------------------------------------ ray optics
@pytest.mark.parametrize("m", [1.5 + 0.01j, 1.33 + 1e-6j, 1.55 + 3e-8j, 1.14 + 1.3j, 1.2 + 0.28j,
                               0.8 + 0.5j, 2.0 + 1.0j])
def test_ray_optics_matches_mie_at_the_switch(m):
    """Above RAY_OPTICS_X, Q_abs comes from ray optics; at the switch it must agree with the
    exact series to the 1% the note states (edge terms fall as x^(-2/3))."""
    from motes.optics import mie

    x = th.RAY_OPTICS_X
    exact = float(mie.efficiencies(m, x).q_abs)
    assert float(th.ray_optics_absorption(m, x)) == pytest.approx(exact, rel=0.01)


def test_non_absorbing_spheres_absorb_nothing():
    """k = 0: no absorption, including total external reflection of an n < 1 medium (no 0/0)."""
    q = th.absorption_efficiency(np.array([0.8 + 0j, 1.5 + 0j])[:, None], np.array([0.1, 1e4]), 0.5)
    assert np.isfinite(q).all() and (q >= 0).all() and q.max() < 1e-12


# ------------------------------------------------------------------ extrapolation rules
def _toy(rule):
    wl = np.geomspace(0.3, 30.0, 20)
    return Material("toy", wl, np.full(20, 1.7), np.full(20, 0.05), extrapolation=rule)


def test_dielectric_rule_k_inverse_lambda_n_constant():
    mat = _toy("dielectric")
    s = mat.sample([60.0, 3000.0, 0.1])
    assert s.m[0] == pytest.approx(1.7 + 0.025j, rel=1e-12)
    assert s.m[1] == pytest.approx(1.7 + 0.0005j, rel=1e-12)
    assert s.m[2] == pytest.approx(1.7 + 0.05j, rel=1e-12)      # ultraviolet side: constant
    assert s.extrapolated.all() and "'dielectric' rule" in s.notes[0] and "1/lambda" in s.notes[0]


def test_conductor_rule_hagen_rubens():
    """Hagen-Rubens: n, k ∝ lambda^(1/2) at low frequency (Bohren & Huffman 1983, ch. 9)."""
    mat = _toy("conductor")
    m = mat.refractive_index([120.0, 3000.0])
    assert m[0] == pytest.approx((1.7 + 0.05j) * 2.0, rel=1e-12)
    assert m[1] == pytest.approx((1.7 + 0.05j) * 10.0, rel=1e-12)
    assert "Hagen-Rubens" in mat.extrapolation_notes([100.0])[0]


def test_no_rule_refuses_the_thermal_range():
    mat = load_material("silica_amorphous")
    with pytest.raises(Exception, match="outside the data"):
        mat.refractive_index(GRID)


def test_iron_at_the_end_of_the_data_is_a_metal():
    """The bundled iron reaches k ≈ 89 at 30 um and k ≈ 152 at the end of its data, 55.6 um (issue 13;
    values of the file, Querry 1985 as exported); the rule continues it without a jump."""
    iron = load_material("iron", extrapolation="conductor")
    lo, hi = iron.wavelength_range
    assert hi == pytest.approx(55.5556, rel=1e-5)
    assert iron.refractive_index(30.303).imag == pytest.approx(89.1, rel=0.01)
    m_end, m_next = iron.refractive_index([hi, hi * 1.0001])
    assert m_end.imag == pytest.approx(152.1, rel=0.01)
    assert m_next == pytest.approx(m_end, rel=1e-4)


# ------------------------------------------------------------------ star and bad input
def test_user_spectrum_is_normalised_and_its_tails_are_noted():
    wl = np.geomspace(0.3, 5.0, 200)
    fl = blackbody_flux_lambda(wl, 5772.0) * 7.0          # any scale
    l_lam, notes = th.stellar_luminosity_density(GRID, 2.0, teff=5772.0, spectrum=(wl, fl))
    assert np.sum(th.trapezoid_weights(GRID) * l_lam) == pytest.approx(2.0, rel=1e-12)
    assert any("Rayleigh-Jeans" in n for n in notes)
    assert any("starts at 0.3 um" in n and "%" in n for n in notes)


def test_ring_inside_the_sublimation_radius_is_refused(sun):
    with pytest.raises(ModelError, match="sublimation radius"):
        th.equilibrium_temperature(np.ones((1, GRID.size)), GRID, sun, 0.005)


def test_bad_radius_and_shapes_are_refused(sun):
    q = np.ones((1, GRID.size))
    with pytest.raises(InputError, match="> 0 au"):
        th.equilibrium_temperature(q, GRID, sun, 0.0)
    with pytest.raises(InputError, match="wavelength axis last"):
        th.equilibrium_temperature(np.ones((1, 5)), GRID, sun, 1.0)
    with pytest.raises(InputError, match="luminosity"):
        th.stellar_luminosity_density(GRID, -1.0, teff=5772.0)
