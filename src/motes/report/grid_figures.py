"""Figures of a grid summary: chi-square profiles per material and axis, best models vs data.

Functions take a :class:`motes.dust.grid.summary.GridSummary` and a file path,
draw with matplotlib's object-oriented API (no pyplot, so the user's plotting
backend is never touched), write the figure (temporary name, then rename) and
return the path. :func:`write_grid_figures` writes all of them.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .figure_files import figure_paths, save_figure
from .figure_style import (DATA_COLOUR, SERIES_COLOURS, TRUTH_COLOUR, colour_map, figure_band_name, house_style,
                           new_figure, series_style)
from .label_placement import marker_boxes, place_labels

__all__ = ["plot_fraction_profiles", "plot_axis_profiles", "plot_best_models", "write_grid_figures"]

_AXIS_LABELS = {"porosity": "porosity (vacuum fraction)", "a_min": "a_min [µm]", "q": "size slope q",
                "a_max": "a_max [µm]", "f_max": "f_max (hollow spheres)"}


#: top of the linear Delta chi2 axis of the profiles; larger values are drawn as triangles at the top edge
_DELTA_CHI2_TOP = 25.0
#: the physical range of each axis (bars and ticks stay inside it)
_DOMAINS = {"fraction": (0.0, 1.0), "porosity": (0.0, 1.0), "f_max": (0.0, 1.0)}


def _plain_log_axis(ax, lo=None, hi=None):
    """Log x axis with plain-number ticks at 1-2-5 (1-1.5-2-3-5-7 over less than a decade)."""
    from matplotlib.ticker import FuncFormatter, LogLocator

    ax.set_xscale("log")
    narrow = lo is not None and hi is not None and hi / lo < 8.0
    subs = (1.0, 1.5, 2.0, 3.0, 5.0, 7.0) if narrow else (1.0, 2.0, 5.0)
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=subs))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _pos: ""))


def _profile_panels(columns, title, summary, truth_values=None):
    """Figure with two rows per column: Delta chi2 profile (top), likelihood share (bottom).

    One linear Delta chi2 axis for every panel, from 0 to the largest value
    or :data:`_DELTA_CHI2_TOP`, whichever is smaller; points above it are
    triangles on the top edge. Shares are stems (a line and a dot at each grid
    value): the same width everywhere and nothing drawn outside the physical
    range (fractions and porosity in [0, 1]). Round ticks; log axes for a_min
    and a_max, whose grids are log-spaced.
    """
    from matplotlib.ticker import MaxNLocator

    n = len(columns)
    fig = new_figure(2 if n > 1 else 1, height=3.6)
    axes = fig.subplots(2, n, squeeze=False, sharey="row", gridspec_kw={"height_ratios": [3, 2]})
    top_value = max(float(np.nanmax(c[2])) for c in columns)
    y_top = min(max(top_value * 1.1, 5.0), _DELTA_CHI2_TOP)
    truth_values = truth_values or [None] * n
    has_truth = off_axis = False
    for i, ((label, x, delta, share, log_x, domain), truth) in enumerate(zip(columns, truth_values)):
        top, bottom = axes[0, i], axes[1, i]
        x, delta, share = (np.asarray(v, dtype=float) for v in (x, delta, share))
        top.plot(x, np.minimum(delta, y_top), "-", color=SERIES_COLOURS[0], lw=1.1)
        inside = delta <= y_top
        top.plot(x[inside], delta[inside], "o", color=SERIES_COLOURS[0], ms=3.5)
        if np.any(~inside):
            top.plot(x[~inside], np.full((~inside).sum(), y_top), "^", color=SERIES_COLOURS[0], ms=4, mfc="white",
                     clip_on=False)
        for level, style in ((1.0, ":"), (4.0, "--")):
            top.axhline(level, color="0.45", ls=style, lw=0.8)
        bottom.vlines(x, 0.0, share, color=SERIES_COLOURS[1], lw=2.0)
        bottom.plot(x, share, "o", color=SERIES_COLOURS[1], ms=3)
        top.set_title(label)
        if log_x:
            for ax in (top, bottom):
                _plain_log_axis(ax, x.min() / 1.25, x.max() * 1.25)
                ax.set_xlim(x.min() / 1.25, x.max() * 1.25)
        else:
            lo, hi = (x.min(), x.max()) if domain is None else domain
            pad = 0.04 * (hi - lo if hi > lo else 1.0)
            for ax in (top, bottom):
                ax.set_xlim(lo - pad, hi + pad)
                ax.xaxis.set_major_locator(MaxNLocator(5, steps=[1, 2, 2.5, 5, 10]))
                ax.spines["bottom"].set_bounds(lo, hi)
                ax.spines["top"].set_bounds(lo, hi)
        if truth is not None and np.isfinite(truth):
            for ax in (top, bottom):
                ax.axvline(truth, color=TRUTH_COLOUR, lw=1.0, ls=(0, (1, 1)))
            has_truth = True
        top.tick_params(labelbottom=False)
        bottom.set_xlabel(label)
        off_axis = off_axis or bool(np.any(~inside))
    axes[0, 0].set_ylabel("best Δχ² (profile)")
    axes[1, 0].set_ylabel("share of exp(−Δχ²/2)")
    axes[0, 0].set_ylim(-0.03 * y_top, y_top)
    axes[0, 0].yaxis.set_major_locator(MaxNLocator(6, steps=[1, 2, 5, 10]))
    axes[1, 0].set_ylim(0, 1.08)
    key = ["dotted Δχ² = 1, dashed Δχ² = 4"]
    if off_axis:
        key.append(f"open triangles: Δχ² > {y_top:g}, off the axis")
    if has_truth:
        key.append("orange dotted line: invented truth")
    fig.suptitle(f"{title}: χ²_min = {summary.chi2_min:.2f} for {summary.dof} dof\n({'; '.join(key)})")
    fig.tight_layout()
    return fig


def _truth_of(truth, key):
    if not truth:
        return None
    if key in (truth.get("fractions") or {}):
        return float(truth["fractions"][key])
    value = truth.get(key)
    return None if value is None else float(value)


@house_style
def plot_fraction_profiles(summary, path, formats=None, truth=None) -> Path:
    """Best Delta chi2 and likelihood share against each material's fraction.

    Parameters
    ----------
    summary : GridSummary
    path : str or os.PathLike
        Output file (see :func:`motes.report.save_figure`).
    formats : sequence of str, optional
        ``("png", "pdf")`` and so on; default the suffix of ``path``.
    truth : dict, optional
        Invented truth (demo): ``{"fractions": {material: f}, "porosity": ..., "a_min": ...}``,
        drawn as dotted lines.

    Returns
    -------
    pathlib.Path
    """
    prof = summary.fraction_profiles
    cols, truths = [], []
    for name in summary.materials:
        rows = prof[prof["material"] == name]
        cols.append((f"{name} fraction", np.asarray(rows["fraction"]), np.asarray(rows["delta_chi2"]),
                     np.asarray(rows["share"]), False, _DOMAINS["fraction"]))
        truths.append(_truth_of(truth, name))
    return save_figure(_profile_panels(cols, "Materials", summary, truths), path, formats=formats)


@house_style
def plot_axis_profiles(summary, path, formats=None, truth=None) -> Path | None:
    """Best Delta chi2 and likelihood share against porosity, a_min, q, a_max (and f_max, hollow spheres).

    Axes with a single value are left out; returns None when none has more.
    """
    prof = summary.axis_profiles
    cols, truths = [], []
    for name in ("porosity", "a_min", "q", "a_max", "f_max"):
        rows = prof[prof["axis"] == name]
        if len(rows) < 2:
            continue
        cols.append((_AXIS_LABELS[name], np.asarray(rows["value"]), np.asarray(rows["delta_chi2"]),
                     np.asarray(rows["share"]), name in ("a_min", "a_max"), _DOMAINS.get(name)))
        truths.append(_truth_of(truth, name))
    if not cols:
        return None
    return save_figure(_profile_panels(cols, "Porosity and sizes", summary, truths), path, formats=formats)


@house_style
def plot_best_models(summary, path, n_models: int = 5, formats=None, truth=None) -> Path:
    """The data against the scaled band values of the best grid points.

    Wavelength on a log axis (as in the fit's colour figure), band names
    beside the data, each model's band values as markers (not joined: they
    are band averages, not a spectrum), the mixture, porosity and a_min of
    each in the legend. ``truth`` (demo): the invented mixture, written under
    the legend.

    Parameters
    ----------
    summary : GridSummary
    path : str or os.PathLike
    n_models : int
        How many of the best points to draw.
    formats : sequence of str, optional
    truth : dict, optional
    """
    obs = summary.observations
    wave = np.asarray(obs["pivot_wavelength_um"], dtype=float)
    value, error = np.asarray(obs["value"], dtype=float), np.asarray(obs["error"], dtype=float)
    limit = np.asarray(obs["is_limit"], dtype=bool)
    fig = new_figure(2, height=3.4)
    ax = fig.subplots()
    det = ~limit
    best = summary.best
    shown = min(n_models, len(best))
    cmap = colour_map()
    for i in range(shown):
        row = best[i]
        model = np.array([row[f"model_{b}"] for b in summary.bands]) * row["scale"]
        mix = ", ".join(f"{m} {row['f_' + m]:.2f}" for m in summary.materials if row["f_" + m] > 0)
        label = (f"#{i + 1} Δχ² = {row['delta_chi2']:.2f}: {mix}; porosity {row['porosity']:.2f}, "
                 f"a_min {row['a_min']:.3g} µm")
        shift = 1.0 + 0.01 * (i - 0.5 * (shown - 1))
        ax.plot(wave * shift, model, ls="none", marker=series_style(i)["marker"], ms=4, mfc="white",
                mec=cmap(0.75 * i / max(shown - 1, 1)), mew=1.0, label=label, zorder=4 - i * 0.1)
    ax.errorbar(wave[det], value[det], yerr=error[det], fmt="o", color=DATA_COLOUR, ms=4, capsize=0,
                elinewidth=0.9, label="disk data (1σ)", zorder=5)
    if np.any(limit):
        ax.errorbar(wave[limit], value[limit], yerr=0.3 * value[limit], uplims=True, fmt="v", mfc="white",
                    color=DATA_COLOUR, ms=5, zorder=5, label="upper limits")
    ax.set_xlabel("pivot wavelength [µm]")
    ax.set_ylabel("disk / star" + (" [arcsec⁻²]" if obs.get("normalisation") == "surface brightness" else ""))
    ax.set_yscale("log")
    _plain_log_axis(ax, wave.min() / 1.15, wave.max() * 1.15)
    ax.set_xlim(wave.min() / 1.15, wave.max() * 1.15)
    ylo, yhi = ax.get_ylim()
    ax.set_ylim(ylo / 1.2, yhi * 1.2)
    legend = ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=6)
    if truth:
        fr = truth.get("fractions") or {}
        text = ", ".join(f"{m} {v:.2f}" for m, v in fr.items())
        extra = "; ".join(f"{k} {truth[k]:g}" + (" µm" if k.startswith("a_") else "")
                          for k in ("porosity", "a_min", "q") if k in truth)
        legend.set_title(f"invented truth: {text}\n{extra}", prop={"size": 6})
        legend._legend_box.align = "left"
    ax.set_title("Best grid mixtures (Mie spheres) against the data")
    fig.subplots_adjust(left=0.09, right=0.55, top=0.9, bottom=0.14)
    obstacles = marker_boxes(ax, list(ax.lines) + list(ax.collections))
    place_labels(ax, list(zip(wave, value)), [figure_band_name(b) for b in summary.bands], obstacles=obstacles, fontsize=6)
    return save_figure(fig, path, formats=formats)


def write_grid_figures(summary, folder, formats=None, truth=None) -> list[Path]:
    """Write every grid figure into ``folder`` (each in every one of ``formats``, default PNG);
    return the paths written. ``truth`` (demo): the invented truth, drawn on each figure."""
    folder = Path(folder)
    out = []
    for name, plot in (("grid_fraction_profiles.png", plot_fraction_profiles),
                       ("grid_axis_profiles.png", plot_axis_profiles),
                       ("grid_best_models.png", plot_best_models)):
        if plot(summary, folder / name, formats=formats, truth=truth) is not None:
            out += figure_paths(folder / name, formats)
    return out
