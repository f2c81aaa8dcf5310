"""Running dynesty for one model: checkpoints, resume, worker pool, progress.

dynesty (Speagle 2020, MNRAS 493, 3132; Koposov et al., Zenodo) samples the
posterior and estimates the evidence Z = integral L(theta) pi(theta) dtheta by
nested sampling (Skilling 2006, Bayesian Analysis 1, 833).

Checkpoints: ``run_nested(checkpoint_file=...)`` saves the sampler state
every ``checkpoint_every`` seconds (dynesty writes a temporary file and
renames it); :func:`run_nested_model` resumes with
``NestedSampler.restore(file, pool=...)`` and ``run_nested(resume=True)``.
The sampler state file is dynesty's own (a pickle, readable only by the same
dynesty version); motes' *results* are written in open formats elsewhere.

Workers and batches: the sampler always calls the likelihood through
dynesty's ``dynesty.pool`` function cache (set in the driver process too), so
a checkpoint holds no reference to a particular pool and resumes with any
number of workers. The pool is a :class:`motes.dust.fit.batch.BatchPool`: its
``map`` steps a queue of proposals in lockstep and evaluates each step's
points in one vectorised likelihood call (in this process with one worker;
with ``workers > 1`` each of that many processes (forked on Linux, inheriting
the driver's forward model; spawned elsewhere, building it once from the fit
description) steps a contiguous part of the
queue). The queue holds ``min(32, nlive / (4 workers))`` walks per worker
(:func:`motes.dust.fit.batch.queue_size`); a likelihood without a ``batch``
method gets one point per worker, as dynesty's own pool would.

Checkpoints are written every ``checkpoint_every`` seconds *and* every
``checkpoint_iterations`` iterations, whichever comes first, so that a model
of a few seconds can also resume mid-run; a checkpoint by iterations waits at
least ``CHECKPOINT_COST_FACTOR`` (50) times as long as the previous one took to
write, which keeps their cost below ~2% of the run.
"""

from __future__ import annotations

import contextlib
import math
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...errors import FitError
from .spec import SamplerSettings

__all__ = ["NestedRun", "run_nested_model", "open_pool"]


@dataclass(frozen=True)
class NestedRun:
    """Outcome of one nested-sampling run.

    Attributes
    ----------
    ln_z, ln_z_err : float
        ln evidence and its 1-sigma uncertainty (dynesty's estimate).
    samples : ndarray[M, ndim]
        All dead (and final live) points, in parameter space.
    ln_l : ndarray[M]
        Their ln-likelihoods.
    ln_weight : ndarray[M]
        Their ln importance weights (normalised: logsumexp = 0).
    n_calls : int
        Likelihood calls in total (all sessions).
    n_iterations : int
    information : float
        Kullback-Leibler information H [nats] of the posterior vs the prior.
    resumed : bool
        True when this session continued from a checkpoint.
    wall_time : float [s]
        Wall time of this session.
    checkpoints : int
        Checkpoints written by progress (every ``checkpoint_iterations``) in
        this session; dynesty's timed ones and the final one come on top.
    """

    ln_z: float
    ln_z_err: float
    samples: np.ndarray
    ln_l: np.ndarray
    ln_weight: np.ndarray
    n_calls: int
    n_iterations: int
    information: float
    resumed: bool
    wall_time: float
    checkpoints: int = 0

    def equal_weight_samples(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """Resample to at most ``n`` equally weighted posterior samples, ndarray[n', ndim]."""
        from dynesty.utils import resample_equal

        w = np.exp(self.ln_weight - self.ln_weight.max())
        w /= w.sum()
        eq = resample_equal(self.samples, w, rng)
        n_eff = int(min(n, eq.shape[0]))
        idx = rng.choice(eq.shape[0], size=n_eff, replace=False)
        return eq[idx]


@contextlib.contextmanager
def open_pool(workers: int, loglike, prior_transform):
    """Context manager: a :class:`~motes.dust.fit.batch.BatchPool` of ``workers`` processes.

    With one worker everything runs in this process; the pool's ``map``
    still evaluates a whole queue of proposals in vectorised batches when
    ``loglike`` has a ``batch`` method (:class:`~motes.dust.fit.problem.HandleLikelihood`).
    The driver process always gets dynesty's function cache set to
    ``loglike``/``prior_transform``, so samplers built on
    ``dynesty.pool.loglike_cache``/``prior_transform_cache`` work with any
    pool, and so do their checkpoints.
    """
    from dynesty import pool as dpool

    from .batch import BatchPool

    if workers < 1:
        raise FitError(f"workers must be >= 1, got {workers}")
    dpool.initializer(loglike, prior_transform, (), {}, (), {})
    with BatchPool(workers, loglike, prior_transform, size=workers) as pool:
        yield pool


class _Progress:
    """One tqdm line per model: iterations, calls, ln Z so far, remaining Delta ln Z."""

    def __init__(self, label: str, enabled: bool, initial: int = 0):
        self.bar = None
        if enabled:
            from ...progress import progress_bar

            self.bar = progress_bar(desc=label, initial=initial, unit=" it", leave=True)

    def __call__(self, result, niter, ncall, add_live_it=None, dlogz=None, stop_val=None,
                 nbatch=None, logl_min=-np.inf, logl_max=np.inf):
        if self.bar is None:
            return
        logz = getattr(result, "logz", math.nan)
        logzvar = getattr(result, "logzvar", math.nan)
        err = math.sqrt(logzvar) if 0 <= logzvar < 1e6 else math.nan
        remaining = result.delta_logz
        parts = [f"calls {ncall}", f"ln Z {logz:.2f}±{err:.2f}" if logz > -1e6 else "ln Z -inf"]
        if add_live_it is not None:
            parts.append(f"adding live point {add_live_it}")
        elif nbatch:
            parts.append(f"batch {nbatch}")
        else:
            parts.append(f"left {remaining:.3g}" + (f" (stop < {dlogz:g})" if dlogz else ""))
        self.bar.set_postfix_str(", ".join(parts), refresh=False)
        self.bar.update(max(niter - self.bar.n, 0) if add_live_it is None else 0)

    def close(self):
        if self.bar is not None:
            self.bar.close()


#: A checkpoint by progress waits at least this many times as long as the previous one took to write:
#: checkpoints then cost at most ~2% of the wall time, however large the sampler state grows.
CHECKPOINT_COST_FACTOR = 50.0


class _Checkpointer:
    """dynesty ``print_func``: the progress line, plus a checkpoint every ``every`` iterations.

    dynesty's own checkpoints come by time (``checkpoint_every``); this adds
    checkpoints by progress, at the same points of the loop where dynesty
    saves (never while the final live points are being added), spaced by at
    least CHECKPOINT_COST_FACTOR times the last one's writing time.
    """

    def __init__(self, progress: _Progress, every: int, path: Path):
        self.progress = progress
        self.every = int(every)
        self.path = str(path)
        self.sampler = None
        self.last = None
        self.written = 0
        self.cost = 0.0
        self.saved_at = -math.inf

    def __call__(self, result, niter, ncall, add_live_it=None, **kwargs):
        self.progress(result, niter, ncall, add_live_it=add_live_it, **kwargs)
        if self.sampler is None or add_live_it is not None:
            return
        it = int(getattr(self.sampler, "it", 0))
        if self.last is None:
            self.last = it
        if it - self.last < self.every or time.perf_counter() - self.saved_at < CHECKPOINT_COST_FACTOR * self.cost:
            return
        state = getattr(self.sampler, "internal_state", None)
        if state is not None:
            from dynesty.dynamicsampler import DynamicSamplerStatesEnum as S

            if state in (S.INBASEADDLIVE, S.INBATCHADDLIVE, S.BATCH_DONE):
                return
        start = time.perf_counter()
        self.sampler.save(self.path)
        self.saved_at = time.perf_counter()
        self.cost = self.saved_at - start
        self.last = it
        self.written += 1


def run_nested_model(ndim: int, settings: SamplerSettings, checkpoint: Path, *, pool=None,
                     workers: int = 1, seed_key: int = 0, resume: bool = True,
                     progress: bool = True, label: str = "") -> NestedRun:
    """Run (or resume) nested sampling for one model.

    Parameters
    ----------
    ndim : int
        Dimension of the unit cube.
    settings : SamplerSettings
    checkpoint : pathlib.Path
        Sampler state file; resumed from when it exists and ``resume``.
    pool : dynesty.pool.Pool or None
        From :func:`open_pool` (which also sets the function cache).
    workers : int
        Pool size (queue size).
    seed_key : int
        Distinguishes the random streams of the models of one fit.
    resume : bool
    progress : bool
        Show a progress line on stderr.
    label : str
        Progress-line label.

    Returns
    -------
    NestedRun
    """
    import dynesty
    from dynesty import pool as dpool

    from .batch import queue_size as _queue_size

    start = time.perf_counter()
    checkpoint = Path(checkpoint)
    sampler_cls = dynesty.DynamicNestedSampler if settings.kind == "dynamic" else dynesty.NestedSampler
    resumed = bool(resume and checkpoint.exists())
    nlive = settings.nlive if settings.kind != "dynamic" else min(settings.nlive, settings.nlive_batch)
    queue = 1 if pool is None else _queue_size(workers, nlive, bool(getattr(pool, "batched", False)))
    if resumed:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sampler = sampler_cls.restore(str(checkpoint), pool=pool)
        # queue as wide as this session's pool, whatever the interrupted session used
        samplers = [sampler] + [s for s in (getattr(sampler, "sampler", None),
                                            getattr(sampler, "batch_sampler", None)) if s is not None]
        for s in samplers:
            s.queue_size = queue
    else:
        rng = np.random.default_rng([int(settings.seed), int(seed_key)])
        kwargs = dict(bound=settings.bound, sample=settings.sample, rstate=rng,
                      pool=pool, queue_size=queue if pool is not None else None)
        if settings.kind == "dynamic":
            sampler = sampler_cls(dpool.loglike_cache, dpool.prior_transform_cache, ndim, **kwargs)
        else:
            sampler = sampler_cls(dpool.loglike_cache, dpool.prior_transform_cache, ndim,
                                  nlive=settings.nlive, **kwargs)
    checkpoint.parent.mkdir(parents=True, exist_ok=True)
    initial = int(getattr(sampler, "it", 1)) - 1 if resumed else 0
    bar = _Progress(label, progress, initial=max(initial, 0))
    saver = _Checkpointer(bar, settings.checkpoint_iterations, checkpoint)
    saver.sampler = sampler
    try:
        if settings.kind == "dynamic":
            sampler.run_nested(nlive_init=settings.nlive, dlogz_init=settings.dlogz,
                               nlive_batch=settings.nlive_batch, maxbatch=settings.maxbatch,
                               wt_kwargs={"pfrac": settings.pfrac}, maxcall=settings.maxcall,
                               print_progress=True, print_func=saver,
                               checkpoint_file=str(checkpoint),
                               checkpoint_every=settings.checkpoint_every, resume=resumed)
        else:
            with warnings.catch_warnings():
                warnings.filterwarnings("ignore", message="You are resuming a finished static run")
                sampler.run_nested(dlogz=settings.dlogz, maxcall=settings.maxcall,
                                   print_progress=True, print_func=saver,
                                   checkpoint_file=str(checkpoint),
                                   checkpoint_every=settings.checkpoint_every, resume=resumed)
    finally:
        bar.close()
    res = sampler.results
    logwt = np.asarray(res["logwt"], dtype=float)
    ln_z = float(res["logz"][-1])
    ln_weight = logwt - ln_z
    return NestedRun(
        ln_z=ln_z,
        ln_z_err=float(res["logzerr"][-1]),
        samples=np.asarray(res["samples"], dtype=float),
        ln_l=np.asarray(res["logl"], dtype=float),
        ln_weight=ln_weight,
        n_calls=int(np.sum(res["ncall"])),
        n_iterations=int(res["niter"]),
        information=float(res["information"][-1]),
        resumed=resumed,
        wall_time=time.perf_counter() - start,
        checkpoints=saver.written,
    )
