"""Figures for ``motes optics``: reflectance spectrum with the bands, and Q / albedo against size.

Figure functions only draw what they are given (no physics here beyond
calling the model's public methods to sample curves) and return the path
written. They draw with matplotlib's object-oriented API (no pyplot), so the
user's plotting backend is never touched.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..files import atomic_write

__all__ = ["plot_reflectance", "plot_efficiencies"]

_STYLE = {"font.size": 9, "axes.grid": True, "grid.alpha": 0.25, "axes.spines.top": False,
          "axes.spines.right": False}


def plot_reflectance(path, wavelength, flux_ratio_curve, bands, band_flux_ratio, title: str,
                     notes=()) -> Path:
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
        fig = Figure(figsize=(7.0, 4.2))
        ax = fig.subplots()
        ax.plot(wavelength, flux_ratio_curve, color="0.2", lw=1.2, label="monochromatic R(λ)")
        cmap = matplotlib.colormaps["viridis"]
        for i, (band, value) in enumerate(zip(bands, band_flux_ratio)):
            colour = cmap(i / max(len(bands) - 1, 1))
            lo, hi = band.wavelength_min, band.wavelength_max
            ax.axvspan(lo, hi, color=colour, alpha=0.12, lw=0)
            half = 0.5 * band.fwhm
            ax.errorbar([band.pivot_wavelength], [value], xerr=[[half], [half]], fmt="o", ms=5,
                        color=colour, label=band.name + (" (approx.)" if band.approximate else ""))
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("wavelength [µm]")
        ax.set_ylabel("disk/star flux per unit grain cross-section [sr⁻¹]")
        ax.set_title(title, fontsize=9)
        ax.legend(fontsize=7, ncol=2, loc="best", frameon=False)
        if notes:
            fig.text(0.01, 0.005, "\n".join(notes), fontsize=6, color="0.35", va="bottom")
            fig.subplots_adjust(bottom=0.12 + 0.03 * len(notes))
        with atomic_write(path) as tmp:
            fig.savefig(tmp, dpi=150, bbox_inches="tight")
    return path


def plot_efficiencies(path, radius, q_ext, q_sca, wavelengths, labels, title: str,
                      a_min=None, a_max=None) -> Path:
    """Q_ext, Q_sca and albedo against grain radius at a few wavelengths.

    Parameters
    ----------
    path : path-like
    radius : ndarray[n] [um]
    q_ext, q_sca : ndarray[n_wavelengths, n]
    wavelengths : ndarray[n_wavelengths] [um]
    labels : sequence of str
        One label per wavelength (e.g. band names).
    title : str
    a_min, a_max : float, optional [um]
        Size-distribution limits, drawn as vertical lines.
    """
    import matplotlib
    from matplotlib.figure import Figure

    path = Path(path)
    with matplotlib.rc_context(_STYLE):
        fig = Figure(figsize=(7.0, 5.6))
        ax1, ax2 = fig.subplots(2, 1, sharex=True)
        cmap = matplotlib.colormaps["viridis"]
        n = len(wavelengths)
        for i in range(n):
            colour = cmap(i / max(n - 1, 1))
            ax1.plot(radius, q_ext[i], color=colour, lw=1.0, label=f"{labels[i]} ({wavelengths[i]:.3g} µm)")
            ax1.plot(radius, q_sca[i], color=colour, lw=0.8, ls="--")
            with np.errstate(invalid="ignore", divide="ignore"):
                ax2.plot(radius, q_sca[i] / q_ext[i], color=colour, lw=1.0)
        for ax in (ax1, ax2):
            for a in (a_min, a_max):
                if a is not None:
                    ax.axvline(a, color="0.5", lw=0.8, ls=":")
        ax1.set_xscale("log")
        ax1.set_ylabel("Q_ext (solid), Q_sca (dashed)")
        ax2.set_ylabel("single-scattering albedo")
        ax2.set_xlabel("grain radius [µm]")
        ax2.set_ylim(0, 1.02)
        ax1.set_title(title, fontsize=9)
        ax1.legend(fontsize=7, ncol=2, frameon=False)
        with atomic_write(path) as tmp:
            fig.savefig(tmp, dpi=150, bbox_inches="tight")
    return path
