"""Size distributions and the radiation-pressure blow-out size (motes.optics.sizes)."""

from __future__ import annotations

import numpy as np
import pytest

from motes.errors import InputError
from motes.optics import sizes


@pytest.mark.parametrize("q", [2.5, 3.0, 3.5, 4.2])
def test_power_law_has_unit_cross_section(q):
    dist = sizes.PowerLaw(0.7, 1500.0, q)
    a, w = dist.quadrature()
    assert w.sum() == pytest.approx(1.0, rel=1e-12)
    # independent check with scipy quadrature in ln a
    from scipy.integrate import quad

    val, _ = quad(lambda la: np.pi * np.exp(3 * la) * dist.number_density(np.exp(la)),
                  np.log(0.7), np.log(1500.0), limit=200)
    assert val == pytest.approx(1.0, rel=1e-8)


def test_power_law_cross_section_near_q_3():
    # the series branch around q = 3 must join the closed form smoothly
    v = sizes.power_law_cross_section(1.0, 1000.0, np.array([3 - 2e-6, 3.0, 3 + 2e-6]))
    assert v[1] == pytest.approx(np.log(1000.0), rel=1e-12)
    assert np.allclose(v, v[1], rtol=1e-5)


def test_size_quadrature_converges():
    # cross-section-weighted mean of a smooth but structured property: the
    # Gauss-Legendre rule in ln a converges geometrically with nodes per e-fold
    dist = sizes.PowerLaw(0.5, 1000.0, 3.5)
    f = lambda a: 1 + 0.5 * np.sin(np.log(a) * 3) / (1 + a)  # noqa: E731
    values = []
    for n in (2, 4, 8, 16):
        a, w = dist.quadrature(n)
        values.append(np.sum(w * f(a)))
    errors = np.abs(np.array(values[:-1]) - values[-1])
    assert errors[2] < 1e-10
    assert errors[0] > errors[1] > errors[2]


def test_log_normal_normalised():
    dist = sizes.LogNormal(2.0, 0.4)
    a, w = dist.quadrature()
    assert w.sum() == pytest.approx(1.0)
    assert dist.a_min == pytest.approx(2.0 * np.exp(-2.0))


def test_blowout_size_of_the_sun():
    # about 0.5 um for the Sun and rho = 2.5 g cm^-3 (common practice, no source);
    # with Q_pr = 1 the formula gives 0.46 um (Burns, Lamy & Soter 1979, eq. 19)
    a = sizes.blowout_size(1.0, 1.0, 2.5)
    assert 0.4 < a < 0.6
    assert sizes.radiation_pressure_beta(a, 1.0, 1.0, 2.5) == pytest.approx(0.5)


def test_blowout_scales_as_luminosity_over_mass_and_density():
    base = sizes.blowout_size(1.0, 1.0, 1.0)
    assert sizes.blowout_size(10.0, 2.0, 2.5, q_pr=0.8) == pytest.approx(base * 10 / 2 / 2.5 * 0.8)


def test_find_blowout_size_with_size_dependent_q_pr():
    # Q_pr = 1 for large grains, falling as a^4 below 0.1 um (a Rayleigh-like toy):
    # the root must sit where beta = 0.5 on the decreasing branch.
    def q_pr(a):
        a = np.asarray(a)
        return 1.0 / (1.0 + (0.1 / a) ** 4)

    res = sizes.find_blowout_size(q_pr, 1.0, 1.0, 2.5)
    assert res.exists
    assert sizes.radiation_pressure_beta(res.size, 1.0, 1.0, 2.5, q_pr(res.size)) == pytest.approx(0.5, rel=1e-6)
    assert res.size == pytest.approx(0.46, rel=0.05)


def test_no_blowout_size_is_reported():
    # a faint, massive star: beta < 0.5 at every size, and the result says so
    res = sizes.find_blowout_size(lambda a: np.ones_like(a), 0.01, 1.0, 2.5)
    assert not res.exists and res.size is None
    assert "no blow-out size" in res.message
    assert res.beta_max < 0.5



def test_blowout_size_when_beta_crosses_one_half_more_than_once():
    # A toy Q_pr with a resonance that lifts beta above 0.5 again in a band of larger
    # grains: beta falls through 0.5 near 0.46 um (Q_pr = 1 there) and again near 1.5 um.
    # The smallest falling crossing is the blow-out size; the message names both bands.
    def q_pr(a):
        a = np.asarray(a, dtype=float)
        return 1.0 + 4.0 * np.exp(-0.5 * (np.log(a / 1.2) / 0.12) ** 2)

    res = sizes.find_blowout_size(q_pr, 1.0, 1.0, 2.5)
    assert res.exists
    assert res.size == pytest.approx(sizes.blowout_size(1.0, 1.0, 2.5), rel=1e-3)
    beta = sizes.radiation_pressure_beta(res.a, 1.0, 1.0, 2.5, res.q_pr)
    larger_band = res.a[(beta >= 0.5) & (res.a > 2 * res.size)]
    assert larger_band.size > 0          # the toy really has a second band above 0.5
    assert "more than once" in res.message and any("more than once" in n for n in res.notes)


def test_blowout_size_is_unchanged_for_a_single_crossing():
    # one band with beta >= 0.5: no note about multiple crossings
    res = sizes.find_blowout_size(lambda a: np.ones_like(a), 1.0, 1.0, 2.5)
    assert res.size == pytest.approx(sizes.blowout_size(1.0, 1.0, 2.5), rel=1e-6)
    assert "more than once" not in res.message

@pytest.mark.parametrize("a_min,a_max", [(10.0, 10.0), (10.0, 1.0), (-1.0, 5.0)])
def test_bad_size_limits(a_min, a_max):
    with pytest.raises(InputError, match="a_min"):
        sizes.PowerLaw(a_min, a_max, 3.5)


def test_bad_star():
    with pytest.raises(InputError, match="mass_msun"):
        sizes.blowout_size(1.0, 0.0, 2.5)
