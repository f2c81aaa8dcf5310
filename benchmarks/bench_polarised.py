"""Speed and accuracy of polarised-intensity colours: fast path against the converged exact path.

Model: silica, crystalline water ice and amorphous carbon (Bruggeman), around a
5600 K blackbody, seen at 90 deg, in 2mass_j, 2mass_h, 2mass_ks and wise_w1,
each band in total AND polarised intensity (8 model columns, one flux scale:
what a joint fit evaluates). Points (seed ``SEED``, ``N_POINTS``):
Dirichlet(1, 1, 1) fractions with at least ``CARBON_MIN`` carbon, porosity
U(0, 0.6), a_min log-U(0.3, 5) um, q U(3, 4), a_max = ``A_MAX`` um.

Scope, stated plainly: grains up to 20 um (not 1 mm) and no weak-absorber-only
mixtures, so that the converged exact reference of 100 points is computed in
minutes on a shared 2-core machine (one weak-absorber point with grains to
20 um costs ~75 s at the default size rule, ~220 s converged). The table has
the default axes and steps in n, k, q and x, with its x range cut at
``x_top`` ~ 160 (enough for 20 um grains at 1.1 um), so its tiles are cheap;
the interpolation it measures is the default table's. The total-intensity
sphere path at full size range is benchmarked by ``bench_optics.py``.

Prints, measured in this run on ONE core (numba/BLAS threads pinned to 1):

* models/s of the exact path (default settings) on a few points: the baseline,
* models/s of the fast path, total-only model (4 columns) and total + polarised
  model (8 columns), tables already built; their ratios to the baseline,
* table build time of the tiles built in this run and the size of both tables,
* per point, fast against the reference (exact path with the model's own
  settings, 8 Gauss nodes per band and the default size rule, so that the
  difference is the table's; the reference's own convergence is measured on
  ``N_CHECK`` points against the size rule refined 2x with 16 nodes per band,
  and printed): the largest relative error of the polarised
  ratios where the band's degree of polarisation |P| >= ``P_FLOOR`` (near zero
  a relative error means nothing), the largest absolute error in P, and the
  largest total-colour error [mag].

The reference is stored in ``REFERENCE`` (ECSV) and reused when present and
made with the same points (``--recompute`` forces a new one).

Usage::

    python benchmarks/bench_polarised.py [--workers 2] [--recompute]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from dataclasses import replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

HERE = Path(__file__).resolve().parent
REFERENCE = HERE / "polarised_reference.ecsv"
SEED = 20261212
N_POINTS = 100
CARBON_MIN = 0.03
A_MAX = 20.0
STAR_TEFF = 5600.0
MATERIALS = ("silica_amorphous", "water_ice_crystalline", "carbon_amorphous")
BANDS = ("2mass_j", "2mass_h", "2mass_ks", "wise_w1")
INTENSITIES = ("total",) * 4 + ("polarised",) * 4
#: below this |degree of polarisation| a band's polarised ratio counts as near zero
P_FLOOR = 0.02
REFERENCE_NODES, REFERENCE_REFINE = 8, 1.0
#: points whose reference is recomputed with CHECK_NODES nodes per band and the size rule refined CHECK_REFINE x
N_CHECK, CHECK_NODES, CHECK_REFINE = 10, 16, 2.0


def table_spec():
    from motes.dust.model.tables import TableSpec

    return replace(TableSpec(), x_count=360)      # x_top = 0.02 exp(359 * 0.025) ~ 157


def points(rng, n=N_POINTS):
    f = rng.dirichlet(np.ones(3), n)
    f[:, 2] = np.maximum(f[:, 2], CARBON_MIN)
    f /= f.sum(axis=1, keepdims=True)
    por = rng.uniform(0.0, 0.6, n)
    a_min = np.exp(rng.uniform(np.log(0.3), np.log(5.0), n))
    q = rng.uniform(3.0, 4.0, n)
    return f, por, a_min, q


def model(method, intensities=INTENSITIES, nodes=8, refine=1.0):
    from motes.dust.model.colours import DiskColourModel
    from motes.dust.model.sampling import SizeSampling

    sampling = SizeSampling() if refine == 1.0 else SizeSampling().refined(refine)
    bands = BANDS * (len(intensities) // len(BANDS))
    return DiskColourModel(MATERIALS, bands, star_teff=STAR_TEFF, method=method, a_max=A_MAX,
                           wavelength_nodes=nodes, size_sampling=sampling, table_spec=table_spec(),
                           intensities=intensities)


def _exact_row(args):
    f, p, a, q, nodes, refine = args
    return model("exact", nodes=nodes, refine=refine).flux_ratio(f[None, :], p, a, q)[0]


def _run(jobs, workers):
    if workers > 1:
        import multiprocessing

        with multiprocessing.get_context("fork").Pool(workers) as pool:
            return np.asarray(pool.map(_exact_row, jobs, chunksize=1))
    return np.asarray([_exact_row(j) for j in jobs])


def reference(pts, workers, recompute):
    from astropy.table import Table

    from motes.files import atomic_write

    f, por, a_min, q = pts
    if REFERENCE.exists() and not recompute:
        t = Table.read(REFERENCE, format="ascii.ecsv")
        if len(t) == len(por) and np.allclose(t["a_min"], a_min, rtol=0, atol=0) and t.meta.get("seed") == SEED:
            return np.asarray(t["reference"]), np.asarray(t["check"]), t.meta.get("seconds", float("nan"))
    t0 = time.perf_counter()
    ref = _run([(f[i], por[i], a_min[i], q[i], REFERENCE_NODES, REFERENCE_REFINE) for i in range(len(por))], workers)
    check = np.full_like(ref, np.nan)
    check[:N_CHECK] = _run([(f[i], por[i], a_min[i], q[i], CHECK_NODES, CHECK_REFINE) for i in range(N_CHECK)],
                           workers)
    seconds = time.perf_counter() - t0
    t = Table({"f_silica": f[:, 0], "f_ice": f[:, 1], "f_carbon": f[:, 2], "porosity": por, "a_min": a_min,
               "q": q, "reference": ref, "check": check})
    t.meta.update({"seed": SEED, "bands": list(BANDS), "intensities": list(INTENSITIES), "a_max_um": A_MAX,
                   "star_teff": STAR_TEFF, "materials": list(MATERIALS), "reference_nodes": REFERENCE_NODES,
                   "reference_refine": REFERENCE_REFINE, "check_nodes": CHECK_NODES, "check_refine": CHECK_REFINE,
                   "seconds": seconds,
                   "made_by": "python benchmarks/bench_polarised.py"})
    with atomic_write(REFERENCE) as tmp:
        t.write(tmp, format="ascii.ecsv", overwrite=True)
    return ref, check, seconds


def rate(fn, n_models, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return n_models / best


def folder_size(path):
    return sum(p.stat().st_size for p in Path(path).glob("*") if p.is_file())


def errors(fast, ref):
    """(max rel. polarised error where |P| >= P_FLOOR, max |dP|, max total colour error [mag], n counted)."""
    tot_f, pol_f = fast[:, :4], fast[:, 4:]
    tot_r, pol_r = ref[:, :4], ref[:, 4:]
    degree = pol_r / tot_r
    far = np.abs(degree) >= P_FLOOR
    rel = np.abs(pol_f / pol_r - 1)[far]
    d_p = np.abs(pol_f / tot_f - degree)
    col = np.abs(-2.5 * np.log10((tot_f / tot_f[:, :1]) / (tot_r / tot_r[:, :1])))
    return float(rel.max()), float(d_p.max()), float(col.max()), int(far.sum())


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--workers", type=int, default=1, help="processes for the exact reference")
    parser.add_argument("--recompute", action="store_true")
    args = parser.parse_args(argv)

    from motes.dust.model import tables

    rng = np.random.default_rng(SEED)
    pts = points(rng)
    f, por, a_min, q = pts
    ref, check, ref_seconds = reference(pts, args.workers, args.recompute)

    fast = model("fast")
    t0 = time.perf_counter()
    fast.prepare(f, por)
    timing = points(np.random.default_rng(SEED + 1), 2000)
    fast.prepare(timing[0], timing[1])
    build = time.perf_counter() - t0
    totals = model("fast", intensities=("total",) * 4)
    totals.prepare(timing[0], timing[1])
    pol_table = fast._fast_table().polarised
    tot_table = fast._fast_table().table

    value = fast.flux_ratio(f, por, a_min, q)
    rel, d_p, col, n_far = errors(value, ref)
    rel_chk, d_p_chk, col_chk, _ = errors(ref[:N_CHECK], check[:N_CHECK])
    rel_fc, d_p_fc, col_fc, n_fc = errors(value[:N_CHECK], check[:N_CHECK])

    exact = model("exact")
    n_exact = 3
    exact_rate = rate(lambda: exact.flux_ratio(f[:n_exact], por[:n_exact], a_min[:n_exact], q[:n_exact]), n_exact,
                      repeat=1)
    pol_rate = rate(lambda: fast.flux_ratio(*timing), len(timing[1]))
    tot_rate = rate(lambda: totals.flux_ratio(*timing), len(timing[1]))

    print(f"model: {', '.join(MATERIALS)}; bands {', '.join(BANDS)} in total and polarised intensity; "
          f"90 deg; a_max {A_MAX:g} um; {N_POINTS} points (seed {SEED})")
    print(f"exact path (default settings), baseline      : {exact_rate:10.3g} models/s")
    print(f"fast path, total only (4 columns)            : {tot_rate:10.4g} models/s  "
          f"({tot_rate / exact_rate:.3g}x the baseline)")
    print(f"fast path, total + polarised (8 columns)     : {pol_rate:10.4g} models/s  "
          f"({pol_rate / exact_rate:.3g}x the baseline, {pol_rate / tot_rate:.2f}x the total-only fast path)")
    print(f"tables: built in this run {build:.1f} s ({tot_table.tiles_built} total + {pol_table.tiles_built} "
          f"polarised tiles); on disk {folder_size(tot_table.folder) / 1e6:.1f} MB total, "
          f"{folder_size(pol_table.folder) / 1e6:.1f} MB polarised ({len(pol_table._tiles)} polarised tiles)")
    print(f"reference: exact path, size rule x{REFERENCE_REFINE:g}, {REFERENCE_NODES} nodes per band "
          f"({ref_seconds:.0f} s to compute with the check, stored in {REFERENCE.name})")
    print(f"fast vs reference: polarised ratios (|P| >= {P_FLOOR:g}, {n_far} of {4 * N_POINTS}) within "
          f"{100 * rel:.3g}%; degree of polarisation within {d_p:.2g}; total colours within {col:.3g} mag")
    print(f"reference vs size rule x{CHECK_REFINE:g} and {CHECK_NODES} nodes per band on {N_CHECK} points "
          f"(its convergence): polarised {100 * rel_chk:.3g}%, P {d_p_chk:.2g}, colours {col_chk:.3g} mag")
    print(f"fast vs the x{CHECK_REFINE:g} / {CHECK_NODES}-node values on those {N_CHECK} points: polarised "
          f"{100 * rel_fc:.3g}% ({n_fc} ratios), P {d_p_fc:.2g}, colours {col_fc:.3g} mag")
    goal = rel <= 0.01 and col <= 0.01 and pol_rate >= 1000
    print("goal (polarised within 1% where |P| >= floor, colours within 0.01 mag, >= 1000 models/s): "
          + ("met" if goal else "NOT met"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
