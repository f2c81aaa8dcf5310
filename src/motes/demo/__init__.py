"""The bundled demo: an invented star system run end to end.

The demo inputs are invented: photometry and disk colours generated from known
truth by the scripts in ``examples/`` and shipped as package data in
``motes/demo/data``. Each part of the demo is a module of this package with

``write_inputs(folder)``
    copy that part's input files into ``folder``;
``run(folder)``
    run the part through the public API, print a short summary and the paths
    of the files it wrote.

:func:`run_demo` runs the parts in data-flow order: measurements first, then
the companion, then the dust optics, fit and grid, then the joint
scattered-light + thermal fit. A part whose module sets ``RUNS_APART = True``
(it reads nothing another part writes, and writes nothing another reads: the
joint fit) runs in a second process alongside the others when ``workers`` is 2
or more; its printed output is held back and shown in its turn, with its own
time. The results are those of a run in sequence (each fit is seeded; nothing
in a part depends on the process it runs in).
"""

from __future__ import annotations

import importlib
import os
import time
from pathlib import Path

from ..errors import InputError, MotesError
from ..files import write_bytes_atomic

__all__ = ["DEMO_PARTS", "available_parts", "copy_demo_inputs", "run_demo"]

#: Demo parts in the order they run.
DEMO_PARTS = ("photometry", "companion", "optics", "disk_fit", "disk_grid", "joint_fit")


def copy_demo_inputs(folder, names) -> None:
    """Copy the named package-data files of the demo into ``folder`` (created if needed)."""
    from importlib import resources

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    data = resources.files(__name__) / "data"
    for name in names:
        write_bytes_atomic(folder / name, (data / name).read_bytes())


def available_parts() -> list[str]:
    """Demo parts present in this installation."""
    found = []
    for name in DEMO_PARTS:
        try:
            importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"{__name__}.{name}":
                raise
            continue
        found.append(name)
    return found


def run_demo(folder, parts=None, echo=print, workers=None) -> Path:
    """Write the demo inputs into ``folder`` and run the chosen parts.

    Parameters
    ----------
    folder : str or os.PathLike
        Where inputs and results go (created if needed).
    parts : sequence of str, optional
        Subset of :data:`DEMO_PARTS`; all available parts by default.
    echo : callable
        Where progress lines go.
    workers : int, optional
        Processes: with 2 or more, the parts marked ``RUNS_APART`` run in a
        second process alongside the others (when other parts run too);
        with 1, every part runs in sequence in this process. Default: 2, or
        1 on a one-core machine.

    Returns
    -------
    pathlib.Path
        The demo folder.
    """
    folder = Path(folder)
    known = available_parts()
    chosen = list(known if parts is None else parts)
    unknown = [p for p in chosen if p not in known]
    if unknown:
        raise InputError(f"unknown demo part(s) {unknown}; available: {known}")
    workers = min(2, os.cpu_count() or 1) if workers is None else int(workers)
    if workers < 1:
        raise InputError(f"workers must be >= 1, got {workers}", where="workers")
    modules = {name: importlib.import_module(f"{__name__}.{name}") for name in chosen}
    apart = [n for n in chosen if workers > 1 and len(chosen) > 1 and getattr(modules[n], "RUNS_APART", False)]
    folder.mkdir(parents=True, exist_ok=True)
    apart_run = _ApartRun(folder, apart) if apart else None
    # parts of this process that a part apart waits for on a fresh cache (their tiles are its tiles)
    awaited = {n for a in apart for n in getattr(modules[a], "WAITS_FOR", ()) if n in chosen and n not in apart}
    if apart_run is not None and not awaited:
        apart_run.go()
    echo(f"motes demo: an invented star system, written to {folder.resolve()}")
    echo("All names and measurements in this demo are invented (generated from known truth).")
    try:
        for name in chosen:
            label = name.replace("_", " ")
            echo("")
            echo(f"=== {label} ===")
            if name in apart:
                apart_run.go()
                ok, text, seconds = apart_run.result(name)
                if text:
                    echo(text.rstrip("\n"))
                if not ok:
                    raise MotesError(f"demo part {name!r} failed in its process: {text.strip().splitlines()[-1]}")
                echo(f"({label} took {seconds:.1f} s, in a second process alongside the other parts)")
                continue
            start = time.perf_counter()
            modules[name].write_inputs(folder)
            modules[name].run(folder)
            echo(f"({label} took {time.perf_counter() - start:.1f} s)")
            awaited.discard(name)
            if apart_run is not None and not awaited:
                apart_run.go()
    finally:
        if apart_run is not None:
            apart_run.close()
    return folder


class _ApartRun:
    """The ``RUNS_APART`` parts, run one after the other in a second (spawned) process.

    A fresh interpreter (spawn) is safe whatever this process has imported or
    started. Each part's result (ok, printed text, seconds) comes back through a
    pipe; a process that dies without answering (e.g. a script calling
    :func:`run_demo` without ``if __name__ == "__main__":``, which spawn
    re-imports) is reported, never waited for forever.
    """

    def __init__(self, folder: Path, names):
        import multiprocessing as mp

        ctx = mp.get_context("spawn")
        self._conn, child = ctx.Pipe(duplex=False)
        go_child, self._go = ctx.Pipe(duplex=False)
        self._proc = ctx.Process(target=_run_parts_apart, args=(str(folder), list(names), child, go_child),
                                 daemon=True)
        self._proc.start()
        child.close()
        go_child.close()
        self._went = False
        self._results = {}

    def go(self) -> None:
        """Tell the second process that the parts it may wait for are done (once)."""
        if not self._went:
            self._went = True
            try:
                self._go.send(True)
            except (BrokenPipeError, OSError):      # it has already stopped: result() reports it
                pass

    def result(self, name: str) -> tuple[bool, str, float]:
        while name not in self._results:
            ended = False
            if self._conn.poll(0.2):
                try:
                    got, ok, text, seconds = self._conn.recv()
                    self._results[got] = (ok, text, seconds)
                    continue
                except EOFError:      # the process closed its end: nothing more will come
                    ended = True
            if ended or not self._proc.is_alive() and not self._conn.poll():
                self._proc.join(timeout=5)
                raise MotesError(
                    f"the second process of the demo (part {name!r}) stopped without a result (exit code "
                    f"{self._proc.exitcode}); a script that calls run_demo needs `if __name__ == \"__main__\":` "
                    "around it, or run with workers=1")
        return self._results[name]

    def close(self) -> None:
        if self._proc.is_alive():
            self._proc.terminate()
        self._proc.join()
        self._conn.close()
        self._go.close()


def _run_parts_apart(folder: str, names, conn, go) -> None:
    """Worker process: run each part of ``names`` (:func:`_run_part_apart`) and send its result.

    A part with a ``warm_up(folder)`` runs it first (e.g. building the lookup tiles that only it
    needs); when that returns True (a fresh cache), the part waits for the main process's go
    (sent when the parts it names in ``WAITS_FOR`` are done) before it runs.
    """
    try:
        for name in names:
            module = importlib.import_module(f"{__name__}.{name}")
            warm = getattr(module, "warm_up", None)
            cold = False
            if warm is not None:
                try:
                    cold = bool(warm(Path(folder)))
                except MotesError:
                    cold = False        # the part's own run reports the problem
            if cold:
                try:
                    go.recv()
                except EOFError:        # the main process has gone: nothing to wait for
                    pass
            conn.send((name, *_run_part_apart(folder, name)))
    finally:
        conn.close()
        go.close()


def _run_part_apart(folder: str, name: str) -> tuple[bool, str, float]:
    """Run one demo part in this (worker) process; return (ok, what it printed, seconds).

    The part's printed lines are captured, its progress bars left out when its
    ``run`` takes ``progress`` (they would interleave with the other parts').
    On an error, ``ok`` is False and the text ends with the error's message (a
    traceback for a bug).
    """
    import contextlib
    import inspect
    import io
    import traceback

    module = importlib.import_module(f"{__name__}.{name}")
    quiet = {"progress": False} if "progress" in inspect.signature(module.run).parameters else {}
    out = io.StringIO()
    start = time.perf_counter()
    ok = True
    with contextlib.redirect_stdout(out):
        try:
            module.write_inputs(Path(folder))
            module.run(Path(folder), **quiet)
        except MotesError as exc:
            ok = False
            print(f"error: {exc}")
        except Exception:
            ok = False
            print(traceback.format_exc())
    return ok, out.getvalue(), time.perf_counter() - start
