"""Figures of a disk-colour fit: data vs posterior models, a corner plot, evidences.

Only formatting: every number plotted comes from a
:class:`motes.dust.fit.results.FitResult` (its per-model colour tables,
posterior samples and ranking). Drawn with matplotlib's object-oriented API
(no pyplot), so the user's plotting backend is never touched.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .figure_files import figure_paths, save_figure
from .figure_style import house_style, new_figure

__all__ = ["write_fit_figures", "plot_colours", "plot_corner", "plot_evidence", "plot_thermal_fit"]

_COLOURS = ("#1b6ca8", "#c0392b", "#2e8b57", "#8e44ad")
_N_MODELS_SHOWN = 3


@house_style
def plot_colours(result, path: Path, n_models: int = _N_MODELS_SHOWN, formats=None, curves=None,
                 truth_values=None) -> Path:
    """Data and the best models' band values (median, 68%) vs wavelength, with residuals.

    ``curves`` (from :func:`motes.dust.fit.curves.posterior_curves`) adds each
    model's monochromatic spectrum; ``truth_values`` (demo) the invented
    truth's band values. See :mod:`motes.report.colours_figure`.
    """
    from .colours_figure import draw_colours

    return save_figure(draw_colours(result, n_models, curves=curves, truth_values=truth_values), path,
                       formats=formats)


@house_style
def plot_corner(model, path: Path, max_points: int = 3000, formats=None, truth=None) -> Path:
    """Pairwise posterior of one model: histograms on the diagonal, smoothed 2-D densities with
    39%/86% contours below, nuisance parameters as small marginals (see
    :mod:`motes.report.corner_figure`). ``truth``: known values drawn as dotted lines (demo).
    ``max_points`` is kept for compatibility (every sample enters the histograms)."""
    from .corner_figure import draw_corner

    return save_figure(draw_corner(model, truth=truth), path, formats=formats)


@house_style
def plot_evidence(result, path: Path, formats=None) -> Path:
    """ln Z - ln Z(best) per model, with 1-sigma errors and the Kass & Raftery reading breaks.

    A linear axis from -12 to +2 keeps the breaks at ln B = -1, -3, -5 (Kass &
    Raftery 1995) apart; a model far below (beyond the axis) is drawn at the
    edge as an arrow with its value written beside it. Every model, the best
    one included (at 0), is a point with its error bar.
    """
    from matplotlib.figure import Figure

    names = [m.name for m in result.models]
    d = np.array([m.ln_z - result.best.ln_z for m in result.models])
    err = np.array([m.ln_z_err for m in result.models])
    fig = new_figure(2, height=0.4 * len(names) + 1.5)
    ax = fig.subplots()
    y = np.arange(len(names))[::-1]
    left, right = -12.0, 1.5
    for edge in (1, 3, 5):
        ax.axvline(-edge, color="0.45", lw=0.8, ls=(0, (4, 3)))
    # the strength of the evidence against a model in each interval (Kass & Raftery 1995)
    for x0, x1, label in ((-1, 0.0, "hardly\nany"), (-3, -1, "modest"), (-5, -3, "firm"), (left, -5, "overwhelming")):
        ax.text(0.5 * (x0 + x1), len(names) - 0.4, label, ha="center", va="bottom", fontsize=7, color="0.35")
    inside = d - err > left
    best = d == 0
    ax.errorbar(d[inside & ~best], y[inside & ~best], xerr=err[inside & ~best], fmt="o", color="0.25",
                ms=5, capsize=3, lw=1.2)
    ax.errorbar(d[best], y[best], xerr=err[best], fmt="D", color=_COLOURS[0], ms=6, capsize=3, lw=1.2,
                label="best model (ln Z reference)")
    for yi, v, e, ok in zip(y, d, err, inside):
        if ok:
            ax.text(1.01, yi, f"{v:+.1f} ± {e:.1f}", va="center", ha="left", fontsize=7,
                    transform=ax.get_yaxis_transform())
        else:
            ax.annotate("", xy=(left + 0.05, yi), xytext=(left + 1.6, yi),
                        arrowprops=dict(arrowstyle="->", color="0.25", lw=1.2))
            ax.text(left + 1.8, yi, f"{v:+.1f} ± {e:.1f} (off the axis)", va="center", fontsize=7)
    ax.set_yticks(y)
    ax.set_yticklabels(names, fontsize=8)
    ax.set_ylim(-0.7, len(names) + 0.2)
    ax.set_xlim(left, right)
    ax.set_xlabel("ln B = ln Z - ln Z(best)   (dashed: -1, -3, -5; Kass & Raftery 1995 breaks)")
    ax.set_title("Evidence per model, relative to the best", fontsize=10)
    ax.legend(loc="lower left", fontsize=7, frameon=False)
    fig.tight_layout()
    return save_figure(fig, path, formats=formats)


@house_style
def plot_thermal_fit(model, path: Path, formats=None) -> Path:
    """Thermal SED of a joint fit's model: the data (limits as arrows), the posterior model
    fluxes per band (median, 68% and 95% ranges), the best fit and the stellar photosphere.

    Parameters
    ----------
    model : ModelResult
        With ``thermal_fluxes`` (``thermal.ecsv`` of a joint fit).
    path : path-like

    Returns
    -------
    Path
    """
    from matplotlib.ticker import FuncFormatter

    from .figure_style import SERIES_COLOURS, figure_band_name

    t = model.thermal_fluxes
    if t is None or len(t) == 0:
        raise ValueError(f"model {model.name!r} has no thermal fluxes (not a joint fit)")
    order = np.argsort(np.asarray(t["pivot_wavelength"], dtype=float))
    lam = np.asarray(t["pivot_wavelength"], dtype=float)[order]
    mjy = 1000.0
    col = {n: np.asarray(t[n], dtype=float)[order] * mjy for n in
           ("value", "error", "star_flux", "model_median", "model_lo68", "model_hi68", "model_lo95",
            "model_hi95", "model_best")}
    limit = np.asarray(t["is_limit"], dtype=bool)[order]
    fig = new_figure(1, height=4.0)
    ax = fig.subplots()
    # band values are points, not a spectrum: the model beside the data (x 1.05), 68% and 95% bars
    xm = lam * 1.05
    med = col["model_median"]
    ax.errorbar(xm, med, yerr=[med - col["model_lo95"], col["model_hi95"] - med], fmt="none",
                ecolor=SERIES_COLOURS[0], elinewidth=0.7, capsize=0, alpha=0.6)
    ax.errorbar(xm, med, yerr=[med - col["model_lo68"], col["model_hi68"] - med], fmt="s", ms=3.5,
                mfc="white", color=SERIES_COLOURS[0], elinewidth=1.4, capsize=0,
                label="model: median, 68% (thick) and 95% (thin)")
    ax.plot(xm, col["model_best"], lw=0, marker="x", ms=4.5, color=SERIES_COLOURS[0], label="model: best fit")
    ax.plot(lam, col["star_flux"], lw=0, marker="_", ms=9, mew=1.2, color="0.35", label="stellar photosphere")
    det = ~limit
    ax.errorbar(lam[det], col["value"][det], yerr=col["error"][det], fmt="o", ms=4, color=SERIES_COLOURS[3],
                capsize=2, label="data (excess over the photosphere)", zorder=5)
    if limit.any():
        up = col["value"][limit]
        ax.errorbar(lam[limit], up, yerr=0.35 * up, uplims=True, fmt="v", ms=4, color=SERIES_COLOURS[3],
                    zorder=5, label="upper limit")
    ax.set_xscale("log")
    ax.set_yscale("log")
    from matplotlib.ticker import NullFormatter

    from matplotlib.ticker import LogLocator

    plain = FuncFormatter(lambda v, _pos: f"{v:g}")
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))    # 10, 20, 50, 100, ...: labelled
    ax.xaxis.set_major_formatter(plain)
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("wavelength [µm]")
    ax.set_ylabel("flux density [mJy]")
    top = ax.secondary_xaxis("top")
    top.set_xticks(lam, [figure_band_name(str(n)) for n in np.asarray(t["band"])[order]], rotation=60,
                   ha="left", fontsize=5)
    top.xaxis.set_minor_formatter(NullFormatter())
    top.tick_params(which="minor", length=0)
    ax.set_title(f"thermal SED: {model.name}", fontsize=8, loc="left")
    ax.legend(fontsize=6, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=2, frameon=False)
    fig.tight_layout()
    return save_figure(fig, path, formats=formats)


def write_fit_figures(result, folder: Path, formats=None, curves=None, truth=None) -> tuple[Path, ...]:
    """Write the colour, corner and evidence figures of a fit into ``folder``; return the paths.

    Parameters
    ----------
    result : FitResult
    folder : path-like
    formats : sequence of str, optional
        Each figure in each format (default PNG), see :func:`motes.report.save_figure`.
    curves : dict of str to ModelCurve, optional
        Monochromatic model curves for the colour figure.
    truth : dict, optional
        Invented truth (demo) drawn on the corner figure.
    """
    folder = Path(folder)
    corner = folder / f"corner_{result.best.folder.name if result.best.folder else 'best'}.png"
    plot_colours(result, folder / "colours.png", formats=formats, curves=curves)
    plot_corner(result.best, corner, formats=formats, truth=truth)
    plot_evidence(result, folder / "evidence.png", formats=formats)
    written = [folder / "colours.png", corner, folder / "evidence.png"]
    if getattr(result.best, "thermal_fluxes", None) is not None and len(result.best.thermal_fluxes):
        written.append(plot_thermal_fit(result.best, folder / "thermal_sed.png", formats=formats))
    files = []
    for p in written:
        files += figure_paths(p, formats)
    return tuple(files)
