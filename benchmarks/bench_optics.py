"""Speed and accuracy of the disk-colour model: straightforward exact, converged exact, fast.

Reference model (issue 4): 4 components + porosity, 8 bands between 0.6 and
4 um, a_min 0.5-10 um, a_max 1 mm, q = 3.5, seen at 90 deg (model "A" of
``benchmarks/make_optics_reference.py``: amorphous silica, crystalline water
ice, amorphous carbon, iron).

Prints, measured in this run on ONE core (numba/BLAS threads pinned to 1):

* models/s of the straightforward exact evaluation (8 bands x 7 wavelength
  nodes x 200 log-spaced sizes, trapezoid in ln a; what a first script does),
* models/s of motes' exact path at the model's default settings (8 Gauss
  nodes per band, 16 on absorption features; size rule of motes.dust.model.sampling),
* models/s of the fast path (batches of points, tables already built),
* their ratios,
* the table build time (tiles built in this run, if any) and the cache size,
* the worst colour difference, fast vs the committed converged reference
  (``tests/data/optics_reference.ecsv``, every point of all three models),
  and of the straightforward evaluation vs the same reference on a subset.

Usage::

    python benchmarks/bench_optics.py                # everything
    python benchmarks/bench_optics.py --quick        # fewer timing points, model A accuracy only
    MOTES_TABLE_WORKERS=2 python benchmarks/bench_optics.py   # build missing tiles on 2 cores
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import make_optics_reference as mk  # noqa: E402

REFERENCE = HERE.parent / "tests" / "data" / "optics_reference.ecsv"


def straightforward(model, fractions, porosity, a_min, q=3.5, a_max=1000.0, nodes=7, sizes=200):
    """The plain evaluation: per band 7 Gauss nodes, 200 log-spaced sizes, trapezoid in ln a."""
    from motes.dust.model.sampling import weighted_gauss_nodes
    from motes.optics import mie

    out = np.empty((len(fractions), len(model.bands)))
    theta = model.geometry.angles_rad
    band_nodes = []
    for band in model.bands:
        grid = np.linspace(band.wavelength_min, band.wavelength_max, 801)
        band_nodes.append(weighted_gauss_nodes(grid, band.weight(grid) * model.star_flux(grid), nodes))
    lam = np.concatenate([b[0] for b in band_nodes])
    for i, (f, p, amin) in enumerate(zip(fractions, porosity, a_min)):
        m = model.effective_index(f[None, :], p, lam)[0]
        a = np.geomspace(amin, a_max, sizes)
        x = 2 * np.pi * a[None, :] / lam[:, None]
        mm = np.broadcast_to(m[:, None], x.shape)
        s = mie.scattered_intensity(mm, x, theta)
        # pi a^2 Q_sca p = a^2 s / (2 x^2)
        integrand = a[None, :] ** (3 - q) * s / (2 * x**2)   # per d ln a, times a^-q a
        num = np.trapezoid(integrand, np.log(a), axis=1)
        den = np.pi * np.trapezoid(a ** (3 - q), np.log(a))
        r = num / den
        k = 0
        for b, (xb, wb) in enumerate(band_nodes):
            out[i, b] = np.sum(wb * r[k:k + xb.size])
            k += xb.size
    return out


def colours(r):
    return -2.5 * np.log10(r / r[:, :1])


def random_points(rng, n, k=4):
    f = rng.dirichlet(np.ones(k), n)
    return f, rng.uniform(0, 0.8, n), np.exp(rng.uniform(np.log(0.5), np.log(10), n))


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="fewer timing points; model A accuracy only")
    args = parser.parse_args(argv)

    from astropy.table import Table

    from motes.files import cache_directory
    from motes.optics.mie import solver_summary

    print(f"Mie solver: {solver_summary()}")
    rng = np.random.default_rng(20261204)
    exact = mk.build_model("A", "exact")
    fast = mk.build_model("A", "fast")

    # --- straightforward exact
    n_plain = 2 if args.quick else 4
    f, p, amin = random_points(rng, n_plain)
    t0 = time.perf_counter()
    straightforward(exact, f, p, amin)
    plain_rate = n_plain / (time.perf_counter() - t0)
    print(f"straightforward exact (8 bands x 7 nodes x 200 sizes): {plain_rate:8.3f} models/s")

    # --- converged exact path
    n_exact = 2 if args.quick else 4
    f, p, amin = random_points(rng, n_exact)
    t0 = time.perf_counter()
    exact.flux_ratio(f, p, amin, 3.5)
    exact_rate = n_exact / (time.perf_counter() - t0)
    print(f"motes exact path (8 nodes per band, 16 on absorption features; size rule): {exact_rate:8.3f} models/s")

    # --- fast path: build/load tables, then time batches
    from motes.dust.model.tables import table_for_model

    t0 = time.perf_counter()
    handle = table_for_model(fast)
    fast._table = handle
    build = time.perf_counter() - t0
    table = handle.table
    print(f"fast path tables: {len(table._tiles)} tiles ready in {build:.1f} s "
          f"({table.tiles_built} built in this run, {table.build_seconds:.1f} s of building)")
    n_fast = 2000 if args.quick else 10000
    f, p, amin = random_points(rng, n_fast)
    fast.flux_ratio(f[:50], p[:50], amin[:50], 3.5)          # warm-up (compilation, q slices)
    t0 = time.perf_counter()
    for lo in range(0, n_fast, 1000):
        fast.flux_ratio(f[lo:lo + 1000], p[lo:lo + 1000], amin[lo:lo + 1000], 3.5)
    fast_rate = n_fast / (time.perf_counter() - t0)
    print(f"fast path (batches of 1000, 8 nodes per band, 16 on absorption features): {fast_rate:10.1f} models/s")
    print(f"ratio fast / straightforward exact: {fast_rate / plain_rate:10.0f}")
    print(f"ratio fast / exact reference path:  {fast_rate / exact_rate:10.0f}")

    # --- accuracy against the committed reference
    if not REFERENCE.exists():
        print(f"no reference file {REFERENCE}: run benchmarks/make_optics_reference.py first")
        return
    ref = Table.read(REFERENCE, format="ascii.ecsv")
    bands = ref.meta["bands"]
    worst, worst_row, n_points = 0.0, None, 0
    per_point, all_colours = [], []
    t0 = time.perf_counter()
    for name in (["A"] if args.quick else sorted(set(ref["model"]))):
        rows = [i for i in range(len(ref)) if ref["model"][i] == name]
        model = fast if name == "A" else mk.build_model(name, "fast")
        fr = np.array([[ref[f"f{j}"][i] for j in range(4)] for i in rows])
        got = model.flux_ratio(fr, ref["porosity"][rows], ref["a_min"][rows], 3.5, 1000.0)
        want = np.array([[ref[f"R_{b}"][i] for b in bands] for i in rows])
        d = np.abs(colours(got) - colours(want))
        per_point.extend(d.max(axis=1))
        all_colours.extend(d[:, 1:].ravel())
        n_points += len(rows)
        if d.max() > worst:
            worst = float(d.max())
            worst_row = rows[int(np.argmax(d.max(axis=1)))]
    seconds = time.perf_counter() - t0
    print(f"worst colour difference fast vs converged exact over {n_points} reference points: "
          f"{worst:.4f} mag (row {worst_row}; tables for the other models built/loaded in {seconds:.0f} s)")
    per_point = np.array(per_point)
    print(f"  median colour difference {np.median(all_colours):.5f} mag, 95th percentile "
          f"{np.percentile(all_colours, 95):.4f} mag; points with every colour within 0.01 mag: "
          f"{int((per_point < 0.01).sum())}/{per_point.size}, within 0.02 mag: {int((per_point < 0.02).sum())}")
    if "convergence_max_colour_change_mag" in ref.meta:
        print(f"reference convergence (2x sizes and 2x wavelength nodes on {len(ref.meta['convergence_rows'])} "
              f"points): max colour change {ref.meta['convergence_max_colour_change_mag']:.4f} mag")
    if "raised_settings_row_max_colour_change_mag" in ref.meta:
        change = ref.meta["raised_settings_row_max_colour_change_mag"]
        print(f"reference rows recomputed at raised settings ({len(change)} rows, now "
              f"{ref.meta.get('wavelength_nodes', '?')} nodes): their colours moved by up to {max(change):.4f} mag "
              "from the earlier settings")
    # the straightforward evaluation against the same reference (a few model-A points)
    rows = [i for i in range(len(ref)) if ref["model"][i] == "A"][: (3 if args.quick else 8)]
    fr = np.array([[ref[f"f{j}"][i] for j in range(4)] for i in rows])
    got = straightforward(exact, fr, ref["porosity"][rows], ref["a_min"][rows])
    want = np.array([[ref[f"R_{b}"][i] for b in bands] for i in rows])
    print(f"worst colour difference straightforward vs converged exact ({len(rows)} points): "
          f"{np.abs(colours(got) - colours(want)).max():.4f} mag")
    size = sum(p.stat().st_size for p in (cache_directory() / "tables").rglob("*.npz"))
    print(f"table cache: {cache_directory() / 'tables'} ({size / 1e6:.0f} MB)")


if __name__ == "__main__":
    main()
