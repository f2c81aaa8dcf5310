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
the companion, then the dust optics, fit and grid.
"""

from __future__ import annotations

import importlib
import time
from pathlib import Path

from ..errors import InputError
from ..files import write_bytes_atomic

__all__ = ["DEMO_PARTS", "available_parts", "copy_demo_inputs", "run_demo"]

#: Demo parts in the order they run.
DEMO_PARTS = ("photometry", "companion", "optics", "disk_fit", "disk_grid")


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


def run_demo(folder, parts=None, echo=print) -> Path:
    """Write the demo inputs into ``folder`` and run the chosen parts.

    Parameters
    ----------
    folder : str or os.PathLike
        Where inputs and results go (created if needed).
    parts : sequence of str, optional
        Subset of :data:`DEMO_PARTS`; all available parts by default.
    echo : callable
        Where progress lines go.

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
    folder.mkdir(parents=True, exist_ok=True)
    echo(f"motes demo: an invented star system, written to {folder.resolve()}")
    echo("All names and measurements in this demo are invented (generated from known truth).")
    for name in chosen:
        module = importlib.import_module(f"{__name__}.{name}")
        echo("")
        echo(f"=== {name.replace('_', ' ')} ===")
        start = time.perf_counter()
        module.write_inputs(folder)
        module.run(folder)
        echo(f"({name.replace('_', ' ')} took {time.perf_counter() - start:.1f} s)")
    return folder
