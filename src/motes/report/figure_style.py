"""The house style of every motes figure: sizes, fonts, colours, line styles.

Every figure builder of :mod:`motes.report` is wrapped in :func:`house_style`
(one decorator: it draws the figure inside :func:`matplotlib.rc_context` with
:data:`HOUSE_RC`, so nothing leaks into the user's own settings) and makes its
figure with :func:`new_figure`, which gives journal widths.

Choices, and why
----------------
Widths
    :data:`ONE_COLUMN_IN` = 3.5 in and :data:`TWO_COLUMN_IN` = 7.1 in: the text
    widths of one and two columns in the astronomy journals (A&A 88 mm and
    180 mm, MNRAS 84 mm and 174 mm, AAS journals about 3.5 in and 7.1 in; from
    memory of the authors' guides). A figure drawn at the width it is printed
    at keeps its 8-pt labels 8 pt on paper.
Fonts
    8 pt text, 7 pt ticks and legends (common practice, no source: journals ask
    for lettering no smaller than about 6-7 pt at print size). DejaVu Sans,
    matplotlib's own font, has µ, ν, ′ and σ, so no label falls back to boxes;
    PDF and SVG embed it as TrueType (``pdf.fonttype = 42``), which journals'
    typesetting tools can read.
Colours for series
    :data:`SERIES_COLOURS`, six of the eight colours of Okabe & Ito (2008,
    "Color Universal Design (CUD): how to make figures and presentations that
    are friendly to colorblind people", https://jfly.uni-koeln.de/color/),
    designed to stay apart for the common colour-vision deficiencies. Black is
    kept for data. In grey several of them have similar lightness, so each
    series also has its own line style and marker (:func:`series_style`): a
    greyscale print still tells them apart.
Colour map
    ``cividis`` (Nuñez, Anderton & Renslow 2018, PLoS ONE 13, e0199239):
    perceptually uniform, its lightness rises monotonically (so it reads in
    grey) and it was optimised for readers with colour-vision deficiency.

Formats
    :data:`FIGURE_FORMATS` are the formats :func:`motes.report.save_figure`
    writes on request (``formats=("png", "pdf")``); PDF and SVG are vector.
"""

from __future__ import annotations

import functools

import matplotlib

__all__ = [
    "figure_band_name",
    "ONE_COLUMN_IN",
    "TWO_COLUMN_IN",
    "HOUSE_RC",
    "HOUSE_COLOUR_MAP",
    "SERIES_COLOURS",
    "DATA_COLOUR",
    "TRUTH_COLOUR",
    "FIGURE_FORMATS",
    "PNG_DPI",
    "house_style",
    "new_figure",
    "series_style",
    "colour_map",
]

#: width of a one-column figure [inch] (A&A 88 mm, MNRAS 84 mm, AAS 3.5 in; from memory)
ONE_COLUMN_IN = 3.5
#: width of a full-page (two-column) figure [inch] (A&A 180 mm, MNRAS 174 mm, AAS 7.1 in; from memory)
TWO_COLUMN_IN = 7.1
#: resolution of PNG files [dots per inch]; 300 is the usual journal minimum for raster art (common practice)
PNG_DPI = 300
#: formats :func:`motes.report.save_figure` can write (suffix = format)
FIGURE_FORMATS = ("png", "pdf", "svg")

#: Okabe & Ito (2008) colours, ordered so that neighbours differ in lightness too:
#: blue, orange, bluish green, vermillion, reddish purple, sky blue
SERIES_COLOURS = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9")
_SERIES_LINES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)), (0, (8, 2)))
_SERIES_MARKERS = ("s", "^", "D", "v", "P", "o")
#: measured data
DATA_COLOUR = "black"
#: an invented truth (demo figures), drawn as a star marker / dotted line
TRUTH_COLOUR = "#D55E00"
#: the sequential colour map of every image and colour-coded series
HOUSE_COLOUR_MAP = "cividis"

#: matplotlib settings of the house style (applied inside :func:`house_style` only)
HOUSE_RC = {
    "font.family": "DejaVu Sans",
    "font.size": 8.0,
    "axes.titlesize": 8.5,
    "axes.labelsize": 8.0,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "legend.fontsize": 7.0,
    "legend.frameon": False,
    "figure.titlesize": 9.0,
    "mathtext.fontset": "dejavusans",
    "axes.linewidth": 0.7,
    "lines.linewidth": 1.2,
    "lines.markersize": 4.5,
    "errorbar.capsize": 2.0,
    "xtick.direction": "in",
    "ytick.direction": "in",
    "xtick.top": True,
    "ytick.right": True,
    "xtick.major.size": 3.5,
    "ytick.major.size": 3.5,
    "xtick.minor.size": 2.0,
    "ytick.minor.size": 2.0,
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "axes.formatter.use_mathtext": False,
    "axes.formatter.limits": (-3, 4),
    "axes.grid": False,
    "grid.alpha": 0.25,
    "grid.linewidth": 0.5,
    "image.cmap": HOUSE_COLOUR_MAP,
    "axes.prop_cycle": matplotlib.cycler(color=list(SERIES_COLOURS), linestyle=list(_SERIES_LINES)),
    "savefig.dpi": PNG_DPI,
    "savefig.bbox": "tight",
    "savefig.pad_inches": 0.03,
    "pdf.fonttype": 42,
    "ps.fonttype": 42,
    "svg.fonttype": "path",
}


def house_style(builder):
    """Decorator: run a figure builder inside the house style (:data:`HOUSE_RC`).

    The settings hold while the builder draws and saves, and are undone
    afterwards (:func:`matplotlib.rc_context`): the user's own rcParams and
    backend are never changed. The wrapped function is marked
    ``__house_style__ = True`` (a test checks every public builder).
    """
    @functools.wraps(builder)
    def styled(*args, **kwargs):
        with matplotlib.rc_context(HOUSE_RC):
            return builder(*args, **kwargs)

    styled.__house_style__ = True
    return styled


def new_figure(columns: int = 1, height: float | None = None, aspect: float = 0.75):
    """A :class:`matplotlib.figure.Figure` of journal width.

    Parameters
    ----------
    columns : {1, 2}
        One column (:data:`ONE_COLUMN_IN`) or the full page (:data:`TWO_COLUMN_IN`).
    height : float, optional [inch]
        Default ``aspect`` times the width.
    aspect : float
        Height / width when ``height`` is not given.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.figure import Figure

    if columns not in (1, 2):
        raise ValueError(f"columns must be 1 or 2, not {columns!r}")
    width = ONE_COLUMN_IN if columns == 1 else TWO_COLUMN_IN
    return Figure(figsize=(width, height if height is not None else aspect * width))


def series_style(i: int) -> dict:
    """Colour, line style and marker of the ``i``-th series (cycling), as plot keywords."""
    k = i % len(SERIES_COLOURS)
    return {"color": SERIES_COLOURS[k], "linestyle": _SERIES_LINES[k], "marker": _SERIES_MARKERS[k]}


def colour_map():
    """The house colour map (``cividis``) as a :class:`matplotlib.colors.Colormap`."""
    return matplotlib.colormaps[HOUSE_COLOUR_MAP]


def figure_band_name(name: str) -> str:
    """A band as every figure writes it: ``"2mass_ks"`` -> ``"2MASS Ks"`` (user bands unchanged).

    A polarised-intensity row (``"2mass_h_polarised"`` or ``"2mass_h (polarised)"``)
    keeps its mark: ``"2MASS H (polarised)"``. See
    :func:`motes.photometry.band_names.display_name`.
    """
    from ..photometry.band_names import display_name

    for suffix in ("_polarised", " (polarised)"):
        if name.endswith(suffix):
            return display_name(name[: -len(suffix)]) + " (polarised)"
    return display_name(name)
