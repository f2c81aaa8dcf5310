"""The flux scale: its log-uniform prior integrated out, checked against scipy quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from motes.dust.observations import DiskPhotometry
from motes.dust.likelihood import ln_likelihood
from motes.dust.likelihood import ScalePrior, draw_scale, ln_marginal_likelihood
from motes.errors import FitError
from motes.photometry.bands import top_hat_band

BANDS = tuple(top_hat_band(f"b{i}", 0.7 + 0.45 * i, 0.1) for i in range(6))


def _obs(value, error, limits=None):
    limits = np.zeros(len(value), bool) if limits is None else np.asarray(limits, bool)
    return DiskPhotometry(BANDS, value, error, limits, np.where(limits, 3.0, np.nan))


def _quad_reference(row, obs, prior, f, ln_ref, s_hint):
    """integral L(s) p(s) ds by adaptive quadrature (scipy) in t = ln s, relative to exp(ln_ref)."""
    def integrand(t):
        return math.exp(float(ln_likelihood(math.exp(t) * row[None, :], obs, f)[0]) - ln_ref) / prior.ln_width

    lo, hi = math.log(prior.lower), math.log(prior.upper)
    marks = [math.log(s_hint) + d for d in (-0.3, -0.1, -0.03, -0.01, 0.0, 0.01, 0.03, 0.1, 0.3)]
    marks += [hi - d for d in (1e-4, 1e-3, 1e-2, 0.1)]
    edges = [lo] + sorted({m for m in marks if lo < m < hi}) + [hi]
    return sum(quad(integrand, a, b, limit=500, epsabs=0, epsrel=1e-12)[0] for a, b in zip(edges[:-1], edges[1:]))


@pytest.fixture
def case(rng):
    model = np.abs(rng.normal(1.0, 0.3, (4, 6))) * 0.05
    value = 2e-4 * model[0] * (1 + 0.03 * rng.normal(size=6))
    return model, value


@pytest.mark.parametrize("label, prior, noise, f, limits", [
    ("high S/N, broad prior", ScalePrior(1e-9, 1.0), 0.03, 0.0, None),
    ("systematic term", ScalePrior(1e-9, 1.0), 0.03, 0.07, None),
    ("low S/N", ScalePrior(1e-9, 1.0), 3.0, 0.0, None),
    ("prior bound near the mode", ScalePrior(1e-9, 2.1e-4), 0.03, 0.0, None),
    ("upper limits", ScalePrior(1e-9, 1.0), 0.03, 0.0, [0, 0, 0, 0, 1, 1]),
    ("mode beyond the upper bound", ScalePrior(1e-9, 1e-4), 0.03, 0.0, None),
])
def test_marginal_matches_adaptive_quadrature(case, label, prior, noise, f, limits):
    model, value = case
    lim = np.zeros(6, bool) if limits is None else np.asarray(limits, bool)
    v = np.where(lim, 0.9 * value, value)
    err = np.where(lim, 0.9 * value / 3, noise * value)
    obs = _obs(v, err, lim)
    ln_l, s_best = ln_marginal_likelihood(model, obs, prior, f)
    for i in range(model.shape[0]):
        ratio = _quad_reference(model[i], obs, prior, f, ln_l[i], max(s_best[i], prior.lower * 2))
        # our quadrature vs scipy's adaptive one: agreement to 1e-7 relative (scipy's own epsrel is 1e-11)
        assert ratio == pytest.approx(1.0, abs=1e-7), label


def test_prior_width_enters_as_its_log(case):
    """Widening the prior from 4 to 10 decades lowers ln L by ln(10/4) when the mode is well inside."""
    model, value = case
    obs = _obs(value, 0.03 * value)
    a, _ = ln_marginal_likelihood(model, obs, ScalePrior(1e-6, 1e-2))
    b, _ = ln_marginal_likelihood(model, obs, ScalePrior(1e-10, 1.0))
    assert np.allclose(a - b, math.log(10 / 4), atol=1e-10)


def test_draws_follow_the_conditional_posterior(case, rng):
    model, value = case
    obs = _obs(value, 0.3 * value)            # wide enough for a visible 1/s skew
    row = np.repeat(model[:1], 4000, axis=0)
    draws = draw_scale(row, obs, ScalePrior(), rng=rng)
    # reference mean and sd of p(s) ∝ L(s)/s by quadrature
    prior = ScalePrior()
    ln_ref = float(ln_marginal_likelihood(model[:1], obs, prior)[0][0])

    def moment(k):
        g = lambda s: s**k * math.exp(float(ln_likelihood(s * model[0][None, :], obs)[0]) - ln_ref) / (s * prior.ln_width)
        return quad(g, 1e-7, 1e-3, limit=500, epsrel=1e-10)[0]

    mean = moment(1)
    sd = math.sqrt(moment(2) - mean**2)
    # 4000 draws: standard error of the mean is sd/63; allow 4 standard errors
    assert abs(draws.mean() - mean) < 4 * sd / math.sqrt(draws.size)
    assert draws.std() == pytest.approx(sd, rel=0.06)


def test_bad_scale_prior():
    with pytest.raises(FitError, match="lower < upper"):
        ScalePrior(1.0, 1.0)
    with pytest.raises(FitError):
        ScalePrior(0.0, 1.0)


def test_draws_of_regular_rows_together_equal_the_row_by_row_draws(case, monkeypatch):
    """The rows drawn all at once (panels inside the prior) give bit for bit the row-by-row numbers."""
    import motes.dust.likelihood as lik

    model, value = case
    rng = np.random.default_rng(11)
    rows = model[rng.integers(0, model.shape[0], 300)] * rng.uniform(0.5, 2.0, (300, 1))
    kinds = set()
    original = lik._regular_rows

    def recording(s, w, p):
        mask = original(s, w, p)
        kinds.update(mask.tolist())
        return mask

    for error, limits, prior in ((0.03, None, ScalePrior()), (0.3, None, ScalePrior()),
                                 (0.03, None, ScalePrior(1e-6, 2e-4)),          # some modes near a bound
                                 (0.1, [False, True, False, False, False, False], ScalePrior())):
        obs = _obs(value, error * value, limits)
        f = rng.uniform(0.0, 0.05, rows.shape[0])
        with monkeypatch.context() as mp:
            mp.setattr(lik, "_regular_rows", recording)
            together = draw_scale(rows, obs, prior, f, rng=np.random.default_rng(3))
        with monkeypatch.context() as mp:
            mp.setattr(lik, "_regular_rows", lambda s, w, p: np.zeros(s.shape, dtype=bool))
            one_by_one = draw_scale(rows, obs, prior, f, rng=np.random.default_rng(3))
        assert np.array_equal(together, one_by_one)
    assert kinds == {True, False}          # both paths were taken
