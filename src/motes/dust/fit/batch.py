"""Batched likelihood evaluation for dynesty: a "pool" whose ``map`` steps a whole queue in lockstep.

dynesty hands proposals to the likelihood one point at a time: with a
``pool`` and ``queue_size = Q`` it instead maps its internal sampler's
``sample`` over Q independent starting points (each with its own random
seed, :func:`dynesty.utils.get_seed_sequence`). :class:`BatchPool` is such a
pool. Its ``map`` runs the Q walks of the random-walk (``rwalk``), uniform
(``unif``) and unit-cube samplers together, step by step: every step collects
the point each unfinished walk wants evaluated, transforms and evaluates all
of them in one vectorised call (``ln_likelihood(theta[N, ndim])`` of
:class:`~motes.dust.fit.problem.FitProblem`), and hands each walk its value.
Each walk follows dynesty 3.1's own ``generic_random_walk`` /
``UnitCubeSampler.sample`` / ``UniformBoundSampler.sample`` on its own random
stream, drawing the same numbers in the same order. With
``vectorised=False`` the random-walk arithmetic is dynesty's too, so a queue
gives exactly the points, values and call counts of dynesty's serial ``map``
over the same queue; by default the proposals of all walks are computed on
arrays, which agrees with dynesty to rounding (~1e-15) until rounding once
decides an acceptance or a bound differently (both checked in
tests/test_dust_fit_batch.py).

With ``workers > 1`` the queue is cut into ``workers`` contiguous parts, each
stepped in lockstep by one process (forked on Linux, inheriting the driver's
forward model and tables; spawned elsewhere, building them once). The cut
depends only on Q and the number of workers, so a run is
reproducible from its seed for a given number of workers.

Other samplers (``slice``, ``rslice``) and other mapped functions go through
the plain, point-by-point ``map`` (in the worker processes when there are any).
"""

from __future__ import annotations

import multiprocessing as mp
import sys

import numpy as np

__all__ = ["BatchPool", "batch_function", "lockstep"]

#: walks stepped together per process (the likelihood's batch size). The queue adds
#: work: a point proposed j iterations before it is used is wasted when it is no longer
#: above the current likelihood bound (probability ~ j / nlive), so the queue is also
#: kept to at most nlive / 4 (see :func:`queue_size`).
BATCH_PER_WORKER = 32


def queue_size(workers: int, nlive: int, batched: bool) -> int:
    """Queue length for ``workers`` processes: BATCH_PER_WORKER each (<= nlive/4), or one point each."""
    if not batched:
        return int(workers)
    per = max(1, min(BATCH_PER_WORKER, int(nlive) // (4 * int(workers))))
    return per * int(workers)


def batch_function(func, kind: str):
    """``f(X[N, d]) -> ndarray`` for a point-wise ``func``: its own ``batch`` method, else a loop.

    ``kind`` is ``"loglike"`` (returns ndarray[N]) or ``"transform"`` (ndarray[N, d]).
    """
    batch = getattr(func, "batch", None)
    if batch is not None:
        return batch
    if kind == "loglike":
        return lambda x: np.array([float(func(np.array(row))) for row in x])
    return lambda x: np.array([np.asarray(func(np.array(row)), dtype=float) for row in x])


# ------------------------------------------------------------- the walks
def _rwalk(a, keep_history=True):
    """dynesty 3.1 ``generic_random_walk`` as a generator: yields u, receives (v, logl)."""
    from dynesty.internal_samplers import SamplerReturn, SamplerHistoryItem, get_random_generator, \
        propose_ball_point

    rstate = get_random_generator(a.rseed)
    kwargs = a.kwargs
    nonbounded, periodic, reflective = (kwargs.get(k) for k in ("nonbounded", "periodic", "reflective"))
    u = a.u
    n = len(u)
    n_cluster = a.axes.shape[0]
    walks = kwargs["walks"]
    history = []
    n_accept = n_reject = ncall = 0
    v = logl = None
    while ncall < walks:
        u_prop, fail = propose_ball_point(u, a.scale, a.axes, n, n_cluster, rstate=rstate, periodic=periodic,
                                          reflective=reflective, nonbounded=nonbounded)
        if fail:
            n_reject += 1
            ncall += 1
            continue
        v_prop, logl_prop = yield u_prop
        ncall += 1
        if keep_history:
            history.append(SamplerHistoryItem(u=u_prop, v=v_prop, logl=logl_prop))
        if logl_prop > a.loglstar:
            u, v, logl = u_prop, v_prop, logl_prop
            n_accept += 1
        else:
            n_reject += 1
    if n_accept == 0:   # dynesty recomputes the start's value (not counted as a call)
        v, logl = yield u
    return SamplerReturn(u=u, v=v, logl=logl, ncalls=ncall,
                         tuning_info={"accept": n_accept, "reject": n_reject, "scale": a.scale},
                         evaluation_history=history, proposal_stats=dict(n_accept=n_accept, n_reject=n_reject))


def _unit_cube(a, keep_history=True):
    """dynesty 3.1 ``UnitCubeSampler.sample`` as a generator."""
    from dynesty.internal_samplers import SamplerReturn, SamplerHistoryItem, get_random_generator

    rstate = get_random_generator(a.rseed)
    ndim = a.kwargs.get("ndim")
    nc = 0
    history = []
    while True:
        u = rstate.uniform(size=ndim)
        v, logl = yield u
        if keep_history:
            history.append(SamplerHistoryItem(u=u, v=v, logl=logl))
        nc += 1
        if logl > a.loglstar:
            break
    return SamplerReturn(u=u, v=v, logl=logl, ncalls=nc, tuning_info=None, evaluation_history=history,
                         proposal_stats=dict(n_proposals=nc))


def _uniform_bound(a, keep_history=True):
    """dynesty 3.1 ``UniformBoundSampler.sample`` as a generator."""
    import warnings

    from dynesty.internal_samplers import SamplerReturn, SamplerHistoryItem, get_random_generator, unitcheck

    rstate = get_random_generator(a.rseed)
    bound = a.kwargs["bound"]
    nonbounded = a.kwargs.get("nonbounded")
    n_cluster = a.kwargs.get("n_cluster")
    ndim = a.kwargs["ndim"]
    if nonbounded is not None:
        nonbounded = nonbounded[:n_cluster]
    nc = ntries = 0
    warned = False
    history = []
    while True:
        u = bound.samples(1, rstate=rstate).flatten()
        if not unitcheck(u, nonbounded):
            ntries += 1
            if ntries > 10000 and not warned:
                warnings.warn("Ellipsoid sampling is extremely inefficient", category=RuntimeWarning)
                warned = True
            continue
        ntries = 0
        if n_cluster != ndim:
            u = np.concatenate((u, rstate.uniform(size=(ndim - n_cluster))))
        v, logl = yield u
        if keep_history:
            history.append(SamplerHistoryItem(u=u, v=v, logl=logl))
        nc += 1
        if logl > a.loglstar:
            break
    return SamplerReturn(u=u, v=v, logl=logl, ncalls=nc, tuning_info=None, evaluation_history=history,
                         proposal_stats={"n_proposals": ntries})


def _walk_kind(func):
    """'rwalk', 'cube', 'unif' for the internal samplers that :func:`lockstep` steps, else None."""
    from dynesty.internal_samplers import RWalkSampler, UniformBoundSampler, UnitCubeSampler

    for kind, cls in (("rwalk", RWalkSampler), ("cube", UnitCubeSampler), ("unif", UniformBoundSampler)):
        if func is cls.sample:
            return kind
    return None


_WALKS = {"rwalk": _rwalk, "cube": _unit_cube, "unif": _uniform_bound}


def _rwalk_vectorised(args, transform_batch, loglike_batch, keep_history: bool) -> list:
    """The random walks of ``args`` stepped together, proposals computed for all walks at once.

    The same algorithm as dynesty 3.1's ``generic_random_walk`` (``walks``
    proposals per walk, uniform in the walk's ellipsoid ``scale * axes``, a
    proposal outside the unit cube counts as a rejected call), and the same
    random draws from each walk's own stream in the same order
    (``random(n - n_cluster)``, ``standard_normal(n_cluster)``, ``random()``).
    Only the arithmetic on the draws runs on arrays, so proposals agree with
    dynesty's to rounding, not to the bit. Used when no coordinate is periodic
    or reflective (motes sets none).
    """
    from dynesty.internal_samplers import SamplerReturn, SamplerHistoryItem, get_random_generator
    from dynesty.utils import LoglOutput

    w = len(args)
    rstates = [get_random_generator(a.rseed) for a in args]
    walks = int(args[0].kwargs["walks"])
    scale = np.array([a.scale for a in args], dtype=float)
    loglstar = np.array([float(a.loglstar) for a in args], dtype=float)
    u = np.array([a.u for a in args], dtype=float)               # current positions [W, n]
    n = u.shape[1]
    n_cluster = args[0].axes.shape[0]
    axes = np.array([a.axes for a in args], dtype=float)        # [W, nc, nc]
    v = np.full((w, n), np.nan)
    logl = np.full(w, np.nan)
    n_accept = np.zeros(w, dtype=int)
    n_reject = np.zeros(w, dtype=int)
    ncall = np.zeros(w, dtype=int)
    history = [[] for _ in range(w)]
    z = np.empty((w, n_cluster))
    r = np.empty(w)
    extra = np.empty((w, n - n_cluster))
    while True:
        need = np.flatnonzero(ncall < walks)
        if need.size == 0:
            break
        props = np.empty((w, n))
        has = np.zeros(w, dtype=bool)
        while need.size:
            for i in need.tolist():   # each walk's own stream, in dynesty's order
                rs = rstates[i]
                if n > n_cluster:
                    extra[i] = rs.random(n - n_cluster)
                z[i] = rs.standard_normal(n_cluster)
                r[i] = rs.random()
            zz = z[need]
            xhat = zz * (r[need] ** (1.0 / n_cluster) / np.sqrt(np.einsum("ij,ij->i", zz, zz)))[:, None]
            du = np.einsum("wij,wj->wi", axes[need], xhat)
            up = np.empty((need.size, n))
            up[:, :n_cluster] = u[need, :n_cluster] + scale[need, None] * du
            up[:, n_cluster:] = extra[need]
            inside = (up.min(axis=1) > 0) & (up.max(axis=1) < 1)
            ncall[need] += 1
            props[need[inside]] = up[inside]
            has[need[inside]] = True
            out = need[~inside]
            n_reject[out] += 1
            need = out[ncall[out] < walks]
        idx = np.flatnonzero(has)
        if idx.size == 0:
            continue
        vp = np.asarray(transform_batch(props[idx]), dtype=float)
        lp = np.asarray(loglike_batch(vp), dtype=float)
        if keep_history:
            for j, i in enumerate(idx):
                history[i].append(SamplerHistoryItem(u=props[i].copy(), v=vp[j].copy(),
                                                     logl=LoglOutput(float(lp[j]), False)))
        good = lp > loglstar[idx]
        acc = idx[good]
        u[acc] = props[acc]
        v[acc] = vp[good]
        logl[acc] = lp[good]
        n_accept[acc] += 1
        n_reject[idx[~good]] += 1
    stuck = np.flatnonzero(n_accept == 0)   # dynesty recomputes the start's value (not counted)
    if stuck.size:
        v[stuck] = np.asarray(transform_batch(u[stuck]), dtype=float)
        logl[stuck] = np.asarray(loglike_batch(v[stuck]), dtype=float)
    return [SamplerReturn(u=u[i].copy(), v=v[i].copy(), logl=LoglOutput(float(logl[i]), False),
                          ncalls=int(ncall[i]),
                          tuning_info={"accept": int(n_accept[i]), "reject": int(n_reject[i]), "scale": args[i].scale},
                          evaluation_history=history[i],
                          proposal_stats=dict(n_accept=int(n_accept[i]), n_reject=int(n_reject[i])))
            for i in range(w)]


def _vectorisable(args) -> bool:
    kw = args[0].kwargs
    return (all(kw.get(k) is None for k in ("nonbounded", "periodic", "reflective"))
            and len({a.axes.shape for a in args}) == 1 and len({float(a.scale) for a in args}) == 1)


def lockstep(kind: str, args, transform_batch, loglike_batch, keep_history: bool = True,
             vectorised: bool = True) -> list:
    """Run the walks of ``args`` (dynesty SamplerArguments) together; their SamplerReturns, in order.

    ``keep_history=False`` leaves each return's ``evaluation_history`` empty
    (dynesty reads it only when it saves its evaluation history).
    ``vectorised=False`` steps random walks with dynesty's own per-walk
    arithmetic (bit for bit dynesty's serial result; slower).
    """
    from dynesty.utils import LoglOutput

    if kind == "rwalk" and vectorised and _vectorisable(args):
        return _rwalk_vectorised(args, transform_batch, loglike_batch, keep_history)
    walks = [_WALKS[kind](a, keep_history) for a in args]
    results = [None] * len(walks)
    pending = {}
    for i, w in enumerate(walks):
        try:
            pending[i] = next(w)
        except StopIteration as stop:
            results[i] = stop.value
    while pending:
        order = sorted(pending)
        v = np.asarray(transform_batch(np.array([pending[i] for i in order])), dtype=float)
        logl = np.asarray(loglike_batch(v), dtype=float)
        nxt = {}
        for j, i in enumerate(order):
            try:
                nxt[i] = walks[i].send((v[j].copy(), LoglOutput(float(logl[j]), False)))
            except StopIteration as stop:
                results[i] = stop.value
        pending = nxt
    return results


# ------------------------------------------------------------- worker side
_WORKER: dict = {}


def _init_worker(loglike, prior_transform):
    from dynesty import pool as dpool

    dpool.initializer(loglike, prior_transform, (), {}, (), {})
    _WORKER["loglike"] = batch_function(loglike, "loglike")
    _WORKER["transform"] = batch_function(prior_transform, "transform")


def _walk_part(payload):
    kind, args, keep_history, vectorised = payload
    return lockstep(kind, args, _WORKER["transform"], _WORKER["loglike"], keep_history, vectorised)


def _loglike_part(x):
    return _WORKER["loglike"](x)


def _call_part(payload):
    func, items = payload
    return [func(item) for item in items]


class BatchPool:
    """dynesty ``pool``: ``map`` evaluates a whole queue of proposals in vectorised batches.

    Parameters
    ----------
    workers : int
        1: everything in this process; more: that many worker processes, each
        stepping a contiguous part of the queue.
    loglike, prior_transform : callable
        Point-wise functions (picklable when ``workers > 1``); a ``batch``
        attribute (``f(X[N, d])``) is used for whole batches when present.
    size : int
        Queue length the samplers should use (``queue_size``).
    vectorised : bool
        Random-walk proposals computed on arrays (default); False: with
        dynesty's own per-walk arithmetic (bit for bit its serial result).

    Use as a context manager (starts and stops the processes).
    """

    def __init__(self, workers: int, loglike, prior_transform, size: int, vectorised: bool = True):
        self.workers = int(workers)
        self.vectorised = bool(vectorised)
        self.size = int(size)
        self.loglike = loglike
        self.prior_transform = prior_transform
        self.batched = getattr(loglike, "batch", None) is not None
        self._loglike_batch = batch_function(loglike, "loglike")
        self._transform_batch = batch_function(prior_transform, "transform")
        self._procs = None

    def __enter__(self):
        if self.workers > 1:
            # fork on Linux: the workers inherit this process's forward model (tables loaded, q slices
            # assembled, shared copy-on-write) instead of importing motes and loading the tables again
            # (the grid's workers do the same); spawn elsewhere. Started here, before any progress
            # thread of the run exists.
            method = "fork" if sys.platform.startswith("linux") and "fork" in mp.get_all_start_methods() \
                else "spawn"
            ctx = mp.get_context(method)
            self._procs = ctx.Pool(self.workers, _init_worker, (self.loglike, self.prior_transform))
        return self

    def __exit__(self, *exc):
        if self._procs is not None:
            self._procs.terminate()
            self._procs.join()
            self._procs = None
        return False

    def _parts(self, items):
        return [p for p in (items[s] for s in _part_slices(len(items), self.workers)) if len(p)]

    def map(self, func, iterable):
        """``[func(x) for x in iterable]``, in lockstep batches where ``func`` allows it."""
        from dynesty.dynesty import _function_wrapper
        from dynesty.utils import LogLikelihood, LoglOutput

        items = list(iterable)
        if not items:
            return []
        kind = _walk_kind(func)
        if kind is not None:
            keep = bool(getattr(items[0].loglikelihood, "save_evaluation_history", True))
            if self._procs is None:
                return lockstep(kind, items, self._transform_batch, self._loglike_batch, keep, self.vectorised)
            light = [a._replace(prior_transform=None, loglikelihood=None) for a in items]
            parts = self._procs.map(_walk_part, [(kind, p, keep, self.vectorised) for p in self._parts(light)])
            return [r for part in parts for r in part]
        if isinstance(func, LogLikelihood) and not func.blob:
            x = np.asarray(items, dtype=float)
            if self._procs is None:
                values = self._loglike_batch(x)
            else:
                values = np.concatenate(self._procs.map(_loglike_part, self._parts(x)))
            return [LoglOutput(float(val), False) for val in values]
        if isinstance(func, _function_wrapper) and func.name == "prior_transform" \
                and not func.args and not func.kwargs:
            return list(np.asarray(self._transform_batch(np.asarray(items, dtype=float)), dtype=float))
        if self._procs is None:
            return list(map(func, items))
        parts = self._procs.map(_call_part, [(func, p) for p in self._parts(items)])
        return [r for part in parts for r in part]


def _part_slices(n: int, parts: int):
    edges = np.linspace(0, n, parts + 1).round().astype(int)
    return [slice(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:])]
