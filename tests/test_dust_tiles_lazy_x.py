"""Lookup tiles built in x ranges (issue 15, the first run): only the x bins a run reaches.

A tile of the fast path holds, per (n, k) node, moments over every ``ln x`` bin up to
x = 1.26e4; the demo's bands (3-4 um, a_max = 1 mm) reach x ~ 2e3 only, and the bins
above cost most of a node (the Mie series grows with x). Tiles are therefore built up to
the x a run needs (rounded up to ``_X_QUANTUM`` bins) and extended when a later query
reaches further. Every bin depends on its own samples only, so a tile built in x ranges
must equal the whole build bit for bit: these tests check exactly that (array_equal,
no tolerance), on the tile arrays, on the cache files and on the interpolated integrals.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from motes.dust.model.colours import ScatteringGeometry
from motes.dust.model.sampling import SizeSampling
from motes.dust.model.tablebuild import FORMAT_VERSION, TableSpec, build_node, build_tile, tail_first_bin
from motes.dust.model.tables import _X_QUANTUM, PARTIAL_FORMAT, LookupTable

# a small table around m ~ 2, x from 0.05 to ~19 (cheap; its top decade starts at bin 71)
SMALL = TableSpec(n_min=1.8, dln_n=0.02, n_count=14, k_shift=1e-6, dln_k=0.4, k_count=40,
                  x_min=0.05, dln_x=0.05, x_count=120, sampling=SizeSampling(c0=2e-4, c_max=0.05))
N_BINS = SMALL.x_count - 1


@pytest.mark.parametrize("kind", ["mie", "polarised", "hg", "hollow"])
def test_a_node_built_in_x_ranges_equals_the_whole_node(kind):
    geometry = ScatteringGeometry((90.0,), "hg" if kind == "hg" else "mie")
    quantity = "polarised" if kind == "polarised" else "total"
    f_max = 0.5 if kind == "hollow" else None
    spec = SMALL if kind != "hollow" else replace(SMALL, x_count=80)     # hollow nodes are the slow ones
    n_bins, top = spec.x_count - 1, tail_first_bin(spec)
    splits = [(0, 37, 60, n_bins), (0, top + 3, n_bins), (0, 1, n_bins)]
    for m in (1.9 + 1e-3j,) if kind == "hollow" else (1.9 + 0.0j, 1.9 + 1e-3j, 2.0 + 0.5j):
        whole = build_node(spec, geometry, m, quantity, f_max)
        for cuts in splits[:1] if kind == "hollow" else splits:
            parts = [build_node(spec, geometry, m, quantity, f_max, bins=(a, b))
                     for a, b in zip(cuts[:-1], cuts[1:])]
            np.testing.assert_array_equal(np.concatenate([p[0] for p in parts], axis=1), whole[0])
            np.testing.assert_array_equal(parts[0][1], whole[1])             # start: x_min
            np.testing.assert_array_equal(parts[-1][2], whole[2])            # tail: the top decade
            assert all(np.all(p[2] == 0) for p in parts[:-1])                # no tail below the top


def test_the_tail_alone_equals_the_whole_nodes_tail():
    # all bins first (a query just below the top), the tail later (a query above it): the tail
    # then needs the top decade's samples again, and equals the whole build's
    g = ScatteringGeometry((90.0,))
    for m in (1.9 + 0.0j, 2.0 + 0.5j):
        whole = build_node(SMALL, g, m)
        bins = build_node(SMALL, g, m, bins=(0, N_BINS), tail=False)
        alone = build_node(SMALL, g, m, bins=(N_BINS, N_BINS), tail=True)
        np.testing.assert_array_equal(bins[0], whole[0])
        assert np.all(bins[2] == 0) and alone[0].shape[1] == 0
        np.testing.assert_array_equal(alone[2], whole[2])


def test_bin_ranges_are_checked():
    g = ScatteringGeometry((90.0,))
    with pytest.raises(ValueError):
        build_node(SMALL, g, 2.0 + 0.5j, bins=(10, 10))
    with pytest.raises(ValueError):
        build_node(SMALL, g, 2.0 + 0.5j, bins=(0, N_BINS + 1))
    with pytest.raises(ValueError):
        build_node(SMALL, g, 2.0 + 0.5j, bins=(0, 50), tail=True)          # the tail needs the top


def test_bins_needed_covers_the_stencil():
    table = LookupTable(ScatteringGeometry((90.0,)), SMALL, folder="/nonexistent", progress=False)
    x_nodes = SMALL.x_min * np.exp(SMALL.dln_x * np.arange(SMALL.x_count))
    need = table.bins_needed(x_nodes[:-1] * 1.0001)
    node = np.clip(np.arange(SMALL.x_count - 1), 1, SMALL.x_count - 3)
    assert np.all(need >= node + 2) and np.all((need % _X_QUANTUM == 0) | (need == N_BINS))
    assert table.bins_needed(SMALL.x_top * 0.99) == N_BINS               # every bin, no tail
    assert table.bins_needed(SMALL.x_top * 2) == N_BINS + 1 and table.bins_needed(1e-3) == _X_QUANTUM


def _bins(table):
    """x bins built per node, on the table's axes."""
    return table._nbins[:table.spec.n_count, :table.spec.k_count]


def _assert_nodes_equal_the_whole_tile(table, ij, geometry):
    """Every node of tile ij built over the whole x range equals build_tile's, bit for bit."""
    t = table.spec.tile
    whole = build_tile(table.spec, geometry, *ij)
    bins = table._nbins[ij[0] * t:(ij[0] + 1) * t, ij[1] * t:(ij[1] + 1) * t]
    done = bins == table.n_bins + 1                 # every bin and the tail
    for got, want in zip(table._tiles[ij], whole):
        np.testing.assert_array_equal(got[done], want[done])
    return done


def test_a_table_built_to_an_x_then_extended_equals_the_whole_table(tmp_path):
    g = ScatteringGeometry((70.0, 110.0))
    m = np.array([1.95 + 0.5j, 2.05 + 0.45j, 2.0 + 0.48j])      # x1 0.03: below the table (Rayleigh)
    q = np.array([3.2, 4.4, 3.9])
    x1 = np.array([0.5, 0.7, 0.03])
    low, high = np.array([3.0, 2.5, 4.0]), np.array([10.0, 40.0, 15.0])   # 40: above the top (tail)

    whole = LookupTable(g, SMALL, folder=tmp_path / "whole", progress=False, workers=1)
    for ij in whole.tiles_for(m):
        whole._load_or_build([ij])                              # whole tiles, every node
    assert (whole._nbins[whole._loaded.repeat(4, 0).repeat(4, 1)] == N_BINS + 1).all()
    ref_low, ref_high = whole.integrals(m, x1, low, q), whole.integrals(m, x1, high, q)

    lazy = LookupTable(g, SMALL, folder=tmp_path / "lazy", progress=False, workers=1)
    got_low = lazy.integrals(m, x1, low, q)                    # the stencils' nodes, up to x = 4 only
    assert 0 < _bins(lazy).max() < N_BINS
    assert 0 < (_bins(lazy) > 0).sum() < 16 * lazy._loaded.sum()   # not every node of the tiles
    files = sorted((tmp_path / "lazy").glob("tile_*.npz"))
    assert files
    for path in files:
        with np.load(path) as z:
            assert int(z["format"]) == PARTIAL_FORMAT != FORMAT_VERSION     # older motes: foreign, rebuilt
            assert z["bins"].max() < N_BINS and np.isnan(z["moments"]).any()
    below_top = np.array([10.0, SMALL.x_top * 0.99, 15.0])
    ref_below = whole.integrals(m, x1, below_top, q)
    np.testing.assert_array_equal(lazy.integrals(m, x1, below_top, q), ref_below)   # every bin, no tail
    assert _bins(lazy).max() == N_BINS
    got_high = lazy.integrals(m, x1, high, q)                  # extends the same nodes (and the stack)
    np.testing.assert_array_equal(got_low, ref_low)
    np.testing.assert_array_equal(got_high, ref_high)
    np.testing.assert_array_equal(lazy.integrals(m, x1, low, q), ref_low)
    assert (_bins(lazy) == N_BINS + 1).any()
    for ij in lazy._tiles:
        _assert_nodes_equal_the_whole_tile(lazy, ij, g)


def test_a_partial_tile_on_disk_is_extended_by_the_next_run(tmp_path):
    g = ScatteringGeometry((90.0,))
    m = np.array([2.0 + 0.5j])
    first = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=1)
    first.ensure(m, x=2.0)
    built = first.tiles_built
    assert built > 0 and 0 < _bins(first).max() < N_BINS
    second = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=1)
    second.ensure(m, x=2.0)                                    # from the cache, nothing built
    assert second.tiles_built == 0
    np.testing.assert_array_equal(second._nbins, first._nbins)
    second.ensure(m)                                           # the whole x range: extends them
    assert second.tiles_built == built
    assert set(np.unique(_bins(second))) == {0, N_BINS + 1}
    for ij in second._tiles:
        assert _assert_nodes_equal_the_whole_tile(second, ij, g).any()
    for ij in first.tiles_for(m):                              # whole tiles on request: the old file format
        second._load_or_build([ij])
        with np.load(tmp_path / f"tile_{ij[0]:03d}_{ij[1]:03d}.npz") as z:
            assert int(z["format"]) == FORMAT_VERSION and "bins" not in z
            for key, want in zip(("moments", "start", "tail"), build_tile(SMALL, g, *ij)):
                np.testing.assert_array_equal(z[key], want)


def test_extension_split_over_two_workers_equals_the_serial_build(tmp_path):
    g = ScatteringGeometry((90.0,))
    table = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=2)
    need = np.zeros_like(table._nbins)
    need[5:8, 37:39] = 40                                      # some nodes of tile (1, 9), part of x
    table._load_or_build([(1, 9)], need)
    assert _bins(table)[5:8, 37:39].min() == 40 and _bins(table).sum() == 6 * 40
    table._load_or_build([(1, 9)])
    for got, want in zip(table._tiles[(1, 9)], build_tile(SMALL, g, 1, 9)):
        np.testing.assert_array_equal(got, want)


def test_two_processes_writing_one_tile_keep_each_others_nodes(tmp_path):
    # two tables on one cache folder (two processes) build different nodes of the same tile: the
    # file keeps both sets (each write merges the nodes on disk that hold more x bins)
    g = ScatteringGeometry((90.0,))
    first = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=1)
    second = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=1)
    one, two = np.zeros_like(first._nbins), np.zeros_like(first._nbins)
    one[4:6, 36:38] = 16
    two[6:8, 38:40] = 24
    two[4, 36] = 40                                            # more bins than the first's
    first._load_or_build([(1, 9)], one)
    second._load_or_build([(1, 9)], two)                       # second never read first's nodes
    got = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=1)
    got._load_or_build([(1, 9)], np.maximum(one, two))
    assert got.tiles_built == 0
    np.testing.assert_array_equal(_bins(got)[4:8, 36:40], np.maximum(one, two)[4:8, 36:40])
    whole = build_tile(SMALL, g, 1, 9)
    built = _bins(got)[4:8, 36:40]
    for c in range(4):
        for d in range(4):
            n_b = built[c, d]
            if n_b:
                np.testing.assert_array_equal(got._tiles[(1, 9)][0][c, d, :, :n_b], whole[0][c, d, :, :n_b])
