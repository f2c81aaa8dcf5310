"""f_max per point for hollow-sphere grains: a fitted f_max and an f_max grid axis.

The fast path interpolates f_max between tables at ``F_MAX_NODES`` (4-point
Lagrange) for a fitted f_max, and builds one table per listed value for a grid
axis. The interpolation error is measured against the exact path at the f_max
itself by ``benchmarks/bench_hollow_fmax.py`` (100 random points; figures in
docs/optics.md, "f_max per point"); the test below repeats it on a few points.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.model.colours import DiskColourModel
from motes.dust.model.sampling import SizeSampling
from motes.dust.model.tables import F_MAX_NODES, TableSpec, f_max_terms
from motes.errors import InputError, ModelError
from motes.optics.constants import Material
from motes.photometry.bands import top_hat_band

BANDS = (top_hat_band("b1", 1.0, 0.05), top_hat_band("b2", 1.3, 0.05))
#: a small table (m ~ 2 + 0.5i, x up to ~4.3), as in tests/test_dust_hollow.py
SMALL = TableSpec(n_min=1.8, dln_n=0.02, n_count=14, k_shift=1e-6, dln_k=0.4, k_count=40,
                  x_min=0.05, dln_x=0.05, x_count=90, sampling=SizeSampling(c0=1e-3, c_max=0.05))


def _material(name, m):
    return Material(name, np.array([0.2, 30.0]), np.full(2, m.real), np.full(2, m.imag), density=2.0)


@pytest.fixture(scope="module", autouse=True)
def _own_cache(tmp_path_factory):
    mp = pytest.MonkeyPatch()
    mp.setenv("MOTES_CACHE_DIR", str(tmp_path_factory.mktemp("cache")))
    mp.setenv("MOTES_TABLE_WORKERS", "1")
    yield
    mp.undo()


# ------------------------------------------------------------------ interpolation weights
def test_f_max_terms_interpolate_cubics_exactly_and_use_one_table_on_a_node(rng):
    f = rng.uniform(0.1, F_MAX_NODES[-1], 50)
    terms = f_max_terms(f, "nodes")
    for poly in (lambda x: np.ones_like(x), lambda x: x, lambda x: 3 * x**3 - x**2 + 0.5):
        got = np.zeros_like(f)
        for node, rows, w in terms:
            got[rows] += w * poly(np.array(node))
        assert np.allclose(got, poly(f), atol=1e-12)
    on = f_max_terms([0.3, 0.9, 0.1], "nodes")
    assert [(n, r.tolist(), w.tolist()) for n, r, w in on] == [
        (0.1, [False, False, True], [1.0]), (0.3, [True, False, False], [1.0]), (0.9, [False, True, False], [1.0])]
    values = f_max_terms([0.37, 0.5, 0.37], "values")
    assert [(v, r.tolist()) for v, r, _ in values] == [(0.37, [True, False, True]), (0.5, [False, True, False])]
    for bad in (0.95, 0.05):     # no table above 0.9; below 0.1 weak absorbers change too fast (measured)
        with pytest.raises(ModelError, match=f"f_max = {bad:g}: the fast path interpolates a fitted f_max"):
            f_max_terms([0.5, bad], "nodes")


# ------------------------------------------------------------------ the model with f_max per point
def _models(tables, **kw):
    mat = _material("g", 2.0 + 0.5j)
    common = dict(star_teff=5800, a_max=0.6, wavelength_nodes=2, table_spec=SMALL, grains="hollow spheres",
                  size_sampling=SMALL.sampling)
    common.update(kw)
    return (DiskColourModel([mat], BANDS, method="fast", f_max_tables=tables, **common),
            DiskColourModel([mat], BANDS, method="exact", f_max_tables=tables, **common))


def test_per_point_f_max_needs_a_model_built_for_it():
    mat = _material("g", 2.0 + 0.5j)
    fixed = DiskColourModel([mat], BANDS, star_teff=5800, method="exact", grains="hollow spheres", f_max=0.5)
    with pytest.raises(InputError, match="f_max per point needs a hollow-sphere model built with f_max_tables"):
        fixed.flux_ratio([1.0], 0.0, 0.1, 3.5, f_max=0.3)
    varied = DiskColourModel([mat], BANDS, star_teff=5800, method="exact", grains="hollow spheres",
                             f_max_tables="nodes")
    assert varied.grain_summary == "hollow spheres (f_max per point)"
    assert any("f_max given per point" in n for n in varied.notes)
    with pytest.raises(InputError, match="takes f_max per point"):
        varied.flux_ratio([1.0], 0.0, 0.1, 3.5)
    with pytest.raises(InputError, match=r"f_max .* must be in \[0, 1\), got 1"):
        varied.flux_ratio([1.0], 0.0, 0.1, 3.5, f_max=1.0)
    with pytest.raises(InputError, match="grains = 'hollow spheres' only"):
        DiskColourModel([mat], BANDS, star_teff=5800, f_max_tables="nodes")
    with pytest.raises(InputError, match="f_max_tables must be one of"):
        DiskColourModel([mat], BANDS, star_teff=5800, grains="hollow spheres", f_max_tables="grid")


def test_exact_and_listed_values_equal_the_one_f_max_model():
    # the exact path at each point's f_max, and a table per listed value ("values"), are the
    # models with that one f_max (same tables, same sums)
    fast, exact = _models("values", intensities=("total", "polarised"))
    f_max = np.array([0.3, 0.7, 0.3])
    args = (np.ones((3, 1)), 0.1, np.array([0.1, 0.2, 0.15]), 3.5)
    got_fast, got_exact = fast.flux_ratio(*args, f_max=f_max), exact.flux_ratio(*args, f_max=f_max)
    for i, value in enumerate(f_max):
        one_fast, one_exact = (DiskColourModel([_material("g", 2.0 + 0.5j)], BANDS, star_teff=5800, a_max=0.6,
                                               wavelength_nodes=2, table_spec=SMALL, grains="hollow spheres",
                                               size_sampling=SMALL.sampling, f_max=value, method=method,
                                               intensities=("total", "polarised")) for method in ("fast", "exact"))
        row = tuple(a[i:i + 1] if np.ndim(a) else a for a in args)
        # equal but for the order of floating-point sums (a batch of 3 rows against 1)
        assert np.allclose(got_fast[i], one_fast.flux_ratio(*row)[0], rtol=1e-12, atol=0)
        assert np.allclose(got_exact[i], one_exact.flux_ratio(*row)[0], rtol=1e-12, atol=0)


def test_interpolated_f_max_against_the_exact_path():
    # the fast path with f_max interpolated between node tables against the exact path at the f_max
    # itself (small table, so the table's own error is included). Measured: within 2.1e-4 (total) and
    # 9.3e-4 (polarised); required 5e-3, as for the one-f_max small table (tests/test_dust_hollow.py).
    fast, exact = _models("nodes", intensities=("total", "polarised"))
    f_max = np.array([0.23, 0.5, 0.66])
    n = f_max.size
    args = (np.ones((n, 1)), np.linspace(0.0, 0.02, n), np.geomspace(0.05, 0.3, n), np.linspace(3.2, 3.8, n))
    got, ref = fast.flux_ratio(*args, f_max=f_max), exact.flux_ratio(*args, f_max=f_max)
    assert np.all(np.abs(got[:, 0] / ref[:, 0] - 1) < 5e-3), got / ref - 1
    assert np.all(np.abs(got[:, 1] / ref[:, 1] - 1) < 5e-3), got / ref - 1
    fast.prepare(args[0], args[1], f_max=f_max)     # the node tables a run needs: loaded, none other
    assert sorted(fast._tables) == [0.15, 0.2, 0.25, 0.3, 0.5, 0.6, 0.65, 0.7, 0.75]


def test_f_max_interpolation_error_on_random_points(rng):
    # interpolation alone: exact-path values at the nodes, interpolated, against the exact path at the
    # f_max itself, monochromatic (1.25 um), grains to 1 um, weak to strong absorbers. The 60-point run
    # of benchmarks/bench_hollow_fmax.py (docs/optics.md) measured, with F_MAX_NODES (step 0.05) and
    # f_max in [0.1, 0.9], at most 8.6e-4 in R and 6.0e-4 in the degree of polarisation; required here
    # 2e-3 and 2e-3 on a few points.
    mat = _material("g", 1.5 + 0.01j)
    models = {}

    def ratios(f, m, a_min, q):
        model = models.setdefault(f, DiskColourModel([mat], BANDS[:1], star_teff=5800, method="exact", a_max=1.0,
                                                     grains="hollow spheres", f_max=f))
        return np.array([model.node_values_exact(np.array([[m]]), np.array([1.25]), a_min, q, 1.0,
                                                 quantity=quantity)[0, 0] for quantity in ("total", "polarised")])

    for _ in range(3):
        m = complex(rng.uniform(1.3, 2.0), np.exp(rng.uniform(np.log(1e-4), 0.0)))
        a_min, q, f = np.exp(rng.uniform(np.log(0.1), np.log(0.5))), rng.uniform(3.0, 4.0), rng.uniform(0.1, 0.9)
        total, polarised = sum(w[0] * ratios(node, m, a_min, q) for node, _, w in f_max_terms([f]))
        ref_total, ref_polarised = ratios(f, m, a_min, q)
        assert abs(total / ref_total - 1) < 2e-3, (m, a_min, q, f, total / ref_total - 1)
        assert abs(polarised / total - ref_polarised / ref_total) < 2e-3, (m, a_min, q, f)


def test_millimetre_hollow_grains_are_announced_before_the_table_is_built(capsys):
    # a_max = 1 mm: the hollow-sphere table must reach x ~ 2 pi a_max / lambda_min (8.6e3 here, bands
    # at 1.0-1.3 um), whose first build takes hours; the run says so on stderr and in its notes before
    # any tile is built (it is not refused: the fast path then works as for smaller grains, cached)
    from motes.dust.model.tables import HOLLOW_X_WARN, table_for_model

    mat = _material("g", 2.0 + 0.5j)
    big = DiskColourModel([mat], BANDS, star_teff=5800, method="fast", a_max=1000.0, grains="hollow spheres",
                          f_max=0.8)
    table = table_for_model(big, lazy=True)
    assert table.table.spec.x_top > HOLLOW_X_WARN and table.table.tiles_built == 0
    assert any("a_max = 1000 um need lookup tables up to x = 8.63e+03" in n for n in big.notes)
    assert "can take hours on first use" in capsys.readouterr().err
    small = DiskColourModel([mat], BANDS, star_teff=5800, method="fast", a_max=2.0, grains="hollow spheres",
                            f_max=0.8)
    table_for_model(small, lazy=True)
    assert not any("need lookup tables up to" in n for n in small.notes)


def test_monochromatic_ratio_takes_f_max_per_point():
    # the fit's spectrum curves pass the sampled f_max (motes.dust.fit.curves)
    mat = _material("g", 2.0 + 0.5j)
    kw = dict(star_teff=5800, method="exact", a_max=0.6, grains="hollow spheres", size_sampling=SMALL.sampling)
    varied = DiskColourModel([mat], BANDS[:1], f_max_tables="nodes", **kw)
    fixed = DiskColourModel([mat], BANDS[:1], f_max=0.4, **kw)
    args = ([1.0, 1.2], np.ones((2, 1)), 0.0, 0.1, 3.5)
    assert np.allclose(varied.monochromatic_flux_ratio(*args, f_max=[0.4, 0.4]), fixed.monochromatic_flux_ratio(*args),
                       rtol=1e-12, atol=0)
    with pytest.raises(InputError, match="takes f_max per point"):
        varied.monochromatic_flux_ratio(*args)
