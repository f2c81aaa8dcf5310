"""Interpolation in f_max of hollow-sphere ratios: tables at f_max nodes against the f_max itself.

A fitted f_max (``[parameters] f_max``) is interpolated by the fast path between
tables at ``motes.dust.model.tables.F_MAX_NODES`` (0, 0.1, ..., 0.9; 4-point
Lagrange, weights from ``f_max_terms``). This script measures that
interpolation alone: at ``N_POINTS`` random points (seed ``SEED``) it computes
the exact-path ratio R at the stencil's node f_max values, interpolates, and
compares with the exact path at the point's own f_max, for node steps ``STEPS``
(0.1 and 0.05), for the total and the polarised intensity (90 deg, one wavelength ``LAMBDA`` um, sizes a_min to
``A_MAX`` um; ``DiskColourModel.node_values_exact``). The table's own error
(n, k, x, q interpolation) comes on top and is measured by bench_hollow.py.

Points: n U(1.3, 2.0), k log-U(1e-4, 1), a_min log-U(0.1, 1) um, q U(3, 4),
f_max U(0, 0.9). Prints the largest and the 95th-percentile relative error of
R and of the polarised ratio (where |P| >= ``P_FLOOR``), and the largest error
of the colour-like quantity |2.5 log10(R_interp / R)| [mag], for all points and
for f_max >= 0.1 (the fast path's range). Results are kept in ``OUT`` (one
line per point; ``$BENCH_FMAX_OUT`` overrides) and resumed: with the stored
file the script only reports.

Usage::

    python benchmarks/bench_hollow_fmax.py [N_POINTS]
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

SEED = 20261214
N_POINTS = 60
LAMBDA = 1.25
A_MAX = 3.0
P_FLOOR = 0.02
#: node steps in f_max compared (the fast path's F_MAX_NODES is one of them)
STEPS = (0.1, 0.05)
#: lower end of the fast path's fitted-f_max range (motes.dust.model.tables.F_MAX_FAST_RANGE)
F_MAX_LOW = 0.1
#: one line per point: index, n, k, a_min, q, f_max, then for total and polarised intensity the exact
#: value and the interpolated one per step of STEPS (the 60-point run of docs/optics.md is stored here)
OUT = Path(os.environ.get("BENCH_FMAX_OUT", Path(__file__).resolve().parent / "hollow_fmax_reference.txt"))


def main(n_points: int = N_POINTS) -> None:
    from motes.dust.model.colours import DiskColourModel
    from motes.dust.model.tables import f_max_terms
    from motes.optics.constants import Material
    from motes.photometry.bands import top_hat_band

    mat = Material("g", np.array([0.2, 30.0]), np.full(2, 1.5), np.full(2, 0.01), density=2.0)
    band = (top_hat_band("b1", LAMBDA, 0.05),)
    models = {}

    def ratio(f, m, a_min, q, quantity):
        f = float(f)
        if f not in models:
            models[f] = DiskColourModel([mat], band, star_teff=5800, method="exact", a_max=A_MAX,
                                        grains="hollow spheres", f_max=f)
        return models[f].node_values_exact(np.array([[m]]), np.array([LAMBDA]), np.array([a_min]), np.array([q]),
                                           np.array([A_MAX]), quantity=quantity)[0, 0]

    cache = {}

    def cached(f, m, a_min, q, quantity):
        key = (round(float(f), 10), quantity)
        if key not in cache:
            cache[key] = ratio(f, m, a_min, q, quantity)
        return cache[key]

    rng = np.random.default_rng(SEED)
    draws = [(rng.uniform(1.3, 2.0), np.exp(rng.uniform(np.log(1e-4), 0.0)), np.exp(rng.uniform(np.log(0.1), 0.0)),
              rng.uniform(3.0, 4.0), rng.uniform(0.0, 0.9)) for _ in range(n_points)]
    done = OUT.read_text().splitlines() if OUT.exists() else []
    t0 = time.perf_counter()
    with OUT.open("a") as fh:
        for i, (n, k, a_min, q, f) in enumerate(draws):
            if i < len(done):
                continue
            m = complex(n, k)
            row = [i, n, k, a_min, q, f]
            cache.clear()
            for quantity in ("total", "polarised"):
                row.append(cached(f, m, a_min, q, quantity))
                for step in STEPS:
                    nodes = np.round(np.arange(0.0, 0.9 + 1e-9, step), 10)
                    row.append(sum(w[0] * cached(node, m, a_min, q, quantity)
                                   for node, _, w in f_max_terms([f], nodes=nodes)))
            fh.write(" ".join(f"{v:.12g}" for v in row) + "\n")
            fh.flush()
            print(f"point {i}: {time.perf_counter() - t0:.0f} s", flush=True)
    report()


def report() -> None:
    d = np.loadtxt(OUT, ndmin=2)
    ns = len(STEPS)
    tot, pol = d[:, 6], d[:, 7 + ns]
    print(f"{len(d)} points (seed {SEED}), lambda {LAMBDA} um, sizes a_min-{A_MAX} um, f_max U(0, 0.9)")
    for lo in (0.0, F_MAX_LOW):       # every point, and the fast path's range f_max >= F_MAX_LOW
        inside = d[:, 5] >= lo
        keep = (np.abs(pol / tot) >= P_FLOOR) & inside
        for j, step in enumerate(STEPS):
            tot_i, pol_i = d[:, 7 + j], d[:, 8 + ns + j]
            err = np.abs(tot_i / tot - 1)[inside]
            mag = np.abs(2.5 * np.log10(tot_i / tot))[inside]
            perr = np.abs(pol_i[keep] / pol[keep] - 1)
            derr = np.abs(pol_i / tot_i - pol / tot)[inside]
            print(f"f_max >= {lo:g} ({inside.sum()} points), nodes every {step:g} in f_max:")
            print(f"  total R: max rel. error {err.max():.2e} (95th pct {np.percentile(err, 95):.2e}); "
                  f"max {mag.max():.2e} mag")
            print(f"  polarised R (|P| >= {P_FLOOR}, {keep.sum()} points): max rel. error {perr.max():.2e} "
                  f"(95th pct {np.percentile(perr, 95):.2e}); degree of polarisation within {derr.max():.2e}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else N_POINTS)
