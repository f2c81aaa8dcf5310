"""Progress bars for long work (tile building, grids, nested sampling).

A thin layer over tqdm: on a terminal the bar redraws twice a second; when
stderr is a file or a pipe (a batch job's log, CI) it prints a fresh line at
most every ``LOG_INTERVAL`` seconds, so overnight logs stay readable instead of
filling with redraws: there each redraw becomes a line of its own, with
plain ASCII bars and no cursor movement.
"""

from __future__ import annotations

import sys

__all__ = ["LOG_INTERVAL", "progress_bar", "remaining_estimate"]

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


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def remaining_estimate(timed, calls_per_job, n_left: int, unit: str = "model") -> str | None:
    """A labelled estimate of the time the jobs left will take, or None.

    The rate is that of the jobs run from start to end in this session
    (likelihood calls per second of wall time, everything included); the
    work per job is the mean of the calls of every finished job. Jobs differ
    (a model with more free parameters needs more calls), so the line says it
    is an estimate and what it rests on.

    Parameters
    ----------
    timed : sequence of (int, float)
        (likelihood calls, wall seconds) of each job run whole in this session.
    calls_per_job : sequence of int
        Likelihood calls of every finished job (including earlier sessions').
    n_left : int
        Jobs not finished yet.
    unit : str
        What a job is called in the line.

    Returns
    -------
    str or None
        None when nothing is left or no job was timed yet.

    Examples
    --------
    >>> print(remaining_estimate([(6000, 60.0)], [6000, 4000], 3))
    estimate: about 2 min for the 3 models left (5,000 likelihood calls per model so far, at 100 calls/s; models differ, so this is a rough guide)
    """
    calls = sum(c for c, _ in timed)
    seconds = sum(s for _, s in timed)
    if n_left <= 0 or not timed or seconds <= 0 or calls <= 0 or not calls_per_job:
        return None
    rate = calls / seconds
    per_job = sum(calls_per_job) / len(calls_per_job)
    plural = unit if n_left == 1 else unit + "s"
    return (f"estimate: about {_duration(n_left * per_job / rate)} for the {n_left} {plural} left "
            f"({per_job:,.0f} likelihood calls per {unit} so far, at {rate:,.0f} calls/s; "
            f"{unit}s differ, so this is a rough guide)")
