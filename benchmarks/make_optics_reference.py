"""Generate the converged exact reference colours for the fast-path accuracy checks.

Writes ``tests/data/optics_reference.ecsv``: a fixed random set of parameter
points for three 4-material models (together every bundled material), 8 bands
between 0.6 and 4 um, seen at 90 deg with the Mie phase function around a
5600 K blackbody, with the disk/star flux ratio per band from the EXACT path
(miepython at every quadrature node). The tests
(``tests/test_dust_model_fast.py``) and ``benchmarks/bench_optics.py`` compare
the fast path against these values.

The points (seed ``SEED``): per model, each pure component, two weak-absorber
binaries without any absorbing component at a_min = 10 um (the hardest case:
ripple and rainbow structure at 90 deg), and Dirichlet(1, 1, 1, 1) fractions;
porosity uniform in [0, 0.8], a_min log-uniform in [0.5, 10] um, q = 3.5 and
a_max = 1 mm (the issue's reference model).

Convergence: every row uses the exact path's size rule refined ``REFERENCE_REFINE``
times and ``REFERENCE_NODES`` Gauss nodes per band (bands on an absorption
feature get twice as many, as in every motes model; columns ``nodes`` and
``refine``). ``--check N`` recomputes N rows with twice the nodes and twice the
size samples of their own settings and stores the colour changes in the
table's meta (``convergence_*``); with ``--reuse`` the colour changes of rows
whose settings were raised are stored too (``raised_settings_*``: an estimate
of the error of the earlier, lower settings).

Commands used for the committed file (two cores, shared with other work).
The first two runs made the earlier file (8 nodes, 1x for rows with an
absorbing component; the second recomputed the weak-absorber rows at 16 nodes,
2x); the third recomputed every row with an absorbing component at 16 nodes,
2x and kept the weak-absorber rows::

    python benchmarks/make_optics_reference.py --workers 2 --check 9
    python benchmarks/make_optics_reference.py --workers 2 --check 9 --reuse tests/data/optics_reference.ecsv
    python benchmarks/make_optics_reference.py --workers 2 --reuse tests/data/optics_reference.ecsv
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

OUT = Path(__file__).resolve().parents[1] / "tests" / "data" / "optics_reference.ecsv"
SEED = 20261203
STAR_TEFF = 5600.0
MODELS = {
    "A": ("silica_amorphous", "water_ice_crystalline", "carbon_amorphous", "iron"),
    "B": ("silica_amorphous", "water_ice_crystalline", "methane_ice", "magnetite"),
    "C": ("silica_amorphous", "methane_ice", "carbon_soot", "iron"),
}
#: standard bands plus three approximate top-hat bands on and beside the water-ice feature
BANDS = ("cousins_r", "cousins_i", "2mass_j", "2mass_h", "2mass_ks", "NB3p1", "NB3p3", "Lp")
TOP_HATS = {"NB3p1": (3.1, 0.1), "NB3p3": (3.3, 0.1), "Lp": (3.78, 0.7)}
#: Gauss nodes per band of the fast path in the tests and the benchmark (motes' default)
FAST_NODES = 8
#: the reference's settings, every row: an earlier file used (8 nodes, 1x) for rows with an absorbing
#: component, which left rows with a few % magnetite or iron off by up to ~0.008 mag
REFERENCE_NODES, REFERENCE_REFINE = 16, 2.0
#: weak absorbers (no absorbing component) converge slowest: twice the nodes and size samples
N_RANDOM = 34          # per model, besides the 6 special points


def bands():
    from motes.photometry.bands import get_band, top_hat_band

    custom = {name: top_hat_band(name, c, w) for name, (c, w) in TOP_HATS.items()}
    return tuple(get_band(b, custom) for b in BANDS)


def reference_sampling():
    from motes.dust.model.sampling import SizeSampling

    return SizeSampling()  # the exact path's default rule (c0 = 1e-4)


def build_model(name, method, nodes=FAST_NODES, sampling=None):
    from motes.dust.model.colours import DiskColourModel

    return DiskColourModel(MODELS[name], bands(), star_teff=STAR_TEFF, method=method, a_max=1000.0,
                           wavelength_nodes=nodes, size_sampling=sampling or reference_sampling())


def parameter_points(rng):
    """Rows (model, fractions[4], porosity, a_min, q, a_max)."""
    rows = []
    for name, mats in MODELS.items():
        for i in range(4):  # each pure component
            f = np.zeros(4)
            f[i] = 1.0
            rows.append((name, f, rng.uniform(0, 0.8), float(np.exp(rng.uniform(np.log(0.5), np.log(10))))))
        weak = [i for i, m in enumerate(mats) if m in ("silica_amorphous", "water_ice_crystalline", "methane_ice")]
        for por in (0.0, 0.4):  # weak-absorber binaries with large grains
            f = np.zeros(4)
            if len(weak) >= 2:
                f[weak[0]], f[weak[1]] = 0.7, 0.3
            else:
                f[weak[0]] = 1.0
            rows.append((name, f, por, 10.0))
        for _ in range(N_RANDOM):
            f = rng.dirichlet(np.ones(4))
            rows.append((name, f, rng.uniform(0, 0.8), float(np.exp(rng.uniform(np.log(0.5), np.log(10))))))
    return rows


def row_settings(name, f):
    """(wavelength nodes per band, size-sampling refinement) of the reference value of a row."""
    return REFERENCE_NODES, REFERENCE_REFINE


def _evaluate(args):
    name, f, por, amin, nodes, refine = args
    sampling = reference_sampling()
    if refine != 1.0:
        sampling = sampling.refined(refine)
    model = build_model(name, "exact", nodes, sampling)
    return model.flux_ratio(np.asarray(f)[None, :], por, amin, 3.5, 1000.0)[0]


def _run(jobs, workers):
    from tqdm import tqdm

    if workers > 1:
        import multiprocessing

        with multiprocessing.get_context("fork").Pool(workers) as pool:
            return np.asarray(list(tqdm(pool.imap(_evaluate, jobs), total=len(jobs), file=sys.stderr)))
    return np.asarray([_evaluate(j) for j in tqdm(jobs, file=sys.stderr)])


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--workers", type=int, default=1)
    parser.add_argument("--check", type=int, default=0, metavar="N",
                        help="re-run N points with 2x size samples and 2x wavelength nodes")
    parser.add_argument("--out", default=str(OUT))
    parser.add_argument("--reuse", metavar="FILE",
                        help="copy the values of rows computed with the same settings from an earlier file "
                             "(they are deterministic); recompute the others")
    args = parser.parse_args(argv)

    from astropy.table import Table

    rng = np.random.default_rng(SEED)
    rows = parameter_points(rng)
    settings = [row_settings(n, f) for n, f, _, _ in rows]
    jobs = [(n, f, p, a, *st) for (n, f, p, a), st in zip(rows, settings)]
    values = np.full((len(rows), len(BANDS)), np.nan)
    previous = {}
    if args.reuse:
        old = Table.read(args.reuse, format="ascii.ecsv")
        for i, (st, row) in enumerate(zip(settings, old)):
            if row["model"] != rows[i][0] or not np.isclose(row["a_min"], rows[i][3]):
                continue
            old_st = (int(row["nodes"]), float(row["refine"])) if "nodes" in old.colnames \
                else (int(old.meta["wavelength_nodes"]), 1.0)
            if old_st == st:
                values[i] = [row[f"R_{b}"] for b in BANDS]
            else:
                previous[i] = np.array([row[f"R_{b}"] for b in BANDS])
    todo = [i for i in range(len(rows)) if not np.isfinite(values[i]).all()]
    t0 = time.perf_counter()
    if todo:
        values[todo] = _run([jobs[i] for i in todo], args.workers)
    seconds = time.perf_counter() - t0
    col = lambda r: -2.5 * np.log10(r / r[:, :1])  # noqa: E731
    check = {}
    if previous:
        # rows whose settings were raised (weak absorbers): how much the colours moved
        idx = sorted(previous)
        change = np.abs(col(values[idx]) - col(np.array([previous[i] for i in idx])))
        check.update({"raised_settings_rows": idx,
                      "raised_settings_row_max_colour_change_mag": [float(c) for c in change.max(axis=1)]})
    if args.check:
        # rows at the base settings, spread over the set, re-run with 2x nodes and 2x size samples
        base_rows = list(range(len(rows)))
        idx = np.array(base_rows)[np.linspace(0, len(base_rows) - 1, args.check).round().astype(int)]
        cjobs = [(*jobs[i][:4], 2 * settings[i][0], 2 * settings[i][1]) for i in idx]
        refined = _run(cjobs, args.workers)
        base = values[idx]
        change = np.abs(col(refined) - col(base))
        check.update({"convergence_rows": idx.tolist(),
                 "convergence_row_max_colour_change_mag": [float(c) for c in change.max(axis=1)],
                 "convergence_max_colour_change_mag": float(change.max()),
                 "convergence_median_colour_change_mag": float(np.median(change[:, 1:])),
                 "convergence_max_flux_change": float(np.abs(refined / base - 1).max())})
    t = Table()
    t["model"] = [r[0] for r in rows]
    for i in range(4):
        t[f"f{i}"] = [r[1][i] for r in rows]
    t["porosity"] = [r[2] for r in rows]
    t["a_min"] = [r[3] for r in rows]
    t["q"] = np.full(len(rows), 3.5)
    t["a_max"] = np.full(len(rows), 1000.0)
    t["nodes"] = [st[0] for st in settings]
    t["refine"] = [st[1] for st in settings]
    for j, b in enumerate(BANDS):
        t[f"R_{b}"] = values[:, j]
    from motes import __version__
    from motes.optics.mie import solver_summary

    t.meta.update({
        "description": "exact disk/star flux ratios per unit cross-section [sr^-1], 90 deg, Mie phase function",
        "models": {k: list(v) for k, v in MODELS.items()}, "bands": list(BANDS),
        "top_hats": {k: list(v) for k, v in TOP_HATS.items()}, "star_teff": STAR_TEFF,
        "wavelength_nodes": REFERENCE_NODES, "sampling": repr(reference_sampling()),
        "row_settings": "columns nodes (Gauss nodes per band) and refine (size-sampling refinement factor)",
        "seed": SEED, "seconds": seconds, "motes": __version__, "mie": solver_summary(),
        "command": "python benchmarks/make_optics_reference.py " + " ".join(argv or sys.argv[1:]),
        **check})
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_suffix(".tmp.ecsv")
    t.write(tmp, format="ascii.ecsv", overwrite=True)
    os.replace(tmp, out)
    print(f"wrote {out}: {len(rows)} points in {seconds:.0f} s; {check}")


if __name__ == "__main__":
    main()
