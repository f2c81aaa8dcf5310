"""The common-proper-motion figure: measured offsets and the background track.

Measured offsets (Δα*, Δδ) [mas] with their 1- and 2-sigma error ellipses, each epoch
labelled; the track a distant background object would follow from the first epoch,
with its 1-sigma band; where it would be at each later epoch (open markers and
dotted ellipses). East is to the left, as on the sky. Drawn with the object-oriented
API (no pyplot); readable in grey (markers and line styles differ, not only colours).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..companion.motion import MotionTest, background_track
from .figure_files import save_figure
from .figure_style import house_style

__all__ = ["plot_motion", "motion_figure_name"]


def motion_figure_name(name: str) -> str:
    """File name of the figure for a target called ``name``."""
    return "".join(c if c.isalnum() or c in "-_" else "_" for c in name.strip()) + "_motion.png"


def _ellipse_points(mean, cov, scale=1.0, n=90):
    vals, vecs = np.linalg.eigh(cov)
    t = np.linspace(0, 2 * np.pi, n)
    circle = np.stack([np.cos(t), np.sin(t)])
    return mean[:, None] + scale * vecs @ (np.sqrt(np.clip(vals, 0, None))[:, None] * circle)


def _zoom(ax, astro, track) -> None:
    """An inset on the measured ellipses when they are small against the track (a co-moving companion)."""
    pts = np.concatenate([_ellipse_points(astro.offset[i], astro.covariance[i], 2.0) for i in range(len(astro.mjd))],
                         axis=1)
    span = np.ptp(np.concatenate([pts, track.offset.T], axis=1), axis=1).max()
    size = np.ptp(pts, axis=1).max()
    if size > 0.15 * span:
        return
    inset = ax.inset_axes([0.04, 0.62, 0.34, 0.34])
    for i in range(len(astro.mjd)):
        for scale, lw in ((1.0, 1.2), (2.0, 0.6)):
            e = _ellipse_points(astro.offset[i], astro.covariance[i], scale)
            inset.plot(e[0], e[1], color="#1b4f72", lw=lw)
        inset.annotate(str(i + 1), astro.offset[i], xytext=(4, 4), textcoords="offset points", fontsize=7,
                       color="#1b4f72")
    inset.plot(astro.offset[:, 0], astro.offset[:, 1], ls="-", lw=0.6, color="#1b4f72", marker="o", ms=3)
    centre, half = pts.mean(axis=1), 0.6 * size
    inset.set_xlim(centre[0] + half, centre[0] - half)    # east to the left
    inset.set_ylim(centre[1] - half, centre[1] + half)
    inset.set_aspect("equal")
    inset.tick_params(labelsize=6)
    inset.set_title("measured, zoomed [mas]", fontsize=7)


@house_style
def plot_motion(result: MotionTest, path, title: str | None = None, formats=None) -> Path:
    """Draw the common-proper-motion figure of ``result`` into the PNG ``path``.

    Parameters
    ----------
    result : MotionTest
    path : str or Path
    title : str, optional
    formats : sequence of str, optional
        ``("png", "pdf")`` and so on; default the suffix of ``path``.

    Returns
    -------
    Path
    """
    from matplotlib.figure import Figure

    astro = result.astrometry
    track = background_track(astro, result.host, settings=result.settings)
    at_epochs = background_track(astro, result.host, astro.mjd, settings=result.settings)
    fig = Figure(figsize=(6.6, 6.0))
    ax = fig.subplots()
    # 1-sigma band of the track: the union of its ellipses along the path
    for k in range(0, len(track.mjd), 2):
        pts = _ellipse_points(track.offset[k], track.covariance[k])
        ax.fill(pts[0], pts[1], color="0.85", lw=0, zorder=0)
    ax.plot(track.offset[:, 0], track.offset[:, 1], color="0.35", ls="--", lw=1.2, zorder=1,
            label="background track (1σ band shaded)")
    for i in range(1, len(astro.mjd)):
        pts = _ellipse_points(at_epochs.offset[i], at_epochs.covariance[i])
        ax.plot(pts[0], pts[1], color="0.35", ls=":", lw=1.0, zorder=2)
    ax.plot(at_epochs.offset[1:, 0], at_epochs.offset[1:, 1], ls="none", marker="s", mfc="white", mec="0.2",
            ms=6, zorder=3, label="background position at each epoch")
    for i in range(len(astro.mjd)):
        for scale, lw in ((1.0, 1.4), (2.0, 0.7)):
            pts = _ellipse_points(astro.offset[i], astro.covariance[i], scale)
            ax.plot(pts[0], pts[1], color="#1b4f72", lw=lw, zorder=4)
    ax.plot(astro.offset[:, 0], astro.offset[:, 1], ls="-", lw=0.6, color="#1b4f72", marker="o", ms=5,
            zorder=5, label="measured (1σ and 2σ ellipses)")
    # epochs numbered at the measured and the background positions, the key in a corner
    labels = astro.labels or tuple(f"{y:.3f}" for y in astro.years)
    n = len(astro.mjd)
    for i in range(n):
        angle = np.radians(100.0 + 360.0 * i / n)   # spread the labels of clustered points around them
        ax.annotate(str(i + 1), astro.offset[i], xytext=(26 * np.cos(angle), 26 * np.sin(angle)),
                    textcoords="offset points", fontsize=8, color="#1b4f72", ha="center", va="center",
                    bbox={"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none"},
                    arrowprops={"arrowstyle": "-", "lw": 0.5, "color": "0.3"}, zorder=6)
        if i:
            ax.annotate(str(i + 1), at_epochs.offset[i], xytext=(7, 5), textcoords="offset points", fontsize=8,
                        color="0.2", zorder=6)
    key = "\n".join(f"{i + 1}: {text}" for i, text in enumerate(labels))
    ax.text(0.02, 0.02, "epochs\n" + key, transform=ax.transAxes, fontsize=7.5, va="bottom", ha="left",
            bbox={"facecolor": "white", "edgecolor": "0.6", "alpha": 0.9}, zorder=7)
    _zoom(ax, astro, track)
    ax.set_xlabel("Δα* (east) [mas]")
    ax.set_ylabel("Δδ (north) [mas]")
    ax.set_aspect("equal", adjustable="datalim")
    ax.invert_xaxis()   # east to the left, as on the sky
    ax.grid(True, color="0.9", lw=0.5)
    ax.legend(loc="best", fontsize=8, framealpha=0.9)
    verdict = f"{result.verdict}: ln B = {result.ln_bayes_factor:.1f}, host motion {result.motion_sigma:.1f}σ"
    ax.set_title((title + "\n" if title else "") + verdict, fontsize=10)
    fig.tight_layout()
    return save_figure(fig, path, formats=formats)
