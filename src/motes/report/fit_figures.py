"""Figures of a disk-colour fit: data vs posterior models, a corner plot, evidences.

Only formatting: every number plotted comes from a
:class:`motes.dust.fit.results.FitResult` (its per-model colour tables,
posterior samples and ranking). Drawn with matplotlib's object-oriented API
(no pyplot), so the user's plotting backend is never touched.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..files import atomic_write

__all__ = ["write_fit_figures", "plot_colours", "plot_corner", "plot_evidence"]

_COLOURS = ("#1b6ca8", "#c0392b", "#2e8b57", "#8e44ad")
_N_MODELS_SHOWN = 3


def plot_colours(result, path: Path, n_models: int = _N_MODELS_SHOWN) -> Path:
    """Data and posterior model ratios (median, 68% band) of the best models vs wavelength."""
    from matplotlib.figure import Figure

    obs = result.observations
    lam = obs.wavelength
    order = np.argsort(lam)
    fig = Figure(figsize=(7.0, 4.6))
    ax = fig.subplots()
    for i, m in enumerate(result.models[:n_models]):
        c = m.colours
        col = _COLOURS[i % len(_COLOURS)]
        med = np.asarray(c["model_median"])[order]
        ax.fill_between(lam[order], np.asarray(c["model_lo68"])[order], np.asarray(c["model_hi68"])[order],
                        color=col, alpha=0.2, lw=0)
        ax.plot(lam[order], med, "-", color=col, lw=1.6,
                label=f"{m.name} (ln Z {m.ln_z:.1f}; median, 68%)")
    det = ~obs.is_limit
    ax.errorbar(lam[det], obs.value[det], yerr=obs.error[det], fmt="o", color="k", ms=5, capsize=2,
                label="data", zorder=5)
    if np.any(~det):
        ax.errorbar(lam[~det], obs.value[~det], yerr=0.3 * obs.value[~det], uplims=True, fmt="v",
                    color="k", ms=5, zorder=5, label="upper limits")
    for b, x, y in zip(obs.bands, lam, obs.value):
        ax.annotate(b.name, (x, y), textcoords="offset points", xytext=(0, 8), ha="center", fontsize=7,
                    color="0.35")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("pivot wavelength [µm]")
    ax.set_ylabel("disk / star" + (" [arcsec$^{-2}$]" if obs.normalisation == "surface brightness" else ""))
    ax.set_title("Disk colours: data and posterior models (Mie spheres)", fontsize=10)
    ax.legend(fontsize=7, loc="best")
    fig.tight_layout()
    with atomic_write(path) as tmp:
        fig.savefig(tmp, dpi=130)
    return Path(path)


def plot_corner(model, path: Path, max_points: int = 3000) -> Path:
    """Pairwise posterior of one model: histograms on the diagonal, 2-D densities below."""
    from matplotlib.figure import Figure

    names = list(model.sample_names)
    x = np.array(model.samples, dtype=float)
    if "scale" in names:                      # the scale spans decades: plot its log
        j = names.index("scale")
        x[:, j] = np.log10(x[:, j])
        names[j] = "log10 scale"
    if "a_min" in names:
        j = names.index("a_min")
        x[:, j] = np.log10(x[:, j])
        names[j] = "log10 a_min [µm]"
    p = len(names)
    best = []
    for n in model.sample_names:
        v = model.best.get(n, np.nan)
        best.append(np.log10(v) if n in ("scale", "a_min") and v > 0 else v)
    size = max(1.6 * p, 4.0)
    fig = Figure(figsize=(size, size))
    axes = fig.subplots(p, p, squeeze=False)
    lo = np.percentile(x, 0.5, axis=0)
    hi = np.percentile(x, 99.5, axis=0)
    span = np.where(hi > lo, hi - lo, 1.0)
    lo, hi = lo - 0.05 * span, hi + 0.05 * span
    for i in range(p):
        for j in range(p):
            ax = axes[i, j]
            if j > i:
                ax.axis("off")
                continue
            if i == j:
                ax.hist(x[:, i], bins=30, range=(lo[i], hi[i]), color=_COLOURS[0], histtype="stepfilled", alpha=0.6)
                for q in np.percentile(x[:, i], [16, 50, 84]):
                    ax.axvline(q, color="k", lw=0.8, ls="--" if q != np.median(x[:, i]) else "-")
                ax.set_yticks([])
            else:
                h, xe, ye = np.histogram2d(x[:, j], x[:, i], bins=25, range=[[lo[j], hi[j]], [lo[i], hi[i]]])
                ax.imshow(h.T, origin="lower", extent=(xe[0], xe[-1], ye[0], ye[-1]), aspect="auto",
                          cmap="Blues")
                if np.isfinite(best[j]) and np.isfinite(best[i]):
                    ax.plot(best[j], best[i], "x", color="#c0392b", ms=6)
                ax.set_ylim(lo[i], hi[i])
            ax.set_xlim(lo[j], hi[j])
            ax.tick_params(labelsize=6)
            if i == p - 1:
                ax.set_xlabel(names[j], fontsize=7)
            else:
                ax.set_xticklabels([])
            if j == 0 and i > 0:
                ax.set_ylabel(names[i], fontsize=7)
            elif j > 0:
                ax.set_yticklabels([])
    fig.suptitle(f"Posterior of {model.name} (dashes: 16/84%; x: maximum likelihood)", fontsize=9)
    fig.tight_layout()
    with atomic_write(path) as tmp:
        fig.savefig(tmp, dpi=110)
    return Path(path)


def plot_evidence(result, path: Path) -> Path:
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
    fig = Figure(figsize=(6.8, 0.45 * len(names) + 1.7))
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
    with atomic_write(path) as tmp:
        fig.savefig(tmp, dpi=130)
    return Path(path)


def write_fit_figures(result, folder: Path) -> tuple[Path, ...]:
    """Write the colour, corner and evidence figures of a fit into ``folder``; return the paths."""
    folder = Path(folder)
    files = [plot_colours(result, folder / "colours.png"),
             plot_corner(result.best, folder / f"corner_{result.best.folder.name if result.best.folder else 'best'}.png"),
             plot_evidence(result, folder / "evidence.png")]
    return tuple(files)
