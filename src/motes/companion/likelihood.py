"""Marginal likelihood of templates with a shared magnitude offset.

Pure, vectorised functions: every template is evaluated at once
(``model[n_t, n_b]``); no Python loop over templates.

The model
---------
For template t in band i the predicted magnitude is ``model[t, i] + delta
(+ A_V k_i)``, with one offset ``delta`` shared by all bands. A detection
contributes a Gaussian density in magnitude with variance

    sigma_i^2 = sigma_obs,i^2 + sigma_tpl,i^2

(observed and template uncertainties), including its normalisation
``-1/2 ln(2 pi sigma_i^2)`` so that templates with different scatter compare
fairly. An upper limit contributes the probability that the measured flux
falls below the N-sigma limiting flux ``f_lim`` given the model flux ``F``:

    P_i = Phi((f_lim,i - F_i) / s_i),   s_i^2 = noise_i^2 + (0.4 ln 10 F_i sigma_tpl,i)^2

with ``noise = f_lim / N`` (flux-space treatment of non-detections, e.g.
Sawicki 2012, PASP 124, 1208, eq. 6, from memory; the template term is a
first-order propagation of the template scatter into flux). A limit is never
used as a detection.

Priors on delta
---------------
* ``GaussianOffset(sigma)``: delta ~ N(0, sigma^2) - the distance-known mode,
  where sigma combines the distance-modulus error (one term shared by all
  bands) with the intrinsic luminosity scatter of the templates;
* ``FlatOffset(lower, upper)``: delta uniform in [lower, upper] - the
  colours-only mode. The prior density 1/(upper - lower) enters every
  template's evidence, so evidences compare only between templates with the
  same prior width (motes uses one fixed width for all templates).

Marginalisation over delta is analytic when all bands are detections and no
extinction grid is used; otherwise it is numerical on a fixed grid in
standardised units (see :func:`offset_marginal`). Extinction A_V is
marginalised on a grid with the caller's prior weights.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import log_ndtr, logsumexp, ndtr

__all__ = [
    "GaussianOffset",
    "FlatOffset",
    "OffsetMarginal",
    "offset_marginal",
    "MAG_PER_LN",
    "U_COARSE",
    "U_FINE",
]

#: 2.5 / ln 10: magnitudes per natural-log unit of flux.
MAG_PER_LN = 2.5 / math.log(10.0)

#: Numerical offset integral, in units u of the detections' own posterior
#: width s around its centre m (delta = m + s u). Stage 1, (first, last,
#: nodes): a coarse grid from u = -9 to max(31, u_lim + 12), where u_lim is
#: where the template's flux reaches its upper limits (limits only push the
#: offset towards fainter values), locates the peak of the integrand. Stage 2,
#: (half width, nodes): a fine grid of +-12 around that peak (step 1/16; the
#: integrand is at most as wide as the unit Gaussian) gives the integral.
U_COARSE = (-9.0, 31.0, 481)
U_FINE = (12.0, 385)

_LN_2PI = math.log(2.0 * math.pi)


@dataclass(frozen=True)
class GaussianOffset:
    """Gaussian prior delta ~ N(0, sigma^2) [mag]; sigma may be 0 (offset fixed)."""

    sigma: float

    def __post_init__(self):
        if not (math.isfinite(self.sigma) and self.sigma >= 0):
            raise ValueError(f"GaussianOffset sigma must be finite and >= 0, got {self.sigma!r}")


@dataclass(frozen=True, eq=False)
class FlatOffset:
    """Flat prior on delta between ``lower`` and ``upper`` [mag] (scalars or ndarray[n_t])."""

    lower: object
    upper: object

    def bounds(self, n_t: int) -> tuple[np.ndarray, np.ndarray]:
        lo = np.broadcast_to(np.asarray(self.lower, dtype=float), (n_t,))
        hi = np.broadcast_to(np.asarray(self.upper, dtype=float), (n_t,))
        if not np.all(hi > lo):
            raise ValueError("FlatOffset needs upper > lower")
        return lo, hi


@dataclass(frozen=True, eq=False)
class OffsetMarginal:
    """Per-template results of :func:`offset_marginal` (all ndarray[n_t]).

    Attributes
    ----------
    ln_evidence : ln of the likelihood marginalised over delta (and A_V),
        normalisation terms included.
    chi2 : minimum over delta (and A_V) of
        sum_det r^2/sigma^2 - 2 sum_lim ln P_lim (+ delta^2/sigma_prior^2 for a Gaussian prior).
    offset : delta at that minimum [mag].
    offset_error : width of the detections' posterior in delta [mag]
        (1/sqrt(sum w [+ 1/sigma_prior^2])), at the best A_V.
    av : A_V at the minimum [mag] (0 without extinction).
    av_mean : posterior mean of A_V [mag] (0 without extinction).
    """

    ln_evidence: np.ndarray
    chi2: np.ndarray
    offset: np.ndarray
    offset_error: np.ndarray
    av: np.ndarray
    av_mean: np.ndarray


def _detections_part(resid, weight, prior, n_t):
    """Analytic Gaussian pieces of the detections (+ Gaussian prior).

    resid : [n_t, n_d]; weight : [n_t, n_d] (1/sigma^2).
    Returns centre m, width s, chi2 at the centre (prior term included for
    a Gaussian prior), and ln Z_base = ln of the integral of the detections'
    likelihood (x prior density) over delta, before truncation/limits.
    """
    a = weight.sum(axis=-1)
    b = (weight * resid).sum(axis=-1)
    c = (weight * resid**2).sum(axis=-1)
    norm = -0.5 * (_LN_2PI - np.log(weight)).sum(axis=-1)
    if isinstance(prior, GaussianOffset):
        if prior.sigma == 0:
            m = np.zeros(n_t)
            s = np.zeros(n_t)
            chi2 = c
            ln_base = norm - 0.5 * c
        else:
            a_post = a + 1.0 / prior.sigma**2
            m = b / a_post
            s = 1.0 / np.sqrt(a_post)
            chi2 = c - b**2 / a_post
            ln_base = norm - 0.5 * np.log1p(a * prior.sigma**2) - 0.5 * chi2
        return m, s, chi2, ln_base
    lo, hi = prior.bounds(n_t)
    m = b / a
    s = 1.0 / np.sqrt(a)
    chi2 = c - b**2 / a
    ln_base = norm - 0.5 * chi2 + 0.5 * (_LN_2PI - np.log(a)) - np.log(hi - lo)
    return m, s, chi2, ln_base


def _limits_ln_prob(delta, model_lim, lim_flux, lim_noise, zero_point, scatter_lim):
    """ln P of every limit at offsets ``delta``; shapes broadcast to [..., n_lim] then summed."""
    flux = zero_point * 10.0 ** (-0.4 * (model_lim + delta[..., None]))
    spread = np.sqrt(lim_noise**2 + (flux * scatter_lim / MAG_PER_LN) ** 2)
    return log_ndtr((lim_flux - flux) / spread).sum(axis=-1)


def _one_av(model, observed, detected, weight, prior, limits, shift, numeric):
    """ln Z, chi2, best offset, width for one extinction value. Arrays [n_t]."""
    n_t = model.shape[0]
    shifted = model + shift[None, :]
    resid = observed[None, detected] - shifted[:, detected]
    m, s, chi2_g, ln_base = _detections_part(resid, weight[:, detected], prior, n_t)
    if not numeric:
        if isinstance(prior, FlatOffset):
            lo, hi = prior.bounds(n_t)
            with np.errstate(divide="ignore"):
                mass = np.log(np.clip(ndtr((hi - m) / s) - ndtr((lo - m) / s), 0.0, None))
            return ln_base + mass, chi2_g, np.clip(m, lo, hi), s
        return ln_base, chi2_g, m, s
    # numerical integral over delta = m + s u, two stages (see U_COARSE)
    lim = ~detected
    lim_args = None
    reach = np.zeros(n_t)
    if limits is not None:
        lim_flux, lim_noise, zero_point, scatter = limits
        lim_args = (shifted[:, None, lim], lim_flux[lim], lim_noise[lim], zero_point[lim], scatter[:, None, lim])
        # offset at which each template's flux reaches its limits, in units of s
        delta_lim = -2.5 * np.log10(lim_flux[lim] / zero_point[lim])[None, :] - shifted[:, lim]
        with np.errstate(divide="ignore", invalid="ignore"):
            reach = np.where(s > 0, (delta_lim.max(axis=1) - m) / np.where(s > 0, s, 1.0), 0.0)
    if isinstance(prior, FlatOffset):
        lo, hi = prior.bounds(n_t)

    def log_h(u):
        delta = m[:, None] + s[:, None] * u
        out = -0.5 * u**2
        if lim_args is not None:
            out = out + _limits_ln_prob(delta, *lim_args)
        if isinstance(prior, FlatOffset):
            out = np.where((delta >= lo[:, None]) & (delta <= hi[:, None]), out, -np.inf)
        return out, delta

    top = np.clip(np.maximum(U_COARSE[1], reach + 12.0), None, 1e4)
    coarse = U_COARSE[0] + (top - U_COARSE[0])[:, None] * np.linspace(0.0, 1.0, U_COARSE[2])[None, :]
    h_coarse, _ = log_h(coarse)
    rows = np.arange(n_t)
    centre = coarse[rows, np.argmax(h_coarse, axis=1)]
    fine = centre[:, None] + np.linspace(-U_FINE[0], U_FINE[0], U_FINE[1])[None, :]
    h, delta = log_h(fine)
    du = fine[:, 1] - fine[:, 0]
    with np.errstate(divide="ignore"):
        ln_mass = logsumexp(h, axis=1) + np.log(du) - 0.5 * _LN_2PI
    best = np.argmax(h, axis=1)
    # chi2 along delta: chi2_g + u^2 - 2 sum ln P
    chi2 = chi2_g - 2.0 * h[rows, best]
    return ln_base + ln_mass, chi2, delta[rows, best], s


def offset_marginal(model, observed, sigma_obs, detected, template_scatter, prior, *,
                    limit_flux=None, limit_noise=None, zero_point=None,
                    extinction_coeff=None, av_nodes=None, av_weights=None,
                    force_numeric: bool = False) -> OffsetMarginal:
    """Marginal likelihood of every template, the shared offset integrated out.

    Parameters
    ----------
    model : ndarray[n_t, n_b] [mag]
        Template magnitudes in the same frame as ``observed`` (apparent
        magnitudes: add the distance modulus for the distance-known mode).
        Must be finite in every band used.
    observed : ndarray[n_b] [mag]
        Observed magnitudes (ignored for limits).
    sigma_obs : ndarray[n_b] [mag]
        1-sigma of the detections (ignored for limits).
    detected : ndarray[n_b] of bool
        False marks an upper limit.
    template_scatter : float or ndarray[n_b] or ndarray[n_t, n_b] [mag]
        Intrinsic scatter of the templates, per band.
    prior : GaussianOffset or FlatOffset
    limit_flux, limit_noise, zero_point : ndarray[n_b] [Jy], optional
        For upper limits: N-sigma limiting flux, its noise (limit / N), and
        the flux of magnitude 0 in the band. Required when any band is a limit.
    extinction_coeff : ndarray[n_b], optional
        A_band / A_V of each band; with ``av_nodes`` [mag] and ``av_weights``
        (prior weights summing to 1) A_V is marginalised on that grid.
    force_numeric : bool
        Use the numerical offset integral even when the analytic one applies
        (for tests).

    Returns
    -------
    OffsetMarginal

    Notes
    -----
    With weights w_i = 1/sigma_i^2 and residuals r_i = m_obs,i - m_tpl,i,
    A = sum w, B = sum w r, C = sum w r^2, the detections give
    ln L(delta) = -1/2 sum ln(2 pi sigma_i^2) - 1/2 (A delta^2 - 2 B delta + C).
    Gaussian prior N(0, s_p^2):
    ln Z = -1/2 sum ln(2 pi sigma_i^2) - 1/2 ln(1 + A s_p^2) - 1/2 (C - B^2/(A + s_p^-2)).
    Flat prior on [a, b]:
    ln Z = -1/2 sum ln(2 pi sigma_i^2) - 1/2 (C - B^2/A) + 1/2 ln(2 pi / A) - ln(b - a)
           + ln[Phi((b - m) sqrt A) - Phi((a - m) sqrt A)],  m = B/A.
    With limits, the Gaussian part fixes the integration variable
    delta = m + s u (s its posterior width) and the limits' probabilities are
    integrated over u against the normal density on a grid that follows the
    integrand's peak (:data:`U_COARSE`, :data:`U_FINE`; log-sum-exp).
    """
    model = np.asarray(model, dtype=float)
    if model.ndim != 2:
        raise ValueError(f"model must be 2-D (templates, bands), got shape {model.shape}")
    n_t, n_b = model.shape
    observed = np.broadcast_to(np.asarray(observed, dtype=float), (n_b,))
    sigma_obs = np.broadcast_to(np.asarray(sigma_obs, dtype=float), (n_b,))
    detected = np.broadcast_to(np.asarray(detected, dtype=bool), (n_b,))
    scatter = np.broadcast_to(np.asarray(template_scatter, dtype=float), (n_t, n_b))
    if not detected.any():
        raise ValueError("offset_marginal needs at least one detection")
    if not np.all(np.isfinite(model)):
        raise ValueError("model magnitudes must be finite in every band used")
    variance = np.where(detected[None, :], sigma_obs[None, :] ** 2 + scatter**2, 1.0)
    weight = 1.0 / variance
    limits = None
    if not detected.all():
        if limit_flux is None or limit_noise is None or zero_point is None:
            raise ValueError("upper limits need limit_flux, limit_noise and zero_point")
        limits = (np.broadcast_to(np.asarray(limit_flux, float), (n_b,)),
                  np.broadcast_to(np.asarray(limit_noise, float), (n_b,)),
                  np.broadcast_to(np.asarray(zero_point, float), (n_b,)),
                  scatter)
    numeric = force_numeric or limits is not None
    if extinction_coeff is None:
        ln_z, chi2, off, err = _one_av(model, observed, detected, weight, prior,
                                       limits, np.zeros(n_b), numeric)
        zeros = np.zeros(n_t)
        return OffsetMarginal(ln_z, chi2, off, err, zeros, zeros.copy())
    coeff = np.broadcast_to(np.asarray(extinction_coeff, dtype=float), (n_b,))
    av_nodes = np.asarray(av_nodes, dtype=float)
    av_weights = np.asarray(av_weights, dtype=float)
    if av_nodes.ndim != 1 or av_nodes.shape != av_weights.shape or not np.isclose(av_weights.sum(), 1.0):
        raise ValueError("av_nodes and av_weights must be 1-D of equal length with weights summing to 1")
    results = [_one_av(model, observed, detected, weight, prior, limits,
                       av * coeff, numeric) for av in av_nodes]
    ln_z = np.stack([r[0] for r in results], axis=1)                  # [n_t, n_a]
    chi2 = np.stack([r[1] for r in results], axis=1)
    with np.errstate(divide="ignore"):
        ln_joint = ln_z + np.log(av_weights)[None, :]
    total = logsumexp(ln_joint, axis=1)
    best = np.argmin(chi2, axis=1)
    rows = np.arange(n_t)
    with np.errstate(invalid="ignore"):
        post = np.where(np.isfinite(total)[:, None], np.exp(ln_joint - total[:, None]), 0.0)
    return OffsetMarginal(
        ln_evidence=total,
        chi2=chi2[rows, best],
        offset=np.stack([r[2] for r in results], axis=1)[rows, best],
        offset_error=np.stack([r[3] for r in results], axis=1)[rows, best],
        av=av_nodes[best],
        av_mean=(post * av_nodes[None, :]).sum(axis=1),
    )

