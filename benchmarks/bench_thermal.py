"""Benchmark of the thermal fast path: accuracy against the exact path, models/s, joint rate.

Problem: a ring of the demo's four materials (silica, water ice, carbon,
iron; dielectric / conductor extrapolation rules beyond the data) around a
5,600 K, 0.9 L_sun star, six thermal bands (WISE W3, W4, PACS 70, 160,
SPIRE 500 and a 1.3 mm top-hat), and the demo's eight scattered-light bands.
Every ratio below is measured in this one run.

1. Exact path (:func:`motes.dust.model.thermal.compute_thermal`) on a fixed
   random set of mixtures (seeded): seconds per model (the baseline).
2. Fast path (:class:`motes.dust.model.thermal_fast.ThermalRingModel`) on the
   same set: the largest relative difference of every band flux (goal: every
   flux within 2%).
3. Fast path rate in batches (thermal alone), the scattered-light fast path
   rate, and the joint rate (both for the same points; goal >= 1000 models/s
   on one core), with the ratios to the exact baseline.

Run from the repository root (the first run builds the Q_abs table tiles
under the cache folder; the build time is printed)::

    python benchmarks/bench_thermal.py [--exact N] [--fast N]
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
    parser.add_argument("--exact", type=int, default=8, help="points of the fixed random set (exact path)")
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

    rng = np.random.default_rng(20261213)
    f, p, amin, q, r = random_set(rng, args.exact)

    # 1. exact baseline
    exact = []
    t0 = time.perf_counter()
    for i in range(args.exact):
        m = dataclasses.replace(mix, fractions=tuple(f[i]), porosity=float(p[i]), a_min=float(amin[i]),
                                q=float(q[i]))
        s = dataclasses.replace(settings, radius_au=(float(r[i]),))
        exact.append(dt.compute_thermal(desc, m, s).band_disk)
    exact = np.array(exact)
    exact_s = (time.perf_counter() - t0) / args.exact
    print(f"1. exact path: {exact_s:.2f} s per model ({args.exact} models)")

    # 2. fast path accuracy on the same set (cold start: tiles built or loaded here)
    t0 = time.perf_counter()
    fast = ThermalRingModel(desc, settings.bands, distance_pc=settings.distance_pc)
    built0 = fast.table.tiles_built
    got = fast.evaluate(f, p, amin, 1000.0, q, r)
    cold = time.perf_counter() - t0
    print(f"   fast path cold start: {cold:.1f} s ({fast.table.tiles_built - built0} table tiles built, "
          f"{fast.table.tiles_ready} ready)")
    rel = got / exact - 1.0
    names = [b.name for b in settings.bands]
    print("2. fast / exact - 1, largest |.| per band over the set:")
    for j, name in enumerate(names):
        print(f"   {name:22s} {100 * np.max(np.abs(rel[:, j])):6.2f} %")
    if args.verbose:
        for i in range(args.exact):
            print(f"   point {i}: f={np.round(f[i], 2)} P={p[i]:.2f} a_min={amin[i]:.2f} q={q[i]:.2f} r={r[i]:.0f}: "
                  f"{np.round(100 * rel[i], 2)} %")
    worst = float(np.max(np.abs(rel)))
    print(f"   worst {100 * worst:.2f} % (goal <= {100 * GOAL_ERROR:.0f} %): {'met' if worst <= GOAL_ERROR else 'NOT met'}")

    # 3. rates
    big = random_set(rng, args.fast)
    fast.prepare(big[0], big[1])
    colour = desc.build_model(method="fast")
    colour._table = table_for_model(colour, progress=False, fractions=big[0], porosity=big[1])
    b = args.batch
    fast.evaluate(big[0][:b], big[1][:b], big[2][:b], 1000.0, big[3][:b], big[4][:b])
    colour.flux_ratio(big[0][:b], big[1][:b], big[2][:b], big[3][:b])
    t0 = time.perf_counter()
    for lo in range(0, args.fast, b):
        sl = slice(lo, lo + b)
        fast.evaluate(big[0][sl], big[1][sl], big[2][sl], 1000.0, big[3][sl], big[4][sl])
    t_th = time.perf_counter() - t0
    t0 = time.perf_counter()
    for lo in range(0, args.fast, b):
        sl = slice(lo, lo + b)
        colour.flux_ratio(big[0][sl], big[1][sl], big[2][sl], big[3][sl])
    t_sc = time.perf_counter() - t0
    rate_th, rate_sc = args.fast / t_th, args.fast / t_sc
    rate_joint = args.fast / (t_th + t_sc)
    print(f"3. thermal fast path: {rate_th:8.0f} models/s (batches of {b}); ratio to exact {rate_th * exact_s:8.0f}")
    print(f"   scattered-light fast path: {rate_sc:8.0f} models/s")
    print(f"   joint (both, same points): {rate_joint:8.0f} models/s (goal >= {GOAL_RATE:.0f}): "
          f"{'met' if rate_joint >= GOAL_RATE else 'NOT met'}; ratio to exact thermal {rate_joint * exact_s:8.0f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
