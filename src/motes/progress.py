"""Progress bars for long work (tile building, grids, nested sampling).

A thin layer over tqdm: on a terminal the bar redraws twice a second; when
stderr is a file or a pipe (a batch job's log, CI) it prints a fresh line at
most every ``LOG_INTERVAL`` seconds, so overnight logs stay readable instead of
filling with redraws: there each redraw becomes a line of its own, with
plain ASCII bars and no cursor movement.
"""

from __future__ import annotations

import sys

__all__ = ["LOG_INTERVAL", "progress_bar"]

#: Seconds between progress lines when stderr is not a terminal.
LOG_INTERVAL = 60.0


def _stderr_is_terminal() -> bool:
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):  # replaced or closed stream
        return False


class _LogStream:
    """A file wrapper turning tqdm's redraws into whole lines (for logs)."""

    def __init__(self, stream):
        self.stream = stream

    def write(self, text: str) -> int:
        text = text.replace("\x1b[A", "")
        for piece in text.split("\r"):
            piece = piece.rstrip()
            if piece:
                self.stream.write(piece + "\n")
        return len(text)

    def flush(self) -> None:
        self.stream.flush()


def progress_bar(**kwargs):
    """A tqdm bar on stderr; keyword arguments go to ``tqdm.tqdm``.

    Returns
    -------
    tqdm.tqdm
    """
    from tqdm import tqdm

    kwargs.setdefault("file", sys.stderr)
    if _stderr_is_terminal():
        kwargs.setdefault("mininterval", 0.5)
        kwargs.setdefault("dynamic_ncols", True)
    else:
        kwargs["mininterval"] = max(float(kwargs.get("mininterval", 0.0)), LOG_INTERVAL)
        kwargs["maxinterval"] = max(float(kwargs.get("maxinterval", 0.0)), LOG_INTERVAL)
        kwargs["dynamic_ncols"] = False
        kwargs.setdefault("ncols", 100)
        kwargs["ascii"] = True
        kwargs["position"] = 0
        kwargs["file"] = _LogStream(kwargs["file"])
    return tqdm(**kwargs)
