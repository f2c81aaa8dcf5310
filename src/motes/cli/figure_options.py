"""The one command-line option that chooses figure formats, shared by every command that draws.

``--figure-formats png,pdf`` (default ``png``): each figure is written once
per format, with that suffix (see :func:`motes.report.save_figure`). PDF and
SVG are vector formats for journals; PNG is for screens.
"""

from __future__ import annotations

import argparse

__all__ = ["add_figure_formats_option", "figure_formats"]


def _formats(text: str) -> tuple[str, ...]:
    from ..errors import InputError
    from ..report.figure_files import check_formats

    try:
        return check_formats(text)
    except InputError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def add_figure_formats_option(parser) -> None:
    """Add ``--figure-formats LIST`` to an argparse parser."""
    parser.add_argument("--figure-formats", metavar="LIST", type=_formats, default=None,
                        help="figure formats, comma-separated: png, pdf (vector), svg (vector); "
                             "default png; e.g. --figure-formats png,pdf (the HTML report page embeds "
                             "the PNG or SVG ones)")


def figure_formats(args) -> tuple[str, ...] | None:
    """The formats chosen on the command line (None: the default, PNG)."""
    return getattr(args, "figure_formats", None)
