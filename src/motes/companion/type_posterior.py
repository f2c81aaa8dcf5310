"""Highest-density intervals and separate peaks of a posterior on a grid.

The dwarf-sequence posterior lives on a regular grid of type codes (step h):
grid point i stands for the cell [c_i - h/2, c_i + h/2] with probability
p_i, so the density is piecewise constant. On such a density:

* the **highest-density region** (HDR) of credibility q is the smallest set
  of cells whose probability reaches q: cells are taken in decreasing
  density until their sum is >= q (whole cells, so the content is q or a
  little more, never less). Its contiguous runs of cells are the intervals.
  A gap between two runs is kept only where the posterior really dips: runs
  are merged across a gap in which the density never falls below half the
  HDR's threshold density and which holds at most 5% of the probability (a
  shallow dip between jittery grid rows is not an empty gap; the merged
  interval then holds at most 5% more per gap). An interval never spans a gap
  where the density falls below half the threshold.
* **peaks** are the runs of the 95% HDR; each takes the probability of the
  whole axis between the density minima that separate it from its
  neighbours, so the peaks' probabilities add up to 1. Peaks with less than
  :data:`PEAK_MIN_PROBABILITY` are not reported separately.

For a quantity carried along the grid (Teff, mass), the same cells map to
cells [v(c - h/2), v(c + h/2)] in that variable, whose density is
p_i / |width_i|: the HDR in Teff is computed in Teff, not by mapping the type
interval's ends (the two differ where Teff(type) is curved).

These are pure functions on arrays (no Ranking needed), used by
:mod:`motes.companion.summary_stats`.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["hdr_intervals", "posterior_peaks", "cell_edges", "median_between", "rebin_monotone", "HDR_LEVEL",
           "PEAK_LEVEL", "N_REBIN", "GAP_MASS",
           "PEAK_MIN_PROBABILITY", "GAP_DEPTH"]

#: Credibility of the reported intervals.
HDR_LEVEL = 0.68
#: Credibility of the region whose separate runs are the reported peaks.
PEAK_LEVEL = 0.95
#: Peaks holding less probability than this are not reported as separate
#: peaks (their probability stays in the posterior; 5%, common practice, no source).
PEAK_MIN_PROBABILITY = 0.05
#: Runs are merged across a gap unless the density in it falls below this
#: fraction of the region's threshold density (a real dip; 1/2 is a choice,
#: common practice, no source) ...
GAP_DEPTH = 0.5
#: ... or the gap holds more than this fraction of the probability (so that
#: merging adds at most 5% per gap to the interval's content; a choice, common
#: practice, no source).
GAP_MASS = 0.05


def cell_edges(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper edges of the cells of grid values (midpoints; ends extended by half a step).

    Parameters
    ----------
    values : ndarray[n]
        Values at consecutive grid points (monotone or not).

    Returns
    -------
    (ndarray[n], ndarray[n])
        Edges on either side of each point, in the order of the grid (for a
        decreasing quantity the "left" edge is the larger value).
    """
    v = np.asarray(values, dtype=float)
    if v.size == 1:
        return v.copy(), v.copy()
    mid = 0.5 * (v[1:] + v[:-1])
    left = np.concatenate([[v[0] - (mid[0] - v[0])], mid])
    right = np.concatenate([mid, [v[-1] + (v[-1] - mid[-1])]])
    return left, right


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) index of each run of True."""
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts = np.concatenate([[idx[0]], idx[breaks + 1]])
    ends = np.concatenate([idx[breaks], [idx[-1]]])
    return list(zip(starts.tolist(), ends.tolist()))


def _region(prob: np.ndarray, width: np.ndarray, level: float) -> tuple[np.ndarray, list[tuple[int, int]]]:
    """Cells of the HDR of credibility ``level`` and their merged runs."""
    with np.errstate(divide="ignore", invalid="ignore"):
        density = np.where(width > 0, prob / np.where(width > 0, width, 1.0), 0.0)
    order = np.argsort(-density, kind="stable")
    cum = np.cumsum(prob[order])
    n = int(np.searchsorted(cum, level * cum[-1] - 1e-12)) + 1
    chosen = np.zeros(prob.size, bool)
    chosen[order[:n]] = True
    threshold = density[order[min(n, prob.size) - 1]]
    runs = _runs(chosen)
    merged = [runs[0]]
    for first, last in runs[1:]:
        gap = density[merged[-1][1] + 1:first]
        mass = prob[merged[-1][1] + 1:first].sum()
        if gap.size and gap.min() >= GAP_DEPTH * threshold and mass <= GAP_MASS * prob.sum():
            merged[-1] = (merged[-1][0], last)
        else:
            merged.append((first, last))
    for first, last in merged:
        chosen[first:last + 1] = True
    return chosen, merged


def _normalised_cells(values, prob):
    """The finite grid values, their probabilities normalised to 1, and the cells' edges and widths
    (None when no probability is left)."""
    values = np.asarray(values, dtype=float)
    prob = np.where(np.isfinite(values), np.asarray(prob, dtype=float), 0.0)
    total = prob.sum()
    if not total > 0:
        return None
    keep = np.flatnonzero(np.isfinite(values))
    v, p = values[keep], prob[keep] / total
    left, right = cell_edges(v)
    return v, p, left, right, np.abs(right - left)


def hdr_intervals(values, prob, level: float = HDR_LEVEL) -> tuple[tuple[float, float, float], ...]:
    """Highest-density intervals of a posterior on consecutive grid cells.

    Parameters
    ----------
    values : ndarray[n]
        The variable at consecutive grid points (type code, Teff, mass, ...);
        nan points must carry no probability.
    prob : ndarray[n]
        Probabilities (need not be normalised).
    level : float
        Credibility (default 0.68).

    Returns
    -------
    tuple of (lower, upper, probability)
        One per interval, in increasing ``lower``; probability normalised to
        the total. Empty when no probability is on finite values.

    Examples
    --------
    >>> x = np.arange(0.05, 10.0, 0.1)   # cell centres
    >>> p = np.exp(-0.5 * ((x - 2) / 0.3) ** 2) + np.exp(-0.5 * ((x - 7) / 0.3) ** 2)
    >>> [f"{lo:.1f}-{hi:.1f} ({q:.2f})" for lo, hi, q in hdr_intervals(x, p)]
    ['1.7-2.3 (0.34)', '6.7-7.3 (0.34)']
    """
    cells = _normalised_cells(values, prob)
    if cells is None:
        return ()
    v, p, left, right, width = cells
    chosen, runs = _region(p, width, level)
    out = []
    for first, last in runs:
        ends = [left[first], right[first], left[last], right[last]]
        out.append((float(min(ends)), float(max(ends)), float(p[first:last + 1].sum())))
    return tuple(sorted(out))


def posterior_peaks(values, prob, level: float = PEAK_LEVEL) -> tuple[tuple[float, float, float, float], ...]:
    """Separate peaks of a gridded posterior: the runs of its ``level`` HDR.

    Parameters
    ----------
    values, prob : ndarray[n]
        As for :func:`hdr_intervals` (values increasing along the grid).
    level : float
        Credibility of the region whose runs are the peaks (default 0.95).

    Returns
    -------
    tuple of (mode, lower, upper, probability)
        One per peak in increasing value: the grid value of highest density,
        the run's extent, and the probability between the density minima
        that bound the peak (the peaks' probabilities sum to 1).
    """
    cells = _normalised_cells(values, prob)
    if cells is None:
        return ()
    v, p, left, right, width = cells
    _, runs = _region(p, width, level)
    with np.errstate(divide="ignore", invalid="ignore"):
        density = np.where(width > 0, p / np.where(width > 0, width, 1.0), 0.0)
    # split the axis at the density minimum between consecutive runs
    cuts = [0]
    for (_, last), (first, _) in zip(runs[:-1], runs[1:]):
        gap = density[last + 1:first]
        cuts.append(last + 1 + int(np.argmin(gap)) if gap.size else first)
    cuts.append(v.size)
    out = []
    for (first, last), a, b in zip(runs, cuts[:-1], cuts[1:]):
        mode = first + int(np.argmax(density[first:last + 1]))
        out.append((float(v[mode]), float(min(left[first], right[last])), float(max(left[first], right[last])),
                    float(p[a:b].sum())))
    return tuple(out)


#: Regular bins onto which a quantity carried along the type grid is re-binned
#: before its HDI is taken (see :func:`rebin_monotone`).
N_REBIN = 30


def rebin_monotone(values, prob, n_bins: int = N_REBIN, tail: float = 1e-3):
    """Posterior of a monotone quantity carried along a grid, on regular bins of that quantity.

    Each grid cell's probability is spread uniformly over its extent in the
    quantity (:func:`cell_edges`), and the resulting piecewise-linear
    cumulative distribution is read at ``n_bins + 1`` regular edges spanning
    the central ``1 - 2 tail`` of the probability. Regular bins smooth the
    cell-to-cell jitter of the quantity's steps (the sequence tabulates Teff
    and mass rounded, every half subtype), which would otherwise fragment a
    highest-density interval taken cell by cell.

    Returns
    -------
    (centres ndarray[n_bins], probabilities ndarray[n_bins]) or None when the
    values are not monotone along the grid or carry no probability.
    """
    values = np.asarray(values, dtype=float)
    prob = np.asarray(prob, dtype=float)
    ok = np.isfinite(values) & (prob > 0)
    if ok.sum() < 2:
        return None
    first, last = np.flatnonzero(ok)[[0, -1]]
    v, p = values[first:last + 1], np.where(ok[first:last + 1], prob[first:last + 1], 0.0)
    if not np.all(np.isfinite(v)):
        return None
    step = np.diff(v)
    if np.all(step < 0):
        v, p = v[::-1], p[::-1]
    elif not np.all(step > 0):
        return None
    left, right = cell_edges(v)
    edges = np.concatenate([left[:1], right])
    cdf = np.concatenate([[0.0], np.cumsum(p)]) / p.sum()
    lo, hi = np.interp([tail, 1.0 - tail], cdf, edges)
    if not hi > lo:
        return None
    bins = np.linspace(lo, hi, n_bins + 1)
    return 0.5 * (bins[1:] + bins[:-1]), np.diff(np.interp(bins, edges, cdf))


def median_between(values, prob, lower: float, upper: float, half_width: float) -> float:
    """Median of the part of a gridded posterior with ``lower <= value <= upper``."""
    from .summary_stats import weighted_quantiles

    values = np.asarray(values, dtype=float)
    inside = (values >= lower) & (values <= upper)
    if not np.any(inside & (np.asarray(prob) > 0)):
        return math.nan
    return float(weighted_quantiles(values[inside], np.asarray(prob, float)[inside], (0.5,), half_width)[0])
