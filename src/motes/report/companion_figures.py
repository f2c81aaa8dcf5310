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
from .figure_files import figure_paths, save_figure
from .figure_style import house_style

__all__ = ["plot_companion_sed", "plot_type_probability", "write_companion_figures", "plot_colour_magnitude",
           "default_cmd_bands"]

_MODE_NAMES = {"distance": "distance known", "colours": "colours only"}
_COLOURS = ("#1b6f8a", "#d4762c", "#6b8e23")


def _headline_ranking(result: Classification):
    est = result.estimate
    if est is not None:
        for r in result.rankings:
            if r.source == est.source and r.mode == est.mode:
                return r
    return result.rankings[0]


@house_style
def plot_companion_sed(result: Classification, path, n_best: int = 3, formats=None) -> Path:
    """Measured SED (f_nu vs wavelength) with the ``n_best`` most probable templates, and residuals.

    Detections are points with 1-sigma error bars and the band's FWHM as a
    horizontal bar; upper limits are open triangles with arrows from the
    N-sigma limiting flux. Templates of the headline ranking are drawn as
    band-averaged values (a stroke across each band, no line joining bands),
    library spectra as thin curves, the best blackbody (when the fallback was
    used) as a dashed curve. Bands without a template value are predicted from
    the spectrum when there is one (open markers, not fitted), else named in
    the title. The lower panel shows data / template per band. Band labels
    are placed clear of the points (see :mod:`motes.report.companion_sed`).

    Parameters
    ----------
    result : Classification
    path : str or Path
        File to write (see :func:`motes.report.save_figure`).
    n_best : int
    formats : sequence of str, optional
        ``("png", "pdf")`` and so on; default the suffix of ``path``.

    Returns
    -------
    Path
        The first file written.
    """
    from .companion_sed import draw_companion_sed

    fig, _labels, _boxes = draw_companion_sed(result, n_best)
    return save_figure(fig, path, formats=formats)


@house_style
def plot_type_probability(result: Classification, path, formats=None, truth=None) -> Path:
    """Probability versus spectral type for every ranking with spectral types.

    Sequence rankings show the probability per integer subtype (bars, summing
    to 1) and the fine-grid posterior as a density per subtype (line; its
    integral over the type axis is 1), their 68% interval shaded and the
    median marked, both named in the legend; library rankings show one marker
    per spectrum. The axis spans the types holding 99.5% of the probability,
    plus one subtype on either side.

    Parameters
    ----------
    result : Classification
    path : str or Path
    formats : sequence of str, optional
    truth : str or float, optional
        A known spectral type (the demo's invented truth), drawn as a line.

    Returns
    -------
    Path
    """
    from .companion_types import draw_type_probability

    return save_figure(draw_type_probability(result, truth=truth), path, formats=formats)


def write_companion_figures(result: Classification, folder, stem: str | None = None, formats=None,
                            truth=None) -> list[Path]:
    """Write both figures into ``folder`` (each in every one of ``formats``, default PNG); return the paths.

    ``truth``: a known spectral type (the demo's invented truth), drawn on the type figure.
    """
    from .companion_text import classification_file_stem

    folder = Path(folder)
    stem = stem or classification_file_stem(result.target)
    paths = []
    for name, draw in ((f"{stem}_sed.png", lambda p: plot_companion_sed(result, p, formats=formats)),
                       (f"{stem}_types.png", lambda p: plot_type_probability(result, p, formats=formats,
                                                                             truth=truth))):
        draw(folder / name)
        paths += figure_paths(folder / name, formats)
    return paths


#: Short names of the sequence's bands for axis labels.
_CMD_BAND_NAMES = {"johnson_v": "V", "gaia_bp": "BP", "gaia_g": "G", "cousins_r": "R_C", "gaia_rp": "RP",
                   "cousins_i": "I_C", "2mass_j": "J", "2mass_h": "H", "2mass_ks": "K_s", "wise_w1": "W1",
                   "wise_w2": "W2"}


def default_cmd_bands(result: Classification) -> tuple[str, str, str] | None:
    """(colour band 1, colour band 2, magnitude band) for the default diagram, as sequence band names.

    J - Ks against J when both are detected; otherwise the bluest and reddest detected bands the
    sequence covers, against the bluer one; None with fewer than two.
    """
    mapping = dict(getattr(result.settings, "band_map", ()) or ())
    from ..companion.sequence import SEQUENCE_BANDS

    names = [mapping.get(r.band.name, r.band.name) for r in result.photometry.rows if not r.is_limit]
    names = [n for n in names if n in SEQUENCE_BANDS]
    if "2mass_j" in names and "2mass_ks" in names:
        return ("2mass_j", "2mass_ks", "2mass_j")
    if len(names) < 2:
        return None
    order = sorted(names, key=SEQUENCE_BANDS.index)
    return (order[0], order[-1], order[0])


@house_style
def plot_colour_magnitude(result: Classification, path, bands=None, formats=None) -> Path:
    """Colour-magnitude diagram: the dwarf sequence labelled by type and the companion.

    The companion is drawn at the host's distance with 1-sigma errors (the magnitude's
    error includes the distance modulus's). When the photometric boundness test was run
    and did not call the companion bound, it is drawn a second time where the background
    reading puts it: absolute magnitude at that reading's most probable distance and the
    colour corrected for the mean reddening on the way there.

    Parameters
    ----------
    result : Classification
        With the host's distance.
    path : str or Path
    bands : (str, str, str), optional
        Colour = band 1 - band 2, against the absolute magnitude in band 3; sequence band
        names or observed band names mapped to them (default :func:`default_cmd_bands`).
    formats : sequence of str, optional

    Returns
    -------
    Path

    Raises
    ------
    InputError
        A band that is not a detected band of the photometry or that the sequence does not tabulate.
    """
    from ..companion.sequence import SEQUENCE_BANDS, load_dwarf_sequence, read_dwarf_sequence_file
    from ..errors import InputError
    from .figure_style import SERIES_COLOURS, new_figure

    phot = result.photometry
    if not math.isfinite(phot.distance_modulus):
        raise InputError("a colour-magnitude diagram needs the host's distance")
    mapping = dict(getattr(result.settings, "band_map", ()) or ())
    bands = tuple(bands) if bands is not None else default_cmd_bands(result)
    if bands is None or len(bands) != 3:
        raise InputError("a colour-magnitude diagram needs two detected bands the dwarf sequence tabulates, "
                         f"named as (colour band 1, colour band 2, magnitude band); got {bands!r}")
    rows = {}
    for r in phot.rows:
        if not r.is_limit:
            rows[r.band.name] = r
            rows.setdefault(mapping.get(r.band.name, r.band.name), r)
    picked, standard = [], []
    for name in bands:
        row = rows.get(name)
        std = mapping.get(row.band.name, row.band.name) if row is not None else name
        if row is None or std not in SEQUENCE_BANDS:
            raise InputError(f"band {name!r} for the colour-magnitude diagram must be a detected band that the "
                             f"dwarf sequence tabulates ({', '.join(SEQUENCE_BANDS)}); detected: "
                             f"{', '.join(r.band.name for r in phot.rows if not r.is_limit)}")
        picked.append(row)
        standard.append(std)
    if standard[0] == standard[1]:
        raise InputError(f"the colour needs two different bands, got {bands[0]!r} twice")
    path_seq = getattr(result.settings, "sequence_file", None)
    seq = read_dwarf_sequence_file(path_seq) if path_seq else load_dwarf_sequence()
    codes = np.arange(seq.code_range[0], seq.code_range[1] + 1e-9, 0.1)
    m1, m2, my = (seq.value(s, codes) for s in standard)
    ok = np.isfinite(m1) & np.isfinite(m2) & np.isfinite(my)
    names = [_CMD_BAND_NAMES.get(s, s) for s in standard]
    mathname = [n if "_" not in n else n.split("_")[0] + "_{\\rm " + n.split("_")[1] + "}" for n in names]
    fig = new_figure(1, aspect=1.25)
    ax = fig.subplots()
    colour_seq, mag_seq = (m1 - m2)[ok], my[ok]
    ax.plot(colour_seq, mag_seq, "-", color="0.55", lw=1.0, zorder=1, label=f"{seq.name}")
    type_anchors, type_texts = [], []     # labelled after the layout is final, clear of the markers
    for c in np.arange(math.ceil(codes[ok][0]), codes[ok][-1] + 1e-9, 1.0):
        if c % 5:
            continue
        i = int(np.argmin(np.abs(codes - c)))
        if not ok[i]:
            continue
        ax.plot(m1[i] - m2[i], my[i], "o", color="0.35", ms=2.5, zorder=2)
        type_anchors.append((m1[i] - m2[i], my[i]))
        type_texts.append(type_label(c, 0))
    a, b_, y = picked
    colour = a.apparent_mag - b_.apparent_mag
    colour_err = math.hypot(a.apparent_mag_error, b_.apparent_mag_error)
    mag = y.apparent_mag - phot.distance_modulus
    mag_err = math.hypot(y.apparent_mag_error, phot.distance_modulus_error
                         if math.isfinite(phot.distance_modulus_error) else 0.0)
    ax.errorbar([colour], [mag], xerr=[colour_err], yerr=[mag_err], fmt="*", ms=9, color="black", capsize=2,
                zorder=5, label=f"companion at the host's distance, {phot.distance_pc:.3g} pc")
    xs, ys = list(colour_seq) + [colour], list(mag_seq) + [mag]
    test = getattr(result, "boundness", None)
    if test is not None and test.verdict != "bound":
        from ..companion.extinction import extinction_coefficients

        bg = test.background
        k = extinction_coefficients([a.band, b_.band, y.band], result.settings.extinction_law, result.settings.rv)
        colour_bg = colour - bg.av * (k[0] - k[1])
        mag_bg = y.apparent_mag - 5 * math.log10(bg.best_distance / 10.0) - bg.av * k[2]
        ax.errorbar([colour_bg], [mag_bg], xerr=[colour_err], yerr=[y.apparent_mag_error], fmt="D", ms=5,
                    mfc="white", color=SERIES_COLOURS[1], capsize=2, zorder=5,
                    label=f"at the background reading's distance, {bg.best_distance:.3g} pc "
                          f"(A$_V$ = {bg.av:.2f} mag)")
        ax.annotate("", (colour_bg, mag_bg), (colour, mag),
                    arrowprops={"arrowstyle": "->", "color": SERIES_COLOURS[1], "lw": 0.8}, zorder=4)
        xs.append(colour_bg)
        ys.append(mag_bg)
    pad_x = 0.08 * (max(xs) - min(xs) + 0.2)
    pad_y = 0.05 * (max(ys) - min(ys) + 1.0)
    ax.set_xlim(min(xs) - pad_x, max(xs) + 3 * pad_x)
    ax.set_ylim(max(ys) + pad_y, min(ys) - pad_y)      # brighter up
    ax.set_xlabel(f"${mathname[0]} - {mathname[1]}$ [mag]")
    ax.set_ylabel(f"$M_{{{mathname[2]}}}$ [mag]")
    ax.minorticks_on()
    ax.grid(True, alpha=0.2, lw=0.4)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), frameon=False)
    title = result.target
    if test is not None:
        title += f": {test.verdict} (B = {test.bayes_factor:.3g})"
    ax.set_title(title)
    fig.tight_layout()
    # type labels beside their dots, clear of the companion's marker and error bars and of each other
    from .label_placement import marker_boxes, place_labels

    obstacles = marker_boxes(ax, list(ax.lines) + list(ax.collections))
    place_labels(ax, type_anchors, type_texts, obstacles=obstacles, fontsize=6.5)
    return save_figure(fig, path, formats=formats)
