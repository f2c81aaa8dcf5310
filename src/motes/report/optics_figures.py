"""Figures for ``motes optics``: reflectance spectrum with the bands, Q / albedo against size, polarisation.

Figure functions only draw what they are given (no physics here beyond
calling the model's public methods to sample curves) and return the path
written. They draw with matplotlib's object-oriented API (no pyplot), so the
user's plotting backend is never touched.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .figure_files import save_figure
from .figure_style import colour_map, figure_band_name, house_style, new_figure

__all__ = ["plot_reflectance", "plot_efficiencies", "plot_polarisation"]

#: on top of the house style (:mod:`motes.report.figure_style`): a light grid
_STYLE = {"axes.grid": True, "grid.alpha": 0.25}


@house_style
def plot_reflectance(path, wavelength, flux_ratio_curve, bands, band_flux_ratio, title: str,
                     notes=(), formats=None) -> Path:
    """Disk/star flux ratio per unit cross-section against wavelength, bands marked.

    Parameters
    ----------
    path : path-like
        Output file (PNG, PDF...).
    wavelength : ndarray[n] [um]
    flux_ratio_curve : ndarray[n] [sr^-1]
        Monochromatic flux ratio R(lambda).
    bands : sequence of Band
    band_flux_ratio : ndarray[n_bands] [sr^-1]
        Band-averaged values.
    title : str
    notes : sequence of str
        Printed small under the axes (e.g. "real grains are not Mie spheres").
    """
    import matplotlib
    from matplotlib.figure import Figure

    path = Path(path)
    with matplotlib.rc_context(_STYLE):
        from matplotlib.ticker import FuncFormatter

        from .label_placement import curve_boxes, marker_boxes, place_labels

        fig = new_figure(2, height=3.6)
        ax = fig.subplots()
        ax.plot(wavelength, flux_ratio_curve, color="0.2", lw=1.1, label="monochromatic R(λ)")
        cmap = colour_map()
        for i, (band, value) in enumerate(zip(bands, band_flux_ratio)):
            colour = cmap(0.8 * i / max(len(bands) - 1, 1))
            lo, hi = band.wavelength_min, band.wavelength_max
            ax.axvspan(lo, hi, color=colour, alpha=0.10, lw=0)
            half = 0.5 * band.fwhm
            ax.errorbar([band.pivot_wavelength], [value], xerr=[[half], [half]], fmt="o", ms=4.5,
                        color=colour, label="band average (bar: FWHM; shaded: curve extent)" if i == 0 else None)
        ax.set_xscale("log")
        ax.set_yscale("log")
        plain = FuncFormatter(lambda v, _pos: f"{v:g}")
        ax.xaxis.set_major_formatter(plain)
        lo_w, hi_w = float(np.min(wavelength)), float(np.max(wavelength))
        # label the minor ticks on narrow ranges (all of them below a factor 3, 2-3-5 below 30)
        ax.xaxis.set_minor_formatter(plain if hi_w / lo_w < 3 else
                                     FuncFormatter(lambda v, _pos: f"{v:g}" if f"{v:.0e}"[0] in "235" else "")
                                     if hi_w / lo_w < 30 else FuncFormatter(lambda v, _pos: ""))
        ax.set_xlabel("wavelength [µm]")
        ax.set_ylabel("disk/star flux per unit grain cross-section [sr⁻¹]")
        ax.set_title(title)
        ax.legend(loc="best")
        fig.tight_layout()
        if notes:
            fig.text(0.01, 0.005, "\n".join(notes), fontsize=6, color="0.35", va="bottom")
            fig.subplots_adjust(bottom=0.14 + 0.03 * len(notes))
        # band names beside their points (no colour-coded legend: it would not read in grey)
        obstacles = marker_boxes(ax, list(ax.lines) + list(ax.collections)) + curve_boxes(ax, ax.lines)
        place_labels(ax, [(b.pivot_wavelength, v) for b, v in zip(bands, band_flux_ratio)],
                     [figure_band_name(b.name) + (" (approx.)" if b.approximate else "") for b in bands],
                     obstacles=obstacles,
                     fontsize=6)
        return save_figure(fig, path, formats=formats)


@house_style
def plot_efficiencies(path, radius, q_ext, q_sca, wavelengths, labels, title: str,
                      a_min=None, a_max=None, formats=None) -> Path:
    """Q_ext, Q_sca and albedo against grain radius at a few wavelengths.

    Parameters
    ----------
    path : path-like
    radius : ndarray[n] [um]
    q_ext, q_sca : ndarray[n_wavelengths, n]
    wavelengths : ndarray[n_wavelengths] [um]
    labels : sequence of str
        One label per wavelength (e.g. band identifiers, written by their display names).
    title : str
    a_min, a_max : float, optional [um]
        Size-distribution limits, drawn as vertical lines.
    """
    import matplotlib
    from matplotlib.figure import Figure

    path = Path(path)
    with matplotlib.rc_context(_STYLE):
        fig = new_figure(2, height=4.6)
        ax1, ax2 = fig.subplots(2, 1, sharex=True)
        cmap = colour_map()
        n = len(wavelengths)
        for i in range(n):
            colour = cmap(0.8 * i / max(n - 1, 1))
            ax1.plot(radius, q_ext[i], color=colour, lw=1.0,
                     label=f"{figure_band_name(labels[i])} ({wavelengths[i]:.3g} µm)")
            ax1.plot(radius, q_sca[i], color=colour, lw=0.8, ls="--")
            with np.errstate(invalid="ignore", divide="ignore"):
                ax2.plot(radius, q_sca[i] / q_ext[i], color=colour, lw=1.0)
        for ax in (ax1, ax2):
            for a in (a_min, a_max):
                if a is not None:
                    ax.axvline(a, color="0.5", lw=0.8, ls=":")
        ax1.set_xscale("log")
        from matplotlib.ticker import FuncFormatter

        ax2.xaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
        ax1.set_ylabel("Q_ext (solid), Q_sca (dashed)")
        ax2.set_ylabel("single-scattering albedo")
        ax2.set_xlabel("grain radius [µm]")
        ax2.set_ylim(0, 1.02)
        ax1.set_title(title, fontsize=9)
        ax1.legend(fontsize=7, ncol=2, frameon=False)
        return save_figure(fig, path, formats=formats)


@house_style
def plot_polarisation(path, wavelength, total_curve, polarised_curve, bands, band_total, band_polarised,
                      title: str, notes=(), formats=None) -> Path:
    """Total and polarised intensity, and the degree of polarisation, against wavelength.

    Parameters
    ----------
    path : path-like
    wavelength : ndarray[n] [um]
    total_curve, polarised_curve : ndarray[n] [sr^-1]
        Monochromatic total and polarised flux ratios (the polarised one signed).
    bands : sequence of Band
    band_total, band_polarised : ndarray[n_bands] [sr^-1]
        Band-averaged values.
    title : str
    notes : sequence of str
    """
    import matplotlib
    from matplotlib.figure import Figure

    path = Path(path)
    with matplotlib.rc_context(_STYLE):
        fig = Figure(figsize=(7.0, 5.8))
        ax1, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 2]})
        ax1.plot(wavelength, total_curve, color="0.2", lw=1.2, label="total R(λ)")
        ax1.plot(wavelength, np.abs(polarised_curve), color="tab:blue", lw=1.2, ls="--",
                 label="polarised |R_pol(λ)|")
        negative = polarised_curve < 0
        if negative.any():
            ax1.plot(wavelength[negative], -polarised_curve[negative], ".", color="tab:red", ms=3,
                     label="R_pol < 0 (parallel)")
        with np.errstate(invalid="ignore", divide="ignore"):
            ax2.plot(wavelength, polarised_curve / total_curve, color="tab:blue", lw=1.2)
            degree = np.asarray(band_polarised) / np.asarray(band_total)
        cmap = colour_map()
        for i, band in enumerate(bands):
            colour = cmap(0.8 * i / max(len(bands) - 1, 1))
            half = 0.5 * band.fwhm
            for ax in (ax1, ax2):
                ax.axvspan(band.wavelength_min, band.wavelength_max, color=colour, alpha=0.12, lw=0)
            ax1.errorbar([band.pivot_wavelength], [band_total[i]], xerr=[[half], [half]], fmt="o", ms=5,
                         color=colour, label=figure_band_name(band.name) + (" (approx.)" if band.approximate else ""))
            ax1.errorbar([band.pivot_wavelength], [abs(band_polarised[i])], xerr=[[half], [half]],
                         fmt="s" if band_polarised[i] >= 0 else "v", ms=5, mfc="none", color=colour)
            ax2.errorbar([band.pivot_wavelength], [degree[i]], xerr=[[half], [half]], fmt="o", ms=5, color=colour)
        ax2.axhline(0.0, color="0.5", lw=0.8)
        ax1.set_xscale("log")
        from matplotlib.ticker import FuncFormatter

        plain = FuncFormatter(lambda v, _: f"{v:g}")
        ax2.xaxis.set_major_formatter(plain)
        ax2.xaxis.set_minor_formatter(plain)
        ax1.set_yscale("log")
        ax1.set_ylabel("disk/star per unit cross-section [sr⁻¹]")
        ax2.set_ylabel("degree of polarisation\nR_pol / R")
        ax2.set_xlabel("wavelength [µm]")
        ax1.set_title(title, fontsize=9)
        ax1.legend(fontsize=7, ncol=2, loc="best", frameon=False)
        fig.text(0.01, 0.005, "\n".join(("filled: total; open squares: polarised (open triangles: negative, "
                                          "drawn as |R_pol|)",) + tuple(notes)),
                 fontsize=6, color="0.35", va="bottom")
        fig.subplots_adjust(bottom=0.12 + 0.03 * len(notes))
        return save_figure(fig, path, formats=formats)
