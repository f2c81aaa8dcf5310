"""The disk likelihood: one noise model for every fit and grid in motes.

Where each piece lives: detections and the systematic term
(:func:`effective_errors`, :func:`chi_square`, :func:`ln_likelihood`), upper
limits (the normal-CDF terms of :func:`chi_square` and their derivatives in
:func:`_mills_ratio`), the best flux scale (:func:`chi_square_with_best_scale`)
and the flux scale's prior and marginalisation (:class:`ScalePrior`,
:func:`ln_marginal_likelihood`, :func:`draw_scale`). The data themselves are
:class:`motes.dust.observations.DiskPhotometry`. This mirrors
:mod:`motes.companion.likelihood` on the companion side.

Noise model (used by every fit and grid in motes)
--------------------------------------------------
Detections are Gaussian in the ratio with sigma_eff^2 = sigma^2 + (f |v|)^2,
where f is an optional fractional systematic term (relative to the *measured*
value v, so that the best scale stays analytic). An N-sigma upper limit L has
noise sigma_L = L / N and enters through the normal CDF: the probability that
the measurement fell below L given the scaled model s m is Phi((L - s m) /
sigma_L) (e.g. Isobe, Feigelson & Nelson 1986, ApJ 306, 490, for censored
data; common practice for photometric limits, no single source). The
chi-square used everywhere is -2 ln L up to the model-independent constant of
the Gaussian normalisation:

    chi2 = sum_det ((s m - v) / sigma_eff)^2  -  2 sum_lim ln Phi((L - s m) / sigma_L).

Flux scale
----------
A dust model predicts disk/star ratios m_b up to one free factor s (dust
cross-section over distance squared, geometry): the data are fitted by s m_b.
For Bayesian evidences to compare between models, s needs a *proper* prior that
is the same in every model. motes uses a log-uniform prior between fixed bounds,

    p(s) = 1 / (s ln(s_hi / s_lo)),   s_lo <= s <= s_hi,

and integrates s out of the likelihood per parameter point,

    L(theta) = integral L(theta, s) p(s) ds.

Why marginalise rather than sample s: the integral is one-dimensional and
cheap to do to 1e-8 relative precision, it removes a dimension that is strongly
correlated with composition (changing the mixture changes the overall
brightness), and the nested sampler then spends its live points on the
parameters of interest. Sampling s instead (``treatment = "sample"``) gives the
same evidence within its error; a test checks that.

Integration
    Detections only, Gaussian errors: L(theta, s) is a Gaussian in s with mean
    s_hat = sum(m v / sig^2) / sum(m^2 / sig^2) and width 1/sqrt(sum m^2/sig^2).
    When that Gaussian lies 12 widths inside the prior bounds and away from 0,
    the integral of Gaussian x 1/s is done by 40-point Gauss-Hermite quadrature
    (exact to ~1e-15 there: 1/s is analytic over the window).
    Otherwise (upper limits, low signal-to-noise, or a mode near a bound) the
    integrand is unimodal in s; it is integrated by composite Gauss-Legendre
    quadrature on panels placed at s* + {0, +-1.5, +-3, +-5, +-8, +-12} sigma*
    around the mode s* (found exactly, see `chi_square_with_best_scale`),
    switching to ln s as variable, in panels of one e-fold, wherever a panel
    spans more than a factor of 2 in s.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import log_ndtr, logsumexp

from ..errors import FitError, InputError
from .observations import DiskPhotometry

__all__ = [
    "effective_errors",
    "chi_square",
    "ln_likelihood",
    "chi_square_with_best_scale",
    "ScalePrior",
    "ln_marginal_likelihood",
    "draw_scale",
]

_GH_X, _GH_W = np.polynomial.hermite.hermgauss(40)
_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)
_EDGES = np.array([-12.0, -8.0, -5.0, -3.0, -1.5, 0.0, 1.5, 3.0, 5.0, 8.0, 12.0])
_HALF_LN_2PI = 0.5 * math.log(2 * math.pi)


def _mills_ratio(z):
    """phi(z) / Phi(z), computed stably in logs (the upper-limit terms' derivative)."""
    return np.exp(-0.5 * z * z - log_ndtr(z)) / math.sqrt(2 * math.pi)

def effective_errors(obs: DiskPhotometry, systematic=0.0) -> np.ndarray:
    """1-sigma errors with an optional fractional systematic term.

    Parameters
    ----------
    obs : DiskPhotometry
    systematic : float or ndarray[N]
        Fractional systematic error f (>= 0), one per model row.

    Returns
    -------
    ndarray[N, B] (or [B] for scalar ``systematic``)
        sqrt(sigma^2 + (f |v|)^2) for detections; the limit noise L/N,
        unchanged, for upper limits.
    """
    f = np.asarray(systematic, dtype=float)
    extra = (f[..., None] * np.abs(obs.value)) ** 2
    return np.where(obs.is_limit, obs.error, np.sqrt(obs.error**2 + np.where(obs.is_limit, 0.0, extra)))


def _as_rows(model, obs):
    model = np.asarray(model, dtype=float)
    scalar = model.ndim == 1
    model2 = np.atleast_2d(model)
    if model2.ndim != 2 or model2.shape[1] != len(obs.bands):
        raise InputError(
            f"model must have shape [N, {len(obs.bands)}] (one column per band), got {model.shape}")
    return model2, scalar


def chi_square(model_scaled, obs: DiskPhotometry, systematic=0.0) -> np.ndarray:
    """Chi-square of already-scaled model ratios (see the module notes).

    Parameters
    ----------
    model_scaled : ndarray[N, B]
        Model disk/star ratios, scale included.
    obs : DiskPhotometry
    systematic : float or ndarray[N]
        Fractional systematic error term.

    Returns
    -------
    ndarray[N]
        sum_det ((m - v)/sigma_eff)^2 - 2 sum_lim ln Phi((L - m)/sigma_L).
    """
    m, scalar = _as_rows(model_scaled, obs)
    sig = effective_errors(obs, np.broadcast_to(np.asarray(systematic, float), (m.shape[0],)))
    z = (m - obs.value) / sig
    det = np.where(obs.is_limit, 0.0, z * z)
    if np.any(obs.is_limit):
        out = det.sum(axis=-1) + np.where(obs.is_limit, -2.0 * log_ndtr(-z), 0.0).sum(axis=-1)
    else:
        out = det.sum(axis=-1) + 0.0        # (as before: adds the limits' zeros, without the log_ndtr of every cell)
    return out[0] if scalar else out


def ln_likelihood(model_scaled, obs: DiskPhotometry, systematic=0.0) -> np.ndarray:
    """Normalised log-likelihood of already-scaled model ratios.

    Parameters
    ----------
    model_scaled : ndarray[N, B]
    obs : DiskPhotometry
    systematic : float or ndarray[N]

    Returns
    -------
    ndarray[N]
        -chi2/2 - sum_det ln(sqrt(2 pi) sigma_eff). The normalisation matters
        when ``systematic`` is a free parameter.
    """
    m, scalar = _as_rows(model_scaled, obs)
    f = np.broadcast_to(np.asarray(systematic, float), (m.shape[0],))
    sig = effective_errors(obs, f)
    norm = np.where(obs.is_limit, 0.0, np.log(sig) + 0.5 * math.log(2 * math.pi)).sum(axis=-1)
    out = -0.5 * chi_square(m, obs, f) - norm
    return out[0] if scalar else out


def chi_square_with_best_scale(model, obs: DiskPhotometry, systematic=0.0):
    """Best flux scale and chi-square of unscaled model ratios, exactly.

    Parameters
    ----------
    model : ndarray[N, B] (or [B])
        Unscaled model ratios (e.g. ``DiskColourModel.flux_ratio`` output).
    obs : DiskPhotometry
    systematic : float or ndarray[N]
        Fractional systematic error f relative to the measured values.

    Returns
    -------
    scale : ndarray[N] (float for 1-D input)
        The scale s >= 0 minimising chi2(s).
    chi2 : ndarray[N] (float for 1-D input)
        chi2 at that scale (module notes: detections plus limit terms).
    dof : int
        Number of detections minus 1 (the scale). Subtract the number of
        other fitted parameters yourself.

    Notes
    -----
    Detections only: s = sum(m v / sigma^2) / sum(m^2 / sigma^2) (weighted
    least squares; e.g. Press et al. 2007, Numerical Recipes, sec. 15.2), and
    chi2 = sum(v^2/sigma^2) - s * sum(m v / sigma^2). A negative optimum is
    clipped to s = 0 (a flux scale is non-negative).

    With upper limits chi2(s) gains -2 sum ln Phi((L - s m)/sigma_L), which is
    convex in s (ln Phi is log-concave), so the joint minimum is unique. It lies
    in [0, s_det] (the limit terms only increase with s when m > 0) and is found
    by a safeguarded Newton iteration kept inside that bracket, to a relative
    precision of 1e-12 in s. A limit on a negative model value (polarised
    intensity can be negative) pulls the scale up instead; the bracket is then
    extended upwards by doublings until chi2 rises.

    Total and polarised rows (:attr:`DiskPhotometry.intensity`) are one vector
    here: they share the one scale s, and polarised model values may be negative. Limits therefore pull the scale down exactly as
    much as the likelihood says, and the same chi2 definition is used in every
    fit and grid in motes.
    """
    m, scalar = _as_rows(model, obs)
    n = m.shape[0]
    f = np.broadcast_to(np.asarray(systematic, float), (n,))
    sig = effective_errors(obs, f)
    det = ~obs.is_limit
    w = np.where(det, 1.0 / sig**2, 0.0)
    a = np.sum(w * m * m, axis=-1)
    b = np.sum(w * m * obs.value, axis=-1)
    c = np.sum(w * obs.value**2, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(a > 0, b / a, 0.0)
    s = np.maximum(s, 0.0)
    chi2 = np.maximum(c - 2 * s * b + s * s * a, 0.0)
    if np.any(obs.is_limit):
        s = _refine_scale_with_limits(m, obs, sig, a, b, s)
        chi2 = chi_square(s[:, None] * m, obs, f)
    dof = obs.n_detections - 1
    if scalar:
        return float(s[0]), float(chi2[0]), dof
    return s, chi2, dof


def _refine_scale_with_limits(m, obs, sig, a, b, s_det, iterations=100):
    """Minimise the convex chi2(s) on [0, s_det] by bracketed Newton steps."""
    lim = obs.is_limit
    mu = np.where(lim, m, 0.0)
    lo = np.zeros_like(s_det)
    hi = s_det.copy()
    s = s_det.copy()

    def derivatives(s):
        z = (obs.value - s[:, None] * mu) / sig          # (L - s m)/sigma_L on limit columns
        ratio = _mills_ratio(z)   # phi/Phi
        k = np.where(lim, mu / sig, 0.0)
        d1 = 2 * (a * s - b) + 2 * np.sum(k * ratio, axis=-1)
        d2 = 2 * a + 2 * np.sum(k * k * ratio * (z + ratio), axis=-1)
        return d1, d2

    if np.any(lim & (mu < 0)):
        # a negative model value (polarised intensity) in an upper limit pulls the scale up, so
        # the minimum may lie above s_det: move the bracket up by doublings until chi2 rises
        grow = np.any(lim & (mu < 0), axis=-1)
        with np.errstate(divide="ignore", invalid="ignore"):
            reach = np.where(lim & (mu != 0), np.abs(obs.value / np.where(mu != 0, mu, 1.0)), 0.0).max(axis=-1)
        top = np.where(grow, np.maximum(np.maximum(s_det, reach), 1e-300), s_det)
        for _ in range(2100):
            d1, _ = derivatives(top)
            up = grow & (d1 <= 0)
            if not np.any(up):
                break
            lo = np.where(up, top, lo)
            top = np.where(up, 2.0 * top, top)
        hi = np.where(grow, top, hi)
        s = np.where(grow, top, s)
    active = np.ones(s.shape, dtype=bool)
    d1, _ = derivatives(s)
    active &= d1 > 0            # derivative <= 0 at s_det: minimum is s_det itself
    for _ in range(iterations):
        if not np.any(active):
            break
        d1, d2 = derivatives(s)
        hi = np.where(active & (d1 > 0), s, hi)
        lo = np.where(active & (d1 <= 0), s, lo)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(d2 > 0, s - d1 / d2, 0.5 * (lo + hi))
        outside = ~((step > lo) & (step < hi))
        new = np.where(outside, 0.5 * (lo + hi), step)
        new = np.where(active, new, s)
        done = np.abs(new - s) <= 1e-12 * np.maximum(np.abs(new), 1e-300)
        s = new
        active &= ~done & (hi - lo > 1e-15 * np.maximum(hi, 1e-300))
    # the constrained minimum at s = 0 when the derivative there is already >= 0
    d1_zero, _ = derivatives(np.zeros_like(s))
    s = np.where(d1_zero >= 0, 0.0, s)
    return s


@dataclass(frozen=True)
class ScalePrior:
    """Log-uniform prior on the flux scale s between fixed bounds.

    Parameters
    ----------
    lower, upper : float
        Bounds on s (same unit as data / model), 0 < lower < upper.
    """

    lower: float = 1e-12
    upper: float = 1.0

    def __post_init__(self):
        lo, hi = float(self.lower), float(self.upper)
        if not (math.isfinite(lo) and math.isfinite(hi)) or lo <= 0 or hi <= lo:
            raise FitError(f"flux-scale prior needs 0 < lower < upper, got lower={self.lower!r}, upper={self.upper!r}")
        object.__setattr__(self, "lower", lo)
        object.__setattr__(self, "upper", hi)

    @property
    def ln_width(self) -> float:
        """ln(upper / lower), the normalisation of the log-uniform prior."""
        return math.log(self.upper / self.lower)

    def transform(self, u):
        """Map u in [0, 1] to s (inverse CDF of the log-uniform prior)."""
        return self.lower * np.exp(np.asarray(u, dtype=float) * self.ln_width)


def _moments(model, obs, systematic):
    sig = effective_errors(obs, systematic)
    det = ~obs.is_limit
    w = np.where(det, 1.0 / sig**2, 0.0)
    a = np.sum(w * model * model, axis=-1)
    b = np.sum(w * model * obs.value, axis=-1)
    c = np.sum(w * obs.value**2, axis=-1)
    norm = np.sum(np.where(det, np.log(sig) + _HALF_LN_2PI, 0.0), axis=-1)
    return sig, a, b, c, norm


def _curvature(model_row, obs, sig_row, a_row, s):
    """-(d^2/ds^2) ln L at s (>= the detections' precision a)."""
    if not np.any(obs.is_limit):
        return a_row
    mu = np.where(obs.is_limit, model_row, 0.0)
    z = (obs.value - s * mu) / sig_row
    ratio = _mills_ratio(z)
    k = np.where(obs.is_limit, mu / sig_row, 0.0)
    return a_row + float(np.sum(k * k * ratio * (z + ratio)))


def _row_nodes(model_row, obs, f_row, prior, s_star, width):
    """Quadrature nodes s_i and log-weights (Jacobian and 1/s included) for one row."""
    lo, hi = prior.lower, prior.upper
    edges = np.clip(s_star + width * _EDGES, lo, hi)
    edges = np.unique(edges)
    if edges.size < 2:
        # the mode lies > 12 widths outside the bounds: the integrand decays away from the
        # nearer bound on the scale ell = 1 / |d ln L / ds| = width^2 / distance (Gaussian)
        bound = hi if s_star > hi else lo
        ell = width * width / abs(s_star - bound)
        steps = np.array([0.0, 1.0, 2.0, 4.0, 8.0, 15.0, 30.0, 60.0]) * ell
        edges = np.unique(np.clip(hi - steps if bound == hi else lo + steps, lo, hi))
    nodes, logw = [], []
    for p, q in zip(edges[:-1], edges[1:]):
        if q <= p:
            continue
        if q / p <= 2.0:
            s = 0.5 * (q + p) + 0.5 * (q - p) * _GL_X
            nodes.append(s)
            logw.append(np.log(0.5 * (q - p) * _GL_W) - np.log(s))
        else:
            t_edges = np.linspace(math.log(p), math.log(q), int(math.ceil(math.log(q / p))) + 1)
            for tp, tq in zip(t_edges[:-1], t_edges[1:]):
                t = 0.5 * (tq + tp) + 0.5 * (tq - tp) * _GL_X
                nodes.append(np.exp(t))
                logw.append(np.log(0.5 * (tq - tp) * _GL_W))
    s = np.concatenate(nodes)
    lw = np.concatenate(logw)
    lnl = ln_likelihood(s[:, None] * model_row[None, :], obs, np.full(s.size, f_row))
    return s, lw + lnl - math.log(prior.ln_width)


def _regular_rows(s_star, width, prior) -> np.ndarray:
    """Rows whose panels s* + width * _EDGES lie strictly inside the prior, increasing, each within a
    factor 2: there :func:`_row_nodes` places the same 16 Gauss-Legendre nodes on every panel, so the
    rows can be done together (:func:`_draw_regular`) with the very same arithmetic."""
    with np.errstate(invalid="ignore", over="ignore"):
        edges = s_star[:, None] + width[:, None] * _EDGES[None, :]
        ok = np.isfinite(edges).all(axis=1) & (edges[:, 0] > prior.lower) & (edges[:, -1] < prior.upper)
        ok &= np.all(np.diff(edges, axis=1) > 0, axis=1) & (edges[:, 0] > 0)
        ok &= np.all(edges[:, 1:] / edges[:, :-1] <= 2.0, axis=1)        # the test of _row_nodes
    return ok


def _draw_regular(model, obs, f, prior, s_star, width, u) -> np.ndarray:
    """:func:`draw_scale` for rows of :func:`_regular_rows`, all at once (same numbers as row by row)."""
    edges = np.clip(s_star[:, None] + width[:, None] * _EDGES[None, :], prior.lower, prior.upper)
    p, q = edges[:, :-1, None], edges[:, 1:, None]                          # [R, panels, 1]
    s = (0.5 * (q + p) + 0.5 * (q - p) * _GL_X).reshape(len(s_star), -1)    # increasing along each row
    logw = (np.log(0.5 * (q - p) * _GL_W) - np.log(s.reshape(q.shape[0], q.shape[1], -1))).reshape(s.shape)
    n_nodes = s.shape[1]
    scaled = (s[:, :, None] * model[:, None, :]).reshape(-1, model.shape[1])
    lnl = ln_likelihood(scaled, obs, np.repeat(f, n_nodes)).reshape(s.shape)
    lw = logw + lnl - math.log(prior.ln_width)
    weight = np.exp(lw - lw.max(axis=1, keepdims=True))
    cells = np.concatenate([s[:, :1], 0.5 * (s[:, 1:] + s[:, :-1]), s[:, -1:]], axis=1)
    cdf = np.concatenate([np.zeros((s.shape[0], 1)), np.cumsum(weight, axis=1)], axis=1)
    cdf /= cdf[:, -1:]
    return np.array([np.interp(u[i], cdf[i], cells[i]) for i in range(s.shape[0])])


def ln_marginal_likelihood(model, obs: DiskPhotometry, prior: ScalePrior, systematic=0.0):
    """ln of the likelihood integrated over the flux scale under its prior.

    Parameters
    ----------
    model : ndarray[N, B]
        Unscaled model ratios, one row per parameter point.
    obs : DiskPhotometry
    prior : ScalePrior
    systematic : float or ndarray[N]
        Fractional systematic error term per row.

    Returns
    -------
    ln_l : ndarray[N]
        ln integral L(theta, s) p(s) ds, with the Gaussian normalisation
        of every detection included (module notes).
    s_best : ndarray[N]
        The scale maximising L(theta, s) on s >= 0.

    Notes
    -----
    See the module notes for the quadrature; accuracy is checked against
    `scipy.integrate.quad` in the tests.
    """
    model = np.atleast_2d(np.asarray(model, dtype=float))
    n = model.shape[0]
    f = np.broadcast_to(np.asarray(systematic, dtype=float), (n,))
    sig, a, b, c, norm = _moments(model, obs, f)
    if np.any(obs.is_limit):
        s_star, _, _ = chi_square_with_best_scale(model, obs, f)
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            s_star = np.maximum(np.where(a > 0, b / a, 0.0), 0.0)
    with np.errstate(divide="ignore"):
        width = 1.0 / np.sqrt(a)
    out = np.empty(n)
    easy = (~np.any(obs.is_limit)) & (a > 0) & (s_star - 12 * width > prior.lower) & \
        (s_star + 12 * width < prior.upper) & (s_star > 12 * width)
    if np.any(easy):
        se, we = s_star[easy], width[easy]
        chi2_min = np.maximum(c[easy] - b[easy] ** 2 / a[easy], 0.0)
        s_nodes = se[:, None] + math.sqrt(2.0) * we[:, None] * _GH_X[None, :]
        integral = math.sqrt(2.0) * we * np.sum(_GH_W[None, :] / s_nodes, axis=-1)
        out[easy] = -0.5 * chi2_min - norm[easy] + np.log(integral) - math.log(prior.ln_width)
    for i in np.flatnonzero(~easy):
        if a[i] > 0:
            w_i = 1.0 / math.sqrt(_curvature(model[i], obs, sig[i], a[i], s_star[i]))
        else:
            w_i = max(s_star[i], prior.lower)
        _, lw = _row_nodes(model[i], obs, f[i], prior, s_star[i], w_i)
        out[i] = logsumexp(lw)
    return out, s_star


def draw_scale(model, obs: DiskPhotometry, prior: ScalePrior, systematic=0.0, *, rng: np.random.Generator):
    """Draw the flux scale from its conditional posterior p(s | theta, data), per row.

    Parameters
    ----------
    model : ndarray[N, B]
        Unscaled model ratios.
    obs : DiskPhotometry
    prior : ScalePrior
    systematic : float or ndarray[N]
    rng : numpy.random.Generator

    Returns
    -------
    ndarray[N]
        One draw per row, by inverting the cumulative distribution built on the
        quadrature nodes of :func:`ln_marginal_likelihood` (general path): each
        node's mass is spread uniformly over the cell between the midpoints to
        its neighbours.
    """
    model = np.atleast_2d(np.asarray(model, dtype=float))
    n = model.shape[0]
    f = np.broadcast_to(np.asarray(systematic, dtype=float), (n,))
    sig, a, *_ = _moments(model, obs, f)
    s_star, _, _ = chi_square_with_best_scale(model, obs, f)
    out = np.empty(n)
    u = rng.uniform(size=n)
    width = np.empty(n)
    for i in range(n):
        if not np.any(obs.is_limit) and a[i] > 0:
            width[i] = 1.0 / math.sqrt(a[i])       # _curvature is a itself without limits
        else:
            width[i] = 1.0 / math.sqrt(_curvature(model[i], obs, sig[i], a[i], s_star[i])) if a[i] > 0 \
                else max(s_star[i], prior.lower)
    regular = _regular_rows(s_star, width, prior)
    rows = np.flatnonzero(regular)
    for start in range(0, rows.size, 2048):      # in chunks: 160 nodes x bands of memory per row
        r = rows[start:start + 2048]
        out[r] = _draw_regular(model[r], obs, f[r], prior, s_star[r], width[r], u[r])
    for i in np.flatnonzero(~regular):
        w_i = width[i]
        s, lw = _row_nodes(model[i], obs, f[i], prior, s_star[i], w_i)
        order = np.argsort(s)
        s, lw = s[order], lw[order]
        p = np.exp(lw - lw.max())
        # node i carries the mass of the cell between the midpoints to its neighbours
        edges = np.concatenate([[s[0]], 0.5 * (s[1:] + s[:-1]), [s[-1]]])
        cdf = np.concatenate([[0.0], np.cumsum(p)])
        cdf /= cdf[-1]
        out[i] = np.interp(u[i], cdf, edges)
    return out
