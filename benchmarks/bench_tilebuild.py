"""Where a lookup tile's build time goes, and the one-index Mie kernel against miepython's loop.

A tile of the fast path (:mod:`motes.dust.model.tables`) is 4 x 4 (n, k) nodes; each
node samples the size integrand with the size rule of the table
(:func:`motes.dust.model.sampling.bin_rule`) and evaluates one Mie series per sample,
whose cost grows with x (about x + 4 x^(1/3) terms). Weak absorbers (small k) are
sampled densely up to the table's top (x = 1.26e4), so their nodes cost ~10x the
opaque ones. For one node of each kind (one n, the first k of k tiles 0, 2, 4, 5, 6, 8
and 10) this prints, in one run:

* the samples, the sum of series terms, the share above x = 100;
* the CPU seconds (``time.process_time``) of the node's Mie evaluations with
  miepython's per-x loop (``mie.scattered_intensity``, the builder before) and with
  the one-index kernel (``mie.intensities_for_index``, the builder now), their ratio,
  and the largest relative difference of the node's stored moments (old against new);
* the CPU seconds of a whole tile per kind, projected from the node (x 16);
* with ``--tile``, one tile built by ``LookupTable`` with 1 and with 2 workers
  (wall and CPU time): a single missing tile is now split row by row over the workers.

Usage::

    python benchmarks/bench_tilebuild.py            # nodes per kind, old against new
    python benchmarks/bench_tilebuild.py --tile     # also one tile on 1 and 2 workers

The machine may be loaded: CPU time is the measure; wall time is printed beside it.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

from motes.dust.model import tablebuild  # noqa: E402
from motes.dust.model.colours import ScatteringGeometry  # noqa: E402
from motes.dust.model.sampling import bin_rule  # noqa: E402
from motes.optics import mie  # noqa: E402

K_TILES = (0, 2, 4, 5, 6, 8, 10)


def _old_channels(geometry, m, t, quantity="total", f_max=None):
    """The builder's integrand before the one-index kernel: miepython's loop, one x at a time."""
    if quantity == "polarised":
        return mie.polarised_scattered_intensity(m, t, geometry.angles_rad)[None, :]
    return mie.scattered_intensity(m, t, geometry.angles_rad)[None, :]


def _node(spec, geometry, m, old: bool):
    saved = tablebuild._channels
    if old:
        tablebuild._channels = _old_channels
    try:
        c0, w0 = time.process_time(), time.perf_counter()
        out = tablebuild.build_node(spec, geometry, m)
        return out, time.process_time() - c0, time.perf_counter() - w0
    finally:
        tablebuild._channels = saved


def nodes(n_value: float = 1.5) -> None:
    spec = tablebuild.TableSpec()
    g = ScatteringGeometry((90.0,))
    _node(spec, g, complex(1.5, 0.01), True)       # compile both paths outside the timings
    _node(spec, g, complex(1.5, 0.01), False)
    print(f"one node per kind at n = {n_value} (x to {spec.x_top:.3g}, 90 deg); CPU s (wall s)")
    print(f"{'k tile':>6} {'k':>9} {'samples':>8} {'terms':>9} {'>x100':>6} {'miepython':>15} "
          f"{'one-index':>15} {'ratio':>6} {'max rel moments':>16} {'tile old/new CPU s':>19}")
    tot_old = tot_new = 0.0
    for j in K_TILES:
        m = complex(n_value, spec.k[4 * j])
        t, _, _ = bin_rule(spec.ln_x, spec.sampling, m.imag)
        terms = t + 4.05 * t ** (1 / 3)
        big = t > 100
        (mo, so, to), c_old, w_old = _node(spec, g, m, True)
        (mn, sn, tn), c_new, w_new = _node(spec, g, m, False)
        scale = np.abs(mo).max(axis=-2, keepdims=True)           # per moment order, over the bins
        rel = float(np.max(np.abs(mn - mo) / np.where(scale > 0, scale, 1.0)))
        rel = max(rel, float(np.max(np.abs(sn / so - 1))), float(np.max(np.abs(tn / to - 1))))
        tot_old += c_old
        tot_new += c_new
        print(f"{j:6d} {m.imag:9.2e} {t.size:8d} {terms.sum():9.3g} {terms[big].sum() / terms.sum():6.2f} "
              f"{c_old:7.3f} ({w_old:5.2f}) {c_new:7.3f} ({w_new:5.2f}) {c_old / c_new:6.2f} {rel:16.1e} "
              f"{16 * c_old:9.1f} / {16 * c_new:5.1f}")
    print(f"all kinds: miepython {tot_old:.2f} CPU s, one-index {tot_new:.2f} CPU s, "
          f"tile build time ratio old/new {tot_old / tot_new:.2f}")


def one_tile() -> None:
    from motes.dust.model.tables import LookupTable

    spec = tablebuild.TableSpec()
    g = ScatteringGeometry((90.0,))
    tile = (int(np.log(1.5 / spec.n_min) / spec.dln_n) // spec.tile, 2)
    print(f"one tile {tile} (n ~ 1.5, k tile 2), built by LookupTable in a fresh folder:")
    for workers in (1, 2):
        with tempfile.TemporaryDirectory() as folder:
            table = LookupTable(g, spec, folder=folder, progress=False, workers=workers)
            c0, w0 = time.process_time(), time.perf_counter()
            table._load_or_build([tile])
            cpu, wall = time.process_time() - c0, time.perf_counter() - w0
        # process_time counts this process only: with workers the rows run in child processes
        print(f"  {workers} worker(s): wall {wall:.1f} s (CPU in this process {cpu:.1f} s)")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--tile", action="store_true", help="also build one tile on 1 and 2 workers")
    parser.add_argument("--n", type=float, default=1.5, help="real index of the nodes (default 1.5)")
    args = parser.parse_args(argv)
    print(mie.solver_summary(), f"; {os.cpu_count()} cores")
    nodes(args.n)
    if args.tile:
        one_tile()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
