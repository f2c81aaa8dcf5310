"""Drawing the corner figure of one fitted model (used by :func:`plot_corner`).

Which panels: every sampled physical parameter, with ``a_min`` on a log axis
(it is sampled log-uniformly); of the volume fractions of a two-material
model only the first (the second is one minus it, so their panel would be a
straight line); the nuisance parameters (the flux ``scale``, a sampled
``systematic`` term) get no row or column but small marginal panels in the
empty upper-right corner.

How: 1-D marginals as histograms with the median and 16/84% quantiles;
2-D marginals as histograms smoothed by a Gaussian of one bin
(:func:`scipy.ndimage.gaussian_filter`) and contoured at the levels that
enclose 39.3% and 86.5% of the samples, the 1 and 2 sigma regions of a 2-D
Gaussian (stated on the figure); the maximum-likelihood point as a cross and,
when given, an invented truth as lines and a star.
"""

from __future__ import annotations

import textwrap

import numpy as np

from .figure_style import DATA_COLOUR, SERIES_COLOURS, TRUTH_COLOUR, colour_map, new_figure

__all__ = ["draw_corner", "credible_levels", "CORNER_LEVELS"]

#: probability enclosed by the 2-D contours: the 1- and 2-sigma regions of a 2-D Gaussian, 1 - exp(-k^2/2)
CORNER_LEVELS = (1.0 - np.exp(-0.5), 1.0 - np.exp(-2.0))
_NUISANCE = ("scale", "systematic", "thermal_scale")
_TITLE_PT, _SUMMARY_PT, _INSET_PT = 6.5, 6.5, 6.0      # font sizes [pt] of the title, the diagonal summaries, insets
_LOG_AXES = {"a_min": "log10 a_min [µm]", "a_max": "log10 a_max [µm]",
             "thermal_scale": "log10 thermal scale [au²]"}
_LABELS = {"porosity": "porosity", "q": "size slope q", "angle": "angle [deg]", "ring_radius": "ring radius [au]",
           "f_max": "f_max (largest core fraction)"}


def credible_levels(density, levels=CORNER_LEVELS) -> np.ndarray:
    """Density thresholds enclosing the fractions ``levels`` of the total, highest density first.

    Parameters
    ----------
    density : ndarray
        Non-negative (smoothed) histogram.
    levels : sequence of float in (0, 1)

    Returns
    -------
    ndarray[len(levels)]
        Increasing thresholds (the outermost level first), as contouring needs.
    """
    flat = np.sort(np.asarray(density, dtype=float).ravel())[::-1]
    cum = np.cumsum(flat)
    cum /= cum[-1]
    out = [flat[min(np.searchsorted(cum, lev), flat.size - 1)] for lev in levels]
    return np.sort(np.array(out))


def _columns(model):
    """(label, samples, best, truth key) of each panel and of each nuisance parameter."""
    names = list(model.sample_names)
    x = np.asarray(model.samples, dtype=float)
    fractions = [n for n in names if n.startswith("fraction_")]
    drop = {fractions[-1]} if len(fractions) == 2 else set()
    main, nuisance = [], []
    for j, n in enumerate(names):
        if n in drop:
            continue
        v = x[:, j]
        best = model.best.get(n, np.nan)
        label = _LABELS.get(n, n.replace("fraction_", "fraction ") if n.startswith("fraction_") else n)
        if n in _LOG_AXES or n == "scale":
            ok = v > 0
            v = np.where(ok, np.log10(np.where(ok, v, 1.0)), np.nan)
            best = np.log10(best) if best > 0 else np.nan
            label = _LOG_AXES.get(n, "log10 " + n)
        (nuisance if n in _NUISANCE else main).append((label, v, best, n))
    return main, nuisance


def _truth_value(truth, key):
    if not truth:
        return np.nan
    if key.startswith("fraction_"):
        value = truth.get("fractions", {}).get(key[len("fraction_"):], truth.get(key, np.nan))
    else:
        value = truth.get(key, np.nan)
    value = float(value) if value is not None else np.nan
    if key in _LOG_AXES or key == "scale":
        value = np.log10(value) if value > 0 else np.nan
    return value


def _inner_ticks(lo: float, hi: float, low_margin: float, high_margin: float, n: int = 3) -> np.ndarray:
    """At most ``n + 1`` round tick values kept the given fractions of the span away from the axis ends.

    Rotated tick labels reach left of their tick, so an edge tick's label would run into the
    neighbouring panel's labels; ticks are therefore kept off the ends (at least two stay).
    """
    from matplotlib.ticker import MaxNLocator

    a, b = lo + low_margin * (hi - lo), hi - high_margin * (hi - lo)
    for bins in (n, n + 1, n + 3):
        ticks = MaxNLocator(bins).tick_values(a, b)
        ticks = ticks[(ticks >= a - 1e-12 * abs(b - a)) & (ticks <= b + 1e-12 * abs(b - a))]
        if ticks.size >= 2:
            return ticks
    return np.array([a, b])


def draw_corner(model, truth=None, bins: int | None = None):
    """Draw the corner figure of ``model`` (a :class:`~motes.dust.fit.results.ModelResult`).

    ``truth``: known values (the demo's invented truth), ``{"fractions":
    {material: f}, "porosity": ..., "a_min": ...}``; absent keys are not drawn.
    Returns the :class:`matplotlib.figure.Figure`.
    """
    from matplotlib.ticker import FixedLocator
    from scipy.ndimage import gaussian_filter

    main, nuisance = _columns(model)
    p = len(main)
    if bins is None:      # about sqrt(N)/1.5 bins: few samples, coarse bins (common practice, no source)
        bins = int(np.clip(np.sqrt(np.asarray(model.samples).shape[0]) / 1.5, 10, 30))
    title = (f"Posterior of {model.name}: contours enclose 39% and 86% (2-D 1σ, 2σ); "
             f"dashes 16/84%, × maximum likelihood")
    if truth:
        title += "; dotted: invented truth"
    fig = new_figure(2 if p > 3 else 1, aspect=1.0)
    width = fig.get_figwidth()
    # the title wrapped to the figure width (about 0.5 em a character), so it neither overlaps the
    # panels nor widens the saved (tight) figure
    title = "\n".join(textwrap.wrap(title, int(width * 72 / (0.5 * _TITLE_PT)) - 4))
    lines = title.count("\n") + 1
    # margins and gaps in inch: room for the title, the summaries above the diagonal panels
    # and the rotated tick labels; the grid stays square
    left, right, bottom, gap_x, gap_y = 0.5, 0.08, 0.55, 0.06, 0.17
    top = lines * _TITLE_PT * 1.25 / 72 + 0.06 + (_SUMMARY_PT + 4) / 72 + 0.04
    grid = width - left - right
    height = grid + bottom + top
    fig.set_size_inches(width, height)
    cell = (grid - (p - 1) * gap_x) / p
    axes = fig.subplots(p, p, squeeze=False)
    fig.subplots_adjust(left=left / width, right=1 - right / width, bottom=bottom / height, top=1 - top / height,
                        wspace=gap_x / cell, hspace=gap_y / ((grid - (p - 1) * gap_y) / p))
    data = [c[1] for c in main]
    lo = [np.nanpercentile(v, 0.5) for v in data]
    hi = [np.nanpercentile(v, 99.5) for v in data]
    span = [h - l if h > l else 1.0 for l, h in zip(lo, hi)]
    lo = [l - 0.05 * s for l, s in zip(lo, span)]
    hi = [h + 0.05 * s for h, s in zip(hi, span)]
    cmap = colour_map()
    fill = [(*cmap(0.3)[:3], 0.22), (*cmap(0.3)[:3], 0.55)]     # outer region lighter, inner darker
    for i in range(p):
        for j in range(p):
            ax = axes[i, j]
            if j > i:
                ax.axis("off")
                continue
            xi, xj = data[i], data[j]
            tj = _truth_value(truth, main[j][3])
            if i == j:
                ok = np.isfinite(xi)
                ax.hist(xi[ok], bins=bins, range=(lo[i], hi[i]), color=SERIES_COLOURS[0], histtype="step", lw=1.0)
                q16, q50, q84 = np.percentile(xi[ok], [16, 50, 84])
                for q, ls in ((q16, "--"), (q50, "-"), (q84, "--")):
                    ax.axvline(q, color=DATA_COLOUR, lw=0.7, ls=ls)
                ax.set_title(f"{q50:.3g} (+{q84 - q50:.2g} / −{q50 - q16:.2g})", fontsize=_SUMMARY_PT, pad=2)
                ax.set_yticks([])
                if np.isfinite(tj):
                    ax.axvline(tj, color=TRUTH_COLOUR, lw=1.0, ls=":")
            else:
                ok = np.isfinite(xi) & np.isfinite(xj)
                h, xe, ye = np.histogram2d(xj[ok], xi[ok], bins=bins, range=[[lo[j], hi[j]], [lo[i], hi[i]]])
                h = gaussian_filter(h, 1.2)
                xc, yc = 0.5 * (xe[1:] + xe[:-1]), 0.5 * (ye[1:] + ye[:-1])
                levels = credible_levels(h)
                if h.max() > 0 and np.all(np.diff(levels) > 0):
                    ax.contourf(xc, yc, h.T, levels=[levels[0], levels[1], h.max() * 1.01], colors=fill)
                    ax.contour(xc, yc, h.T, levels=levels, colors=[cmap(0.05)], linewidths=0.7)
                else:
                    ax.plot(xj[ok], xi[ok], ",", color=SERIES_COLOURS[0], alpha=0.3)
                if np.isfinite(main[j][2]) and np.isfinite(main[i][2]):
                    ax.plot(main[j][2], main[i][2], "x", color=DATA_COLOUR, ms=4, mew=0.9)
                ti = _truth_value(truth, main[i][3])
                if np.isfinite(tj):
                    ax.axvline(tj, color=TRUTH_COLOUR, lw=0.8, ls=":")
                if np.isfinite(ti):
                    ax.axhline(ti, color=TRUTH_COLOUR, lw=0.8, ls=":")
                if np.isfinite(ti) and np.isfinite(tj):
                    ax.plot(tj, ti, "*", color=TRUTH_COLOUR, ms=6)
                ax.set_ylim(lo[i], hi[i])
            ax.set_xlim(lo[j], hi[j])
            ax.xaxis.set_major_locator(FixedLocator(_inner_ticks(lo[j], hi[j], 0.18, 0.06)))
            if i != j:
                ax.yaxis.set_major_locator(FixedLocator(_inner_ticks(lo[i], hi[i], 0.08, 0.08)))
            ax.tick_params(labelsize=6.5, top=False, right=False)
            if i == p - 1:
                ax.set_xlabel(main[j][0], fontsize=7)
                for t in ax.get_xticklabels():
                    t.set_rotation(40)
                    t.set_horizontalalignment("right")
            else:
                ax.set_xticklabels([])
            if j == 0 and i > 0:
                ax.set_ylabel(main[i][0], fontsize=7)
            elif j > 0 or i == 0:
                ax.set_yticklabels([])
    # the nuisance parameters: small marginals in the empty upper-right triangle, no row of their own:
    # the block of empty cells rows 0..r-1, columns r..p-1, stacked top down, right-aligned, each with
    # room below for its tick labels and label; kept clear of the summary above panel (r-1, r-1),
    # which runs a little into column r
    if nuisance:
        r = max(1, p // 2)
        pos_tl, pos_br = axes[0, r].get_position(), axes[r - 1, p - 1].get_position()
        clear = (0.3 if r >= 2 else 0.05) / width
        x0, x1, y0, y1 = pos_tl.x0 + clear, pos_br.x1, pos_br.y0, pos_tl.y1
        slot = (y1 - y0) / len(nuisance)
        below = (_INSET_PT * 2 * 1.2 + 6) / 72 / height        # tick labels, label, pads [figure fraction]
        h = max(min(0.32 / height, slot - below - 0.05 / height), 0.12 / height)
        w = min(x1 - x0, 1.7 / width)
        for k, (label, v, best, _key) in enumerate(nuisance):
            inset = fig.add_axes([x1 - w, y1 - k * slot - h - 0.02 / height, w, h])
            ok = np.isfinite(v)
            inset.hist(v[ok], bins=bins, color="0.55", histtype="step", lw=0.9)
            inset.set_yticks([])
            inset.xaxis.set_major_locator(FixedLocator(_inner_ticks(*inset.get_xlim(), 0.1, 0.1)))
            inset.tick_params(labelsize=_INSET_PT, top=False, right=False)
            inset.set_xlabel(f"{label} (nuisance)", fontsize=_INSET_PT, labelpad=1)
    fig.suptitle(title, fontsize=_TITLE_PT, y=1 - 0.04 / height, va="top")
    return fig
