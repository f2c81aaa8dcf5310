"""Cold start of a demo-sized fit: building the fast path's lookup tables from nothing.

On a fresh machine the first fit pays for the lookup tiles of the fast path
(:mod:`motes.dust.model.tables`); later runs load them from the cache. This
script measures that first run in one process, on an empty cache of its own
(a temporary folder, never the user's cache):

* the time to make the tables ready for every model of the demo fit
  (``prepare_fit`` on ``src/motes/demo/data/disk_fit.toml``), the tiles built
  and the time per tile;
* with ``--fit``, the fit itself (one worker, as ``motes demo`` runs it), then
  the same fit again on the now warm cache;
* these times against the goals of a first ``motes demo`` within 3 minutes
  and a warm one within 60 s (the fit is most of the demo);
* with ``--demo``, the whole ``motes demo`` as a user runs it (a subprocess,
  every part), first on the empty cache, then again on the now warm one, with
  each part's time, against the same goals.

Usage::

    python benchmarks/bench_coldstart.py            # tables only
    python benchmarks/bench_coldstart.py --fit      # tables, cold fit, warm fit
    python benchmarks/bench_coldstart.py --demo     # the whole motes demo, cold then warm
    MOTES_TABLE_WORKERS=1 python benchmarks/bench_coldstart.py   # build on one core
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

GOAL_COLD_S = 180.0     # issue 15: first `motes demo` within 3 minutes on 2 cores
GOAL_WARM_S = 60.0      # issue 15: a warm `motes demo` within 60 s


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--fit", action="store_true", help="also run the demo fit, cold then warm")
    parser.add_argument("--demo", action="store_true",
                        help="time the whole `motes demo` (a subprocess), cold then warm, instead")
    parser.add_argument("--keep", action="store_true", help="keep the temporary cache and run folders")
    parser.add_argument("--cache", help="use this cache folder instead of an empty one (times a warm start)")
    args = parser.parse_args(argv)

    work = Path(tempfile.mkdtemp(prefix="motes_coldstart_"))
    os.environ["MOTES_CACHE_DIR"] = args.cache or str(work / "cache")     # before motes reads it
    if args.demo:
        try:
            # a given cache folder that holds no tiles yet is a cold start too
            return _whole_demo(work, bool(args.cache) and any(Path(args.cache).glob("tables/*/tile_*.npz")))
        finally:
            if args.keep:
                print(f"kept {work}")
            else:
                shutil.rmtree(work, ignore_errors=True)
    import motes.demo
    from motes.dust.fit.run import FitRunSettings, prepare_fit, run_fit
    from motes.dust.fit.spec import read_fit_description
    from motes.dust.model import tables

    try:
        description = Path(motes.demo.__file__).parent / "data" / "disk_fit.toml"
        spec = read_fit_description(description)
        print(f"demo fit: {len(spec.models)} models; cores: {os.cpu_count()}; "
              f"tile builders: {tables.table_build_workers()}; cache {os.environ['MOTES_CACHE_DIR']}"
              f"{'' if args.cache else ' (empty)'}")
        t0, c0 = time.perf_counter(), _cpu_seconds()
        prepare_fit(spec)
        ready = time.perf_counter() - t0
        cpu = _cpu_seconds() - c0
        built = sum(t.tiles_built for t in tables._TABLES.values())
        nodes = sum(getattr(t, "nodes_built", 0) for t in tables._TABLES.values())
        building = sum(t.build_seconds for t in tables._TABLES.values())
        loaded = sum(len(t._tiles) for t in tables._TABLES.values())
        per_tile = building / built if built else float("nan")
        print(f"tables ready in {ready:.1f} s: {built} tiles built, {nodes} nodes in them "
              f"({building:.1f} s of building, "
              f"{per_tile:.2f} s per tile wall), {loaded} tiles in memory")
        # CPU of this process and of the tile builders (pool processes, counted once they end): on a
        # machine shared with other work the wall time above overstates the cost; CPU / cores is the
        # wall time the build needs on idle cores when the builders keep every core busy
        print(f"tables CPU {cpu:.1f} s (this process and its tile builders; {cpu / built if built else float('nan'):.2f} "
              f"CPU s per tile); on {tables.table_build_workers()} idle cores >= {cpu / tables.table_build_workers():.0f} s wall")
        if not args.fit:
            print(f"{'warm' if args.cache else 'cold'}-start table time {ready:.0f} s against the whole first demo's goal of "
                  f"{GOAL_COLD_S:.0f} s ({ready / GOAL_COLD_S:.2f} of it)")
            return
        t0, c0 = time.perf_counter(), _cpu_seconds()
        run_fit(description, FitRunSettings(output=work / "cold", workers=1, progress=False), echo=lambda *_: None)
        cold_fit = time.perf_counter() - t0
        cold_cpu = _cpu_seconds() - c0
        late = sum(t.tiles_built for t in tables._TABLES.values()) - built
        tables._TABLES.clear()                  # a new run: tiles come from the cache on disk
        from motes.dust.fit import problem as _problem
        _problem._PROBLEMS.clear()
        t0, c0 = time.perf_counter(), _cpu_seconds()
        run_fit(description, FitRunSettings(output=work / "warm", workers=1, progress=False), echo=lambda *_: None)
        warm = time.perf_counter() - t0
        warm_cpu = _cpu_seconds() - c0
        print(f"fit on the prepared tiles: {cold_fit:.0f} s wall, {cold_cpu:.1f} CPU s, {late} tiles built during "
              f"sampling; the same fit warm: {warm:.0f} s wall, {warm_cpu:.1f} CPU s (the difference, "
              f"{cold_cpu - warm_cpu:.1f} CPU s, is mostly the tiles built during sampling)")
        cold = ready + cold_fit
        print(f"{'demo' if args.cache else 'cold demo'} fit (tables + fit): {cold:.0f} s against the first demo's goal of {GOAL_COLD_S:.0f} s "
              f"(ratio {cold / GOAL_COLD_S:.2f})")
        print(f"warm demo fit (tiles from the cache): {warm:.0f} s against the warm demo's goal of "
              f"{GOAL_WARM_S:.0f} s (ratio {warm / GOAL_WARM_S:.2f})")
    finally:
        if args.keep:
            print(f"kept {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)


def _cpu_seconds() -> float:
    """User + system CPU seconds of this process and of its finished child processes."""
    import resource

    own, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def _partial_tiles(files) -> tuple[int, int]:
    """How many tile files hold only some nodes (or some x bins), and how many nodes those hold."""
    import numpy as np

    from motes.dust.model.tables import PARTIAL_FORMAT

    partial = nodes = 0
    for path in files:
        try:
            with np.load(path) as z:
                if int(z["format"]) == PARTIAL_FORMAT:
                    partial += 1
                    nodes += int((z["bins"] > 0).sum())
        except (OSError, ValueError, KeyError):
            pass
    return partial, nodes


def _whole_demo(work: Path, warm_cache: bool) -> None:
    """``motes demo`` twice in subprocesses on the cache of MOTES_CACHE_DIR: times against the goals."""
    import re
    import subprocess

    print(f"motes demo, cores: {os.cpu_count()}; cache {os.environ['MOTES_CACHE_DIR']}"
          f"{' (given)' if warm_cache else ' (empty)'}")
    times = []
    for label in ("first", "second"):
        t0, c0, load0 = time.perf_counter(), _cpu_seconds(), os.getloadavg()[0]
        proc = subprocess.run([sys.executable, "-m", "motes", "demo", str(work / f"demo_{label}")],
                              capture_output=True, text=True, env=dict(os.environ))
        wall, cpu = time.perf_counter() - t0, _cpu_seconds() - c0
        if proc.returncode != 0:
            print(proc.stdout[-2000:], proc.stderr[-2000:])
            raise SystemExit(f"motes demo failed (rc {proc.returncode})")
        # "(disk fit took 12.3 s)"; a part run alongside: "(joint fit took 45.6 s, in a second process ...)"
        parts = re.findall(r"^\((.+?) took ([0-9.]+) s(?:, [^)]*)?\)$", proc.stdout, flags=re.M)
        files = list(Path(os.environ["MOTES_CACHE_DIR"]).glob("tables/*/tile_*.npz"))
        partial, nodes = _partial_tiles(files)
        # CPU: the demo and its tile builders (children, counted when they end); on a shared machine the
        # wall time overstates the cost, CPU / cores bounds the wall time on idle cores from below
        print(f"{label} run: {wall:.0f} s wall, {cpu:.0f} CPU s (load average {load0:.1f} at the start, "
              f"{os.getloadavg()[0]:.1f} at the end); "
              + ", ".join(f"{name} {float(sec):.1f} s" for name, sec in parts)
              + f"; {len(files)} tiles in the cache after it ({partial} of them partial; {nodes} nodes built "
                "in those)")
        times.append(wall)
    cold, warm = times
    if not warm_cache:
        print(f"cold-start time (first motes demo, empty cache): {cold:.0f} s against the goal of "
              f"{GOAL_COLD_S:.0f} s (ratio {cold / GOAL_COLD_S:.2f}{', met' if cold <= GOAL_COLD_S else ', NOT met'})")
    print(f"warm motes demo (tables cached): {warm:.0f} s against the goal of {GOAL_WARM_S:.0f} s "
          f"(ratio {warm / GOAL_WARM_S:.2f}{', met' if warm <= GOAL_WARM_S else ', NOT met'})")


if __name__ == "__main__":
    sys.exit(main())
