"""Posterior summaries of a ranking: display rows, type estimate, distance check.

Estimates use the ranking's template probabilities as a posterior. For the
dwarf sequence, whose templates sit on a regular grid of type codes (step h),
each grid point stands for the interval [c - h/2, c + h/2] and the cumulative
distribution is piecewise linear, so the median is continuous in type; the
intervals are 68% highest-density intervals and the separate peaks of the
posterior are reported (:mod:`motes.companion.type_posterior`), Teff and mass
intervals are highest-density intervals in Teff and in mass. Discrete
templates (a library) use the usual weighted-percentile interpolation between
template values (16th/84th percentiles).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtr

from .results import DistanceCheck, QuantityEstimate, RankedTemplate, TypeEstimate, TypePeak
from .type_posterior import PEAK_MIN_PROBABILITY, hdr_intervals, median_between, posterior_peaks, rebin_monotone

__all__ = ["build_rows", "type_estimate", "distance_check", "distance_modulus_quantiles", "distance_modulus_density",
           "weighted_quantiles",
           "MASS_COVERAGE_TOLERANCE", "FIT_P_THRESHOLD"]

#: chi2 p-value of the best template below which a fit is called poor and the
#: type is labelled as the least-bad template (0.001, common practice, no source).
FIT_P_THRESHOLD = 1e-3

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
        "probability_flat": fit.probability if fit.probability_flat is None else fit.probability_flat,
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
    """One row per integer subtype: probability of the grid points within half a subtype.

    A grid point on a bin edge (x.5) is shared by the two bins, unless one of them holds no
    point of its own (the grid starts or ends there, e.g. sequence rows from T9.5 on): then
    it goes whole to the other, so that no row is labelled with a type the grid does not reach.
    """
    from .spectral_types import type_label

    codes, prob = a["type_code"], a["probability"]
    lo_bin = np.floor(codes + 0.5 - 1e-7).astype(int)
    hi_bin = np.floor(codes + 0.5 + 1e-7).astype(int)
    split = lo_bin != hi_bin
    own = set(lo_bin[~split].tolist())
    lone_lo = split & ~np.isin(lo_bin, list(own)) & np.isin(hi_bin, list(own))
    lone_hi = split & ~np.isin(hi_bin, list(own)) & np.isin(lo_bin, list(own))
    lo_bin = np.where(lone_lo, hi_bin, lo_bin)
    hi_bin = np.where(lone_hi, lo_bin, hi_bin)
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


def _chi2_p(chi2: float, dof: int) -> float:
    """chi2 survival probability; nan when not testable (dof <= 0 or chi2 not finite)."""
    from scipy.stats import chi2 as chi2_dist

    if dof <= 0 or not math.isfinite(chi2):
        return math.nan
    return float(chi2_dist.sf(chi2, dof))


def _own_variable(values, prob, unit) -> QuantityEstimate:
    """Median and 68% HDI of a quantity carried along a regular grid, in its own variable."""
    values = np.asarray(values, dtype=float)
    med = weighted_quantiles(values, prob, (0.5,))[0]
    if not math.isfinite(med):
        return QuantityEstimate(math.nan, math.nan, math.nan, unit)
    binned = rebin_monotone(values, prob)
    intervals = hdr_intervals(*binned) if binned is not None else hdr_intervals(values, prob)
    main = max(intervals, key=lambda iv: iv[2])
    return QuantityEstimate(float(med), main[0], main[1], unit, intervals)


def _photometric_distance(ranking, sigma_lum: float, probability: str) -> QuantityEstimate | None:
    if ranking.mode != "colours" or not np.all(ranking.grid["absolute"]):
        return None
    x, pdf = distance_modulus_density(ranking, sigma_lum, probability=probability)
    cdf = np.concatenate([[0.0], np.cumsum(0.5 * (pdf[1:] + pdf[:-1]) * np.diff(x))])
    med = float(np.interp(0.5, cdf / cdf[-1], x))
    intervals = tuple((float(10 ** ((lo + 5) / 5)), float(10 ** ((hi + 5) / 5)), pr)
                      for lo, hi, pr in hdr_intervals(x, pdf))
    main = max(intervals, key=lambda iv: iv[2])
    return QuantityEstimate(float(10 ** ((med + 5) / 5)), main[0], main[1], "pc", intervals)


def type_estimate(ranking, probability: str = "probability", prior: str = "flat",
                  luminosity_scatter: float = 0.0) -> TypeEstimate | None:
    """Continuous type, Teff and mass estimate of a ranking (None without types).

    Parameters
    ----------
    ranking : Ranking
    probability : str
        Key of ``ranking.grid`` holding the posterior to summarise
        (``"probability"``: with the type prior; ``"probability_flat"``: flat).
    prior : str
        Description of that posterior's type prior (recorded in the estimate).
    luminosity_scatter : float [mag]
        For the photometric distance of a colours-only ranking.

    Notes
    -----
    Sequence rankings (a regular grid): 68% highest-density intervals and
    separate peaks on the type code (:mod:`motes.companion.type_posterior`),
    Teff and mass intervals as highest-density intervals in Teff and in mass.
    Libraries: weighted 16th/50th/84th percentiles. Every estimate carries
    the chi2 p-value of its best-fitting template over the bands used.
    """
    g = ranking.grid
    codes, prob = g["type_code"], g[probability]
    i_best = int(np.nanargmin(np.where(np.isfinite(g["chi2"]), g["chi2"], np.inf))) if g["chi2"].size else 0
    best_chi2 = float(g["chi2"][i_best])
    p_fit = _chi2_p(best_chi2, ranking.dof)
    fit = dict(fit_p_value=p_fit, poor_fit=bool(math.isfinite(p_fit) and p_fit < FIT_P_THRESHOLD),
               best_fit=ranking.labels[i_best], best_chi2=best_chi2, dof=int(ranking.dof))
    if not np.any(np.isfinite(codes)):
        teff = weighted_quantiles(g["teff"], prob, (0.5, 0.16, 0.84))
        if ranking.kind != "blackbody":
            return None
        return TypeEstimate(math.nan, math.nan, math.nan, math.nan, QuantityEstimate(*teff, "K"),
                            QuantityEstimate(math.nan, math.nan, math.nan, "M_sun"), ranking.source, ranking.mode,
                            prior="none (blackbodies)", **fit)
    total = float(np.sum(prob))
    no_mass = total > 0 and float(np.sum(prob[~np.isfinite(g["mass"])])) > MASS_COVERAGE_TOLERANCE * total
    distance = _photometric_distance(ranking, luminosity_scatter, probability)
    if ranking.kind == "sequence" and codes.size > 1:
        half = 0.5 * float(np.median(np.diff(np.sort(codes))))
        med = float(weighted_quantiles(codes, prob, (0.5,), half)[0])
        intervals = hdr_intervals(codes, prob)
        peaks = tuple(TypePeak(mode, lo, hi, p, median_between(codes, prob, lo_cut, hi_cut, half))
                      for (mode, lo, hi, p), (lo_cut, hi_cut) in _peak_cuts(codes, prob))
        main = max(intervals, key=lambda iv: iv[2])
        top = max(peaks, key=lambda pk: pk.probability)
        point = top.median if len(peaks) > 1 else med
        teff = _own_variable(g["teff"], prob, "K")
        mass = (QuantityEstimate(math.nan, math.nan, math.nan, "M_sun") if no_mass
                else _own_variable(g["mass"], prob, "M_sun"))
        lo_all, hi_all = min(iv[0] for iv in intervals), max(iv[1] for iv in intervals)
        edge = bool(lo_all <= np.nanmin(codes) + 0.5 or hi_all >= np.nanmax(codes) - 0.5)
        return TypeEstimate(
            median=med, lower=main[0], upper=main[1], most_probable=float(codes[int(np.argmax(prob))]),
            teff=teff, mass=mass, source=ranking.source, mode=ranking.mode, at_range_edge=edge,
            intervals=intervals, peaks=peaks, point=point, prior=prior, distance=distance, **fit)
    med, lo, hi = weighted_quantiles(codes, prob, (0.5, 0.16, 0.84))
    teff = weighted_quantiles(g["teff"], prob, (0.5, 0.16, 0.84))
    mass = np.full(3, np.nan) if no_mass else weighted_quantiles(g["mass"], prob, (0.5, 0.16, 0.84))
    return TypeEstimate(
        median=float(med), lower=float(lo), upper=float(hi),
        most_probable=float(codes[int(np.argmax(prob))]),
        teff=QuantityEstimate(*map(float, teff), "K"), mass=QuantityEstimate(*map(float, mass), "M_sun"),
        source=ranking.source, mode=ranking.mode, point=float(med), prior=prior, distance=distance, **fit,
    )


def _peak_cuts(codes, prob):
    """Peaks of a sequence posterior with the type-code range each one owns (between density minima)."""
    peaks = posterior_peaks(codes, prob)
    bounds = [-math.inf] + [0.5 * (a[2] + b[1]) for a, b in zip(peaks[:-1], peaks[1:])] + [math.inf]
    out = [(pk, (bounds[i], bounds[i + 1])) for i, pk in enumerate(peaks)]
    kept = [item for item in out if item[0][3] >= PEAK_MIN_PROBABILITY]
    return kept or [max(out, key=lambda item: item[0][3])]


def distance_modulus_density(ranking, sigma_lum: float, n: int = 4001,
                             probability: str = "probability") -> tuple[np.ndarray, np.ndarray]:
    """The colours-only distance-modulus posterior on a regular grid: (x [mag], density).

    ``probability`` names the template weights in ``ranking.grid`` (``"probability_flat"``: flat type prior).
    """
    g = ranking.grid
    w = g[probability]
    keep = w > 1e-6 * w.max()   # templates below carry < 1e-6 x 500 of the mass: nothing for a 68% interval
    p = w[keep] / w[keep].sum()
    m = g["offset"][keep]
    s = np.maximum(np.sqrt(g["offset_error"][keep] ** 2 + sigma_lum**2), 1e-4)
    x = np.linspace((m - 7 * s).min(), (m + 7 * s).max(), n)
    z = (x[:, None] - m[None, :]) / s[None, :]
    pdf = (p[None, :] * np.exp(-0.5 * z**2) / s[None, :]).sum(axis=1)
    return x, pdf


def distance_modulus_quantiles(ranking, sigma_lum: float, quantiles=(0.5, 0.16, 0.84),
                               probability: str = "probability") -> np.ndarray:
    """Quantiles of the colours-only distance modulus: the mixture over templates
    of N(offset_t, offset_error_t^2 + sigma_lum^2) with their probabilities
    (``probability`` names the weights in ``ranking.grid``)."""
    g = ranking.grid
    w = g[probability]
    keep = w > 1e-8 * w.max()
    p = w[keep] / w[keep].sum()
    m = g["offset"][keep]
    s = np.sqrt(g["offset_error"][keep] ** 2 + sigma_lum**2)
    s = np.maximum(s, 1e-4)
    x = np.linspace((m - 7 * s).min(), (m + 7 * s).max(), 4001)
    cdf = (p[None, :] * ndtr((x[:, None] - m[None, :]) / s[None, :])).sum(axis=1)
    return np.interp(quantiles, cdf, x)


def _host_tension(ranking, sigma_lum: float, mu: float, mu_error: float) -> tuple[float, float]:
    """(signed equivalent sigma of the host's mu under the colours-only posterior, mass within 0.5 mag)."""
    from scipy.special import ndtri

    g = ranking.grid
    keep = g["probability"] > 1e-8 * g["probability"].max()
    p = g["probability"][keep] / g["probability"][keep].sum()
    m = g["offset"][keep]
    s = np.maximum(np.sqrt(g["offset_error"][keep] ** 2 + sigma_lum**2 + mu_error**2), 1e-4)
    x = np.linspace(min((m - 8 * s).min(), mu - 1.0), max((m + 8 * s).max(), mu + 1.0), 8001)
    dens = (p[None, :] * np.exp(-0.5 * ((x[:, None] - m[None, :]) / s[None, :]) ** 2) / s[None, :]).sum(axis=1)
    at_host = float((p * np.exp(-0.5 * ((mu - m) / s) ** 2) / s).sum())
    dx = x[1] - x[0]
    total = dens.sum() * dx
    tail = float(dens[dens <= at_host].sum() * dx / total)
    near = float(((p * (ndtr((mu + 0.5 - m) / s) - ndtr((mu - 0.5 - m) / s))).sum()))
    z = float(ndtri(1.0 - 0.5 * min(max(tail, 1e-300), 1.0))) if tail < 1.0 else 0.0
    beyond = float((p * ndtr((m - mu) / s)).sum())
    return (z if beyond >= 0.5 else -z), near


def distance_check(ranking, mu: float, mu_error: float, host_distance: float, settings) -> DistanceCheck:
    """Compare the colours-only distance modulus with the host's.

    The colours-only posterior of the distance modulus is the mixture over
    templates of N(offset_t, offset_error_t^2 + sigma_lum^2) with the
    templates' probabilities (sigma_lum: luminosity scatter at fixed type).
    The check uses the posterior *mass near the host*, not a median (a two-peaked
    posterior can have its median where it has no mass): each component is widened
    by the host's distance-modulus error sigma_mu, and the tail mass p is the
    posterior mass where the density is at most its value at the host's mu (the mass
    outside the highest-density region whose edge passes through mu). The tension is
    the equivalent two-sided Gaussian z = Phi^-1(1 - p/2), signed + when more mass
    lies beyond the host than in front of it.
    """
    med, lo, hi = distance_modulus_quantiles(ranking, settings.luminosity_scatter)
    mu_error = mu_error if math.isfinite(mu_error) else 0.0
    z, near = _host_tension(ranking, settings.luminosity_scatter, mu, mu_error)
    dist = QuantityEstimate(*(float(10 ** ((v + 5) / 5)) for v in (med, lo, hi)), "pc")
    dm = QuantityEstimate(float(med), float(lo), float(hi), "mag")
    consistent = abs(z) <= settings.tension_sigma
    text = (f"colours-only distance {dist.format('.3g')} vs the host's {host_distance:.3g} pc ({z:+.1f} sigma "
            f"from the posterior mass; {near:.1%} of it within 0.5 mag of the host's distance modulus)")
    if consistent:
        message = f"{text}: consistent with a companion at the host's distance"
    elif z > 0:
        message = f"{text}: the colours place it farther than the host - may be a background object"
    else:
        message = (f"{text}: the colours place it closer than the host - a foreground object, or an "
                   "overluminous companion (young, or an unresolved binary)")
    return DistanceCheck(float(host_distance), float(mu), float(mu_error), dist, dm, float(z), consistent, message)
