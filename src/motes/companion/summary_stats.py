"""Posterior summaries of a ranking: display rows, type estimate, distance check.

Estimates use the ranking's template probabilities as a posterior. For the
dwarf sequence, whose templates sit on a regular grid of type codes (step h),
each grid point stands for the interval [c - h/2, c + h/2] and the cumulative
distribution is piecewise linear, so the median and the 16th/84th
percentiles are continuous in type. Discrete templates (a library) use the
usual weighted-percentile interpolation between template values.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtr

from .results import DistanceCheck, QuantityEstimate, RankedTemplate, TypeEstimate

__all__ = ["build_rows", "type_estimate", "distance_check", "weighted_quantiles", "MASS_COVERAGE_TOLERANCE"]

#: Probability that templates without a mass (e.g. sequence types beyond its last
#: tabulated mass) may carry before the mass estimate is withheld: a mass from the
#: rest alone would be biased (1%, common practice, no source).
MASS_COVERAGE_TOLERANCE = 0.01


def weighted_quantiles(values, weights, quantiles, half_width: float = 0.0) -> np.ndarray:
    """Quantiles of a weighted set of values.

    Parameters
    ----------
    values, weights : ndarray[n]
        nan values are skipped; weights need not be normalised.
    quantiles : sequence of float in [0, 1]
    half_width : float
        > 0: each value is spread uniformly over +-half_width (regular grids);
        0: weighted-percentile interpolation between the values.

    Returns
    -------
    ndarray[len(quantiles)] (nan when no finite value has weight)
    """
    values = np.asarray(values, dtype=float)
    weights = np.asarray(weights, dtype=float)
    ok = np.isfinite(values) & (weights > 0)
    if not ok.any():
        return np.full(len(quantiles), np.nan)
    order = np.argsort(values[ok], kind="stable")
    v, w = values[ok][order], weights[ok][order]
    w = w / w.sum()
    q = np.asarray(quantiles, dtype=float)
    if half_width > 0:
        x = np.concatenate([v - half_width, v[-1:] + half_width])
        cdf = np.concatenate([[0.0], np.cumsum(w)])
        # merge touching intervals of a regular grid: x is then non-decreasing
        return np.interp(q, cdf, np.maximum.accumulate(x))
    if v.size == 1:
        return np.full(q.shape, v[0])
    cdf = np.cumsum(w) - 0.5 * w
    return np.interp(q, cdf, v)


def _distance(offset, absolute, mode, mu):
    dm = offset + (mu if mode == "distance" else 0.0)
    with np.errstate(over="ignore"):
        d = 10.0 ** ((dm + 5.0) / 5.0)
    return np.where(absolute, d, np.nan)


def build_rows(grid, fit, obs, mode: str, dof: int):
    """Display rows and per-template arrays of a fitted ranking.

    Returns
    -------
    rows : tuple of RankedTemplate, most probable first
    arrays : dict of str to ndarray
    """
    t = fit.templates
    m = fit.marginal
    absolute = grid.absolute[t]
    arrays = {
        "type_code": grid.type_code[t], "teff": grid.teff[t], "mass": grid.mass[t],
        "probability": fit.probability, "ln_evidence": m.ln_evidence, "chi2": m.chi2,
        "offset": m.offset, "offset_error": m.offset_error, "av": m.av, "av_mean": m.av_mean,
        "distance_pc": _distance(m.offset, absolute, mode, obs.mu), "absolute": absolute,
        "model": fit.model,
    }
    if grid.kind == "sequence":
        rows = _sequence_rows(arrays, dof)
    else:
        labels = [grid.labels[i] for i in t]
        rows = [_row(labels[i], arrays, i, dof, arrays["probability"][i]) for i in range(t.size)]
        rows.sort(key=lambda r: -r.probability)
    return tuple(rows), arrays


def _row(label, a, i, dof, probability) -> RankedTemplate:
    return RankedTemplate(
        label=label, type_code=float(a["type_code"][i]), teff=float(a["teff"][i]), mass=float(a["mass"][i]),
        chi2=float(a["chi2"][i]), dof=int(dof), probability=float(probability),
        ln_evidence=float(a["ln_evidence"][i]), offset=float(a["offset"][i]),
        offset_error=float(a["offset_error"][i]), distance_pc=float(a["distance_pc"][i]), av=float(a["av"][i]),
    )


def _sequence_rows(a, dof):
    """One row per integer subtype: probability of the grid points within half a subtype."""
    from .spectral_types import type_label

    codes, prob = a["type_code"], a["probability"]
    lo_bin = np.floor(codes + 0.5 - 1e-7).astype(int)
    hi_bin = np.floor(codes + 0.5 + 1e-7).astype(int)
    split = lo_bin != hi_bin
    bins = {}
    for b, p in zip(lo_bin, np.where(split, 0.5 * prob, prob)):
        bins[b] = bins.get(b, 0.0) + p
    for b, p in zip(hi_bin[split], 0.5 * prob[split]):
        bins[b] = bins.get(b, 0.0) + p
    rows = []
    for b, p in bins.items():
        i = int(np.argmin(np.abs(codes - b)))
        rows.append(_row(type_label(b), a, i, dof, p))
    rows.sort(key=lambda r: -r.probability)
    return rows


def type_estimate(ranking) -> TypeEstimate | None:
    """Continuous type, Teff and mass estimate of a ranking (None without types)."""
    g = ranking.grid
    codes, prob = g["type_code"], g["probability"]
    if not np.any(np.isfinite(codes)):
        teff = weighted_quantiles(g["teff"], prob, (0.5, 0.16, 0.84))
        if ranking.kind != "blackbody":
            return None
        return TypeEstimate(math.nan, math.nan, math.nan, math.nan, QuantityEstimate(*teff, "K"),
                            QuantityEstimate(math.nan, math.nan, math.nan, "M_sun"), ranking.source, ranking.mode)
    half = 0.0
    if ranking.kind == "sequence" and codes.size > 1:
        half = 0.5 * float(np.median(np.diff(np.sort(codes))))
    med, lo, hi = weighted_quantiles(codes, prob, (0.5, 0.16, 0.84), half)
    teff = weighted_quantiles(g["teff"], prob, (0.5, 0.16, 0.84))
    mass = weighted_quantiles(g["mass"], prob, (0.5, 0.16, 0.84))
    total = float(np.sum(prob))
    if total > 0 and float(np.sum(prob[~np.isfinite(g["mass"])])) > MASS_COVERAGE_TOLERANCE * total:
        mass = np.full(3, np.nan)  # no mass: too much probability on types without one
    edge = bool(codes.size > 1 and ranking.kind == "sequence"
                and (lo <= np.nanmin(codes) + 0.5 or hi >= np.nanmax(codes) - 0.5))
    return TypeEstimate(
        median=float(med), lower=float(lo), upper=float(hi),
        most_probable=float(codes[int(np.argmax(prob))]),
        teff=QuantityEstimate(*map(float, teff), "K"), mass=QuantityEstimate(*map(float, mass), "M_sun"),
        source=ranking.source, mode=ranking.mode, at_range_edge=edge,
    )


def distance_check(ranking, mu: float, mu_error: float, host_distance: float, settings) -> DistanceCheck:
    """Compare the colours-only distance modulus with the host's.

    The colours-only posterior of the distance modulus is the mixture over
    templates of N(offset_t, offset_error_t^2 + sigma_lum^2) with the
    templates' probabilities (sigma_lum: luminosity scatter at fixed type).
    Tension z = (median - mu) / sqrt(half 68% width^2 + sigma_mu^2).
    """
    g = ranking.grid
    keep = g["probability"] > 1e-8 * g["probability"].max()
    p = g["probability"][keep] / g["probability"][keep].sum()
    m = g["offset"][keep]
    s = np.sqrt(g["offset_error"][keep] ** 2 + settings.luminosity_scatter**2)
    s = np.maximum(s, 1e-4)
    x = np.linspace((m - 7 * s).min(), (m + 7 * s).max(), 4001)
    cdf = (p[None, :] * ndtr((x[:, None] - m[None, :]) / s[None, :])).sum(axis=1)
    med, lo, hi = np.interp([0.5, 0.16, 0.84], cdf, x)
    mu_error = mu_error if math.isfinite(mu_error) else 0.0
    z = (med - mu) / math.hypot(0.5 * (hi - lo), mu_error)
    dist = QuantityEstimate(*(float(10 ** ((v + 5) / 5)) for v in (med, lo, hi)), "pc")
    dm = QuantityEstimate(float(med), float(lo), float(hi), "mag")
    consistent = abs(z) <= settings.tension_sigma
    text = f"colours-only distance {dist.format('.3g')} vs the host's {host_distance:.3g} pc ({z:+.1f} sigma)"
    if consistent:
        message = f"{text}: consistent with a companion at the host's distance"
    elif z > 0:
        message = f"{text}: the colours place it farther than the host - may be a background object"
    else:
        message = (f"{text}: the colours place it closer than the host - a foreground object, or an "
                   "overluminous companion (young, or an unresolved binary)")
    return DistanceCheck(float(host_distance), float(mu), float(mu_error), dist, dm, float(z), consistent, message)
