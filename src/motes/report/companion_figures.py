"""Figures of a companion classification: the measured SED with the best templates, and
the probability of each spectral type.

Both functions take a :class:`~motes.companion.Classification`, write a PNG
into a folder and return its path. They draw with matplotlib's object-oriented
API (no pyplot), so the user's plotting backend is never touched.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..companion.results import Classification
from ..companion.spectral_types import type_label
from ..errors import BandError
from .figure_files import save_figure

__all__ = ["plot_companion_sed", "plot_type_probability", "write_companion_figures"]

_MODE_NAMES = {"distance": "distance known", "colours": "colours only"}
_COLOURS = ("#1b6f8a", "#d4762c", "#6b8e23")


def _headline_ranking(result: Classification):
    est = result.estimate
    if est is not None:
        for r in result.rankings:
            if r.source == est.source and r.mode == est.mode:
                return r
    return result.rankings[0]


def plot_companion_sed(result: Classification, path, n_best: int = 3) -> Path:
    """Measured SED (f_nu vs wavelength) with the ``n_best`` most probable templates.

    Detections are points with 1-sigma error bars; upper limits are arrows
    from the N-sigma limiting flux. Templates of the headline ranking are drawn
    at the pivot wavelengths of the bands they used (library spectra as
    curves), scaled by their best offset; the best blackbody, when the
    fallback was used, as a dashed curve.

    Parameters
    ----------
    result : Classification
    path : str or Path
        PNG file to write.
    n_best : int

    Returns
    -------
    Path
    """
    from matplotlib.figure import Figure

    from ..photometry.spectra import blackbody_flux_lambda
    from ..conventions import flam_to_fnu
    from ..companion.blackbody import R_JUP_PC

    phot = result.photometry
    rows = phot.rows
    fig = Figure(figsize=(7.2, 4.8))
    ax = fig.subplots()
    pivots = {r.band.name: r.band.pivot_wavelength for r in rows}
    zero_points = {}
    for r in rows:
        zp = r.flux_jy * 10 ** (0.4 * r.apparent_mag)
        zero_points[r.band.name] = zp if math.isfinite(zp) and zp > 0 else r.band.vega_zero_point_jy
    det = [r for r in rows if not r.is_limit]
    lim = [r for r in rows if r.is_limit]
    ax.errorbar([pivots[r.band.name] for r in det], [1e3 * r.flux_jy for r in det],
                yerr=[1e3 * r.flux_jy_error for r in det], fmt="o", color="black", ms=6, capsize=3,
                zorder=5, label="measured")
    if lim:
        x = [pivots[r.band.name] for r in lim]
        y = np.array([1e3 * r.flux_jy for r in lim])
        ax.errorbar(x, y, yerr=0.4 * y, uplims=True, fmt="v", color="black", mfc="white", ms=7, zorder=5,
                    label=f"upper limit ({lim[0].limit_sigma:g}σ)")
    for r in rows:
        ax.annotate(r.band.name, (pivots[r.band.name], 1e3 * r.flux_jy), textcoords="offset points",
                    xytext=(4, 6), fontsize=7, color="0.35")
    ranking = _headline_ranking(result)
    if ranking.kind == "sequence":
        # the best display rows (whole subtypes), each drawn with its grid template
        codes = ranking.grid["type_code"]
        picks = [(int(np.argmin(np.abs(codes - row.type_code))), row.label, row.probability)
                 for row in ranking.rows[:n_best]]
    else:
        picks = [(int(i), ranking.labels[i], ranking.grid["probability"][i])
                 for i in ranking.top_templates(n_best)]
    for k, (i, name, prob) in enumerate(picks):
        model = ranking.grid["model"][i]
        x = np.array([pivots[b] for b in ranking.bands])
        y = np.array([1e3 * zero_points[b] * 10 ** (-0.4 * m) for b, m in zip(ranking.bands, model)])
        order = np.argsort(x)
        label = f"{name}  p={prob:.2f}"
        colour = _COLOURS[k % len(_COLOURS)]
        spectra = ranking.extra.get("spectra")
        if spectra is not None:
            spec = spectra[i]
            wl = spec.wavelength
            flux = 1e3 * flam_to_fnu(spec.flux_lambda, wl)
            # scale the curve so its synthetic magnitudes sit at the fitted ones
            first = ranking.bands[0]
            band = next(r.band for r in rows if r.band.name == first)
            try:
                mean = band.average_flux_lambda(wl, spec.flux_lambda)
                scale = (1e3 * zero_points[first] * 10 ** (-0.4 * model[0])) / (1e3 * float(band.flux_lambda_to_fnu(mean)))
                ax.plot(wl, flux * scale, color=colour, lw=0.8, alpha=0.7)
            except (BandError, ValueError, ZeroDivisionError):
                pass  # a curve that cannot be scaled is simply not drawn
        ax.plot(x[order], y[order], "s-", color=colour, ms=5, lw=1.2, alpha=0.85, label=label, zorder=4)
    bb = next((r for r in result.rankings if r.kind == "blackbody"), None)
    if bb is not None and bb is not ranking:
        i = int(np.argmax(bb.grid["probability"]))
        teff = bb.grid["teff"][i]
        wl = np.geomspace(0.8 * min(pivots.values()), 1.25 * max(pivots.values()), 300)
        ref = bb.bands[0]
        band = next(r.band for r in rows if r.band.name == ref)
        radius = 1.0
        scale_geo = math.pi * (radius * R_JUP_PC / 10.0) ** 2
        mean = band.average_flux_lambda_of(lambda w: scale_geo * blackbody_flux_lambda(w, teff))
        target = zero_points[ref] * 10 ** (-0.4 * bb.grid["model"][i][0])
        scale = target / float(band.flux_lambda_to_fnu(mean))
        curve = 1e3 * scale * flam_to_fnu(scale_geo * blackbody_flux_lambda(wl, teff), wl)
        ax.plot(wl, curve, "--", color="0.45", lw=1.0, label=f"best blackbody {teff:.0f} K ({_MODE_NAMES[bb.mode]})")
    from matplotlib.ticker import FuncFormatter

    ax.set_xscale("log")
    ax.set_yscale("log")
    plain = FuncFormatter(lambda v, _pos: f"{v:g}")
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_formatter(plain)
        axis.set_minor_formatter(FuncFormatter(lambda v, _pos: f"{v:g}" if f"{v:.0e}"[0] in "2356" else ""))
    ax.set_xlabel("wavelength [µm]")
    ax.set_ylabel("flux density f_ν [mJy]")
    title = f"{result.target}: best templates, {ranking.source} ({_MODE_NAMES[ranking.mode]})"
    ax.set_title(title, fontsize=10)
    ax.grid(True, which="both", alpha=0.25, lw=0.5)
    ax.legend(fontsize=7.5, loc="best", frameon=False)
    fig.tight_layout()
    return save_figure(fig, path)


def plot_type_probability(result: Classification, path) -> Path:
    """Probability versus spectral type for every ranking with spectral types.

    Sequence rankings show the probability per integer subtype (bars) and the
    fine-grid posterior density (line) with the 68% interval shaded; library
    rankings show one marker per spectrum.

    Returns
    -------
    Path
    """
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.2, 4.0))
    ax = fig.subplots()
    plotted = False
    for k, r in enumerate(result.rankings):
        codes = r.grid["type_code"]
        if not np.any(np.isfinite(codes)):
            continue
        colour = _COLOURS[k % len(_COLOURS)]
        label = f"{r.source}, {_MODE_NAMES[r.mode]}"
        if r.kind == "sequence":
            bins = np.array([row.type_code for row in r.rows])
            width = 0.8 if r.mode == "distance" else 0.5
            ax.bar(np.round(bins), [row.probability for row in r.rows], width=width, color=colour, alpha=0.35,
                   label=f"{label} (per subtype)")
            step = float(np.median(np.diff(codes))) if codes.size > 1 else 1.0
            ax.plot(codes, r.grid["probability"] / step, color=colour, lw=1.2)
            est = next((e for e in result.estimates if e.source == r.source and e.mode == r.mode), None)
            if est is not None:
                ax.axvspan(est.lower, est.upper, color=colour, alpha=0.08)
                ax.axvline(est.median, color=colour, lw=1, ls=":")
        else:
            ax.plot(codes, r.grid["probability"], "D", color=colour, ms=6, label=label)
        plotted = True
    visible = [r.grid["type_code"][r.grid["probability"] > 1e-3 * r.grid["probability"].max()]
               for r in result.rankings if np.any(np.isfinite(r.grid["type_code"]))]
    if visible:
        lo = min(np.nanmin(v) for v in visible if v.size)
        hi = max(np.nanmax(v) for v in visible if v.size)
        ax.set_xlim(lo - 1.5, hi + 1.5)
    if not plotted:
        ax.text(0.5, 0.5, "no template with a spectral type was ranked", ha="center", va="center",
                transform=ax.transAxes)
    else:
        lo, hi = ax.get_xlim()
        ticks = np.arange(math.ceil(lo), math.floor(hi) + 1)
        step = max(1, int(len(ticks) / 12))
        ticks = ticks[::step]
        ax.set_xticks(ticks)
        ax.set_xticklabels([type_label(t, 0) for t in ticks], fontsize=8)
        ax.legend(fontsize=7.5, frameon=False)
    ax.set_xlabel("spectral type")
    ax.set_ylabel("probability (bars: per subtype)")
    ax.set_title(f"{result.target}: spectral-type probability", fontsize=10)
    ax.grid(True, axis="y", alpha=0.25, lw=0.5)
    fig.tight_layout()
    return save_figure(fig, path)


def write_companion_figures(result: Classification, folder, stem: str | None = None) -> list[Path]:
    """Write both figures into ``folder``; returns their paths."""
    from .companion_text import classification_file_stem

    folder = Path(folder)
    stem = stem or classification_file_stem(result.target)
    return [plot_companion_sed(result, folder / f"{stem}_sed.png"),
            plot_type_probability(result, folder / f"{stem}_types.png")]
