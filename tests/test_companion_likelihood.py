"""Unit tests of the offset-marginalised likelihood (motes.companion.likelihood).

Independent references are brute-force integrals with scipy.integrate.quad of
the likelihood written out directly from its definition in the module notes.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.stats import norm

from motes.companion.likelihood import FlatOffset, GaussianOffset, offset_marginal


def _gauss_ln_like(delta, obs, model, var):
    return float(np.sum(-0.5 * (obs - model - delta) ** 2 / var - 0.5 * np.log(2 * np.pi * var)))


@pytest.fixture
def toy(rng):
    model = rng.normal(12.0, 1.0, (6, 4))
    obs = model[3] + 0.4 + rng.normal(0.0, 0.05, 4)
    return model, obs


@pytest.mark.parametrize("prior", [GaussianOffset(0.3), GaussianOffset(0.0), FlatOffset(-20.0, 20.0)],
                         ids=["gaussian", "fixed", "flat"])
def test_analytic_equals_numeric_marginalisation(toy, prior):
    model, obs = toy
    analytic = offset_marginal(model, obs, 0.05, True, 0.1, prior)
    numeric = offset_marginal(model, obs, 0.05, True, 0.1, prior, force_numeric=True)
    np.testing.assert_allclose(numeric.ln_evidence, analytic.ln_evidence, rtol=0, atol=1e-9)
    np.testing.assert_allclose(numeric.chi2, analytic.chi2, rtol=0, atol=1e-3)  # grid step 0.125 sigma
    np.testing.assert_allclose(numeric.offset, analytic.offset, rtol=0, atol=0.01)


def test_gaussian_prior_evidence_matches_quadrature(toy):
    model, obs = toy
    var = 0.05**2 + 0.1**2
    sigma_p = 0.3
    got = offset_marginal(model, obs, 0.05, True, 0.1, GaussianOffset(sigma_p)).ln_evidence
    for t in range(model.shape[0]):
        f = lambda d: math.exp(_gauss_ln_like(d, obs, model[t], var) + norm.logpdf(d, 0, sigma_p) + 30)
        ref = math.log(quad(f, -4, 4, points=[0.0], limit=400, epsabs=0)[0]) - 30
        assert got[t] == pytest.approx(ref, abs=1e-6)


def test_flat_prior_evidence_matches_quadrature_including_truncation(toy):
    model, obs = toy
    var = 0.05**2 + 0.1**2
    # a range that cuts through template 3's likelihood peak (offset ~0.4): truncation matters
    lo, hi = -20.0, 0.42
    got = offset_marginal(model, obs, 0.05, True, 0.1, FlatOffset(lo, hi)).ln_evidence
    t = 3
    f = lambda d: math.exp(_gauss_ln_like(d, obs, model[t], var) + 10)
    ref = math.log(quad(f, lo, hi, points=[0.4], limit=400)[0] / (hi - lo)) - 10
    assert got[t] == pytest.approx(ref, abs=1e-6)


def test_normalisation_terms_penalise_larger_scatter():
    # Two identical templates fitting perfectly; the one with larger template
    # scatter must lose by exactly the sum of 1/2 ln(sigma^2) differences
    # (flat prior wide enough not to truncate; the offset term also differs).
    model = np.array([[10.0, 11.0, 12.0], [10.0, 11.0, 12.0]])
    obs = np.array([13.0, 14.0, 15.0])
    scatter = np.array([[0.1, 0.1, 0.1], [0.3, 0.3, 0.3]])
    res = offset_marginal(model, obs, 0.05, True, scatter, FlatOffset(-20.0, 20.0))
    v1, v2 = 0.05**2 + 0.1**2, 0.05**2 + 0.3**2
    # ln Z = -1/2 sum ln(2 pi v) + 1/2 ln(2 pi / A) - ln W with A = 3/v
    expect = (-1.5 * math.log(v1) + 0.5 * math.log(v1 / 3)) - (-1.5 * math.log(v2) + 0.5 * math.log(v2 / 3))
    assert res.ln_evidence[0] - res.ln_evidence[1] == pytest.approx(expect, abs=1e-12)
    assert res.chi2 == pytest.approx([0.0, 0.0], abs=1e-12)


def _limit_case():
    # band 0, 1 detected; band 2 a 5-sigma limit at 1 mJy (noise 0.2 mJy), zero point 1000 Jy
    model = np.array([[10.0, 10.0, 20.0],    # predicts band 2 far fainter than the limit
                      [10.0, 10.0, 10.0]])   # predicts band 2 far brighter than the limit
    obs = np.array([12.0, 12.0, np.nan])
    sigma = np.array([0.05, 0.05, np.nan])
    det = np.array([True, True, False])
    kw = dict(limit_flux=np.array([np.nan, np.nan, 1e-3]), limit_noise=np.array([np.nan, np.nan, 2e-4]),
              zero_point=np.array([1000.0, 1000.0, 1000.0]))
    return model, obs, sigma, det, kw


def test_upper_limit_matches_quadrature_of_normal_cdf():
    model, obs, sigma, det, kw = _limit_case()
    prior = GaussianOffset(0.3)
    got = offset_marginal(model, obs, sigma, det, 0.1, prior, **kw)
    var = 0.05**2 + 0.1**2
    for t in range(2):
        def f(d):
            flux = 1000.0 * 10 ** (-0.4 * (model[t, 2] + d))
            spread = math.hypot(2e-4, flux * 0.1 * math.log(10) / 2.5)
            return math.exp(_gauss_ln_like(d, obs[:2], model[t, :2], var) + norm.logpdf(d, 0, 0.3)
                            + norm.logcdf((1e-3 - flux) / spread) + 5)
        ref = quad(f, -3, 6, points=[0.0, 1.8, 1.9, 2.0, 2.1], limit=1000)[0]
        assert got.ln_evidence[t] == pytest.approx(math.log(ref) - 5, abs=1e-5)  # quad accuracy


def test_limit_far_above_prediction_costs_nothing_and_below_costs_a_lot():
    model, obs, sigma, det, kw = _limit_case()
    with_limit = offset_marginal(model, obs, sigma, det, 0.1, GaussianOffset(0.3), **kw)
    without = offset_marginal(model[:, :2], obs[:2], sigma[:2], det[:2], 0.1, GaussianOffset(0.3))
    # template 0 predicts ~21.9 mag = 1.8 uJy, far below the 1 mJy limit (15 mag): P = Phi(~5) = 1 - 3e-7
    assert with_limit.ln_evidence[0] == pytest.approx(without.ln_evidence[0], abs=1e-6)
    # template 1 predicts 12 mag = 15.8 mJy against a 1 mJy limit: excluded
    # (the offset can only escape by moving ~1 mag away from the detections: ln Z drops by > 30)
    assert with_limit.ln_evidence[1] < without.ln_evidence[1] - 30


def test_limit_is_not_used_as_a_detection():
    # A template predicting exactly the limiting magnitude would be the best
    # fit if the limit were a detection; as a limit it is at best 1/2 probable
    # (limit at its own flux: Phi(0)), and a fainter prediction is better.
    zp = 1000.0
    lim_flux = 1e-3
    lim_mag = -2.5 * math.log10(lim_flux / zp)
    model = np.array([[12.0, lim_mag], [12.0, lim_mag + 1.0]])  # offset fixed at 0, band 0 fits exactly
    obs = np.array([12.0, np.nan])
    res = offset_marginal(model, obs, np.array([0.01, np.nan]), np.array([True, False]), 0.0,
                          GaussianOffset(0.0), limit_flux=np.array([np.nan, lim_flux]),
                          limit_noise=np.array([np.nan, lim_flux / 5]), zero_point=np.array([zp, zp]))
    # template 0 sits exactly at the limit: ln P = ln 0.5; template 1 is 1 mag fainter: ln P ~ 0
    det_part = -0.5 * math.log(2 * math.pi * 0.01**2)
    assert res.ln_evidence[0] == pytest.approx(det_part + math.log(0.5), abs=1e-9)
    assert res.ln_evidence[1] > res.ln_evidence[0]


def test_extinction_grid_matches_brute_force():
    # One template, three bands, extinction coefficients of a steep law;
    # marginal over delta (flat) and A_V (uniform on [0, 2], 201 nodes) vs dblquad.
    from scipy.integrate import dblquad

    model = np.array([[10.0, 9.5, 9.2]])
    coeff = np.array([0.28, 0.17, 0.11])
    obs = model[0] + 1.0 + 0.8 * coeff
    var = 0.05**2 + 0.1**2
    nodes = np.linspace(0, 2, 201)
    weights = np.full(201, 1.0)
    weights[[0, -1]] = 0.5
    weights /= weights.sum()
    got = offset_marginal(model, obs, 0.05, True, 0.1, FlatOffset(-5.0, 15.0), extinction_coeff=coeff,
                          av_nodes=nodes, av_weights=weights)
    f = lambda d, av: math.exp(_gauss_ln_like(d, obs, model[0] + av * coeff, var) + 5) / 20.0 / 2.0
    ref = dblquad(f, 0, 2, lambda av: -1.0, lambda av: 3.0, epsabs=1e-12)[0]
    assert got.ln_evidence[0] == pytest.approx(math.log(ref) - 5, abs=1e-3)
    assert 0.0 < got.av_mean[0] < 2.0


def test_inputs_are_validated():
    with pytest.raises(ValueError):
        offset_marginal(np.zeros((2, 2)), [1.0, 1.0], 0.1, [False, False], 0.1, GaussianOffset(0.1))
    with pytest.raises(ValueError):
        offset_marginal(np.array([[np.nan, 1.0]]), [1.0, 1.0], 0.1, True, 0.1, GaussianOffset(0.1))
    with pytest.raises(ValueError):
        GaussianOffset(-1.0)
