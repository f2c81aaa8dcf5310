"""Evaluating grid points, and the execution back ends of a grid run.

:class:`GridEvaluator` turns chunks of grid points into store columns (model
colours, best scale, chi2, degrees of freedom); the model comes from one
function, ``model_factory(spec, observations)``, :func:`build_disk_model` by
default. The back ends hand chunk numbers to workers and write what comes back,
in the driver only:

* :func:`run_serial` evaluates in the calling process;
* :func:`run_processes` uses a local process pool. On Linux the workers are
  forked and inherit the driver's evaluator (model and lookup tables already
  loaded); elsewhere they are spawned and build it once. A worker exits by
  itself when its driver dies, whatever killed it;
* :func:`connect_scheduler` and :func:`run_dask` use an existing Dask
  distributed cluster: the description, the data and the factory are scattered
  to every worker once, and each worker builds its evaluator on first use.

At most ``in_flight`` chunks are queued at a time, so the driver's memory does
not grow with the grid.
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

import numpy as np

from ... import __version__
from ...errors import GridError, InputError, MotesError
from .spec import AXES, GridSpec
from .store import GridStore, fraction_column, model_column
from ..likelihood import chi_square_with_best_scale
from ..observations import DiskPhotometry, read_disk_photometry

__all__ = [
    "GridEvaluator",
    "build_disk_model",
    "grid_mixtures",
    "GRID_MIXTURE_LIMIT",
    "read_grid_observations",
    "GridJob",
    "run_serial",
    "run_processes",
    "connect_scheduler",
    "run_dask",
]


def build_disk_model(spec: GridSpec, observations: DiskPhotometry):
    """The forward model a grid description asks for (the default ``model_factory``).

    Parameters
    ----------
    spec : GridSpec
    observations : DiskPhotometry
        The data; the model is built for their bands, in their order.

    Returns
    -------
    motes.dust.model.colours.DiskColourModel
        Built from the description's ``[star]``, ``[[materials]]``, ``[mixing]``,
        ``[geometry]``, ``[model]`` sections (:mod:`motes.dust.model.description`), for
        the bands of the disk photometry in their order, with its lookup tables
        loaded (fast path): only the tiles the grid's mixtures touch
        (:func:`grid_mixtures`), or, for a grid with more mixtures than that
        function enumerates, the model's default set; any tile still missing
        is built when a point needs it.
    """
    if observations.has_polarised:
        model = spec.description.build_model(bands=observations.bands, intensities=observations.intensity)
    else:
        model = spec.description.build_model(bands=observations.bands)
    mixtures = grid_mixtures(spec)
    f_max = {"f_max": spec.f_max} if spec.f_max else {}     # an f_max axis: one table per listed value
    if mixtures is None:
        model.prepare(**f_max)
    else:
        model.prepare(*mixtures, **f_max)
    return model


#: at most this many (composition, porosity) pairs are enumerated to choose a grid's table tiles
GRID_MIXTURE_LIMIT = 20_000


def grid_mixtures(spec: GridSpec, limit: int = GRID_MIXTURE_LIMIT):
    """Every (fractions, porosity) pair of a grid, the part of a point that sets its refractive index.

    Parameters
    ----------
    spec : GridSpec
    limit : int
        Largest number of pairs returned.

    Returns
    -------
    (ndarray[M, K], ndarray[M]) or None
        Fractions and porosity of the ``M = compositions x porosity values``
        pairs; ``None`` when ``M`` exceeds ``limit``.
    """
    n_comp, n_por = spec.n_compositions, len(spec.porosity)
    if n_comp * n_por > limit:
        return None
    fractions = spec.simplex.unrank(np.arange(n_comp, dtype=np.int64)) / spec.simplex.divisions
    porosity = np.asarray(spec.porosity, dtype=float)
    return np.repeat(fractions, n_por, axis=0), np.tile(porosity, n_comp)


def read_grid_observations(spec: GridSpec) -> DiskPhotometry:
    """The disk photometry a grid compares to (``[data] photometry``), with the description's user bands.

    Problems name the file relative to the current folder when it lies below it
    (as the user gave it), not by the absolute path the spec keeps.
    """
    import dataclasses

    shown = os.path.relpath(spec.photometry)
    shown = str(spec.photometry) if shown.startswith("..") else shown
    try:
        obs = read_disk_photometry(spec.photometry, custom_bands=spec.description.custom_bands)
    except InputError as exc:
        if exc.path != str(spec.photometry):
            raise
        raise InputError(exc.reason, shown, exc.where) from None
    return dataclasses.replace(obs, path=shown)     # later messages name it so too


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
        obs = self.observations
        if obs.has_polarised and tuple(getattr(self.model, "intensities", ())) != tuple(obs.intensity):
            raise GridError(f"{obs.path or 'the photometry'}: the data have polarised-intensity rows, but the "
                            "grid's forward model has no polarised columns for them")

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
        extra = {} if pts.f_max is None else {"f_max": pts.f_max}
        flux = np.asarray(self.model.flux_ratio(pts.fractions, pts.porosity, pts.a_min, pts.q,
                                                a_max=pts.a_max, **extra), dtype=float)
        bands = self.observations.row_keys      # band names; "<band>_polarised" for polarised rows
        if flux.shape != (len(pts), len(bands)):
            raise GridError(f"the model returned shape {flux.shape}, expected ({len(pts)}, {len(bands)})")
        scale, chi2, dof = chi_square_with_best_scale(flux, self.observations)
        cols = {"key": pts.keys}
        for j, name in enumerate(self.spec.materials):
            cols[fraction_column(name)] = pts.fractions[:, j]
        for name in self.spec.axis_names:
            cols[name] = getattr(pts, name)
        for j, band in enumerate(bands):
            cols[model_column(band)] = flux[:, j]
        cols["scale"] = np.asarray(scale, dtype=float)
        cols["chi2"] = np.asarray(chi2, dtype=float)
        cols["dof"] = np.full(len(pts), dof, dtype=np.int32)
        return cols

    def evaluate_chunk(self, chunk: int) -> dict[str, np.ndarray]:
        return self.evaluate(self.spec.chunk_keys(chunk))


# ------------------------------------------------------------------------- workers
_WORKER_EVALUATORS: dict = {}
_WORKER_LOCK = threading.Lock()


@dataclass(frozen=True)
class GridJob:
    """What a worker needs to build its evaluator (sent once per worker, not per chunk).

    Attributes
    ----------
    spec : GridSpec
    observations : DiskPhotometry
    model_factory : callable
        ``model_factory(spec, observations)``; picklable (a module-level function).
    """

    spec: GridSpec
    observations: DiskPhotometry
    model_factory: object = None

    @property
    def key(self):
        f = self.model_factory
        return self.spec.digest, getattr(f, "__module__", None), getattr(f, "__qualname__", None)


def _worker_evaluator(job: GridJob) -> GridEvaluator:
    """The evaluator of this worker process, built on first use (thread-safe, for Dask threads)."""
    with _WORKER_LOCK:
        if job.key not in _WORKER_EVALUATORS:
            _WORKER_EVALUATORS[job.key] = GridEvaluator(job.spec, job.model_factory, job.observations)
        return _WORKER_EVALUATORS[job.key]


def _init_local_worker(job, parent_pid, lock_fd=None) -> None:
    # Ctrl-C goes to the whole process group; only the driver should react to it
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if lock_fd is not None:
        # a forked worker holds a copy of the store's lock descriptor: drop it, so that the
        # lock dies with the driver and never outlives it in a worker
        try:
            os.close(lock_fd)
        except OSError:
            pass

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


def _progress(store: GridStore, progress: bool):
    from ...progress import progress_bar

    return progress_bar(total=store.n_points, initial=store.completed_points(), unit="pt",
                        desc="grid", smoothing=0.05, disable=not progress)


def run_serial(evaluator: GridEvaluator, store: GridStore, pending, progress: bool = True) -> None:
    """Evaluate the ``pending`` chunks in this process and write them to ``store`` (locked)."""
    with _progress(store, progress) as bar:
        for chunk in pending:
            store.write_chunk(chunk, evaluator.evaluate_chunk(chunk))
            bar.update(store.chunk_length(chunk))


def _start_method() -> str:
    """``fork`` on Linux (workers inherit the driver's model: no re-import, no rebuild), else ``spawn``."""
    return "fork" if sys.platform.startswith("linux") and "fork" in multiprocessing.get_all_start_methods() \
        else "spawn"


def run_processes(job: GridJob, store: GridStore, pending, workers: int, in_flight: int = 2,
                  progress: bool = True, evaluator: GridEvaluator | None = None) -> None:
    """Evaluate the ``pending`` chunks on ``workers`` local processes; write them in this process.

    Parameters
    ----------
    job : GridJob
    store : GridStore
        Locked by the caller.
    pending : sequence of int
        Chunk numbers to compute.
    workers : int
    in_flight : int
        Chunks queued per worker.
    progress : bool
    evaluator : GridEvaluator, optional
        The driver's evaluator of ``job``, inherited by forked workers.
    """
    method = _start_method()
    if method == "fork" and evaluator is not None:
        # forked workers find the driver's evaluator (model and tables) already built
        with _WORKER_LOCK:
            _WORKER_EVALUATORS[job.key] = evaluator
    limit = workers * in_flight
    queue = iter(pending)
    pool = cf.ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context(method),
                                  initializer=_init_local_worker, initargs=(job, os.getpid(), store.lock_fd if method == "fork" else None))
    try:
        # submit before the progress bar starts its thread: with fork, the pool starts every
        # worker at the first submit, and no thread of ours is alive to be copied half-way
        running = {pool.submit(_local_chunk, chunk) for chunk in itertools.islice(queue, limit)}
        with _progress(store, progress) as bar:
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
    finally:
        with _WORKER_LOCK:
            _WORKER_EVALUATORS.pop(job.key, None)
    pool.shutdown(wait=True)


def _result(future):
    try:
        return future.result()
    except cf.process.BrokenProcessPool:
        raise GridError("a worker process died (out of memory, or killed); the finished chunks are kept: "
                        "run the same command again to resume") from None
    except MotesError:
        raise


def connect_scheduler(address: str, timeout: float = 10.0):
    """Client of the Dask scheduler at ``address``, checked to have workers running this motes version.

    Raises
    ------
    motes.errors.GridError
        Dask missing; the scheduler unreachable within ``timeout`` seconds; no
        worker; workers without motes or with another version.
    """
    try:
        from dask.distributed import Client
    except ImportError:
        raise GridError("--scheduler needs Dask distributed, which is not installed: "
                        "pip install 'motes[cluster]'") from None
    try:
        client = Client(address, timeout=f"{timeout}s", set_as_default=False)
    except Exception as exc:  # OSError, TimeoutError, ValueError for malformed addresses
        raise GridError(f"cannot reach the Dask scheduler at {address!r} within {timeout:g} s "
                        f"({type(exc).__name__}: {exc}); nothing was written") from None
    try:
        try:
            client.wait_for_workers(1, timeout=timeout)
        except Exception:
            raise GridError(f"the Dask scheduler at {address} has no workers after {timeout:g} s; "
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


def run_dask(client, job: GridJob, store: GridStore, pending, in_flight: int = 2, progress: bool = True) -> None:
    """Evaluate the ``pending`` chunks on the Dask cluster of ``client``; write them in this process."""
    from dask.distributed import as_completed

    threads = max(sum(client.nthreads().values()), 1)
    limit = threads * in_flight
    queue = iter(pending)
    [job_future] = client.scatter([job], broadcast=True, hash=False)

    def submit(chunk):
        return client.submit(_dask_chunk, job_future, chunk, pure=False,
                             key=f"motes-grid-{job.spec.digest[:10]}-{chunk}")

    outstanding = {submit(c) for c in itertools.islice(queue, limit)}
    try:
        with client.as_current(), _progress(store, progress) as bar:
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
