"""Running a grid: evaluate chunks of points in parallel and stream them into a store.

The driver (the process that called :func:`run_grid`) is the only one that
writes the store. Work is split into chunks of consecutive keys
(:attr:`GridSpec.chunk_size`); workers (local processes, or Dask workers)
receive a chunk number, compute the model colours, the analytic best scale and
chi-square of every point in it and return the columns; the driver writes each
returned chunk as one atomic Parquet part and moves on. At most a few chunks
per worker are in flight, so memory stays flat however large the grid.

Evaluation and the execution back ends (in-process, local processes, Dask)
are in :mod:`motes.dust.grid.workers`; the forward model comes from one
function, ``model_factory(spec, observations)``,
:func:`~motes.dust.grid.workers.build_disk_model` by default.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...errors import GridError
from .spec import AXES, DEFAULT_MAX_POINTS, GridSpec
from .store import GridStore, fraction_column, model_column
from .workers import (GridEvaluator, GridJob, build_disk_model, connect_scheduler, read_grid_observations,
                          run_dask, run_processes, run_serial)
from ..observations import DiskPhotometry

__all__ = [
    "GridRunSettings",
    "GridRunResult",
    "GridProbe",
    "run_grid",
    "probe_grid",
    "store_manifest",
    "check_grid_size",
    "default_store_path",
    "describe_dry_run",
    "PROBE_MAX_POINTS",
]


@dataclass(frozen=True)
class GridRunSettings:
    """How to run a grid.

    Attributes
    ----------
    workers : int or None
        Local worker processes; ``None`` = every core (``os.cpu_count()``);
        1 = evaluate in the driver process itself. Ignored with ``scheduler``.
    scheduler : str or None
        Address of a running Dask distributed scheduler (e.g.
        ``"tcp://10.0.0.5:8786"``); work then goes to its workers.
    scheduler_timeout : float
        Seconds to wait for the scheduler (and for at least one worker).
    overwrite : bool
        Delete an existing store of another grid description in the output folder.
    confirm_large : bool
        Allow grids larger than ``max_points``.
    max_points : int
        Size above which ``confirm_large`` is required.
    progress : bool
        Show a progress bar (stderr) with rate and ETA.
    in_flight_per_worker : int
        Chunks queued per worker (bounds the driver's memory).
    """

    workers: int | None = None
    scheduler: str | None = None
    scheduler_timeout: float = 10.0
    overwrite: bool = False
    confirm_large: bool = False
    max_points: int = DEFAULT_MAX_POINTS
    progress: bool = True
    in_flight_per_worker: int = 2

    def resolved_workers(self) -> int:
        n = (os.cpu_count() or 1) if self.workers is None else self.workers
        if not isinstance(n, int) or n < 1:
            raise GridError(f"workers must be a positive integer, got {self.workers!r}")
        return n


@dataclass(frozen=True)
class GridRunResult:
    """What a call to :func:`run_grid` did.

    Attributes
    ----------
    store : str
        The store folder.
    n_points : int
        Points in the grid.
    n_computed : int
        Points computed by this call.
    n_resumed : int
        Points already in the store when the call started.
    seconds : float
        Wall time of the evaluation loop.
    where : str
        ``"in-process"``, ``"N local processes"`` or the Dask scheduler address.
    """

    store: str
    n_points: int
    n_computed: int
    n_resumed: int
    seconds: float
    where: str

    @property
    def points_per_second(self) -> float:
        return self.n_computed / self.seconds if self.seconds > 0 else float("nan")


@dataclass(frozen=True)
class GridProbe:
    """A short timing probe of the forward model on a few grid points.

    Attributes
    ----------
    n_probe : int
        Points in the timed batch.
    build_seconds : float
        Time to build the model and evaluate its first point (tables loaded
        or built, compiled code ready; once per run).
    seconds_per_point : float
        Evaluation time per point on one core, in a batch of ``n_probe``
        points once the model is warm (what every further chunk costs).
    warmup_seconds : float
        Extra time of the first evaluation of that batch over a warm one
        (interpolation slices assembled, tiles loaded; paid once per run).
    """

    n_probe: int
    build_seconds: float
    seconds_per_point: float
    warmup_seconds: float = 0.0

    def estimate_seconds(self, n_points: int, workers: int) -> float:
        """Run time estimate: build and warm-up once, plus n_points spread evenly over workers."""
        return self.build_seconds + self.warmup_seconds + n_points * self.seconds_per_point / max(workers, 1)


def store_manifest(spec: GridSpec, observations: DiskPhotometry) -> dict:
    """The manifest a store of this grid gets (see :class:`GridStore`)."""
    bands = list(observations.row_keys)     # "<band>_polarised" for polarised-intensity rows
    columns = (["key"] + [fraction_column(m) for m in spec.materials] + list(spec.axis_names)
               + [model_column(b) for b in bands] + ["scale", "chi2", "dof"])
    return {
        "grid_digest": spec.digest,
        "source": spec.source,
        "description": spec.text,
        "n_points": spec.n_points,
        "chunk_size": spec.chunk_size,
        "materials": list(spec.materials),
        "fraction_divisions": spec.simplex.divisions,
        "fraction_bounds": [[lo, hi] for lo, hi in zip(spec.simplex.lower, spec.simplex.upper)],
        "axes": {name: list(values) for name, values in spec.axis_values.items()},
        "bands": bands,
        "columns": columns,
        # what produced the grid's numbers: mixing rule, geometry, star, grain model, size distribution
        "provenance": spec.description.provenance(),
        "observations": {
            "band": bands,
            "pivot_wavelength_um": [float(x) for x in observations.wavelength],
            "value": [float(x) for x in observations.value],
            "error": [float(x) for x in observations.error],
            "is_limit": [bool(x) for x in observations.is_limit],
            "normalisation": observations.normalisation,
            "notes": list(observations.notes),
            **({"intensity": list(observations.intensity)} if observations.has_polarised else {}),
        },
    }


def check_grid_size(spec: GridSpec, settings: GridRunSettings) -> None:
    """Refuse grids above ``settings.max_points`` unless confirmed."""
    if spec.n_points > settings.max_points and not settings.confirm_large:
        raise GridError(
            f"{spec.source}: {spec.describe_count()}, more than the {settings.max_points:,}-point limit; "
            "check the estimate with --dry-run, then confirm with --yes")


#: the timed batch of a probe holds at most this many points
PROBE_MAX_POINTS = 1000


def probe_grid(spec: GridSpec, model_factory=None, n_probe: int = 16, clock=time.perf_counter) -> GridProbe:
    """Time the model on the real path, on points spread over the grid (for ``--dry-run``).

    The model is built as a run builds it (lookup tables loaded, or built
    when missing), then one batch of points spread evenly over the keys (so
    over every axis) is evaluated twice: the first pass carries the one-off
    costs (interpolation slices, tiles), the second is timed as what every
    chunk of a run costs per point.

    Parameters
    ----------
    spec : GridSpec
    model_factory : callable, optional
        As in :func:`run_grid`.
    n_probe : int
        Fewest points in the timed batch; the batch is a chunk's worth of
        points (``spec.chunk_size``, at most :data:`PROBE_MAX_POINTS`) when
        that is more, and never more than the grid.
    clock : callable
        Seconds as a float (``time.perf_counter``; tests pass a stub).

    Returns
    -------
    GridProbe
    """
    start = clock()
    evaluator = GridEvaluator(spec, model_factory or build_disk_model)
    evaluator.evaluate(np.array([0]))            # compiled paths, first tiles
    build = clock() - start
    size = min(spec.n_points, max(n_probe, min(spec.chunk_size, PROBE_MAX_POINTS)))
    keys = np.unique(np.linspace(0, spec.n_points - 1, size).astype(np.int64))
    start = clock()
    evaluator.evaluate(keys)                     # first pass: one-off costs included
    first = clock() - start
    start = clock()
    evaluator.evaluate(keys)                     # warm pass: the cost of a chunk
    warm = clock() - start
    return GridProbe(n_probe=int(keys.size), build_seconds=build, seconds_per_point=warm / keys.size,
                     warmup_seconds=max(first - warm, 0.0))


def default_store_path(spec: GridSpec) -> Path:
    """Store folder used when none is given: ``./<description stem>_grid``.

    The one default of every command (:func:`motes.files.default_output_folder`),
    made absolute.
    """
    from ...files import default_output_folder

    return Path.cwd() / default_output_folder(spec.source, "grid")


def describe_dry_run(spec: GridSpec, output, settings: GridRunSettings = GridRunSettings(),
                     model_factory=None) -> list[str]:
    """Lines describing what a run would do, with a timed estimate; writes nothing.

    Parameters
    ----------
    spec : GridSpec
    output : str or os.PathLike
        The store folder the run would use.
    settings : GridRunSettings
    model_factory : callable, optional

    Returns
    -------
    list of str
    """
    n = spec.n_points
    lines = [f"grid {spec.source}",
             f"  {spec.describe_count()}",
             f"  materials: {', '.join(spec.materials)}; fraction step 1/{spec.simplex.divisions}",
             f"  {spec.n_chunks:,} chunks of up to {spec.chunk_size:,} points"]
    output = Path(output)
    if GridStore.is_store(output):
        try:
            store = GridStore.prepare(output, store_manifest(spec, read_grid_observations(spec)))
            lines.append(f"  store {output}: exists, {store.completed_points():,} of {n:,} points done; "
                         "a run resumes it")
        except GridError as exc:
            lines.append(f"  store {output}: would be refused: {exc}")
    elif output.exists() and (not output.is_dir() or any(output.iterdir())):
        lines.append(f"  store {output}: exists and is not a grid store; a run would be refused")
    else:
        lines.append(f"  store {output}: new")
    size_note = f"grids over {settings.max_points:,} points need --yes"
    if n > settings.max_points:
        size_note += " (this one does)"
    lines.append(f"  limit: {size_note}")
    probe = probe_grid(spec, model_factory)
    rate = 1.0 / probe.seconds_per_point
    lines.append(f"  timing probe: {probe.n_probe} points at {probe.seconds_per_point * 1e3:.3g} ms per point "
                 f"on one core ({rate:,.0f} points/s) after {probe.build_seconds:.1f} s to build the model "
                 f"and {probe.warmup_seconds:.1f} s of warm-up")
    if settings.scheduler:
        lines.append(f"  estimated run time on Dask ({settings.scheduler}): "
                     f"{_duration(n * probe.seconds_per_point)} divided by the cluster's worker threads, plus "
                     f"{_duration(probe.build_seconds + probe.warmup_seconds)} for each worker to build its model")
    else:
        w = settings.resolved_workers()
        lines.append(f"  estimated run time with {w} local process{'es' if w > 1 else ''}: "
                     f"{_duration(probe.estimate_seconds(n, w))} (ideal scaling; shared cores run slower)")
    n_cols = len(store_manifest(spec, read_grid_observations(spec))["columns"])
    size = n * n_cols * 8 * 0.6          # float64 columns, ~0.6 after zstd (measured on demo stores)
    lines.append(f"  store size: about {size / 1e6:,.1f} MB (compressed Parquet, estimate)" if size > 1e6
                 else f"  store size: about {size / 1e3:,.0f} kB (compressed Parquet, estimate)")
    return lines


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


# ------------------------------------------------------------------------- driver
def run_grid(spec: GridSpec, output, settings: GridRunSettings = GridRunSettings(), model_factory=None,
             echo=print) -> GridRunResult:
    """Evaluate every point of a grid into the store at ``output``, resuming if it exists.

    Parameters
    ----------
    spec : GridSpec
    output : str or os.PathLike
        Store folder: created when absent; continued when it holds a store of
        the same description; refused otherwise (see ``settings.overwrite``).
    settings : GridRunSettings
    model_factory : callable, optional
        ``model_factory(spec, observations)`` returning the forward model (see
        :class:`~motes.dust.grid.workers.GridEvaluator`); default
        :func:`~motes.dust.grid.workers.build_disk_model`.
    echo : callable
        Where one-line status messages go.

    Returns
    -------
    GridRunResult

    Raises
    ------
    motes.errors.GridError
        Too many points without confirmation; a store of another description;
        an unreachable scheduler. In each case nothing is written.

    Notes
    -----
    Order of checks, so that a refusal never changes anything on disk: grid
    size, then compatibility of an existing store, then the scheduler, then
    the model on one point; only then is the store created (or overwritten,
    under the writer lock). Every part already in the store is verified
    (:meth:`GridStore.damaged_parts`); a damaged one is moved aside, named
    through ``echo``, and its chunk computed again.
    """
    check_grid_size(spec, settings)
    workers = 0 if settings.scheduler else settings.resolved_workers()       # validates the setting
    model_factory = model_factory or build_disk_model      # resolved here: workers get it by reference
    observations = read_grid_observations(spec)
    manifest = store_manifest(spec, observations)
    if GridStore.is_store(output) and not settings.overwrite:
        GridStore.prepare(output, manifest)          # raises on mismatch, changes nothing
    client = connect_scheduler(settings.scheduler, settings.scheduler_timeout) if settings.scheduler else None
    try:
        if client is None:
            # validate the model before touching the store; also warms on-disk caches for workers
            local = GridEvaluator(spec, model_factory, observations)
            local.evaluate(spec.chunk_keys(0)[:1])
        store = GridStore.prepare(output, manifest, overwrite=settings.overwrite)
        with store:
            for path, why in store.set_aside_damaged():
                echo(f"damaged part {path.name}: {why}; moved aside to {path.name}.damaged and computed again")
            done = set(store.completed_chunks())
            pending = [c for c in range(spec.n_chunks) if c not in done]
            resumed = store.completed_points()
            if resumed:
                echo(f"resuming {store.path}: {resumed:,} of {spec.n_points:,} points already done")
            start = time.perf_counter()
            if client is not None:
                where = f"Dask scheduler {settings.scheduler}"
                run_dask(client, GridJob(spec, observations, model_factory), store, pending,
                         settings.in_flight_per_worker, settings.progress)
            elif workers == 1:
                where = "in-process"
                run_serial(local, store, pending, settings.progress)
            else:
                where = f"{workers} local processes"
                run_processes(GridJob(spec, observations, model_factory), store, pending, workers,
                              settings.in_flight_per_worker, settings.progress, evaluator=local)
            seconds = time.perf_counter() - start
            missing = spec.n_chunks - len(store.completed_chunks())
            if missing:
                raise GridError(f"{missing} chunk(s) of {store.path} are missing after the run; "
                                "run the same command again to compute them")
    finally:
        if client is not None:
            client.close()
    computed = spec.n_points - resumed
    return GridRunResult(store=str(store.path), n_points=spec.n_points, n_computed=computed,
                         n_resumed=resumed, seconds=seconds, where=where)


