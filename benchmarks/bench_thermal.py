"""Benchmark of the thermal fast path: accuracy against the exact path, models/s, joint rate.

Problem: a ring of the demo's four materials (silica, water ice, carbon,
iron; dielectric / conductor extrapolation rules beyond the data) around a
5,600 K, 0.9 L_sun star, six thermal bands (WISE W3, W4, PACS 70, 160,
SPIRE 500 and a 1.3 mm top-hat), and the demo's eight scattered-light bands.
Every ratio below is measured in this one run.

1. Exact path (:func:`motes.dust.model.thermal.compute_thermal`) on two fixed
   random sets of mixtures (seeded; set A: 8 points, seed 20261213, set B: 24
   points, seed 77, which holds the weakly absorbing iron-rich rings that
   were 5.5% off at 1.3 mm before the table's n interpolation became linear
   in Q and the far-infrared bands got their own size quadrature): seconds
   per model (the baseline).
2. Fast path (:class:`motes.dust.model.thermal_fast.ThermalRingModel`) on the
   same sets: the largest relative difference of every band flux (goal: every
   flux within 2%).
3. Fast path rate in batches of 200 and of 25 (about what the fit's lockstep
   sampler hands over, :mod:`motes.dust.fit.batch`), thermal alone, the
   scattered-light fast path rate, and the joint rate (both for the same
   points; goal >= 1000 models/s on one core), per CPU second (wall beside:
   the machine may be shared; run with NUMBA_NUM_THREADS=1), with the ratios
   to the exact baseline (its CPU seconds per model).

Run from the repository root (the first run builds the Q_abs table tiles
under the cache folder; the build time is printed)::

    python benchmarks/bench_thermal.py [--exact N] [--exact-b N] [--fast N]
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

GOAL_RATE, GOAL_ERROR = 1000.0, 0.02

MIXTURE = """
[star]
teff = 5600.0
luminosity = 0.9
mass = 1.0

[[materials]]
name = "silica"
source = "silica_amorphous"
extrapolation = "dielectric"

[[materials]]
name = "water_ice"
source = "water_ice_crystalline"
extrapolation = "dielectric"

[[materials]]
name = "carbon"
source = "carbon_amorphous"
extrapolation = "conductor"

[[materials]]
name = "iron"
source = "iron"
extrapolation = "conductor"

[mixing]
rule = "bruggeman"

[geometry]
angles_deg = [90.0]

[model]
bands = ["cousins_r", "cousins_i", "2mass_j", "2mass_h", "2mass_ks", "NB3p1", "NB3p3", "Lp"]

[bands.NB3p1]
shape = "top-hat"
centre_um = 3.1
width_um = 0.1

[bands.NB3p3]
shape = "top-hat"
centre_um = 3.3
width_um = 0.1

[bands.Lp]
shape = "top-hat"
centre_um = 3.78
width_um = 0.7

[bands."mm_1.3"]
shape = "top-hat"
centre_um = 1300.0
width_um = 200.0

[mixture]
fractions = { silica = 0.7, water_ice = 0.2, carbon = 0.05, iron = 0.05 }
porosity = 0.3
a_min = 2.0
q = 3.5
a_max = 1000.0

[thermal]
radius_au = 60.0
bands = ["wise_w3", "wise_w4", "herschel-pacs_70", "herschel-pacs_160", "herschel-spire_500", "mm_1.3"]
cross_section_au2 = 1.0
distance_pc = 25.0
"""


def random_set(rng, n):
    """Fractions (Dirichlet), porosity 0-0.8, a_min 0.5-20 um, q 3-4.5, radius 30-150 au."""
    f = rng.dirichlet(np.ones(4), n)
    return (f, rng.uniform(0.0, 0.8, n), np.exp(rng.uniform(np.log(0.5), np.log(20.0), n)),
            rng.uniform(3.0, 4.5, n), np.exp(rng.uniform(np.log(30.0), np.log(150.0), n)))


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--exact", type=int, default=8, help="points of fixed random set A (exact path)")
    parser.add_argument("--exact-b", type=int, default=24, help="points of fixed random set B (exact path; 0: skip)")
    parser.add_argument("--fast", type=int, default=4000, help="points timed on the fast path")
    parser.add_argument("--batch", type=int, default=200, help="batch size of the fast path")
    parser.add_argument("--verbose", action="store_true", help="print every point's differences")
    args = parser.parse_args(argv)

    from motes.dust.model.mixture import read_mixture_file
    from motes.dust.model import thermal as dt
    from motes.dust.model.thermal_fast import ThermalRingModel
    from motes.dust.model.tables import table_for_model
    from motes.files import cache_directory

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "ring.toml"
        path.write_text(MIXTURE)
        desc, mix = read_mixture_file(path)
        settings = dt.read_thermal_settings(path, desc)
    print(f"cache: {cache_directory()}")

    fast = None
    worst_all = 0.0
    rng_rates = np.random.default_rng(20261213)
    exact_s = float("nan")
    for label, seed, count in (("A", 20261213, args.exact), ("B", 77, args.exact_b)):
        if count <= 0:
            continue
        rng = np.random.default_rng(seed)
        f, p, amin, q, r = random_set(rng, count)
        if label == "A":
            rng_rates = rng                    # the rate points follow set A on its stream (as before)

        # 1. exact baseline
        exact = []
        t0, c0 = time.perf_counter(), time.process_time()
        for i in range(count):
            m = dataclasses.replace(mix, fractions=tuple(f[i]), porosity=float(p[i]), a_min=float(amin[i]),
                                    q=float(q[i]))
            s = dataclasses.replace(settings, radius_au=(float(r[i]),))
            exact.append(dt.compute_thermal(desc, m, s).band_disk)
        exact = np.array(exact)
        wall_s, cpu_s = (time.perf_counter() - t0) / count, (time.process_time() - c0) / count
        if label == "A":
            exact_s = cpu_s
        print(f"1{label}. exact path, set {label} (seed {seed}): {wall_s:.2f} s wall, {cpu_s:.2f} s CPU per model "
              f"({count} models)")

        # 2. fast path accuracy on the same set (cold start: tiles built or loaded here)
        t0 = time.perf_counter()
        if fast is None:
            fast = ThermalRingModel(desc, settings.bands, distance_pc=settings.distance_pc)
        built0 = fast.table.tiles_built
        got = fast.evaluate(f, p, amin, 1000.0, q, r)
        cold = time.perf_counter() - t0
        print(f"   fast path cold start: {cold:.1f} s ({fast.table.tiles_built - built0} table tiles built, "
              f"{fast.table.tiles_ready} ready)")
        rel = got / exact - 1.0
        names = [b.name for b in settings.bands]
        print(f"2{label}. fast / exact - 1, largest |.| per band over set {label}:")
        for j, name in enumerate(names):
            print(f"   {name:22s} {100 * np.max(np.abs(rel[:, j])):6.2f} %")
        if args.verbose:
            for i in range(count):
                print(f"   point {i}: f={np.round(f[i], 2)} P={p[i]:.2f} a_min={amin[i]:.2f} q={q[i]:.2f} "
                      f"r={r[i]:.0f}: {np.round(100 * rel[i], 2)} %")
        worst = float(np.max(np.abs(rel)))
        worst_all = max(worst_all, worst)
        print(f"   worst {100 * worst:.2f} % (goal <= {100 * GOAL_ERROR:.0f} %): "
              f"{'met' if worst <= GOAL_ERROR else 'NOT met'}")
    print(f"   both sets: worst {100 * worst_all:.2f} %: {'met' if worst_all <= GOAL_ERROR else 'NOT met'}")

    # 3. rates
    big = random_set(rng_rates, args.fast)
    fast.prepare(big[0], big[1])
    colour = desc.build_model(method="fast")
    colour._table = table_for_model(colour, progress=False, fractions=big[0], porosity=big[1])
    print(f"3. rates on one core (CPU seconds; wall beside; load average {os.getloadavg()[0]:.1f} at start)")
    for b in dict.fromkeys((args.batch, 25)):
        fast.evaluate(big[0][:b], big[1][:b], big[2][:b], 1000.0, big[3][:b], big[4][:b])
        colour.flux_ratio(big[0][:b], big[1][:b], big[2][:b], big[3][:b])
        t0, c0 = time.perf_counter(), time.process_time()
        for lo in range(0, args.fast, b):
            sl = slice(lo, lo + b)
            fast.evaluate(big[0][sl], big[1][sl], big[2][sl], 1000.0, big[3][sl], big[4][sl])
        w_th, t_th = time.perf_counter() - t0, time.process_time() - c0
        t0, c0 = time.perf_counter(), time.process_time()
        for lo in range(0, args.fast, b):
            sl = slice(lo, lo + b)
            colour.flux_ratio(big[0][sl], big[1][sl], big[2][sl], big[3][sl])
        w_sc, t_sc = time.perf_counter() - t0, time.process_time() - c0
        rate_th, rate_sc = args.fast / t_th, args.fast / t_sc
        rate_joint = args.fast / (t_th + t_sc)
        print(f"   batches of {b}: thermal fast path {rate_th:8.0f} models/CPU-s ({args.fast / w_th:.0f}/s wall); "
              f"ratio to exact {rate_th * exact_s:8.0f}")
        print(f"   batches of {b}: scattered-light fast path {rate_sc:8.0f} models/CPU-s "
              f"({args.fast / w_sc:.0f}/s wall)")
        print(f"   batches of {b}: joint (both, same points) {rate_joint:8.0f} models/CPU-s "
              f"({args.fast / (w_th + w_sc):.0f}/s wall) (goal >= {GOAL_RATE:.0f}): "
              f"{'met' if rate_joint >= GOAL_RATE else 'NOT met'}; ratio to exact thermal {rate_joint * exact_s:8.0f}")
    print(f"   load average at the end: {os.getloadavg()[0]:.1f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
