"""Progress bars for long work (tile building, grids, nested sampling).

A thin layer over tqdm: on a terminal the bar redraws twice a second; when
stderr is a file or a pipe (a batch job's log, CI) it prints a fresh line at
most every ``LOG_INTERVAL`` seconds, so overnight logs stay readable instead of
filling with redraws.
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
    return tqdm(**kwargs)
