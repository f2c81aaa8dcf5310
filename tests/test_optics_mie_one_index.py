"""The one-index Mie kernel of the lookup-table builder (motes.optics.mie.intensities_for_index).

It runs miepython's series and recurrences with different rounding (real-arithmetic psi_n,
complex division through one reciprocal), so it is checked against the exact path's
``scattered_intensity`` / ``polarised_scattered_intensity`` at random (m, x) over the
tables' whole range. Tolerance: 1e-9 relative (of the total intensity, for the signed
polarised one too). Rounding of ~1e-16 per operation accumulates over up to ~1.3e4 series
terms and is amplified at deep minima of the Mie ripple; measured at most 6.5e-12 on the
28,525 samples of the tables' weakest absorber (m = 1.5, benchmarks/bench_tilebuild.py).
A wrong term or recurrence shows at 1e-6 or worse, so 1e-9 separates the two cleanly.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.model.sampling import bin_rule
from motes.dust.model.tablebuild import TableSpec, build_tile, tile_rows
from motes.dust.model.colours import ScatteringGeometry
from motes.dust.model.sampling import SizeSampling
from motes.errors import InputError
from motes.optics import mie

RTOL = 1e-9


def _random_indices(rng, count):
    n = np.exp(rng.uniform(np.log(0.8), np.log(8.0), count))
    k = np.where(rng.uniform(size=count) < 0.2, 0.0, 10 ** rng.uniform(-8, 1, count))
    return n + 1j * k


@pytest.mark.parametrize("angles_deg", [(90.0,), (15.0, 90.0, 160.0)])
def test_one_index_kernel_matches_the_exact_path(rng, angles_deg):
    theta = np.radians(angles_deg)
    for m in _random_indices(rng, 12):
        x = np.sort(np.exp(rng.uniform(np.log(0.02), np.log(1.3e4), 15)))
        total, polarised = mie.intensities_for_index(m, x, theta)
        ref_t = mie.scattered_intensity(np.full(x.size, m), x, theta)
        ref_p = mie.polarised_scattered_intensity(np.full(x.size, m), x, theta)
        np.testing.assert_allclose(total, ref_t, rtol=RTOL, atol=0, err_msg=f"m = {m}")
        assert np.all(np.abs(polarised - ref_p) <= RTOL * ref_t), f"m = {m}"


def test_one_index_kernel_on_a_table_node_integral():
    # the weakest absorber of the table on its own size rule: the size integral agrees to rounding
    spec = TableSpec()
    t, w, _ = bin_rule(spec.ln_x[:440], spec.sampling, 0.0)       # x up to ~1e3: keeps the test short
    m = 1.33 + 0.0j
    theta = np.array([np.pi / 2])
    total, _ = mie.intensities_for_index(m, t, theta)
    ref = mie.scattered_intensity(np.full(t.size, m), t, theta)
    assert abs(np.sum(w * total) / np.sum(w * ref) - 1) < 1e-12


def test_one_index_kernel_edge_cases():
    theta = np.array([np.pi / 2])
    total, polarised = mie.intensities_for_index(1.5 + 0.01j, np.array([]), theta)
    assert total.shape == polarised.shape == (0,)
    with pytest.raises(InputError):
        mie.intensities_for_index(np.array([1.5, 1.6]), np.array([1.0]), theta)
    with pytest.raises(InputError):
        mie.intensities_for_index(1.5 - 0.01j, np.array([1.0]), theta)
    with pytest.raises(InputError):
        mie.intensities_for_index(1.5, np.array([0.0]), theta)


SMALL = TableSpec(n_min=1.8, dln_n=0.02, n_count=14, k_shift=1e-6, dln_k=0.4, k_count=40,
                  x_min=0.05, dln_x=0.05, x_count=120, sampling=SizeSampling(c0=2e-4, c_max=0.05))


def test_a_tile_built_row_by_row_equals_the_whole_tile():
    g = ScatteringGeometry((90.0,))
    whole = build_tile(SMALL, g, 1, 9)
    merged = [np.zeros_like(a) for a in whole]
    for a in range(tile_rows(SMALL, 1)):
        part = build_tile(SMALL, g, 1, 9, rows=(a,))
        for dst, src in zip(merged, part):
            dst[a] = src[a]
    for dst, src in zip(merged, whole):
        np.testing.assert_array_equal(dst, src)
    assert tile_rows(SMALL, 3) == 2          # n_count 14: the last tile row holds 2 rows


def test_a_single_missing_tile_is_built_over_the_workers(tmp_path):
    # one missing tile goes to the pool row by row; the result is the serial build, bit for bit
    from motes.dust.model.tables import LookupTable

    g = ScatteringGeometry((90.0,))
    table = LookupTable(g, SMALL, folder=tmp_path, progress=False, workers=2)
    table._load_or_build([(1, 9)])
    whole = build_tile(SMALL, g, 1, 9)
    for got, want in zip(table._tiles[(1, 9)], whole):
        np.testing.assert_array_equal(got, want)
    assert table.tiles_built == 1 and (tmp_path / "tile_001_009.npz").exists()


def test_tables_built_with_the_kernel_have_cache_folders_of_their_own():
    # tiles of the per-x miepython loop (before the kernel) must never be mixed with the kernel's:
    # solid-sphere Mie-phase keys (total and polarised) name the builder; Henyey-Greenstein and
    # hollow-sphere tables, built as before, keep the keys they had (their caches stay valid)
    import hashlib
    import json
    from dataclasses import asdict

    from motes.dust.model.tablebuild import FORMAT_VERSION, SPHERE_BUILDER, channel_key

    spec = TableSpec()

    def key_without_builder(channels):
        payload = json.dumps({"spec": asdict(spec), "channels": channels, "format": FORMAT_VERSION,
                              "miepython": mie.miepython.__version__}, sort_keys=True)
        return hashlib.sha256(payload.encode()).hexdigest()[:20]

    mie_geo, hg_geo = ScatteringGeometry((90.0,)), ScatteringGeometry((90.0,), "hg")
    for ck in (channel_key(mie_geo), channel_key(mie_geo, "polarised")):
        assert spec.key(ck) != key_without_builder(ck)
    for ck in (channel_key(hg_geo), channel_key(mie_geo, "total", 0.8), channel_key(mie_geo, "polarised", 0.8)):
        assert spec.key(ck) == key_without_builder(ck)
    assert SPHERE_BUILDER
