"""The arithmetic of ``motes grid --dry-run``'s run-time estimate, with a stubbed clock.

No timing is asserted: a fake clock advances by a fixed cost per evaluated
point, with one-off costs on the model build and on the first evaluation of
a batch, and the probe must recover those costs and predict the run from them.
"""

from __future__ import annotations

import numpy as np

from motes.dust.grid.run import GridProbe, describe_dry_run, probe_grid
from motes.dust.grid.spec import read_grid_description

from test_dust_grid import StandInModel, grid_file, quiet  # noqa: F401

BUILD, FIRST_BATCH, PER_POINT = 2.0, 0.75, 0.1     # fake seconds


class FakeClock:
    def __init__(self):
        self.now = 100.0

    def __call__(self):
        return self.now


def timed_factory(clock):
    """A stand-in model factory whose build and evaluations advance ``clock``."""

    class TimedModel(StandInModel):
        first = True

        def flux_ratio(self, fractions, porosity, a_min, q, a_max=None):
            n = len(fractions)
            if n > 1 and self.first:
                clock.now += FIRST_BATCH          # one-off: slices, tiles
                self.first = False
            clock.now += PER_POINT * n
            return super().flux_ratio(fractions, porosity, a_min, q, a_max)

    def factory(spec, observations):
        clock.now += BUILD
        return TimedModel(len(spec.materials), observations.wavelength)

    return factory


def test_probe_separates_one_off_costs_from_the_cost_per_point(grid_file):  # noqa: F811
    spec = read_grid_description(grid_file)
    clock = FakeClock()
    probe = probe_grid(spec, timed_factory(clock), clock=clock)
    assert spec.chunk_size == 40 and probe.n_probe == 40          # a chunk's worth of points
    np.testing.assert_allclose(probe.build_seconds, BUILD + PER_POINT)      # build + the first point
    np.testing.assert_allclose(probe.seconds_per_point, PER_POINT)
    np.testing.assert_allclose(probe.warmup_seconds, FIRST_BATCH)


def test_estimate_is_one_off_costs_plus_points_over_workers():
    probe = GridProbe(n_probe=40, build_seconds=2.0, seconds_per_point=1e-3, warmup_seconds=0.5)
    np.testing.assert_allclose(probe.estimate_seconds(10_000, 1), 2.5 + 10.0)
    np.testing.assert_allclose(probe.estimate_seconds(10_000, 4), 2.5 + 2.5)
    np.testing.assert_allclose(GridProbe(n_probe=16, build_seconds=1.0, seconds_per_point=0.5).estimate_seconds(4, 2),
                               1.0 + 1.0)      # no warm-up given: none added


def test_dry_run_prints_the_estimate_from_the_stubbed_probe(grid_file, monkeypatch):  # noqa: F811
    import motes.dust.grid.run as run

    spec = read_grid_description(grid_file)
    clock = FakeClock()
    # describe_dry_run probes with the real clock: route its probe to the fake one
    real_probe = run.probe_grid
    monkeypatch.setattr(run, "probe_grid", lambda s, f=None: real_probe(s, f, clock=clock))
    lines = describe_dry_run(spec, grid_file.parent / "store", quiet(workers=1), model_factory=timed_factory(clock))
    text = "\n".join(lines)
    expected = BUILD + PER_POINT + FIRST_BATCH + spec.n_points * PER_POINT     # 62.25 s
    assert f"estimated run time with 1 local process: {expected:.0f} s" in text, text
