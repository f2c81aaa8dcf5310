"""Joint scattered-light + thermal likelihood (motes.dust.fit.joint): additivity, batching, bad input."""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.fit.joint import JointProblem, thermal_excess_photometry
from motes.dust.fit.priors import ParameterSpace
from motes.dust.fit.problem import FitProblem
from motes.dust.observations import DiskPhotometry
from motes.errors import InputError
from motes.photometry.bands import get_band


class _Colours:
    """Stand-in scattered-light model: ratios depend smoothly on the parameters."""

    def flux_ratio(self, fractions, porosity, a_min, q, a_max=None):
        f = np.atleast_2d(fractions)
        lam = np.array([1.25, 1.65, 2.2])
        return (1 + f[:, :1] * lam) * (1 - 0.5 * np.asarray(porosity)[:, None]) * lam ** (-np.asarray(q)[:, None] / 4)


class _Thermal:
    """Stand-in thermal model: Jy per au^2, warmer (bluer) for small a_min."""

    star_flux = np.array([0.5, 0.1, 0.01])

    def evaluate(self, fractions, porosity, a_min, a_max, q, radius_au):
        lam = np.array([24.0, 70.0, 160.0])
        t = 60.0 * (np.asarray(a_min)[:, None] / 2.0) ** -0.2 * (1 + np.atleast_2d(fractions)[:, :1])
        return 1e-3 * (lam / 70.0) ** -2 * np.exp(-144.0 * 10 / (lam * t))


def _problem(calibration=0.05):
    bands_s = tuple(get_band(n) for n in ("2mass_j", "2mass_h", "2mass_ks"))
    space = ParameterSpace(materials=("a", "b"))
    truth = np.array([[0.3, 0.7, 0.2, 2.0, 3.5]])       # fractions of a and b, porosity, a_min, q
    p = space.unpack(truth)
    sc = _Colours().flux_ratio(p["fractions"], p["porosity"], p["a_min"], p["q"])[0] * 1e-4
    obs_s = DiskPhotometry(bands_s, sc, 0.03 * sc, np.zeros(3, bool), np.full(3, np.nan))
    th = _Thermal()
    fl = th.evaluate(p["fractions"], p["porosity"], p["a_min"], 1000.0, p["q"], 60.0)[0] * 5.0
    bands_t = tuple(get_band(n) for n in ("wise_w4", "herschel-pacs_70", "herschel-pacs_160"))
    obs_t = thermal_excess_photometry(bands_t, fl, 0.05 * fl, th.star_flux)
    return JointProblem(FitProblem(_Colours(), obs_s, space), th, obs_t, 60.0, calibration=calibration), truth


def test_joint_is_the_sum_of_the_parts_and_batches():
    prob, truth = _problem()
    rng = np.random.default_rng(1)
    fa = rng.uniform(0, 1, 5)
    theta = np.vstack([truth, np.column_stack([fa, 1 - fa, rng.uniform(0, 0.8, 5),
                                               rng.uniform(0.5, 10, 5), rng.uniform(3, 4.5, 5)])])
    joint = prob.batch(theta)
    assert np.allclose(joint, prob.part("scattered")(theta) + prob.part("thermal")(theta))
    assert np.allclose(joint, [prob(t) for t in theta])
    # the thermal data alone prefer the a_min they were made with
    a_mins = np.column_stack([np.full(5, 0.3), np.full(5, 0.7), np.full(5, 0.2), [0.6, 1.0, 2.0, 4.0, 8.0],
                              np.full(5, 3.5)])
    assert int(np.argmax(prob.thermal_ln_likelihood(a_mins))) == 2


class _ThermalWithRange(_Thermal):
    """Stand-in that, like the fast path, refuses a whole batch when one point is outside its range."""

    def evaluate(self, fractions, porosity, a_min, a_max, q, radius_au):
        from motes.errors import ModelError

        if (np.asarray(a_min) > 9.0).any():
            raise ModelError("grains would be colder than the temperature table")
        return super().evaluate(fractions, porosity, a_min, a_max, q, radius_au)


def test_one_point_outside_the_model_range_does_not_zero_its_batch():
    prob, truth = _problem()
    prob.thermal.colour_model = _ThermalWithRange()
    theta = np.vstack([truth, truth, truth])
    theta[1, 3] = 9.5                                   # this point alone is outside the model's range
    lnl = prob.thermal_ln_likelihood(theta)
    alone = prob.thermal_ln_likelihood(truth)[0]
    assert lnl[0] == alone and lnl[2] == alone and alone > -1e299
    assert lnl[1] <= -1e299


def test_calibration_term_widens_the_thermal_likelihood():
    tight, truth = _problem(0.0)
    loose, _ = _problem(0.2)
    off = truth.copy()
    off[0, 3] = 6.0
    d_tight = tight.thermal_ln_likelihood(truth) - tight.thermal_ln_likelihood(off)
    d_loose = loose.thermal_ln_likelihood(truth) - loose.thermal_ln_likelihood(off)
    assert d_tight[0] > d_loose[0] > 0


def test_bad_input():
    prob, _ = _problem()
    for r in (0.0, -1.0):
        with pytest.raises(InputError, match="ring radius must be > 0"):
            JointProblem(prob.scattered, prob.thermal_model, prob.thermal_obs, r)
    with pytest.raises(InputError, match="one flux, error and star flux per band"):
        thermal_excess_photometry(prob.thermal_obs.bands, [1.0], [0.1], [1.0])
