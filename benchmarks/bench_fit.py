"""Benchmark of ``motes fit``: wall time and likelihood calls per second, fast vs exact optics.

Problem: the demo disk (8 bands between 0.6 and 4 um, one at 3.1 um) and its
4 candidate materials (silica, water ice, carbon, iron): fractions + porosity +
a_min + q free, scale marginalised.

1. The full-set fit with the fast optics path, run to completion (goal: <= 3 min
   on a 2-core machine).
2. The same fit with the exact optics path on a reduced problem (``--exact-nlive``
   live points, stopped after ``--exact-calls`` likelihood calls: the exact path
   is far too slow to finish): calls/s, and the ratio of fast to exact calls/s
   measured in this same run. The exact wall time of the full fit is
   extrapolated from it.
3. With ``--comparison``: the whole "each material removed in turn" comparison
   (5 models) with the fast path (goal: <= 15 min).

Run from the repository root::

    python benchmarks/bench_fit.py [--nlive 250] [--workers 1] [--comparison]
"""

from __future__ import annotations

import argparse
import re
import shutil
import tempfile
import time
from importlib import resources
from pathlib import Path


def _write(folder: Path, nlive: int, method: str, model_set: str, maxcall: int | None) -> Path:
    data = resources.files("motes.demo") / "data"
    (folder / "disk_photometry.ecsv").write_bytes((data / "disk_photometry.ecsv").read_bytes())
    text = (data / "disk_fit.toml").read_text()
    text = text.replace('method = "fast"', f'method = "{method}"')
    text = re.sub(r"^\[models\].*?(?=^\[)", f"{model_set}\n\n", text, flags=re.S | re.M)
    sampler = f"[sampler]\nnlive = {nlive}\ndlogz = 0.1\nseed = 7\n" + (f"maxcall = {maxcall}\n" if maxcall else "")
    text = re.sub(r"\[sampler\].*", sampler, text, flags=re.S)
    path = folder / "fit.toml"
    path.write_text(text)
    return path


def _run(path: Path, out: Path, workers: int):
    from motes.dust.fit.run import FitRunSettings, run_fit

    start = time.perf_counter()
    res = run_fit(path, FitRunSettings(output=out, workers=workers, progress=False),
                  echo=lambda *a: None)
    wall = time.perf_counter() - start
    calls = sum(m.n_calls for m in res.models)
    return res, wall, calls


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nlive", type=int, default=250)
    parser.add_argument("--workers", type=int, default=1)
    parser.add_argument("--exact-calls", type=int, default=40,
                        help="likelihood calls of the truncated exact-path run (default 40)")
    parser.add_argument("--exact-nlive", type=int, default=20,
                        help="live points of the truncated exact-path run (default 20)")
    parser.add_argument("--comparison", action="store_true",
                        help="also run the full 'each removed in turn' comparison with the fast path")
    args = parser.parse_args(argv)
    full = '[models]\nset = "list"\nlist = [["silica", "water_ice", "carbon", "iron"]]'
    with tempfile.TemporaryDirectory(prefix="motes-bench-fit-") as tmp:
        tmp = Path(tmp)
        (tmp / "fast").mkdir()
        res, wall_fast, calls_fast = _run(_write(tmp / "fast", args.nlive, "fast", full, None),
                                          tmp / "fast" / "run", args.workers)
        m = res.models[0]
        rate_fast = calls_fast / wall_fast
        print(f"fast path, 4-material fit, nlive {args.nlive}, {args.workers} worker(s): "
              f"{wall_fast:.1f} s wall, {calls_fast} calls, {rate_fast:.0f} calls/s, "
              f"ln Z = {m.ln_z:.2f} ± {m.ln_z_err:.2f}  (goal <= 180 s)")

        (tmp / "exact").mkdir()
        _, wall_exact, calls_exact = _run(_write(tmp / "exact", args.exact_nlive, "exact", full,
                                                 max(args.exact_nlive + 1, args.exact_calls)),
                                          tmp / "exact" / "run", args.workers)
        rate_exact = calls_exact / wall_exact
        print(f"exact path, same fit stopped after {calls_exact} calls: {wall_exact:.1f} s, "
              f"{rate_exact:.2f} calls/s; a full exact fit would take ~{calls_fast / rate_exact / 3600:.1f} h")
        print(f"ratio fast/exact likelihood calls per second: {rate_fast / rate_exact:.0f}x")

        if args.comparison:
            each = '[models]\nset = "each-removed"\nkeep = ["silica"]'
            (tmp / "cmp").mkdir()
            res, wall, calls = _run(_write(tmp / "cmp", args.nlive, "fast", each, None), tmp / "cmp" / "run",
                                    args.workers)
            print(f"fast path, each-removed comparison ({len(res.models)} models): {wall:.1f} s wall, "
                  f"{calls} calls, {calls / wall:.0f} calls/s (goal <= 900 s)")
            for v in res.verdicts:
                print("  " + v.sentence())
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
