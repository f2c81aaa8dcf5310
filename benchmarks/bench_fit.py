"""Benchmark of ``motes fit``: batched likelihood, worker scaling, wall times against the goals.

Problem: the demo disk (8 bands between 0.6 and 4 um, one at 3.1 um) and its
4 candidate materials (silica, water ice, carbon, iron): fractions + porosity +
a_min + q free, scale marginalised; nlive 250, dlogz 0.1 (``--materials``
picks a subset for a quick look). Every ratio below is measured in this one
run, so it compares like with like on a loaded machine too.

1. The fast path's own rate: ``ln_likelihood`` of prior draws in batches the
   size of the sampler's queue, and one point per call (what a sampler that
   hands over one point at a time gets).
2. The fit with one worker (batched queue, the default): wall time, calls/s,
   and calls/s as a fraction of stage 1's batch rate (goal >= 80%).
3. The same fit evaluated one point at a time (queue of 1, dynesty's serial
   path, as before batching): ln Z must agree with stage 2 within the errors;
   the speed-up of batching.
4. The fit with 2 workers (goal <= 30 s) and its scaling over 1 worker, against
   the grid's scaling 2 workers / 1 worker measured here on ``--grid-points``
   points (goal: the fit reaches >= 90% of it).
5. With ``--comparison``: the whole "each material removed in turn" comparison
   with 2 workers (goal <= 2 min).
6. Unless ``--skip-exact``: the exact optics path on a truncated run, and the
   ratio of fast to exact calls/s.

Run from the repository root::

    python benchmarks/bench_fit.py [--nlive 250] [--comparison] [--skip-exact]
"""

from __future__ import annotations

import argparse
import math
import os
import re
import sys
import tempfile
import time
from importlib import resources
from pathlib import Path

import numpy as np

FULL = ("silica", "water_ice", "carbon", "iron")
GOAL_FIT_S, GOAL_COMPARISON_S, GOAL_BATCH_FRACTION, GOAL_SCALING_FRACTION = 30.0, 120.0, 0.8, 0.9


def _write(folder: Path, nlive: int, method: str, model_set: str, maxcall: int | None, seed: int = 7) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    data = resources.files("motes.demo") / "data"
    (folder / "disk_photometry.ecsv").write_bytes((data / "disk_photometry.ecsv").read_bytes())
    text = (data / "disk_fit.toml").read_text()
    text = text.replace('method = "fast"', f'method = "{method}"')
    text = re.sub(r"^\[models\].*?(?=^\[)", f"{model_set}\n\n", text, flags=re.S | re.M)
    sampler = f"[sampler]\nnlive = {nlive}\ndlogz = 0.1\nseed = {seed}\n" + (f"maxcall = {maxcall}\n" if maxcall else "")
    text = re.sub(r"\[sampler\].*", sampler, text, flags=re.S)
    path = folder / "fit.toml"
    path.write_text(text)
    return path


def _list_set(materials) -> str:
    return '[models]\nset = "list"\nlist = [[' + ", ".join(f'"{m}"' for m in materials) + "]]"


def _run(path: Path, out: Path, workers: int):
    from motes.dust.fit.run import FitRunSettings, run_fit

    start = time.perf_counter()
    res = run_fit(path, FitRunSettings(output=out, workers=workers, progress=False), echo=lambda *a: None)
    wall = time.perf_counter() - start
    calls = sum(m.n_calls for m in res.models)
    sampling = sum(s["wall_time"] for m in res.models for s in m.sessions)
    return res, wall, calls, sampling


class PointOnly:
    """The likelihood without its ``batch`` method: dynesty then hands over one point at a time."""

    def __init__(self, func):
        self.func = func

    def __call__(self, v):
        return self.func(v)


def _serial_fit(path: Path, folder: Path):
    """Stage 3: the sampler with a queue of one point, as before batching (one worker)."""
    from motes.dust.fit.problem import HandleLikelihood, HandlePriorTransform
    from motes.dust.fit.run import prepare_fit
    from motes.dust.fit.sampler import open_pool, run_nested_model
    from motes.dust.fit.spec import read_fit_description

    spec = read_fit_description(path)
    _, handles = prepare_fit(spec)
    h = handles[0]
    with open_pool(1, PointOnly(HandleLikelihood(h)), HandlePriorTransform(h)) as pool:
        return run_nested_model(h.space.ndim, spec.sampler, folder / "serial.dynesty", pool=pool, workers=1,
                                progress=False)


def _batch_rates(path: Path, batch: int, seconds: float = 4.0):
    """Stage 1: likelihood evaluations per second of prior draws, in batches of ``batch`` and of 1."""
    from motes.dust.fit.run import prepare_fit
    from motes.dust.fit.spec import read_fit_description

    spec = read_fit_description(path)
    _, handles = prepare_fit(spec)
    problem = handles[0].build()
    rng = np.random.default_rng(3)
    theta = problem.space.transform(rng.random((20000, problem.space.ndim)))
    for i in range(0, theta.shape[0], 2000):     # warm: every tile and q slice these draws reach is ready
        problem.ln_likelihood(theta[i:i + 2000])
    rates = {}
    for size in (batch, 1):
        n, start, i = 0, time.perf_counter(), 0
        while time.perf_counter() - start < seconds:
            problem.ln_likelihood(theta[i:i + size])
            n += size
            i = (i + size) % (theta.shape[0] - size)
        rates[size] = n / (time.perf_counter() - start)
    return rates


def _grid_scaling(folder: Path, points: float, materials):
    """Points/s of ``motes grid`` with 1 and 2 workers on the same star, bands and materials."""
    from math import comb

    here = Path(__file__).resolve().parent
    sys.path.insert(0, str(here))
    import bench_grid

    folder.mkdir(parents=True, exist_ok=True)
    (folder / "disk_photometry.ecsv").write_text(bench_grid.demo_text("disk_photometry.ecsv"))
    k = len(materials)
    n_por, n_amin = 6, 8
    div = max(2, round((points / (n_por * n_amin)) ** (1 / max(k - 1, 1))))
    while comb(div + k - 1, k - 1) * n_por * n_amin < points and k > 1:
        div += 1
    text = bench_grid.description(div, n_por, n_amin)
    blocks = re.split(r"(?=^\[\[materials\]\])", text.split("[mixing]")[0], flags=re.M)
    kept = [b for b in blocks[1:] if re.search(r'name = "(\w+)"', b).group(1) in materials]
    text = blocks[0] + "".join(kept) + "[mixing]" + text.split("[mixing]", 1)[1]
    text = re.sub(r"^\[grid\.fraction_bounds\].*?(?=^\[|\Z)", "", text, flags=re.S | re.M)
    path = folder / "scaling.toml"
    path.write_text(text)
    _, r1, _ = bench_grid.run(path, folder / "store_w1", 1)
    _, r2, _ = bench_grid.run(path, folder / "store_w2", 2)
    return r1.points_per_second, r2.points_per_second


def _verdict(ok: bool) -> str:
    return "meets" if ok else "misses"


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nlive", type=int, default=250)
    parser.add_argument("--materials", nargs="+", default=list(FULL), help="candidate materials of the fit")
    parser.add_argument("--grid-points", type=float, default=4e3,
                        help="points of the grid whose 2-worker scaling is the reference (0 skips stage 4)")
    parser.add_argument("--comparison", action="store_true", help="stage 5: the each-removed comparison")
    parser.add_argument("--skip-serial", action="store_true", help="skip stage 3")
    parser.add_argument("--skip-exact", action="store_true", help="skip stage 6")
    parser.add_argument("--seed", type=int, default=7, help="sampler seed (default 7)")
    parser.add_argument("--exact-calls", type=int, default=40)
    parser.add_argument("--exact-nlive", type=int, default=20)
    args = parser.parse_args(argv)
    from motes.dust.fit.batch import queue_size

    materials = tuple(args.materials)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else math.nan
    print(f"motes fit benchmark: {len(materials)} materials ({', '.join(materials)}), nlive {args.nlive}; "
          f"{os.cpu_count()} cores, load average {load:.1f} at the start")
    with tempfile.TemporaryDirectory(prefix="motes-bench-fit-") as tmp:
        tmp = Path(tmp)
        path = _write(tmp / "fit", args.nlive, "fast", _list_set(materials), None, args.seed)
        start = time.perf_counter()
        batch = queue_size(1, args.nlive, batched=True)
        rates = _batch_rates(path, batch)
        print(f"[0] fast-path tables ready and warm in {time.perf_counter() - start:.1f} s (cached on disk)")
        print(f"[1] fast path: {rates[batch]:,.0f} likelihoods/s in batches of {batch}, "
              f"{rates[1]:,.0f}/s one point per call")

        res, wall1, calls1, samp1 = _run(path, tmp / "fit" / "w1", 1)
        m1 = res.models[0]
        rate1 = calls1 / samp1
        frac = rate1 / rates[batch]
        print(f"[2] fit, 1 worker, batched: {wall1:.1f} s wall ({samp1:.1f} s sampling), {calls1} calls, "
              f"{rate1:,.0f} calls/s = {100 * frac:.0f}% of the batch rate ({_verdict(frac >= GOAL_BATCH_FRACTION)} "
              f"the {100 * GOAL_BATCH_FRACTION:.0f}% goal); ln Z = {m1.ln_z:.2f} ± {m1.ln_z_err:.2f}")

        if not args.skip_serial:
            serial = _serial_fit(path, tmp / "fit")
            rate_s = serial.n_calls / serial.wall_time
            diff = m1.ln_z - serial.ln_z
            sig = math.hypot(m1.ln_z_err, serial.ln_z_err)
            print(f"[3] same fit, one point at a time: {serial.wall_time:.1f} s sampling, {serial.n_calls} calls, "
                  f"{rate_s:,.0f} calls/s; ln Z = {serial.ln_z:.2f} ± {serial.ln_z_err:.2f}; batched - serial "
                  f"= {diff:+.2f} ({abs(diff) / sig:.1f} sigma); batching is {serial.wall_time / samp1:.1f}x "
                  "faster in sampling wall time")

        if args.grid_points > 0:
            res2, wall2, calls2, samp2 = _run(path, tmp / "fit" / "w2", 2)
            m2 = res2.models[0]
            g1, g2 = _grid_scaling(tmp / "grid", args.grid_points, materials)
            fit_scaling, grid_scaling = wall1 / wall2, g2 / g1
            print(f"[4] fit, 2 workers: {wall2:.1f} s wall ({_verdict(wall2 <= GOAL_FIT_S)} the {GOAL_FIT_S:.0f} s "
                  f"goal), {calls2} calls, ln Z = {m2.ln_z:.2f} ± {m2.ln_z_err:.2f}; scaling over 1 worker "
                  f"{fit_scaling:.2f}x (wall time)")
            print(f"    grid, {args.grid_points:,.0f} points: 1 worker {g1:,.0f} points/s, 2 workers {g2:,.0f} "
                  f"points/s, scaling {grid_scaling:.2f}x; fit/grid scaling = {fit_scaling / grid_scaling:.2f} "
                  f"({_verdict(fit_scaling / grid_scaling >= GOAL_SCALING_FRACTION)} the "
                  f"{100 * GOAL_SCALING_FRACTION:.0f}% goal)")

        if args.comparison:
            each = '[models]\nset = "each-removed"\nkeep = ["silica"]'
            cmp_path = _write(tmp / "cmp", args.nlive, "fast", each, None, args.seed)
            res, wall, calls, _ = _run(cmp_path, tmp / "cmp" / "run", 2)
            print(f"[5] each-removed comparison ({len(res.models)} models), 2 workers: {wall:.1f} s wall "
                  f"({_verdict(wall <= GOAL_COMPARISON_S)} the {GOAL_COMPARISON_S:.0f} s goal), {calls} calls, "
                  f"{calls / wall:,.0f} calls/s")
            for v in res.verdicts:
                print("  " + v.sentence())

        if not args.skip_exact:
            exact = _write(tmp / "exact", args.exact_nlive, "exact", _list_set(materials),
                           max(args.exact_nlive + 1, args.exact_calls))
            _, wall_e, calls_e, _ = _run(exact, tmp / "exact" / "run", 1)
            rate_e = calls_e / wall_e
            print(f"[6] exact path, stopped after {calls_e} calls: {rate_e:.2f} calls/s; fast (batched fit) / exact "
                  f"= {rate1 / rate_e:,.0f}x; a full exact fit would take ~{calls1 / rate_e / 3600:.1f} h")
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else math.nan
    print(f"load average at the end: {load:.1f} (other work on the machine slows every stage; the ratios "
          "compare stages of this one run)")


if __name__ == "__main__":
    main()
