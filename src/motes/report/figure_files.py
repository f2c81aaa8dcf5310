"""Writing a finished figure to disk: PNG and/or vector formats, atomically, or one clear error."""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from ..files import atomic_writes

__all__ = ["save_figure", "figure_paths", "check_formats", "page_preview"]

#: PNG copies, kept in memory only, of figures saved in vector formats alone (``--figure-formats pdf``),
#: so that the run's report page can still show them; keyed by the resolved path of the vector file.
#: Each save replaces its entry; nothing here is ever written to disk.
_PAGE_PREVIEWS: dict[Path, bytes] = {}


def page_preview(path) -> bytes | None:
    """The in-memory PNG copy of a figure saved only as PDF by :func:`save_figure` in this process.

    Parameters
    ----------
    path : str or os.PathLike
        A PDF file :func:`save_figure` wrote.

    Returns
    -------
    bytes or None
        PNG data, or None when the figure was saved with a PNG or SVG file (or not by this process).
    """
    return _PAGE_PREVIEWS.get(Path(path).resolve())


def figure_paths(path, formats=None) -> list[Path]:
    """The files :func:`save_figure` writes for ``path`` and ``formats``, in that order.

    ``formats`` None: ``path`` itself (a missing suffix becomes ``.png``);
    otherwise one file per format, ``path`` with that suffix.
    """
    path = Path(path)
    if formats is None:
        return [path if path.suffix else path.with_suffix(".png")]
    formats = check_formats(formats)
    return [path.with_suffix("." + f) for f in formats]


def check_formats(formats) -> tuple[str, ...]:
    """Validate a list of figure formats (``"png"``, ``"pdf"``, ``"svg"``; a string may list several
    separated by commas); return them lower-cased, without repeats, in order.

    Raises
    ------
    motes.errors.InputError
        An empty list or an unknown format, naming what is allowed.
    """
    from .figure_style import FIGURE_FORMATS

    if isinstance(formats, str):
        formats = formats.split(",")
    out = []
    for f in formats:
        f = str(f).strip().lower().lstrip(".")
        if f not in FIGURE_FORMATS:
            raise InputError(f"unknown figure format {f!r}; allowed: {', '.join(FIGURE_FORMATS)} "
                             "(several separated by commas, e.g. png,pdf)")
        if f not in out:
            out.append(f)
    if not out:
        raise InputError(f"no figure format given; allowed: {', '.join(FIGURE_FORMATS)}")
    return tuple(out)


def save_figure(fig, path, dpi: int | None = None, formats=None) -> Path:
    """Write ``fig`` (a :class:`matplotlib.figure.Figure`) to ``path``, in one or several formats.

    The folder is created; all files are written to temporary names and
    renamed together (:func:`motes.files.atomic_writes`), so an existing
    figure is never half overwritten and no format is left stale.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : str or os.PathLike
        File name; with ``formats`` its suffix is replaced by each format's.
    dpi : int, optional
        PNG resolution (default the house style's, :data:`motes.report.figure_style.PNG_DPI`).
    formats : sequence of str or str, optional
        ``"png"``, ``"pdf"`` (vector), ``"svg"`` (vector); default: the
        suffix of ``path`` (PNG when it has none).

    Returns
    -------
    Path
        The first file written (see :func:`figure_paths` for all of them).
        When no PNG or SVG file is among them, a PNG copy is also kept in
        memory (not on disk) for the run's report page (:func:`page_preview`).

    Raises
    ------
    motes.errors.InputError
        The file cannot be written (unwritable folder, disk full), naming it,
        or an unknown format.
    """
    import matplotlib

    from .figure_style import PNG_DPI

    paths = figure_paths(path, formats)
    try:
        paths[0].parent.mkdir(parents=True, exist_ok=True)
        # vector files embed their fonts as TrueType (not Type 3), which journals' tools can edit
        with atomic_writes(paths) as tmps, matplotlib.rc_context({"pdf.fonttype": 42, "ps.fonttype": 42}):
            for tmp, final in zip(tmps, paths):
                fig.savefig(tmp, dpi=dpi or PNG_DPI, format=final.suffix.lstrip(".") or "png")
    except OSError as exc:
        raise InputError(f"cannot write figure: {exc}", paths[0]) from None
    vector_only = not any(p.suffix.lower() in (".png", ".svg") for p in paths)
    for p in paths:
        _PAGE_PREVIEWS.pop(p.resolve(), None)
    if vector_only:
        import io

        buffer = io.BytesIO()
        fig.savefig(buffer, dpi=dpi or PNG_DPI, format="png")
        for p in paths:
            _PAGE_PREVIEWS[p.resolve()] = buffer.getvalue()
    return paths[0]
