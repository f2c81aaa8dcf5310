"""Figure of a material's optical constants: n and k against wavelength.

:func:`plot_optical_constants` draws n (linear axis) and k (log axis, zeros
marked along the bottom) for one or more :class:`~motes.optics.constants.Material`
objects on a logarithmic wavelength axis, with the tabulated points shown,
writes the figure to a temporary name and renames it, and returns the path.
It draws with matplotlib's object-oriented API (no pyplot), so the user's
plotting backend is never touched.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib.ticker as ticker
from matplotlib.figure import Figure
import numpy as np

from ..files import atomic_write
from .figure_style import SERIES_COLOURS, house_style

__all__ = ["plot_optical_constants"]

_COLOURS = SERIES_COLOURS + ("0.3",)


@house_style
def plot_optical_constants(materials, path, *, wavelength_range=None, title=None) -> Path:
    """Plot n and k of one or several materials.

    Parameters
    ----------
    materials : Material or sequence of Material
    path : str or os.PathLike
        Output image (format from the suffix, e.g. ``.png``, ``.pdf``).
    wavelength_range : (float, float), optional [um]
        Limits of the wavelength axis (default: the union of the data).
    title : str, optional

    Returns
    -------
    pathlib.Path
        The file written.
    """
    if not isinstance(materials, (list, tuple)):
        materials = [materials]
    fig = Figure(figsize=(7.0, 6.0))
    ax_n, ax_k = fig.subplots(2, 1, sharex=True, gridspec_kw={"hspace": 0.08})
    k_floor = np.inf
    for mat in materials:
        positive = mat.k[mat.k > 0]
        if positive.size:
            k_floor = min(k_floor, positive.min())
    k_floor = 1e-12 if not np.isfinite(k_floor) else k_floor / 3.0
    for i, mat in enumerate(materials):
        colour = _COLOURS[i % len(_COLOURS)]
        ax_n.plot(mat.wavelength, mat.n, "-", color=colour, lw=1.3, label=mat.name)
        ax_n.plot(mat.wavelength, mat.n, ".", color=colour, ms=2.5)
        k = np.where(mat.k > 0, mat.k, np.nan)
        ax_k.plot(mat.wavelength, k, "-", color=colour, lw=1.3)
        ax_k.plot(mat.wavelength, k, ".", color=colour, ms=2.5)
        zeros = mat.k == 0
        if zeros.any():
            ax_k.plot(mat.wavelength[zeros], np.full(zeros.sum(), k_floor), "|", color=colour,
                      ms=8, label=f"{mat.name}: k = 0")
    ax_n.set_xscale("log")
    ax_k.set_yscale("log")
    ax_n.set_ylabel("n (real part)")
    ax_k.set_ylabel("k (imaginary part)")
    ax_k.set_xlabel("wavelength [µm]")
    if wavelength_range is not None:
        ax_k.set_xlim(*wavelength_range)
    lo, hi = ax_k.get_xlim()
    plain = ticker.FuncFormatter(lambda v, _: f"{v:g}")
    ax_k.xaxis.set_major_formatter(plain)
    # label minor ticks only on narrow ranges, where few major ticks exist
    ax_k.xaxis.set_minor_formatter(plain if hi / lo < 30 else ticker.NullFormatter())
    ax_k.tick_params(axis="x", which="minor", labelsize=7)
    for ax in (ax_n, ax_k):
        ax.grid(True, which="major", alpha=0.3)
    ax_n.legend(fontsize=8, frameon=False)
    if ax_k.get_legend_handles_labels()[0]:
        ax_k.legend(fontsize=8, frameon=False)
    ax_n.set_title(title or "optical constants m = n + ik (dots: tabulated points)", fontsize=10)
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_write(path) as tmp:
        fig.savefig(tmp, dpi=130, bbox_inches="tight")
    return path
