"""Does the flux-scale prior hold the scale the data need? Checked before sampling, and after.

The flux scale s multiplies the model's disk/star ratios (per unit
cross-section) to give the data. Its prior (``[scale]``, log-uniform between
``lower`` and ``upper``) is the same in every model. When the data need a
scale outside it (data normalised to one band, say, with the default bounds)
the sampler can only push the other parameters to wherever the model is
brightest or faintest enough: the fit finishes with a meaningless answer.

Rule before sampling (:func:`check_scale_prior`): the best-fit scale (the
analytic minimum of chi-square over s, upper limits included) is computed at
``N_DRAWS`` points spread evenly over the model's prior (an unscrambled Halton
sequence, so the check is deterministic). If the median of those best scales
lies outside ``[lower, upper]`` — the data need, at a typical prior point, a
scale the prior does not allow — the fit is refused, naming the model, the
median and range of the best scales and the bounds. A median is used, not
the extremes, so that a few corners of the prior where the model is very
bright or faint neither trigger nor hide the refusal.

Rule after sampling (:func:`scale_bound_notes`): a note is given when the
likelihood of the scale at the best-fit parameters is not negligible at a
bound, i.e. when chi-square at the bound exceeds its minimum by less than
``NOTE_DELTA_CHI2`` (9, three standard deviations of a Gaussian): only then
does the prior's edge cut into the scale's posterior.
"""

from __future__ import annotations

import numpy as np
from scipy.stats import qmc

from ...errors import FitError
from ..likelihood import ln_likelihood

__all__ = ["N_DRAWS", "NOTE_DELTA_CHI2", "check_scale_prior", "scale_bound_notes"]

#: Prior points at which the best-fit scale is computed before sampling.
N_DRAWS = 64
#: Chi-square above its minimum at a bound below which the bound is said to cut the scale's likelihood.
NOTE_DELTA_CHI2 = 9.0


def _prior_points(space) -> np.ndarray:
    u = qmc.Halton(d=space.ndim, scramble=False).random(N_DRAWS + 1)[1:]    # the first point is the corner 0
    return np.atleast_2d(space.transform(u))


def check_scale_prior(problem, model_name: str, source: str, table: str = "[scale]",
                      keys: tuple = ("lower", "upper")) -> None:
    """Refuse a model whose data need a flux scale outside the scale prior (see the module docstring).

    Parameters
    ----------
    problem : motes.dust.fit.problem.FitProblem
    model_name : str
        Named in the error.
    source : str
        The fit description, named in the error.
    table, keys : str, (str, str)
        Where the prior's bounds are set (a joint fit's thermal scale:
        ``"[thermal]"``, ``("cross_section_lower", "cross_section_upper")``).

    Raises
    ------
    motes.errors.FitError
        When the median best-fit scale over the prior points lies outside the bounds.
    """
    prior = problem.space.scale
    theta = _prior_points(problem.space)
    try:
        scale, _, _ = problem.best_scale_fit(theta)
    except (ArithmeticError, ValueError):
        return                                 # the model itself is checked elsewhere
    scale = np.asarray(scale, dtype=float)
    scale = scale[np.isfinite(scale) & (scale > 0)]
    if scale.size < N_DRAWS // 2:
        return
    median = float(np.median(scale))
    if prior.lower <= median <= prior.upper:
        return
    side = "above the upper" if median > prior.upper else "below the lower"
    decades = np.log10(median)
    raise FitError(
        f"{source}: model '{model_name}': the data need a flux scale of about {median:.3g} (median best-fit "
        f"scale at {scale.size} points spread over the prior; range {scale.min():.3g} to {scale.max():.3g}), "
        f"{side} bound of the {table} prior [{prior.lower:g}, {prior.upper:g}]; the fit would end pinned at "
        f"that bound. Set {table} {keys[0]} and {keys[1]} to bracket it (e.g. {keys[0]} = "
        f"1e{int(np.floor(decades)) - 4}, {keys[1]} = 1e{int(np.ceil(decades)) + 4}), or check the data's "
        "normalisation")


def scale_bound_notes(problem, model_name: str, theta_best, scale_best: float, table: str = "[scale]") -> list[str]:
    """A note when a scale-prior bound cuts into the scale's likelihood at the best fit.

    Parameters
    ----------
    problem : motes.dust.fit.problem.FitProblem
    model_name : str
    theta_best : ndarray[ndim]
        Best-fit parameters.
    scale_best : float
        Best-fit scale at ``theta_best``.

    Returns
    -------
    list of str
        Empty, or one note naming the bound and chi-square's rise there.
    """
    prior = problem.space.scale
    if not np.isfinite(scale_best):
        return []
    theta = np.atleast_2d(theta_best)
    flux = problem.model_ratios(theta)[0]
    systematic = problem.space.unpack(theta)["systematic"]
    scales = np.array([scale_best, prior.lower, prior.upper])
    ln_l = ln_likelihood(scales[:, None] * flux[None, :], problem.obs, systematic)
    rise = 2.0 * (ln_l[0] - ln_l[1:])
    out = []
    for bound, value, d in zip(("lower", "upper"), (prior.lower, prior.upper), rise):
        if not d >= NOTE_DELTA_CHI2:       # NaN counts as a cut
            out.append(f"model {model_name}: the best flux scale {scale_best:.3g} is close to the scale "
                       f"prior's {bound} bound {value:g} (chi-square only {d:.1f} above its minimum there, "
                       f"less than {NOTE_DELTA_CHI2:g}): the bound cuts into the scale's likelihood; widen {table}")
    return out
