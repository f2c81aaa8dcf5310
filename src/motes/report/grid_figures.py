"""Figures of a grid summary: chi-square profiles per material and axis, best models vs data.

Functions take a :class:`motes.dust.grid.summary.GridSummary` and a file path,
draw with matplotlib's object-oriented API (no pyplot, so the user's plotting
backend is never touched), write the figure (temporary name, then rename) and
return the path. :func:`write_grid_figures` writes all of them.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib
from matplotlib.figure import Figure
from matplotlib.ticker import NullFormatter, ScalarFormatter
import numpy as np

from ..files import atomic_write

__all__ = ["plot_fraction_profiles", "plot_axis_profiles", "plot_best_models", "write_grid_figures"]

_AXIS_LABELS = {"porosity": "porosity (vacuum fraction)", "a_min": "a_min [µm]", "q": "size slope q",
                "a_max": "a_max [µm]"}
_PROFILE_COLOUR = "#1b6a8f"
_SHARE_COLOUR = "#d08c2f"


def _save(fig, path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_write(path) as tmp:
        fig.savefig(tmp, dpi=120)
    return path


def _profile_panels(columns, title, summary):
    """Figure with two rows per column: Delta chi2 profile (top), likelihood share (bottom)."""
    n = len(columns)
    fig = Figure(figsize=(3.0 * n + 1.0, 5.2))
    axes = fig.subplots(2, n, squeeze=False, sharey="row", gridspec_kw={"height_ratios": [3, 2]})
    for i, (label, x, delta, share, log_x) in enumerate(columns):
        top, bottom = axes[0, i], axes[1, i]
        top.plot(x, delta, "o-", color=_PROFILE_COLOUR, ms=4, lw=1.4)
        for level, style in ((1.0, ":"), (4.0, "--")):
            top.axhline(level, color="0.45", ls=style, lw=0.8)
        top.set_title(label, fontsize=10)
        width = np.diff(x).min() * 0.8 if len(x) > 1 else 0.1
        if log_x:
            for ax in (top, bottom):
                ax.set_xscale("log")
                ax.xaxis.set_major_formatter(ScalarFormatter())
                ax.xaxis.set_minor_formatter(NullFormatter())
                ax.set_xticks(x)
            bottom.plot(x, share, "s-", color=_SHARE_COLOUR, ms=4)
        else:
            bottom.bar(x, share, width=width, color=_SHARE_COLOUR, alpha=0.85)
        bottom.set_xlabel(label, fontsize=9)
        top.tick_params(labelsize=8)
        bottom.tick_params(labelsize=8)
    axes[0, 0].set_ylabel("best Δχ² (profile; linear below 10)")
    axes[1, 0].set_ylabel("share of exp(−Δχ²/2)")
    # linear where the fit is decided (Delta chi2 < 10), logarithmic above so large values stay visible
    axes[0, 0].set_yscale("symlog", linthresh=10.0, linscale=1.5)
    top_value = max(float(np.nanmax(c[2])) for c in columns)
    ticks = [t for t in (0, 1, 4, 10, 30, 100, 300, 1e3, 3e3, 1e4, 1e5, 1e6) if t <= max(top_value, 10)]
    axes[0, 0].set_yticks(ticks, [f"{t:g}" for t in ticks])
    axes[0, 0].set_ylim(-0.3, max(top_value, 10) * 1.3)
    fig.suptitle(f"{title} — χ²_min = {summary.chi2_min:.2f} for {summary.dof} dof "
                 f"(dotted Δχ² = 1, dashed Δχ² = 4)", fontsize=10)
    fig.tight_layout()
    return fig


def plot_fraction_profiles(summary, path) -> Path:
    """Best Delta chi2 and likelihood share against each material's fraction.

    Parameters
    ----------
    summary : GridSummary
    path : str or os.PathLike
        Output image (PNG or PDF by suffix).

    Returns
    -------
    pathlib.Path
    """
    prof = summary.fraction_profiles
    cols = []
    for name in summary.materials:
        rows = prof[prof["material"] == name]
        cols.append((f"{name} fraction", np.asarray(rows["fraction"]), np.asarray(rows["delta_chi2"]),
                     np.asarray(rows["share"]), False))
    return _save(_profile_panels(cols, "Materials", summary), path)


def plot_axis_profiles(summary, path) -> Path | None:
    """Best Delta chi2 and likelihood share against porosity, a_min, q and a_max.

    Axes with a single value are left out; returns None when none has more.
    """
    prof = summary.axis_profiles
    cols = []
    for name in ("porosity", "a_min", "q", "a_max"):
        rows = prof[prof["axis"] == name]
        if len(rows) < 2:
            continue
        cols.append((_AXIS_LABELS[name], np.asarray(rows["value"]), np.asarray(rows["delta_chi2"]),
                     np.asarray(rows["share"]), name in ("a_min", "a_max")))
    if not cols:
        return None
    return _save(_profile_panels(cols, "Porosity and sizes", summary), path)


def plot_best_models(summary, path, n_models: int = 5) -> Path:
    """The data against the scaled colours of the best grid points.

    Parameters
    ----------
    summary : GridSummary
    path : str or os.PathLike
    n_models : int
        How many of the best points to draw.
    """
    obs = summary.observations
    wave = np.asarray(obs["pivot_wavelength_um"])
    value, error = np.asarray(obs["value"]), np.asarray(obs["error"])
    limit = np.asarray(obs["is_limit"], dtype=bool)
    order = np.argsort(wave)
    fig = Figure(figsize=(6.4, 4.2))
    ax = fig.subplots()
    det = ~limit
    ax.errorbar(wave[det], value[det], yerr=error[det], fmt="o", color="k", ms=5, capsize=2,
                label="disk data", zorder=5)
    if np.any(limit):
        ax.errorbar(wave[limit], value[limit], yerr=0.3 * value[limit], uplims=True, fmt="v", color="k",
                    ms=5, zorder=5, label="upper limits")
    best = summary.best
    cmap = matplotlib.colormaps["viridis"]
    for i in range(min(n_models, len(best))):
        row = best[i]
        model = np.array([row[f"model_{b}"] for b in summary.bands]) * row["scale"]
        mix = ", ".join(f"{m} {row['f_' + m]:.2f}" for m in summary.materials if row["f_" + m] > 0)
        label = (f"#{i + 1} Δχ²={row['delta_chi2']:.2f}: {mix}; p={row['porosity']:.2f}, "
                 f"a_min={row['a_min']:.3g} µm")
        ax.plot(wave[order], model[order], "-", marker=".", lw=1.2, color=cmap(i / max(n_models, 2)),
                label=label, zorder=4 - i * 0.1)
    ax.set_xlabel("pivot wavelength [µm]")
    ax.set_ylabel("disk / star" + (" [arcsec⁻²]" if obs.get("normalisation") == "surface brightness" else ""))
    ax.set_yscale("log")
    ax.legend(fontsize=6.5, loc="best", frameon=False)
    ax.set_title("Best grid mixtures (Mie spheres) against the data", fontsize=10)
    fig.tight_layout()
    return _save(fig, path)


def write_grid_figures(summary, folder) -> list[Path]:
    """Write every grid figure into ``folder``; return the paths written."""
    folder = Path(folder)
    paths = [plot_fraction_profiles(summary, folder / "grid_fraction_profiles.png"),
             plot_axis_profiles(summary, folder / "grid_axis_profiles.png"),
             plot_best_models(summary, folder / "grid_best_models.png")]
    return [p for p in paths if p is not None]
