"""Drawing the disk-colour figure of a fit (used by :func:`plot_colours`).

Top panel: the data (black; vertical bars 1 sigma, horizontal bars the
band's FWHM about its pivot; upper limits as open triangles), and for each of
the best models its band-averaged posterior values (median and 68% interval,
open markers: what the likelihood compares) and, when the forward model can
be evaluated monochromatically, its spectrum on a fine grid (median line and
68% band of posterior draws, :func:`motes.dust.fit.curves.posterior_curves`).
Band values are never joined by lines: they are not a spectrum. Bottom panel:
(data − model median) / sigma per band. Plain-number ticks, wavelengths in
µm, the scattering angles in the title.
"""

from __future__ import annotations

import re

import numpy as np

from .figure_style import DATA_COLOUR, figure_band_name, new_figure, series_style
from .label_placement import curve_boxes, marker_boxes, place_labels

__all__ = ["draw_colours", "scattering_angles_text"]


def scattering_angles_text(angles_deg=(), notes=()) -> str:
    """'scattering angle 90°' / 'scattering angles 60°, 90°', from the angles or a model note."""
    if not angles_deg:
        for n in notes:
            m = re.search(r"scattering angles? ([0-9., ]+) deg", str(n))
            if m:
                angles_deg = [float(a) for a in m.group(1).replace(" ", "").split(",") if a]
                break
    if not angles_deg:
        return "scattering angles not recorded"
    word = "angle" if len(angles_deg) == 1 else "angles (averaged)"
    return f"scattering {word} " + ", ".join(f"{a:g}°" for a in angles_deg)


def draw_colours(result, n_models: int = 3, curves=None, truth_values=None):
    """Draw the figure; return the :class:`matplotlib.figure.Figure`.

    Parameters
    ----------
    result : FitResult
    n_models : int
    curves : dict of str to ModelCurve, optional
        Monochromatic curves per model name (absent models: band values only).
    truth_values : ndarray[n_bands], optional
        Band values of an invented truth (demo), drawn as stars.
    """
    from matplotlib.ticker import FuncFormatter

    evaluated = curves is not None     # None: not asked for; {}: the forward model has no monochromatic path
    curves = curves or {}
    obs = result.observations
    lam = np.asarray(obs.wavelength, dtype=float)
    half = np.array([0.5 * b.fwhm for b in obs.bands])
    det = ~np.asarray(obs.is_limit, dtype=bool)
    value, error = np.asarray(obs.value, dtype=float), np.asarray(obs.error, dtype=float)

    fig = new_figure(2, height=4.4)
    ax, res_ax = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3.0, 1.2], "hspace": 0.05})
    models = result.models[:n_models]
    n = max(len(models), 1)
    for i, m in enumerate(models):
        style = series_style(i)
        c = m.colours
        med = np.asarray(c["model_median"], dtype=float)
        lo, hi = np.asarray(c["model_lo68"], dtype=float), np.asarray(c["model_hi68"], dtype=float)
        shift = 1.0 + 0.012 * (i - 0.5 * (n - 1))      # side by side within a band
        curve = curves.get(m.name)
        if curve is not None:
            ax.fill_between(curve.wavelength, curve.lo68, curve.hi68, color=style["color"], alpha=0.15, lw=0)
            ax.plot(curve.wavelength, curve.median, color=style["color"], ls=style["linestyle"], lw=1.0,
                    label=f"{m.name}: spectrum (median, 68% of {curve.n_draws} draws)")
        ax.errorbar(lam * shift, med, yerr=[med - lo, hi - med], fmt=style["marker"], mfc="white",
                    mec=style["color"], ecolor=style["color"], ms=4.5, elinewidth=0.9, capsize=0, zorder=4,
                    label=f"{m.name}: band values (ln Z {m.ln_z:.1f})")
        with np.errstate(invalid="ignore", divide="ignore"):
            pull = (value - med) / error
        res_ax.plot((lam * shift)[det], pull[det], ls="none", marker=style["marker"], mfc="white",
                    mec=style["color"], ms=4)
    if truth_values is not None:
        ax.plot(lam, truth_values, ls="none", marker="*", ms=7, color="#D55E00", zorder=5,
                label="invented truth (band values)")
    ax.errorbar(lam[det], value[det], yerr=error[det], xerr=half[det], fmt="o", color=DATA_COLOUR, ms=4,
                elinewidth=0.9, capsize=0, zorder=6, label="data (bars: 1σ, band FWHM)")
    if np.any(~det):
        ax.errorbar(lam[~det], value[~det], yerr=0.3 * value[~det], xerr=half[~det], uplims=True, fmt="v",
                    mfc="white", color=DATA_COLOUR, ms=5, elinewidth=0.9, capsize=0, zorder=6,
                    label="upper limits")
    res_ax.axhline(0.0, color="0.5", lw=0.7)
    for k in (-2, 2):
        res_ax.axhline(k, color="0.7", lw=0.6, ls=":")
    res_ax.set_ylabel("(data − model)/σ")
    ax.set_xscale("log")
    signed = bool(np.any(value <= 0))          # a negative polarised intensity (data may be < 0)
    if signed:
        ax.set_yscale("symlog", linthresh=float(np.min(np.abs(value[value != 0]))) if np.any(value != 0) else 1.0)
    else:
        ax.set_yscale("log")
    plain = FuncFormatter(lambda v, _pos: f"{v:g}")
    minor = FuncFormatter(lambda v, _pos: f"{v:g}" if f"{v:.0e}"[0] in "235" else "")
    res_ax.xaxis.set_major_formatter(plain)
    res_ax.xaxis.set_minor_formatter(minor)
    res_ax.set_xlabel("wavelength [µm]")
    unit = " [arcsec⁻²]" if obs.normalisation == "surface brightness" else ""
    ax.set_ylabel("disk / star" + unit)
    angles = next((c.angles_deg for c in curves.values() if getattr(c, "angles_deg", ())), ())
    hollow = any(str(n).startswith("grains: a distribution of hollow spheres") for n in result.notes)
    ax.set_title(f"Disk colours: data and the {len(models)} best models ({'hollow' if hollow else 'Mie'} spheres; "
                 f"{scattering_angles_text(angles, result.notes)})")
    legend = ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=6.5)
    if not curves:
        why = ("this forward model gives\nband values only" if evaluated else
               "not evaluated (motes fit draws\nthe best model's unless --no-spectra)")
        legend.set_title("no monochromatic spectrum: " + why, prop={"size": 6})
    fig.subplots_adjust(left=0.09, right=0.66, top=0.92, bottom=0.11)
    ylo, yhi = ax.get_ylim()
    if not signed:
        ax.set_ylim(ylo / 1.25, yhi * 1.1)
    # band names last, on the final layout, clear of every point and bar
    obstacles = marker_boxes(ax, list(ax.lines) + list(ax.collections)) + curve_boxes(ax, ax.lines)
    labels = [figure_band_name(n) for n in getattr(obs, "row_labels", [b.name for b in obs.bands])]   # "(polarised)"
    place_labels(ax, list(zip(lam, value)), labels, obstacles=obstacles, fontsize=6)
    return fig
