"""Benchmark of ``motes grid``: points per second, worker scaling, fast vs exact, flat memory.

Problem (issue 6): mixtures of 4 materials (amorphous silica, crystalline water
ice, amorphous carbon, iron) plus porosity, a_min and q = 3.5, 8 bands between
0.6 and 4 um, grains up to a_max = 1 mm, Mie phase function at 90 deg: the
star, materials, bands and invented photometry of the demo disk
(``motes/demo/data/disk_grid.toml``, ``disk_photometry.ecsv``), so the fast
path's lookup tables are shared with the demo.

Stages (each size can be overridden; use small ones for a quick look)::

    python benchmarks/bench_grid.py                      # the full run (~5 min on 2 busy cores)
    python benchmarks/bench_grid.py --full 2e4 --scaling 4e3 --exact 4 --memory 1e3 4e3   # quick

1. exact path: ``--exact`` points evaluated in this process with
   ``method="exact"`` (miepython at every node): the baseline;
2. fast path, 1 worker (in-process) and 2 worker processes on the same grid of
   about ``--scaling`` points: points/s and the scaling ratio;
3. the full grid of about ``--full`` points (10^5 by default) with 2 workers:
   wall time against the 2-minute goal;
4. peak memory of a whole run plus its summary, in a fresh subprocess, for
   each size in ``--memory`` (10^3 and 10^4 by default): resident set size and
   the traced Python/numpy peak, to show that memory stays flat.

Every rate is measured in the same invocation; the printed ratios are what to
compare across machines. The first run builds the fast path's lookup tables
(cached on disk); that time is reported separately and excluded from rates.
"""

from __future__ import annotations

import argparse
import itertools
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

GOAL_SECONDS = 120.0


def demo_text(name: str) -> str:
    from importlib import resources

    return (resources.files("motes.demo") / "data" / name).read_text()


def description(divisions: int, n_porosity: int, n_amin: int, method: str = "fast") -> str:
    """The demo grid's star, materials, bands and data, with new grid axes."""
    base = demo_text("disk_grid.toml").split("[grid]")[0].replace('method = "fast"', f'method = "{method}"')
    porosity = [round(float(x), 6) for x in np.linspace(0.0, 0.7, n_porosity)]
    a_min = [round(float(x), 6) for x in np.geomspace(0.5, 10.0, n_amin)]
    return base + f"""[grid]
fraction_step = "1/{divisions}"
porosity = {porosity}
a_min = {a_min}
q = [3.5]
"""


def grid_shape(target: float) -> tuple[int, int, int]:
    """(divisions, n_porosity, n_amin) giving close to ``target`` points with 4 materials."""
    from math import comb

    best = None
    for n, p, a in itertools.product(range(2, 41), range(1, 11), range(1, 13)):
        size = comb(n + 3, 3) * p * a
        score = (abs(np.log(size / target)), -n)
        if best is None or score < best[0]:
            best = (score, (n, p, a))
    return best[1]


def write_problem(folder: Path, target: float, method: str = "fast", name: str = "grid") -> Path:
    """Write the demo photometry (once) and a grid description of about ``target`` points."""
    phot = folder / "disk_photometry.ecsv"
    if not phot.exists():
        phot.write_text(demo_text("disk_photometry.ecsv"))
    path = folder / f"{name}.toml"
    path.write_text(description(*grid_shape(target), method=method))
    return path


def run(path: Path, store: Path, workers: int):
    from motes.dust.grid.spec import read_grid_description
    from motes.dust.grid.run import GridRunSettings, run_grid

    spec = read_grid_description(path)
    start = time.perf_counter()
    result = run_grid(spec, store, GridRunSettings(workers=workers, progress=False, confirm_large=True),
                      echo=lambda *a: None)
    wall = time.perf_counter() - start
    return spec, result, wall


def exact_rate(folder: Path, n: int) -> float:
    from motes.dust.grid.spec import read_grid_description
    from motes.dust.grid.workers import GridEvaluator

    spec = read_grid_description(write_problem(folder, 1e4, method="exact", name="exact"))
    evaluator = GridEvaluator(spec)
    keys = np.unique(np.linspace(0, spec.n_points - 1, n).astype(np.int64))
    evaluator.evaluate(keys[:1])
    start = time.perf_counter()
    evaluator.evaluate(keys)
    return keys.size / (time.perf_counter() - start)


def memory_child(folder: str, target: float) -> None:
    """Run a whole grid and its summary; print peak memory as JSON (run in a fresh process)."""
    import resource
    import tracemalloc

    from motes.dust.grid.spec import read_grid_description
    from motes.dust.grid.run import GridRunSettings, run_grid
    from motes.dust.grid.workers import build_disk_model, read_grid_observations
    from motes.dust.grid.summary import summarize_grid

    folder = Path(folder)
    path = write_problem(folder, target, name=f"memory_{int(target)}")
    spec = read_grid_description(path)
    # model built and its lazily assembled table slices in memory before measuring
    model = build_disk_model(spec, read_grid_observations(spec))
    pts = spec.points(spec.chunk_keys(0))
    model.flux_ratio(pts.fractions, pts.porosity, pts.a_min, pts.q, a_max=pts.a_max)
    del model
    rss_before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    tracemalloc.start()
    store = folder / f"memory_store_{int(target)}"
    run_grid(spec, store, GridRunSettings(workers=1, progress=False, confirm_large=True), echo=lambda *a: None)
    summarize_grid(store, top=10)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(json.dumps({"points": spec.n_points, "traced_peak_mb": peak / 1e6, "rss_peak_mb": rss / 1e3,
                      "rss_before_mb": rss_before / 1e3}))


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--full", type=float, default=1e5, help="points of the full grid (default 1e5)")
    parser.add_argument("--scaling", type=float, default=2e4,
                        help="points of the grid run with 1 and 2 workers (default 2e4; 0 skips stage 2)")
    parser.add_argument("--exact", type=int, default=3,
                        help="points evaluated with the exact path (default 3; 0 skips stage 1)")
    parser.add_argument("--memory", type=float, nargs="*", default=[1e3, 1e4],
                        help="grid sizes whose peak memory is measured (default 1e3 1e4)")
    parser.add_argument("--skip-full", action="store_true", help="skip stage 3")
    parser.add_argument("--_memory-child", nargs=2, metavar=("FOLDER", "POINTS"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args._memory_child:
        memory_child(args._memory_child[0], float(args._memory_child[1]))
        return 0

    from motes.dust.grid.workers import build_disk_model, read_grid_observations
    from motes.dust.grid.spec import read_grid_description
    from motes.optics.mie import solver_summary

    print(f"motes grid benchmark: 4 materials + porosity, 8 bands, a_max 1 mm; {os.cpu_count()} cores")
    print(f"Mie solver: {solver_summary()}")
    with tempfile.TemporaryDirectory(prefix="motes-bench-grid-") as tmp:
        tmp = Path(tmp)
        scaling = write_problem(tmp, max(args.scaling, 1e3), name="scaling")
        start = time.perf_counter()
        spec = read_grid_description(scaling)
        build_disk_model(spec, read_grid_observations(spec)).flux_ratio([[1, 0, 0, 0]], 0.0, 1.0, 3.5)
        print(f"fast-path tables ready in {time.perf_counter() - start:.1f} s (built once, then cached on disk)")

        rate_exact = None
        if args.exact > 0:
            rate_exact = exact_rate(tmp, args.exact)
            print(f"[1] exact path, in-process: {rate_exact:.3g} points/s ({args.exact} points)")

        if args.scaling > 0:
            spec, r1, wall1 = run(scaling, tmp / "store_w1", 1)
            _, r2, wall2 = run(scaling, tmp / "store_w2", 2)
            rate1, rate2 = r1.points_per_second, r2.points_per_second
            print(f"[2] fast path, {spec.n_points:,} points: 1 worker {rate1:,.0f} points/s (wall {wall1:.1f} s); "
                  f"2 workers {rate2:,.0f} points/s (wall {wall2:.1f} s, with process start-up)")
            line = f"    scaling 2 workers / 1 worker = {rate2 / rate1:.2f}"
            if rate_exact:
                line += f"; fast (1 worker) / exact = {rate1 / rate_exact:,.0f}x"
            print(line)

        if not args.skip_full:
            full = write_problem(tmp, args.full, name="full")
            spec, rf, wallf = run(full, tmp / "store_full", 2)
            verdict = "meets" if wallf <= GOAL_SECONDS else "misses"
            print(f"[3] full grid, {spec.n_points:,} points, 2 workers: {wallf:.1f} s wall "
                  f"({rf.points_per_second:,.0f} points/s); {verdict} the {GOAL_SECONDS:.0f} s goal")

        for target in args.memory:
            out = subprocess.run([sys.executable, __file__, "--_memory-child", str(tmp), str(target)],
                                 capture_output=True, text=True, check=True)
            m = json.loads(out.stdout.strip().splitlines()[-1])
            print(f"[4] memory, {m['points']:,} points (run + summary, 1 worker): peak of the allocations made "
                  f"during run and summary {m['traced_peak_mb']:.2f} MB; peak RSS of the process "
                  f"{m['rss_peak_mb']:.0f} MB ({m['rss_before_mb']:.0f} MB before the run: interpreter, model, tables)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
