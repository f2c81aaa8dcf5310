"""A grid prepares the lookup tiles of its own mixtures: every (fractions, porosity) pair, once."""

from __future__ import annotations

import numpy as np

from motes.dust.grid.spec import read_grid_description
from motes.dust.grid.workers import grid_mixtures

from test_dust_grid import grid_file  # noqa: F401


def test_grid_mixtures_are_exactly_the_pairs_of_the_grid_points(grid_file):  # noqa: F811
    spec = read_grid_description(grid_file)
    fractions, porosity = grid_mixtures(spec)
    assert len(porosity) == spec.n_compositions * len(spec.porosity)
    pts = spec.points(np.arange(spec.n_points))
    every = np.unique(np.column_stack([pts.fractions, pts.porosity]), axis=0)
    listed = np.column_stack([fractions, porosity])
    assert np.unique(listed, axis=0).shape[0] == listed.shape[0]          # no pair twice
    np.testing.assert_array_equal(np.unique(listed, axis=0), every)


def test_grid_mixtures_gives_up_above_its_limit(grid_file):  # noqa: F811
    spec = read_grid_description(grid_file)
    n = spec.n_compositions * len(spec.porosity)
    assert grid_mixtures(spec, limit=n - 1) is None
    assert grid_mixtures(spec, limit=n) is not None
