"""Speed and accuracy of hollow-sphere colours: fast path against the exact path, in one run.

Model: porous amorphous carbon (Bruggeman with vacuum) as a distribution of
hollow spheres (Min, Hovenier & de Koter 2005) with ``F_MAX`` = 0.8, around a
5600 K blackbody, seen at 90 deg, in 2mass_j, 2mass_h and 2mass_ks (total
intensity). Points (seed ``SEED``, ``N_POINTS``): porosity U(0, 0.3), a_min
log-U(0.1, 1) um, q U(3, 4), a_max = ``A_MAX`` um; ``NODES`` Gauss nodes per band.

Scope, stated plainly: one absorbing material, grains up to 2 um by default (not
1 mm), 2 nodes per band, total intensity unless ``--polarised``, so that the
hollow-sphere table tiles this run needs (each node is ``DEFAULT_F_NODES`` = 16
coated spheres per size, outer sizes up to 1.7x the material size) and the exact
reference are made in minutes on a shared 2-core machine. The table has the
default axes and steps in n, k, q and x, with its x range cut at ``x_top`` ~ 13
(enough for 2 um grains at 1.1 um); the interpolation it measures is the
default table's. Weak absorbers and mixtures (``--materials``) work here too,
but their exact reference point by point is slow (the size rule resolves the
ripples of weak absorbers: ~14,000 sizes per wavelength for amorphous silica,
each 16 coated spheres); ``bench_hollow_weak.py`` measures them on 100 points
whose per-size values are shared per (composition, porosity) and checked
against the exact path (silica: colours within 0.0003 mag, polarised ratios
within 0.07%, 79,400 models/s CPU; figures in its docstring and docs/optics.md).

Prints, measured in this run on ONE core (numba/BLAS threads pinned to 1):

* models/s of the exact hollow-sphere path (default settings) on a few points:
  the baseline;
* models/s of the fast path for hollow spheres and for solid spheres (same
  model otherwise, tables already built), and their ratios to the baseline;
* table build time of the hollow-sphere tiles built in this run, their
  number and size on disk;
* per point, fast against the exact reference (same settings, so that the
  difference is the table's): the largest colour error [mag] (each band
  against 2mass_j) and the largest relative flux-ratio error; and the
  reference's own convergence on ``N_CHECK`` points against the size rule
  refined 2x with 16 nodes per band.

With ``--polarised`` every band is also modelled in polarised intensity (a
second hollow-sphere table) and the largest relative error of the polarised
ratios where the band's |degree of polarisation| >= ``P_FLOOR`` is printed
too. ``--a-max`` and ``--nodes`` change the largest grain [um] and the Gauss
nodes per band (the table's x range follows a_max); ``--materials`` takes other
bundled materials (weak absorbers such as ``silica_amorphous``, or a mixture
``silica_amorphous,water_ice_crystalline`` with fractions uniform on the simplex).

The reference is stored in ``REFERENCE`` (ECSV, one file per configuration)
and reused when present and made with the same points (``--recompute``
forces a new one).

Usage::

    MOTES_CACHE_DIR=/tmp/cache python benchmarks/bench_hollow.py [--workers 2] [--recompute]
        [--polarised] [--a-max 2] [--nodes 2]
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
REFERENCE = HERE / "hollow_reference.ecsv"
SEED = 20261213
N_POINTS = 100
F_MAX = 0.8
A_MAX = 2.0
NODES = 2
STAR_TEFF = 5600.0
MATERIALS = ("carbon_amorphous",)
BANDS = ("2mass_j", "2mass_h", "2mass_ks")
N_CHECK, CHECK_NODES, CHECK_REFINE = 3, 4, 2.0
P_FLOOR = 0.02
POLARISED = False


def configure(a_max, nodes, polarised, materials=None):
    global A_MAX, NODES, POLARISED, REFERENCE, CHECK_NODES, MATERIALS
    A_MAX, NODES, POLARISED, CHECK_NODES = a_max, nodes, polarised, 2 * nodes
    if materials:
        MATERIALS = tuple(materials)
    tag = "" if MATERIALS == ("carbon_amorphous",) else "_" + "+".join(MATERIALS)
    if (a_max, nodes, polarised) != (2.0, 2, False) or tag:
        REFERENCE = HERE / f"hollow_reference_a{a_max:g}_n{nodes}{'_pol' if polarised else ''}{tag}.ecsv"


def table_spec():
    from motes.dust.model.tables import TableSpec

    # x_top just above 2 pi a_max / 1.05 um (the bluest J node): 0.02 exp(259 * 0.025) ~ 13 for a_max = 2 um
    need = 2 * np.pi * A_MAX / 1.05
    return replace(TableSpec(), x_count=max(260, int(np.ceil(np.log(need / 0.02) / 0.025)) + 2))


def points(rng, n=N_POINTS):
    por = rng.uniform(0.0, 0.3, n)
    a_min = np.exp(rng.uniform(np.log(0.1), np.log(1.0), n))
    q = rng.uniform(3.0, 4.0, n)
    if len(MATERIALS) == 1:
        return np.ones((n, 1)), por, a_min, q
    # several materials: volume fractions uniform on the simplex (drawn after the other columns, so
    # that porosity, a_min and q are the same points as in the one-material runs)
    return rng.dirichlet(np.ones(len(MATERIALS)), n), por, a_min, q


def model(method, grains="hollow spheres", nodes=None, refine=1.0):
    from motes.dust.model.colours import DiskColourModel
    from motes.dust.model.sampling import SizeSampling

    nodes = NODES if nodes is None else nodes
    sampling = SizeSampling() if refine == 1.0 else SizeSampling().refined(refine)
    bands = BANDS * 2 if POLARISED else BANDS
    intensities = ("total",) * len(BANDS) + ("polarised",) * len(BANDS) if POLARISED else None
    return DiskColourModel(MATERIALS, bands, intensities=intensities, star_teff=STAR_TEFF, method=method, a_max=A_MAX,
                           wavelength_nodes=nodes, size_sampling=sampling, table_spec=table_spec(),
                           grains=grains, f_max=F_MAX if grains == "hollow spheres" else None)


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
        if len(t) == len(por) and np.allclose(t["a_min"], a_min, rtol=0, atol=0) and t.meta.get("seed") == SEED \
                and tuple(t.meta.get("materials", ())) == MATERIALS:
            return np.asarray(t["reference"]), np.asarray(t["check"]), t.meta.get("seconds", float("nan"))
    t0 = time.perf_counter()
    ref = _run([(f[i], por[i], a_min[i], q[i], NODES, 1.0) for i in range(len(por))], workers)
    check = np.full_like(ref, np.nan)
    check[:N_CHECK] = _run([(f[i], por[i], a_min[i], q[i], CHECK_NODES, CHECK_REFINE) for i in range(N_CHECK)],
                           workers)
    seconds = time.perf_counter() - t0
    t = Table({"porosity": por, "a_min": a_min, "q": q, "reference": ref, "check": check})
    t.meta.update({"seed": SEED, "bands": list(BANDS), "a_max_um": A_MAX, "f_max": F_MAX, "star_teff": STAR_TEFF,
                   "materials": list(MATERIALS), "grains": "hollow spheres", "seconds": seconds,
                   "check_nodes": CHECK_NODES, "check_refine": CHECK_REFINE,
                   "made_by": "python benchmarks/bench_hollow.py"})
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


def errors(value, ref):
    """(max colour error [mag] against the first band, max relative flux-ratio error of the totals)."""
    value, ref = value[:, :len(BANDS)], ref[:, :len(BANDS)]
    col = np.abs(-2.5 * np.log10((value / value[:, :1]) / (ref / ref[:, :1])))
    return float(np.nanmax(col)), float(np.nanmax(np.abs(value / ref - 1)))


def polarised_errors(value, ref):
    """(max rel. polarised error where |P| >= P_FLOOR, max |dP|, ratios counted)."""
    nb = len(BANDS)
    degree = ref[:, nb:] / ref[:, :nb]
    far = np.abs(degree) >= P_FLOOR
    rel = np.abs(value[:, nb:] / ref[:, nb:] - 1)[far]
    d_p = np.abs(value[:, nb:] / value[:, :nb] - degree)
    return float(rel.max()) if rel.size else float("nan"), float(d_p.max()), int(far.sum())


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--workers", type=int, default=1, help="processes for the exact reference")
    parser.add_argument("--recompute", action="store_true")
    parser.add_argument("--polarised", action="store_true", help="also every band in polarised intensity")
    parser.add_argument("--a-max", type=float, default=A_MAX, help="largest grain radius [um]")
    parser.add_argument("--nodes", type=int, default=NODES, help="Gauss nodes per band")
    parser.add_argument("--materials", default=None,
                        help="comma-separated bundled materials (default carbon_amorphous); several: fractions "
                             "uniform on the simplex, e.g. silica_amorphous,water_ice_crystalline")
    args = parser.parse_args(argv)
    configure(args.a_max, args.nodes, args.polarised,
              None if args.materials is None else [m.strip() for m in args.materials.split(",") if m.strip()])

    pts = points(np.random.default_rng(SEED))
    f, por, a_min, q = pts
    ref, check, ref_seconds = reference(pts, args.workers, args.recompute)

    fast = model("fast")
    t0 = time.perf_counter()
    fast.prepare(f, por)
    build = time.perf_counter() - t0
    table = fast._fast_table().table
    spheres = model("fast", grains="spheres")
    spheres.prepare(f, por)

    value = fast.flux_ratio(f, por, a_min, q)
    col, rel = errors(value, ref)
    col_chk, rel_chk = errors(ref[:N_CHECK], check[:N_CHECK])

    timing = tuple(np.tile(v, (10,) + (1,) * (v.ndim - 1)) for v in pts)      # 1000 models
    exact = model("exact")
    n_exact = 3
    exact_rate = rate(lambda: exact.flux_ratio(f[:n_exact], por[:n_exact], a_min[:n_exact], q[:n_exact]), n_exact,
                      repeat=1)
    hollow_rate = rate(lambda: fast.flux_ratio(*timing), len(timing[1]))
    sphere_rate = rate(lambda: spheres.flux_ratio(*timing), len(timing[1]))

    k_range = [float(np.min(fast._indices.imag)), float(np.max(fast._indices.imag))]
    print(f"materials' k at the band nodes: {k_range[0]:.3g}-{k_range[1]:.3g}")
    print(f"model: porous {', '.join(MATERIALS)}, hollow spheres f_max = {F_MAX:g}; bands {', '.join(BANDS)}"
          f"{' in total and polarised intensity' if POLARISED else ''}; {NODES} nodes per band; "
          f"90 deg; a_max {A_MAX:g} um; {N_POINTS} points (seed {SEED})")
    print(f"exact path, hollow spheres (default settings), baseline : {exact_rate:10.3g} models/s")
    print(f"fast path, hollow spheres                               : {hollow_rate:10.4g} models/s  "
          f"({hollow_rate / exact_rate:.3g}x the baseline)")
    print(f"fast path, solid spheres (same model and points)        : {sphere_rate:10.4g} models/s  "
          f"({sphere_rate / exact_rate:.3g}x the baseline; hollow/solid fast {hollow_rate / sphere_rate:.2f})")
    print(f"hollow-sphere table: built in this run {build:.1f} s ({table.tiles_built} tiles of "
          f"{table.spec.tile}x{table.spec.tile} (n, k) nodes); on disk {folder_size(table.folder) / 1e6:.1f} MB "
          f"({len(table._tiles)} tiles loaded), folder {table.folder}")
    print(f"reference: exact path, {NODES} nodes per band, default size rule ({ref_seconds:.0f} s with its check, "
          f"stored in {REFERENCE.name})")
    print(f"fast vs reference: colours within {col:.3g} mag; flux ratios within {100 * rel:.3g}%")
    print(f"reference vs size rule x{CHECK_REFINE:g} and {CHECK_NODES} nodes per band on {N_CHECK} points "
          f"(its convergence): colours {col_chk:.3g} mag, flux ratios {100 * rel_chk:.3g}%")
    goal = col <= 0.01 and hollow_rate >= 1000
    if POLARISED:
        p_rel, d_p, n_far = polarised_errors(value, ref)
        pol_table = fast._fast_table().polarised
        print(f"polarised hollow-sphere table: {pol_table.tiles_built} tiles built in this run, on disk "
              f"{folder_size(pol_table.folder) / 1e6:.1f} MB")
        print(f"fast vs reference, polarised: ratios (|P| >= {P_FLOOR:g}, {n_far} of {len(BANDS) * N_POINTS}) "
              f"within {100 * p_rel:.3g}%; degree of polarisation within {d_p:.2g}")
        goal = goal and p_rel <= 0.01
    print("goal (colours within 0.01 mag" + (", polarised ratios within 1% where |P| >= floor" if POLARISED else "")
          + ", >= 1000 models/s): " + ("met" if goal else "NOT met"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
