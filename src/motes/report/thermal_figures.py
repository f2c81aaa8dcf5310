"""Figure of the thermal side of ``motes optics``: the SED beside the scattered light, and T against size.

Draws with matplotlib's object-oriented API (no pyplot); only draws what it is given.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .figure_files import save_figure
from .figure_style import colour_map, figure_band_name, house_style, new_figure

__all__ = ["plot_thermal"]

#: on top of the house style (:mod:`motes.report.figure_style`): a light grid
_STYLE = {"axes.grid": True, "grid.alpha": 0.25}


@house_style
def plot_thermal(path, result, scattered=None, title: str | None = None, formats=None) -> Path:
    """Two panels: the disk's SED (thermal and scattered) with the photosphere, and T(a).

    Parameters
    ----------
    path : path-like
        Output file (PNG, PDF...).
    result : motes.dust.model.thermal.ThermalResult
    scattered : (sequence of Band, ndarray[n_bands]), optional
        Scattered-light bands and their disk/star flux ratios, drawn as
        ``ratio x star flux`` beside the thermal points.
    title : str, optional
    formats : sequence of str or str, optional
        Figure formats (``"png"``, ``"pdf"``, ``"svg"``); see :func:`motes.report.save_figure`.

    Returns
    -------
    Path
        The first file written.
    """
    import matplotlib
    from matplotlib.ticker import FuncFormatter

    from .label_placement import curve_boxes, marker_boxes, place_labels

    path = Path(path)
    unit = "Jy" if result.settings.distance_pc else "Jy at 1 pc"
    with matplotlib.rc_context(_STYLE):
        fig = new_figure(2, height=7.6)
        ax1, ax2 = fig.subplots(2, 1, gridspec_kw={"height_ratios": [1.15, 1.0]})
        lam = result.spectrum_wavelength
        ax1.plot(lam, result.spectrum_star, color="0.55", lw=1.0, ls="--", label="photosphere")
        ax1.plot(lam, result.spectrum_disk, color="tab:red", lw=1.4, ls="-", label="dust, thermal")
        ax1.plot(lam, result.spectrum_disk + result.spectrum_star, color="0.15", lw=0.8, ls="-", label="total")
        for i in range(len(result.band_names)):
            ax1.plot([result.band_pivot[i]], [result.band_disk[i]], "o", color="tab:red", ms=5,
                     mec="k", mew=0.5)
        if scattered is not None:
            bands, ratio = scattered
            piv = np.array([b.pivot_wavelength for b in bands])
            star = np.interp(np.log(piv), np.log(lam), result.spectrum_star, left=np.nan)
            if np.isfinite(star).any():
                ax1.plot(piv, np.asarray(ratio) * star, "s", color="tab:blue", ms=5, mec="k", mew=0.5,
                         label="dust, scattered (same grains)")
        top = max(np.nanmax(result.spectrum_star), np.nanmax(result.spectrum_disk))
        ax1.set_ylim(top * 1e-7, top * 3)
        ax1.set_xscale("log")
        ax1.set_yscale("log")
        ax1.set_xlim(lam[0], 3000.0)
        ax1.set_xlabel("wavelength [µm]")
        ax1.set_ylabel(f"flux density F_ν [{unit}]")
        ax1.legend(fontsize=7, frameon=False, loc="lower left")
        ax1.text(0.99, 0.97, f"L_dust/L* = {result.fractional_luminosity:.3g}\n"
                             f"T_dust (F_ν peak) = {result.dust_temperature:.0f} K\n"
                             f"R / R_bb = {result.radius_ratio:.2f}",
                 transform=ax1.transAxes, ha="right", va="top", fontsize=7)
        plain = FuncFormatter(lambda v, _pos: f"{v:g}")
        ax1.xaxis.set_major_formatter(plain)
        cmap = colour_map()
        n_r = result.radii.size
        for j in range(n_r):
            colour = cmap(j / max(n_r - 1, 1)) if n_r > 1 else "tab:red"
            if n_r <= 6 or j in (0, n_r // 2, n_r - 1):
                ax2.plot(result.sizes, result.temperature[:, j], color=colour, lw=1.2,
                         label=f"{result.radii[j]:.3g} au")
                ax2.axhline(result.blackbody_temperature[j], color=colour, lw=0.8, ls=":")
        ax2.text(result.sizes[0], result.blackbody_temperature[0], " blackbody (dotted)", fontsize=6,
                 va="bottom", ha="left", color="0.35")
        ax2.set_xscale("log")
        ax2.xaxis.set_major_formatter(plain)
        ax2.set_xlabel("grain radius [µm]")
        ax2.set_ylabel("grain temperature [K]")
        ax2.legend(fontsize=7, frameon=False, title="distance from the star", title_fontsize=7)
        if title:
            ax1.set_title(title, fontsize=9)
        flags = [f"⚠ {f}" for f in result.flags]
        notes = flags + ["Mie spheres, optically thin; band fluxes without colour corrections"]
        fig.text(0.01, 0.005, "\n".join(_wrap(n) for n in notes), fontsize=6, color="0.3", va="bottom")
        fig.subplots_adjust(left=0.1, right=0.97, top=0.95 if title else 0.98, hspace=0.3, bottom=0.08 + 0.02 * sum(_wrap(n).count("\n") + 1 for n in notes))
        # band names (display names, "WISE W4") beside their points, clear of the curves and markers
        obstacles = marker_boxes(ax1, list(ax1.lines)) + curve_boxes(ax1, ax1.lines)
        place_labels(ax1, list(zip(result.band_pivot, result.band_disk)),
                     [figure_band_name(n) for n in result.band_names], obstacles=obstacles, fontsize=6)
        return save_figure(fig, path, formats=formats)


def _wrap(text: str, width: int = 150) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, width))
