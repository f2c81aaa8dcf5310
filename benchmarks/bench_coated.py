"""Speed of the coated-sphere solver against miepython's homogeneous sphere, in one run.

Prints, on ONE core (numba threads pinned to 1), evaluations per second and
their ratio to the baseline measured in the same run, for the same sizes and
index:

* efficiencies: ``motes.optics.mie.efficiencies`` (miepython, compiled) vs
  ``motes.optics.coated.coated_efficiencies`` with no core (the homogeneous
  path of the coated code) and with a vacuum core filling half the volume;
* one-angle intensities: ``mie.scattered_intensity`` vs
  ``coated.coated_intensities`` (total and polarised in one pass), and
  ``hollow.hollow_intensities`` (the hollow-sphere distribution, per material
  size, ``DEFAULT_F_NODES`` coated spheres each, outer sizes up to 1.7x larger
  for f_max = 0.8).

Sizes: log-spaced over x = 0.1-1000 (``--sizes``, default 4000) and, separately,
x = 1000-3000 (a tenth as many); index 1.5 + 0.001i. The first call of each
compiled kernel (numba compilation or cache load) is timed apart.

Run: ``python benchmarks/bench_coated.py [--sizes 4000] [--repeat 3]``.
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

from motes.optics import coated, hollow, mie  # noqa: E402

M = 1.5 + 0.001j
THETA = np.array([np.pi / 2])


def _best(func, repeat):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        func()
        best = min(best, time.perf_counter() - t0)
    return best


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, default=4000, help="sizes per timing over x = 0.1-1000")
    parser.add_argument("--repeat", type=int, default=3, help="repetitions; the best is kept")
    args = parser.parse_args(argv)

    t0 = time.perf_counter()
    coated.coated_efficiencies(1.0, M, np.array([1.0, 2.0]), 0.5)
    coated.coated_intensities(1.0, M, np.array([1.0, 2.0]), 0.5, THETA)
    mie.efficiencies(M, np.array([1.0]))
    mie.scattered_intensity(M, np.array([1.0]), THETA)
    print(f"first calls (compilation or numba cache load): {time.perf_counter() - t0:.2f} s")
    print(mie.solver_summary())

    for label, x in [("x 0.1-1000", np.geomspace(0.1, 1000.0, args.sizes)),
                     ("x 1000-3000", np.geomspace(1000.0, 3000.0, max(args.sizes // 10, 10)))]:
        print(f"\n{label}, {x.size} sizes, m = {M}, one core")
        base_e = _best(lambda: mie.efficiencies(M, x), args.repeat)
        rows = [("miepython efficiencies (baseline)", base_e, base_e),
                ("coated efficiencies, no core", _best(lambda: coated.coated_efficiencies(M, M, x, 0.0),
                                                       args.repeat), base_e),
                ("coated efficiencies, vacuum core f = 0.5",
                 _best(lambda: coated.coated_efficiencies(1.0, M, x, 0.5), args.repeat), base_e)]
        base_i = _best(lambda: mie.scattered_intensity(M, x, THETA), args.repeat)
        rows += [("miepython intensity at 90 deg (baseline)", base_i, base_i),
                 ("coated intensities (total + polarised), vacuum core f = 0.5",
                  _best(lambda: coated.coated_intensities(1.0, M, x, 0.5, THETA), args.repeat), base_i),
                 (f"hollow-sphere distribution, f_max 0.8, {hollow.DEFAULT_F_NODES} nodes (per material size)",
                  _best(lambda: hollow.hollow_intensities(M, x, THETA, 0.8), 1), base_i)]
        for name, t, base in rows:
            print(f"  {name:<78s} {x.size / t:10.0f} sizes/s   time ratio to baseline {t / base:6.2f}")


if __name__ == "__main__":
    main()
