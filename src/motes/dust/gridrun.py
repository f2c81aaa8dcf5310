"""Running a grid: evaluate chunks of points in parallel and stream them into a store.

The driver (the process that called :func:`run_grid`) is the only one that
writes the store. Work is split into chunks of consecutive keys
(:attr:`GridSpec.chunk_size`); workers (local processes, or Dask workers)
receive a chunk number, compute the model colours, the analytic best scale and
chi-square of every point in it and return the columns; the driver writes each
returned chunk as one atomic Parquet part and moves on. At most a few chunks
per worker are in flight, so memory stays flat however large the grid.

A worker builds the forward model once, from the grid description, the first
time it is handed work (:class:`GridEvaluator`); the model comes from one
function, ``model_factory(spec)``, :func:`build_disk_model` by default.
"""

from __future__ import annotations

import concurrent.futures as cf
import itertools
import multiprocessing
import os
import signal
import sys
import threading
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import GridError, MotesError
from .grid import AXES, DEFAULT_MAX_POINTS, GridSpec
from .gridstore import GridStore, fraction_column, model_column
from .observations import DiskPhotometry, chi_square_with_best_scale, read_disk_photometry

__all__ = [
    "GridRunSettings",
    "GridRunResult",
    "GridProbe",
    "GridEvaluator",
    "build_disk_model",
    "run_grid",
    "probe_grid",
    "store_manifest",
    "check_grid_size",
    "default_store_path",
    "describe_dry_run",
    "read_grid_observations",
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
        Points evaluated (after a warm-up point).
    build_seconds : float
        Time to build the model (once per worker).
    seconds_per_point : float
        Evaluation time per point on one core.
    """

    n_probe: int
    build_seconds: float
    seconds_per_point: float

    def estimate_seconds(self, n_points: int, workers: int) -> float:
        """Run time estimate: build once plus n_points spread evenly over workers."""
        return self.build_seconds + n_points * self.seconds_per_point / max(workers, 1)


def build_disk_model(spec: GridSpec, observations: DiskPhotometry):
    """The forward model a grid description asks for (the default ``model_factory``).

    Parameters
    ----------
    spec : GridSpec
    observations : DiskPhotometry
        The data; the model is built for their bands, in their order.

    Returns
    -------
    motes.dust.model.DiskColourModel
        Built from the description's ``[star]``, ``[[materials]]``, ``[mixing]``,
        ``[geometry]``, ``[model]`` sections (:mod:`motes.dust.description`), for
        the bands of the disk photometry in their order, with its lookup tables
        loaded (fast path).
    """
    from .description import parse_model_description

    description = parse_model_description(spec.description, base_dir=spec.base_dir, source=spec.source)
    model = description.build_model(bands=observations.bands)
    model.prepare()
    return model


def read_grid_observations(spec: GridSpec) -> DiskPhotometry:
    """The disk photometry a grid compares to (``[data] photometry``), with the description's user bands."""
    from .description import parse_model_description

    description = parse_model_description(spec.description, base_dir=spec.base_dir, source=spec.source)
    return read_disk_photometry(spec.photometry, custom_bands=description.custom_bands)


class GridEvaluator:
    """Evaluates grid points: model colours, best scale, chi-square, degrees of freedom.

    Parameters
    ----------
    spec : GridSpec
    model_factory : callable, optional
        ``model_factory(spec, observations)`` returns an object with
        ``flux_ratio(fractions[N, K], porosity[N], a_min[N], q[N], a_max=[N]) -> [N, B]``
        whose bands are those of the photometry, in order. Must be picklable
        (a module-level function) to reach worker processes.
        Default :func:`build_disk_model`.
    observations : DiskPhotometry, optional
        Read from ``spec.photometry`` when not given.
    """

    def __init__(self, spec: GridSpec, model_factory=None, observations: DiskPhotometry | None = None):
        self.spec = spec
        self.observations = observations if observations is not None else read_grid_observations(spec)
        self.model = (model_factory or build_disk_model)(spec, self.observations)

    def evaluate(self, keys) -> dict[str, np.ndarray]:
        """Store columns for the given keys.

        Parameters
        ----------
        keys : ndarray[N] of int

        Returns
        -------
        dict of str to ndarray[N]
            ``key``, ``f_<material>``, porosity, a_min, q, a_max, ``model_<band>``,
            ``scale``, ``chi2``, ``dof``.
        """
        pts = self.spec.points(keys)
        flux = np.asarray(self.model.flux_ratio(pts.fractions, pts.porosity, pts.a_min, pts.q,
                                                a_max=pts.a_max), dtype=float)
        bands = self.observations.band_names
        if flux.shape != (len(pts), len(bands)):
            raise GridError(f"the model returned shape {flux.shape}, expected ({len(pts)}, {len(bands)})")
        scale, chi2, dof = chi_square_with_best_scale(flux, self.observations)
        cols = {"key": pts.keys}
        for j, name in enumerate(self.spec.materials):
            cols[fraction_column(name)] = pts.fractions[:, j]
        for name in AXES:
            cols[name] = getattr(pts, name)
        for j, band in enumerate(bands):
            cols[model_column(band)] = flux[:, j]
        cols["scale"] = np.asarray(scale, dtype=float)
        cols["chi2"] = np.asarray(chi2, dtype=float)
        cols["dof"] = np.full(len(pts), dof, dtype=np.int32)
        return cols

    def evaluate_chunk(self, chunk: int) -> dict[str, np.ndarray]:
        return self.evaluate(self.spec.chunk_keys(chunk))


def store_manifest(spec: GridSpec, observations: DiskPhotometry) -> dict:
    """The manifest a store of this grid gets (see :class:`GridStore`)."""
    bands = list(observations.band_names)
    columns = (["key"] + [fraction_column(m) for m in spec.materials] + list(AXES)
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
        "observations": {
            "band": bands,
            "pivot_wavelength_um": [float(x) for x in observations.wavelength],
            "value": [float(x) for x in observations.value],
            "error": [float(x) for x in observations.error],
            "is_limit": [bool(x) for x in observations.is_limit],
            "normalisation": observations.normalisation,
            "notes": list(observations.notes),
        },
    }


def check_grid_size(spec: GridSpec, settings: GridRunSettings) -> None:
    """Refuse grids above ``settings.max_points`` unless confirmed."""
    if spec.n_points > settings.max_points and not settings.confirm_large:
        raise GridError(
            f"{spec.source}: {spec.describe_count()}, more than the {settings.max_points:,}-point limit; "
            "check the estimate with --dry-run, then confirm with --yes")


def probe_grid(spec: GridSpec, model_factory=None, n_probe: int = 16) -> GridProbe:
    """Time the model on a few points spread over the grid (for ``--dry-run``).

    Parameters
    ----------
    spec : GridSpec
    model_factory : callable, optional
        As in :class:`GridEvaluator`.
    n_probe : int
        Points to time (spread evenly over the keys, so over every axis).

    Returns
    -------
    GridProbe
    """
    start = time.perf_counter()
    evaluator = GridEvaluator(spec, model_factory)
    evaluator.evaluate(np.array([0]))            # warm-up: compiled paths, caches
    build = time.perf_counter() - start
    keys = np.unique(np.linspace(0, spec.n_points - 1, min(n_probe, spec.n_points)).astype(np.int64))
    start = time.perf_counter()
    evaluator.evaluate(keys)
    elapsed = time.perf_counter() - start
    return GridProbe(n_probe=int(keys.size), build_seconds=build, seconds_per_point=elapsed / keys.size)


def default_store_path(spec: GridSpec) -> Path:
    """Store folder used when none is given: ``./<description stem>_grid``."""
    stem = Path(spec.source).stem if spec.source != "<string>" else "motes"
    return Path.cwd() / f"{stem}_grid"


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
                 f"on one core ({rate:,.0f} points/s) after {probe.build_seconds:.1f} s to build the model")
    if settings.scheduler:
        lines.append(f"  estimated run time on Dask ({settings.scheduler}): "
                     f"{_duration(n * probe.seconds_per_point)} divided by the cluster's worker threads")
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


# ------------------------------------------------------------------------- workers
_WORKER_EVALUATORS: dict = {}
_WORKER_LOCK = threading.Lock()


@dataclass(frozen=True)
class _Job:
    """What a worker needs to build its evaluator: sent once per worker, not per chunk."""

    spec: GridSpec
    observations: DiskPhotometry
    model_factory: object = None

    @property
    def key(self):
        f = self.model_factory
        return self.spec.digest, getattr(f, "__module__", None), getattr(f, "__qualname__", None)


def _worker_evaluator(job: _Job) -> GridEvaluator:
    """The evaluator of this worker process, built on first use (thread-safe, for Dask threads)."""
    with _WORKER_LOCK:
        if job.key not in _WORKER_EVALUATORS:
            _WORKER_EVALUATORS[job.key] = GridEvaluator(job.spec, job.model_factory, job.observations)
        return _WORKER_EVALUATORS[job.key]


def _init_local_worker(job, parent_pid) -> None:
    # Ctrl-C goes to the whole process group; only the driver should react to it
    signal.signal(signal.SIGINT, signal.SIG_IGN)

    def watch_parent():
        # if the driver dies (even by SIGKILL) this worker must not linger
        while True:
            if os.getppid() != parent_pid:
                os._exit(1)
            time.sleep(0.5)

    threading.Thread(target=watch_parent, daemon=True).start()
    global _LOCAL_JOB
    _LOCAL_JOB = job
    _worker_evaluator(job)


_LOCAL_JOB = None


def _local_chunk(chunk):
    return chunk, _worker_evaluator(_LOCAL_JOB).evaluate_chunk(chunk)


def _dask_chunk(job, chunk):
    return chunk, _worker_evaluator(job).evaluate_chunk(chunk)


def _motes_version() -> str:
    return __version__


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
        See :class:`GridEvaluator`; default :func:`build_disk_model`.
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
    the model on one point; only then is the store created (or overwritten).
    """
    check_grid_size(spec, settings)
    workers = 0 if settings.scheduler else settings.resolved_workers()       # validates the setting
    model_factory = model_factory or build_disk_model      # resolved here: workers get it by reference
    observations = read_grid_observations(spec)
    manifest = store_manifest(spec, observations)
    if GridStore.is_store(output) and not settings.overwrite:
        GridStore.prepare(output, manifest)          # raises on mismatch, changes nothing
    client = _connect(settings) if settings.scheduler else None
    try:
        if client is None:
            # validate the model before touching the store; also warms on-disk caches for workers
            local = GridEvaluator(spec, model_factory, observations)
            local.evaluate(spec.chunk_keys(0)[:1])
        store = GridStore.prepare(output, manifest, overwrite=settings.overwrite)
        with store:
            done = set(store.completed_chunks())
            pending = [c for c in range(spec.n_chunks) if c not in done]
            resumed = store.completed_points()
            if resumed:
                echo(f"resuming {store.path}: {resumed:,} of {spec.n_points:,} points already done")
            start = time.perf_counter()
            if client is not None:
                where = f"Dask scheduler {settings.scheduler}"
                _run_dask(client, _Job(spec, observations, model_factory), store, pending, settings)
            elif workers == 1:
                where = "in-process"
                _run_serial(local, store, pending, settings)
            else:
                where = f"{workers} local processes"
                del local
                _run_processes(_Job(spec, observations, model_factory), store, pending, workers, settings)
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


def _progress(store: GridStore, settings: GridRunSettings):
    from tqdm import tqdm

    return tqdm(total=store.n_points, initial=store.completed_points(), unit="pt",
                desc="grid", file=sys.stderr, smoothing=0.05, mininterval=0.5,
                disable=not settings.progress, dynamic_ncols=True)


def _run_serial(evaluator: GridEvaluator, store: GridStore, pending, settings) -> None:
    with _progress(store, settings) as bar:
        for chunk in pending:
            store.write_chunk(chunk, evaluator.evaluate_chunk(chunk))
            bar.update(store.chunk_length(chunk))


def _run_processes(job, store, pending, workers, settings) -> None:
    # spawn: workers start clean (no inherited threads or locks), identical on every OS
    context = multiprocessing.get_context("spawn")
    limit = workers * settings.in_flight_per_worker
    queue = iter(pending)
    pool = cf.ProcessPoolExecutor(max_workers=workers, mp_context=context, initializer=_init_local_worker,
                                  initargs=(job, os.getpid()))
    try:
        with _progress(store, settings) as bar:
            running = set()
            for chunk in queue:
                running.add(pool.submit(_local_chunk, chunk))
                if len(running) >= limit:
                    break
            while running:
                finished, running = cf.wait(running, return_when=cf.FIRST_COMPLETED)
                for future in finished:
                    chunk, columns = _result(future)
                    store.write_chunk(chunk, columns)
                    bar.update(store.chunk_length(chunk))
                    nxt = next(queue, None)
                    if nxt is not None:
                        running.add(pool.submit(_local_chunk, nxt))
    except BaseException:
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown(wait=True)


def _result(future):
    try:
        return future.result()
    except cf.process.BrokenProcessPool:
        raise GridError("a worker process died (out of memory, or killed); the finished chunks are kept: "
                        "run the same command again to resume") from None
    except MotesError:
        raise


def _connect(settings: GridRunSettings):
    """Client of the Dask scheduler, checked to have workers that run this motes version."""
    try:
        from dask.distributed import Client
    except ImportError:
        raise GridError("--scheduler needs Dask distributed, which is not installed: "
                        "pip install 'motes[cluster]'") from None
    timeout = settings.scheduler_timeout
    try:
        client = Client(settings.scheduler, timeout=f"{timeout}s", set_as_default=False)
    except Exception as exc:  # OSError, TimeoutError, ValueError for malformed addresses
        raise GridError(f"cannot reach the Dask scheduler at {settings.scheduler!r} within {timeout:g} s "
                        f"({type(exc).__name__}: {exc}); nothing was written") from None
    try:
        try:
            client.wait_for_workers(1, timeout=timeout)
        except Exception:
            raise GridError(f"the Dask scheduler at {settings.scheduler} has no workers after {timeout:g} s; "
                            "start some (dask worker ADDRESS) and run again; nothing was written") from None
        try:
            versions = client.run(_motes_version)
        except Exception as exc:
            raise GridError(f"the Dask workers cannot run motes ({type(exc).__name__}: {exc}); install motes "
                            f"{__version__} on every worker; nothing was written") from None
        wrong = {w: v for w, v in versions.items() if v != __version__}
        if wrong:
            raise GridError(f"Dask workers run other motes versions {wrong}; this is motes {__version__}; "
                            "nothing was written")
    except BaseException:
        client.close()
        raise
    return client


def _run_dask(client, job, store, pending, settings) -> None:
    from dask.distributed import as_completed

    threads = max(sum(client.nthreads().values()), 1)
    limit = threads * settings.in_flight_per_worker
    queue = iter(pending)
    [job_future] = client.scatter([job], broadcast=True, hash=False)

    def submit(chunk):
        return client.submit(_dask_chunk, job_future, chunk, pure=False,
                             key=f"motes-grid-{job.spec.digest[:10]}-{chunk}")

    outstanding = {submit(c) for c in itertools.islice(queue, limit)}
    try:
        with client.as_current(), _progress(store, settings) as bar:
            stream = as_completed(list(outstanding))
            for future in stream:
                chunk, columns = future.result()
                outstanding.discard(future)
                future.release()
                store.write_chunk(chunk, columns)
                bar.update(store.chunk_length(chunk))
                nxt = next(queue, None)
                if nxt is not None:
                    new = submit(nxt)
                    outstanding.add(new)
                    stream.add(new)
    except BaseException:
        client.cancel(list(outstanding))
        raise
