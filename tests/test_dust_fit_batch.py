"""Batched likelihood evaluation (motes.dust.fit.batch) and checkpoints by progress (sampler.py)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from motes.dust.fit.batch import BatchPool, queue_size
from motes.dust.fit.sampler import open_pool, run_nested_model
from motes.dust.fit.spec import SamplerSettings


class GaussLike:
    """ln N(x; mu, 0.1^2) in 3 dimensions; ``batch`` evaluates rows one by one (bit-identical values)."""

    mu = np.array([0.2, -0.3, 0.5])

    def __init__(self):
        self.sizes = []

    def __call__(self, x):
        r = (np.asarray(x) - self.mu) / 0.1
        return float(-0.5 * r @ r)

    def batch(self, x):
        self.sizes.append(len(x))
        return np.array([self(row) for row in x])


class Box:
    def __call__(self, u):
        return 2.0 * np.asarray(u) - 1.0

    def batch(self, u):
        return 2.0 * np.asarray(u) - 1.0


class SerialPool:
    """dynesty's plain point-by-point ``map`` with a queue: the reference the lockstep must reproduce."""

    def __init__(self, size):
        self.size = size

    def map(self, func, items):
        return list(map(func, items))


def _sample(pool, queue, sample="rwalk", nlive=60, seed=5):
    import dynesty
    from dynesty import pool as dpool

    dpool.initializer(GaussLike(), Box(), (), {}, (), {})
    sampler = dynesty.NestedSampler(dpool.loglike_cache, dpool.prior_transform_cache, 3, nlive=nlive,
                                    bound="multi", sample=sample, pool=pool, queue_size=queue,
                                    rstate=np.random.default_rng(seed))
    sampler.run_nested(dlogz=0.5, print_progress=False)
    return sampler.results


@pytest.mark.parametrize("sample, vectorised", [("rwalk", False), ("unif", True)])
def test_lockstep_gives_the_points_of_the_serial_queue(sample, vectorised):
    like = GaussLike()
    with BatchPool(1, like, Box(), size=8, vectorised=vectorised) as pool:
        import dynesty
        from dynesty import pool as dpool

        dpool.initializer(like, Box(), (), {}, (), {})
        batched = dynesty.NestedSampler(dpool.loglike_cache, dpool.prior_transform_cache, 3, nlive=60,
                                        bound="multi", sample=sample, pool=pool, queue_size=8,
                                        rstate=np.random.default_rng(5))
        batched.run_nested(dlogz=0.5, print_progress=False)
        got = batched.results
    ref = _sample(SerialPool(8), 8, sample)
    # same walks on the same random streams: identical points, values, calls and evidence
    assert np.array_equal(got["samples_u"], ref["samples_u"])
    assert np.array_equal(got["logl"], ref["logl"])
    assert np.sum(got["ncall"]) == np.sum(ref["ncall"])
    assert got["logz"][-1] == ref["logz"][-1]
    # and the likelihood really saw batches: the 60 live points at once, then up to 8 walks per step
    assert like.sizes[0] == 60 and max(like.sizes[1:]) == 8
    assert np.mean(like.sizes[1:]) > (4 if sample == "rwalk" else 2)   # uniform draws finish unevenly


def test_vectorised_walks_track_the_serial_queue_to_rounding():
    """Array arithmetic on the same draws: dynesty's serial points to ~1e-15, until rounding once decides
    an acceptance or a bound differently (then the runs differ, as two seeds would)."""
    with BatchPool(1, GaussLike(), Box(), size=8) as pool:
        got = _sample(pool, 8)
    ref = _sample(SerialPool(8), 8)
    n = min(len(got["logl"]), len(ref["logl"]))
    off = np.abs(got["samples_u"][:n] - ref["samples_u"][:n]).max(axis=1)
    first = int(np.argmax(off > 1e-12)) if (off > 1e-12).any() else n
    assert first >= 100 and off[:first].max() < 1e-13, (first, off[:first].max())
    assert abs(got["logz"][-1] - ref["logz"][-1]) < 2 * got["logzerr"][-1]


@pytest.mark.slow   # two spawned processes import motes (several seconds each on a loaded machine)
def test_two_workers_step_the_same_walks_as_one():
    ref = None
    for workers in (1, 2):
        with BatchPool(workers, GaussLike(), Box(), size=8) as pool:
            res = _sample(pool, 8)
        if ref is None:
            ref = res
    assert np.array_equal(res["logl"], ref["logl"]) and res["logz"][-1] == ref["logz"][-1]


def test_queue_size():
    assert queue_size(1, 250, batched=True) == 32
    assert queue_size(2, 250, batched=True) == 62          # 31 walks per worker (nlive / 4 in all)
    assert queue_size(1, 40, batched=True) == 10
    assert queue_size(2, 1000, batched=False) == 2         # a point-wise likelihood: one point per worker


class Interrupt(Exception):
    pass


class StoppingLike(GaussLike):
    """Raises after ``limit`` points, as a killed process would stop."""

    def __init__(self, limit):
        super().__init__()
        self.limit = limit
        self.count = 0

    def batch(self, x):
        self.count += len(x)
        if self.count > self.limit:
            raise Interrupt
        return super().batch(x)


def test_checkpoints_by_iterations_resume_mid_run(tmp_path, monkeypatch):
    import motes.dust.fit.sampler as sampler_module

    monkeypatch.setattr(sampler_module, "CHECKPOINT_COST_FACTOR", 0.0)   # by iterations alone: deterministic
    # no timed checkpoint can come (1e6 s): only the progress ones
    settings = SamplerSettings(nlive=60, dlogz=0.2, seed=3, checkpoint_every=1e6, checkpoint_iterations=40)
    with open_pool(1, GaussLike(), Box()) as pool:
        ref = run_nested_model(3, settings, tmp_path / "ref.dynesty", pool=pool, progress=False)
    assert ref.checkpoints >= 3 and ref.n_iterations > 200

    state = tmp_path / "run.dynesty"
    like = StoppingLike(limit=ref.n_calls // 2)
    with pytest.raises(Interrupt), open_pool(1, like, Box()) as pool:
        run_nested_model(3, settings, state, pool=pool, progress=False)
    assert state.exists()                      # written by progress, long before any timed checkpoint
    with open_pool(1, GaussLike(), Box()) as pool:
        resumed = run_nested_model(3, settings, state, pool=pool, progress=False)
    assert resumed.resumed
    # one worker, resumed from a checkpoint taken mid-run: the same run as the uninterrupted one
    assert resumed.ln_z == ref.ln_z and resumed.n_calls == ref.n_calls
    assert math.isfinite(resumed.ln_z_err)


def test_checkpoint_iterations_is_validated():
    from motes.errors import FitError

    for bad in (0, -5, 2.5, True):
        with pytest.raises(FitError, match="checkpoint_iterations"):
            SamplerSettings(checkpoint_iterations=bad)
