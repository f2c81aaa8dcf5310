"""Drawing the SED figure of a companion classification (used by :func:`plot_companion_sed`).

Top panel: the measured flux densities (black points; vertical bars 1 sigma,
horizontal bars the band's FWHM centred on its pivot; upper limits as open
triangles with arrows), the ``n_best`` templates of the headline ranking as
band-averaged values (a short horizontal stroke across each band's FWHM, no
line joining bands: they are not a spectrum), library spectra as thin curves,
the best blackbody as a dashed curve. Bands a template does not cover are
drawn as open markers when a spectrum predicts them (not fitted) or listed
as "no template value". Band labels are placed clear of every point
(:func:`motes.report.label_placement.place_labels`).

Bottom panel: data / template per band for each template drawn (upper limits
as arrows), 1 marked.
"""

from __future__ import annotations

import math

import numpy as np

from ..companion.results import Classification
from ..errors import BandError
from .figure_style import DATA_COLOUR, figure_band_name, new_figure, series_style
from .label_placement import curve_boxes, marker_boxes, place_labels

__all__ = ["draw_companion_sed"]

_MODE_NAMES = {"distance": "distance known", "colours": "colours only"}


def _headline_ranking(result: Classification):
    est = result.estimate
    if est is not None:
        for r in result.rankings:
            if r.source == est.source and r.mode == est.mode:
                return r
    return result.rankings[0]


def _picks(ranking, n_best):
    if ranking.kind == "sequence":
        codes = ranking.grid["type_code"]
        return [(int(np.argmin(np.abs(codes - row.type_code))), row.label, row.probability)
                for row in ranking.rows[:n_best]]
    return [(int(i), ranking.labels[i], ranking.grid["probability"][i]) for i in ranking.top_templates(n_best)]


def _spectrum_scale(ranking, i, band, zero_point_jy):
    """Factor putting spectrum ``i`` at its fitted magnitude in ``band`` (None if it cannot)."""
    spec = ranking.extra["spectra"][i]
    j = list(ranking.bands).index(band.name)
    try:
        mean = band.average_flux_lambda(spec.wavelength, spec.flux_lambda)
        target = zero_point_jy * 10 ** (-0.4 * ranking.grid["model"][i][j])
        return target / float(band.flux_lambda_to_fnu(mean))
    except (BandError, ValueError, ZeroDivisionError):
        return None


def draw_companion_sed(result: Classification, n_best: int = 3):
    """Draw the SED figure; return ``(figure, band_labels, point_boxes)``.

    ``band_labels`` are the text artists naming the bands; ``point_boxes`` the
    display boxes [pixels] of the data markers and error bars they avoid
    (returned for tests of the placement).
    """
    from matplotlib.ticker import FuncFormatter, NullFormatter

    from ..companion.blackbody import R_JUP_PC
    from ..conventions import flam_to_fnu
    from ..photometry.spectra import blackbody_flux_lambda

    rows = result.photometry.rows
    band_of = {r.band.name: r.band for r in rows}
    pivots = {r.band.name: r.band.pivot_wavelength for r in rows}
    half = {r.band.name: 0.5 * r.band.fwhm for r in rows}
    zero_points = {}
    for r in rows:
        zp = r.flux_jy * 10 ** (0.4 * r.apparent_mag)
        zero_points[r.band.name] = zp if math.isfinite(zp) and zp > 0 else r.band.vega_zero_point_jy
    measured = {r.band.name: 1e3 * r.flux_jy for r in rows}
    sigma = {r.band.name: 1e3 * r.flux_jy_error for r in rows}

    fig = new_figure(1, height=4.8)
    ax, res_ax, gap_ax, key_ax = fig.subplots(4, 1, gridspec_kw={"height_ratios": [3.0, 1.25, 0.32, 0.7]})
    gap_ax.axis("off")           # room for the wavelength label
    res_ax.sharex(ax)
    key_ax.axis("off")           # the legend's own row, so it never hides a point
    fig.subplots_adjust(left=0.17, right=0.97, top=0.94, bottom=0.02, hspace=0.06)
    det = [r for r in rows if not r.is_limit]
    lim = [r for r in rows if r.is_limit]
    data_artists = []
    if det:
        x = np.array([pivots[r.band.name] for r in det])
        eb = ax.errorbar(x, [measured[r.band.name] for r in det], yerr=[sigma[r.band.name] for r in det],
                         xerr=[half[r.band.name] for r in det], fmt="o", color=DATA_COLOUR, ms=4.5,
                         elinewidth=0.9, capsize=0, zorder=6, label="measured (bars: 1σ, band FWHM)")
        data_artists += [eb.lines[0], *eb.lines[2]]
    if lim:
        x = np.array([pivots[r.band.name] for r in lim])
        y = np.array([measured[r.band.name] for r in lim])
        eb = ax.errorbar(x, y, yerr=0.35 * y, xerr=[half[r.band.name] for r in lim], uplims=True, fmt="v",
                         color=DATA_COLOUR, mfc="white", ms=5, elinewidth=0.9, capsize=0, zorder=6,
                         label=f"upper limit ({lim[0].limit_sigma:g}σ)")
        data_artists += [eb.lines[0], *eb.lines[1], *eb.lines[2]]

    ranking = _headline_ranking(result)
    picks = _picks(ranking, n_best)
    spectra = ranking.extra.get("spectra")
    missing = [b for b in pivots if b not in ranking.bands]
    predicted_any = False
    residuals = []          # (label, style, {band: model mJy})
    for k, (i, name, prob) in enumerate(picks):
        style = series_style(k)
        model = {b: 1e3 * zero_points[b] * 10 ** (-0.4 * m) for b, m in zip(ranking.bands, ranking.grid["model"][i])}
        if spectra is not None:
            scale = _spectrum_scale(ranking, i, band_of[ranking.bands[0]], zero_points[ranking.bands[0]])
            if scale is not None:
                spec = spectra[i]
                ax.plot(spec.wavelength, 1e3 * scale * flam_to_fnu(spec.flux_lambda, spec.wavelength),
                        color=style["color"], lw=0.6, alpha=0.6, zorder=2)
                for b in missing:       # what the spectrum predicts where the ranking has no value
                    try:
                        mean = band_of[b].average_flux_lambda(spec.wavelength, spec.flux_lambda)
                    except (BandError, ValueError):
                        continue
                    value = 1e3 * scale * float(band_of[b].flux_lambda_to_fnu(mean))
                    ax.plot([pivots[b]], [value], marker=style["marker"], mfc="white", mec=style["color"],
                            ls="none", ms=5, zorder=4)
                    predicted_any = True
        xs = np.array([pivots[b] for b in model])
        ys = np.array(list(model.values()))
        ax.hlines(ys, xs - [half[b] for b in model], xs + [half[b] for b in model], color=style["color"],
                  lw=1.6, zorder=4)
        ax.plot(xs, ys, marker=style["marker"], color=style["color"], ls="none", ms=4, zorder=4,
                label=f"{name}: probability {prob:.2f}")
        residuals.append((name, style, model))

    bb = next((r for r in result.rankings if r.kind == "blackbody"), None)
    if bb is not None and bb is not ranking:
        i = int(np.argmax(bb.grid["probability"]))
        teff = bb.grid["teff"][i]
        wl = np.geomspace(0.8 * min(pivots.values()), 1.25 * max(pivots.values()), 300)
        ref = band_of[bb.bands[0]]
        scale_geo = math.pi * (R_JUP_PC / 10.0) ** 2
        mean = ref.average_flux_lambda_of(lambda w: scale_geo * blackbody_flux_lambda(w, teff))
        target = zero_points[ref.name] * 10 ** (-0.4 * bb.grid["model"][i][0])
        scale = target / float(ref.flux_lambda_to_fnu(mean))
        curve = 1e3 * scale * flam_to_fnu(scale_geo * blackbody_flux_lambda(wl, teff), wl)
        ax.plot(wl, curve, ls="--", color="0.45", lw=0.9, zorder=1)
        # one legend entry for the curve and its grey circles in the residual panel
        ax.plot([], [], ls="--", marker="o", color="0.45", lw=0.9, ms=3.5,
                label=f"best blackbody {teff:.0f} K ({_MODE_NAMES[bb.mode]});\ncircles below: data / blackbody")
        bb_model = {b: 1e3 * zero_points[b] * 10 ** (-0.4 * m) for b, m in zip(bb.bands, bb.grid["model"][i])}
        residuals.append(("blackbody", {"color": "0.45", "marker": "o", "linestyle": "--"}, bb_model))
    if predicted_any:
        ax.plot([], [], marker="s", mfc="white", mec="0.3", ls="none", ms=5,
                label="spectrum's prediction (not fitted)")

    # residual panel: data / template, templates side by side within each band
    res_ax.axhline(1.0, color="0.5", lw=0.7)
    n_res = max(len(residuals), 1)
    spread = [0.8, 1.2]             # the residual axis shows every point, arrow and error bar
    for k, (name, style, model) in enumerate(residuals):
        shift = 1.0 + 0.03 * (k - 0.5 * (n_res - 1))
        for r in rows:
            b = r.band.name
            if b not in model or not model[b] > 0:
                continue
            ratio = measured[b] / model[b]
            spread.append(0.7 * ratio if r.is_limit else ratio - sigma[b] / model[b])
            spread.append(ratio if r.is_limit else ratio + sigma[b] / model[b])
            xk = pivots[b] * shift
            if r.is_limit:
                res_ax.errorbar([xk], [ratio], yerr=[[0.25 * ratio], [0.0]], uplims=True, fmt="_",
                                color=style["color"], ms=6, elinewidth=0.8, capsize=0)
            else:
                res_ax.errorbar([xk], [ratio], yerr=[sigma[b] / model[b]], fmt=style["marker"], color=style["color"],
                                ms=3.5, elinewidth=0.8, capsize=0)
    no_value = [b for b in missing if not predicted_any]
    if no_value:
        centre = math.exp(np.mean([math.log(pivots[b]) for b in no_value]))
        res_ax.annotate(f"{', '.join(figure_band_name(b) for b in no_value)}:\nno template value", (centre, 0.97),
                        xycoords=("data", "axes fraction"), ha="center", va="top", fontsize=6, color="0.3")
    res_ax.set_ylabel("data / template")
    lo, hi = min(spread), max(spread)
    pad = 0.08 * (hi - lo)
    res_ax.set_ylim(max(lo - pad, 0.0), hi + pad + (0.4 * (hi - lo) if no_value else 0.0))

    ax.set_xscale("log")
    ax.set_yscale("log")
    plain = FuncFormatter(lambda v, _pos: f"{v:g}")
    minor = FuncFormatter(lambda v, _pos: f"{v:g}" if f"{v:.0e}"[0] in "235" else "")
    ax.yaxis.set_major_formatter(plain)
    ax.yaxis.set_minor_formatter(minor)
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.tick_params(axis="x", which="both", labelbottom=False)
    res_ax.xaxis.set_major_formatter(plain)
    res_ax.xaxis.set_minor_formatter(minor)
    x_all = np.array(list(pivots.values()))
    w_all = np.array(list(half.values()))
    res_ax.set_xlim(0.85 * (x_all - w_all).min(), 1.15 * (x_all + w_all).max())
    res_ax.set_xlabel("wavelength [µm]")
    ax.set_ylabel("flux density $f_\\nu$ [mJy]")
    # y range from the points (data and template band values), not from curves reaching far outside
    points = [v for v in measured.values() if v > 0] + [v for _n, _s, m in residuals for v in m.values() if v > 0]
    ylo, yhi = min(points) / 1.8, max(points) * 2.2     # headroom for the labels
    ax.set_ylim(ylo, yhi)
    ax.set_title(f"{result.target}: {ranking.source} ({_MODE_NAMES[ranking.mode]})")
    handles, texts = ax.get_legend_handles_labels()
    key_ax.legend(handles, texts, loc="center", ncol=2, fontsize=6, handlelength=1.8, columnspacing=1.0,
                  labelspacing=0.35)

    # band labels last, on the final layout, clear of the points, bars, templates and legend
    obstacles = marker_boxes(ax, data_artists)
    template_boxes = [c for c in list(ax.collections) + list(ax.lines) if c not in data_artists]
    obstacles_all_curves = curve_boxes(ax, [c for c in ax.lines if c not in data_artists])
    obstacles_all = obstacles + marker_boxes(ax, template_boxes) + obstacles_all_curves
    anchors = [(pivots[r.band.name], measured[r.band.name]) for r in rows]
    labels = place_labels(ax, anchors, [figure_band_name(r.band.name) for r in rows], obstacles=obstacles_all,
                          fontsize=6.5)
    return fig, labels, obstacles
