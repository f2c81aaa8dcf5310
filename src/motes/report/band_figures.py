"""The figure of ``motes bands NAME --plot FILE``: one band's curve and its counting weight.

Drawn with matplotlib's object-oriented API (a :class:`matplotlib.figure.Figure`,
no pyplot), so it never touches the user's plotting backend.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from ..files import atomic_write
from ..photometry.bands import Band
from .figure_style import SERIES_COLOURS, figure_band_name, house_style, new_figure

__all__ = ["plot_band"]


@house_style
def plot_band(band: Band, path) -> Path:
    """Save a plot of a band's curve (normalised) to ``path`` (PNG, PDF, ...).

    Parameters
    ----------
    band : Band
    path : str or Path
        Output file; the format follows the suffix.

    Returns
    -------
    Path
    """
    from matplotlib.figure import Figure

    path = Path(path)
    if path.parent and not path.parent.exists():
        raise InputError("output folder does not exist", path.parent)
    fig = new_figure(1, height=3.0)
    ax = fig.subplots()
    t = band.throughput / band.throughput.max()
    ax.plot(band.wavelength, t, color=SERIES_COLOURS[0], lw=1.4, label=f"curve ({band.response} response)")
    w = band.weight(band.wavelength)
    ax.plot(band.wavelength, w / w.max(), color=SERIES_COLOURS[3], lw=1.0, ls="--",
            label=f"{band.counting}-counting weight")
    ax.axvline(band.pivot_wavelength, color="0.3", lw=0.8, ls=":", label=f"pivot {band.pivot_wavelength:.4f} µm")
    ax.set_xlabel("wavelength [µm]")
    ax.set_ylabel("normalised throughput")
    # the display name ("MKO L′") and the identifier to type ("mko_lp"); a user band by its own name
    shown = figure_band_name(band.name)
    title = (shown if shown == band.name else f"{shown} ({band.name})") + (" (approximate)" if band.approximate else "")
    ax.set_title(title)
    ax.set_ylim(0, 1.12)
    # below the axes: inside, it covers the curve of one band or another (a steep edge, a flat top)
    ax.legend(fontsize=6.5, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=2, frameon=False)
    fig.tight_layout()
    try:
        with atomic_write(path, suffix=path.suffix or ".png") as tmp:
            fig.savefig(tmp, dpi=130)
    except (OSError, ValueError) as exc:
        raise InputError(f"cannot save plot: {exc}", path) from None
    return path
