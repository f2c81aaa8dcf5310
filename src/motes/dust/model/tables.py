"""Fast path of the disk-colour model: cached lookup tables of size integrals.

For ``n(a) ∝ a^-q`` the substitution ``a = t lambda / 2 pi`` turns the size
integral into (GUIDE section 9; :mod:`motes.dust.model.colours`)::

    integral_{a_min}^{a_max} a^-q pi a^2 Q_sca p da = (lambda/2pi)^(3-q) [C(x_max) - C(x_min)]
    C(x; m, q) = 1/2 integral_0^x t^-q s(t; m) dt,   s = mean over angles of |S1|^2 + |S2|^2

``C`` does not depend on lambda or on the size limits, so a table of ``C`` over
(ln n, ln k, ln x) and q turns every wavelength node of every band into two
interpolations. For the Henyey-Greenstein phase function two channels are
tabulated instead, ``s = 2 pi t^2 Q_sca`` and ``2 pi t^2 Q_sca g``. For
polarised-intensity colours a second table of the same form holds ``C`` with
``s = mean over angles of |S1|^2 - |S2|^2`` (signed; Mie phase function only),
in a cache folder of its own, made ready only for models with polarised
columns (``LookupTable(quantity="polarised")``). For hollow-sphere grains
(``DiskColourModel(grains="hollow spheres", f_max=...)``) the integrand is the
hollow-sphere average of :func:`motes.optics.hollow.hollow_intensities` (or
its efficiencies for Henyey-Greenstein), in tables of the run's f_max with
cache folders of their own (``LookupTable(f_max=...)``), made ready only for
such runs; the sphere tables keep their folders and contents. An f_max given
per point (``DiskColourModel(f_max_tables=...)``) uses one such table per listed
value (a grid axis) or interpolates between the tables at :data:`F_MAX_NODES`
(a fitted f_max; :func:`f_max_terms`).

How the table is made
---------------------
* Axes: ``ln n`` (step 0.005 from n = 0.8), ``ln(k + 1e-6)`` (step 0.4 from
  k = 0), ``ln x`` (step 0.025 from x = 0.02 to 1.26e4, i.e. a = 1 mm down to
  lambda = 0.5 um). The first choice, steps 0.01 in ln n and 0.05 in ln x,
  left 3-4% errors next to the Mie rainbow indices for k ~ 5e-4 and up to 2%
  at the lower size limit of weakly absorbing grains (Mie ripple); measured
  in docs/optics.md.
  Below x = 0.02 the Rayleigh power law ``C ∝ x^(7-q)`` continues the table;
  above its top a geometric-optics tail with the mean ``s / t^2`` of the top
  decade (a note is added to the model's notes when it is used).
* Per (n, k) node the integrand is sampled by
  :func:`motes.dust.model.sampling.bin_rule` inside every ``ln x`` bin (the same rule
  as the exact path) and stored as five moments per bin,
  ``M_j = sum w s (ln t - ln t_c)^j``, so that the bin integral for any q is
  ``t_c^-q sum_j (-q)^j M_j / j!`` (truncation error below 1e-6).
* Nodes are built in tiles of 4 x 4 (n, k) nodes, only where the model's
  mixtures can reach (pure components, mixtures on a 10% simplex lattice,
  porosity 0-0.95, at every band node, plus an interpolation margin), and
  cached on disk under :func:`motes.files.cache_directory` (``$MOTES_CACHE_DIR``,
  else ``$XDG_CACHE_HOME/motes``, else ``~/.cache/motes``) ``/tables``,
  keyed by a hash of the geometry, the axes, the sampling rule, the format
  version, the miepython version and (solid spheres, Mie phase) the node builder
  (:data:`motes.dust.model.tablebuild.SPHERE_BUILDER`). Files are written to a temporary name
  and renamed. A tile missing at evaluation time is built then.
* Within a tile only the nodes some index's 4 x 4 interpolation stencil
  reads are built, and each only up to the largest x its queries reach
  (``2 pi a_max / lambda`` at that index's wavelength when a model prepares
  its tables; rounded up to 8 ln x bins): the rest stays unbuilt (NaN in
  memory, so that a read of it can only give a NaN result, which is refused)
  until a later query needs it, and is then built and appended. Every bin of
  a node depends on its own samples only, so the values equal a whole build
  bit for bit (``tests/test_dust_tiles_lazy_x.py``). Partial tiles are cached
  with a format number of their own (:data:`PARTIAL_FORMAT`, the bins built
  per node beside the moments), whole ones as before; a write keeps the
  nodes another process wrote to the same file meanwhile.
* Evaluation: C for the q grid (step 0.1) is assembled from the moments when
  first needed; values are interpolated with 4-point Lagrange polynomials in
  q, ln n, ln k and ln x (a compiled loop over the batch).

Accuracy against the converged exact path is measured by the tests and by
``benchmarks/bench_optics.py`` (``docs/optics.md`` has the figures).
"""

from __future__ import annotations

import dataclasses
import json
import os
from dataclasses import asdict
from pathlib import Path

import numba
import numpy as np

from ... import __version__
from ...errors import InputError, ModelError
from ...parameters import accepts_quantities
from ...files import atomic_write, cache_directory, write_text_atomic
from ...optics import mie
from .tablebuild import (FACTORIALS, FORMAT_VERSION, N_MOMENTS, QUANTITIES, TableSpec, build_nodes, build_tile,
                         channel_key, rayleigh_exponents, tile_path, tile_rows)

#: tile files holding some of their nodes, or some nodes up to some x only (key ``bins``: x bins built per
#: node; see LookupTable): a format number of their own, so that a motes without partial tiles finds them
#: foreign and rebuilds them whole instead of reading their unbuilt parts. Whole tiles keep FORMAT_VERSION
#: and their cache folders.
PARTIAL_FORMAT = 1001
#: x bins are built in steps of this many (0.2 in ln x), above what a run needs
_X_QUANTUM = 8

__all__ = [
    "FORMAT_VERSION",
    "TableSpec",
    "LookupTable",
    "ModelTable",
    "cache_directory",
    "rainbow_indices",
    "reachable_indices",
    "table_for_model",
    "table_build_workers",
    "F_MAX_NODES",
    "F_MAX_FAST_RANGE",
    "f_max_terms",
]

#: q slices added on each side when the assembled q range must grow (a run that explores q one
#: point at a time then re-assembles a few times instead of at every new slice)
_Q_MARGIN = 4


def table_build_workers() -> int:
    """Processes for building missing tiles: ``$MOTES_TABLE_WORKERS``, else a default.

    Building is a one-off, embarrassingly parallel job, so the main process
    uses every core; inside a worker process (a fit or grid running on
    several processes) it stays at 1, so that workers do not each start a
    pool of their own.
    """
    import multiprocessing

    text = os.environ.get("MOTES_TABLE_WORKERS")
    if text is not None and text.strip():
        try:
            value = int(text)
        except ValueError:
            value = 0
        if value < 1:
            raise InputError(f"MOTES_TABLE_WORKERS must be a whole number >= 1, got {text!r}",
                             where="environment variable MOTES_TABLE_WORKERS")
        return value
    if multiprocessing.parent_process() is not None:
        return 1
    return max(1, os.cpu_count() or 1)


# ----------------------------------------------------------------- evaluation
@numba.njit(cache=True)
def _lagrange4(f):  # pragma: no cover - compiled
    return (-f * (f - 1.0) * (f - 2.0) / 6.0,
            (f + 1.0) * (f - 1.0) * (f - 2.0) / 2.0,
            -(f + 1.0) * f * (f - 2.0) / 2.0,
            (f + 1.0) * f * (f - 1.0) / 6.0)


@numba.njit(cache=True)
def _stencil(pos, count):  # pragma: no cover - compiled
    i = int(np.floor(pos))
    if i < 1:
        i = 1
    if i > count - 3:
        i = count - 3
    return i - 1, pos - i


@numba.njit(cache=True)
def _interpolate_batch(C, tail, slots, tile, ray_exp, q_lo, q_step, pn, pk, lx1, lx2, q,
                       ln_x0, dln_x, out):  # pragma: no cover - compiled
    """out[c, i] = C(x2) - C(x1) for query i and channel c.

    C: [n_ch, n_q, n_slots, tile, tile, n_x] (tiles stored compactly; ``slots``
    maps a tile (i, j) to its slot); tail: [n_ch, n_slots, tile, tile]; pn, pk:
    fractional positions on the global n and k axes; lx1, lx2: ln x; q: q values.
    """
    n_ch, n_q = C.shape[0], C.shape[1]
    n_x = C.shape[5]
    n_n = slots.shape[0] * tile
    n_k = slots.shape[1] * tile
    x_top = ln_x0 + dln_x * (n_x - 1)
    for i in range(q.size):
        iq, fq = _stencil((q[i] - q_lo) / q_step, n_q)
        wq = _lagrange4(fq)
        inn, fn = _stencil(pn[i], n_n)
        wn = _lagrange4(fn)
        ik, fk = _stencil(pk[i], n_k)
        wk = _lagrange4(fk)
        # x stencils (clamped inside the table; extrapolation handled below)
        e1 = min(max(lx1[i], ln_x0), x_top)
        e2 = min(max(lx2[i], ln_x0), x_top)
        ix1, fx1 = _stencil((e1 - ln_x0) / dln_x, n_x)
        ix2, fx2 = _stencil((e2 - ln_x0) / dln_x, n_x)
        wx1 = _lagrange4(fx1)
        wx2 = _lagrange4(fx2)
        for c in range(n_ch):
            v1 = 0.0
            v2 = 0.0
            vt = 0.0
            for b in range(4):
                nn = inn + b
                tn = nn // tile
                an = nn - tn * tile
                for d in range(4):
                    kk = ik + d
                    tk = kk // tile
                    ak = kk - tk * tile
                    slot = slots[tn, tk]
                    if slot < 0:  # tile not loaded: flag, never read another tile's data
                        vt = np.nan
                        continue
                    wnk = wn[b] * wk[d]
                    vt += wnk * tail[c, slot, an, ak]
                    for a in range(4):
                        row = C[c, iq + a, slot, an, ak]
                        s1 = 0.0
                        s2 = 0.0
                        for e in range(4):
                            s1 += wx1[e] * row[ix1 + e]
                            s2 += wx2[e] * row[ix2 + e]
                        v1 += wq[a] * wnk * s1
                        v2 += wq[a] * wnk * s2
            qi = q[i]
            # Rayleigh continuation below the table: C ∝ x^(1 + ray_exp - q)
            if lx1[i] < ln_x0:
                v1 = v1 * np.exp((1.0 + ray_exp[c] - qi) * (lx1[i] - ln_x0))
            if lx2[i] < ln_x0:
                v2 = v2 * np.exp((1.0 + ray_exp[c] - qi) * (lx2[i] - ln_x0))
            # geometric-optics tail above the table: C += A int t^(2-q) dt
            for which in range(2):
                lx = lx1[i] if which == 0 else lx2[i]
                if lx > x_top:
                    s = 3.0 - qi
                    if abs(s) < 1e-9:
                        extra = vt * (lx - x_top)
                    else:
                        extra = vt * (np.exp(s * lx) - np.exp(s * x_top)) / s
                    if which == 0:
                        v1 += extra
                    else:
                        v2 += extra
            out[c, i] = v2 - v1 + 0.0 * vt  # NaN when a tile was missing


class LookupTable:
    """Tabulated size integrals for one geometry (see the module notes).

    Parameters
    ----------
    geometry : ScatteringGeometry
    spec : TableSpec
    folder : path, optional
        Cache folder; default ``cache_directory() / "tables" / spec.key(...)``.
    progress : bool
        Show a progress bar (stderr) while building tiles.
    workers : int, optional
        Processes used to build missing tiles (default: ``$MOTES_TABLE_WORKERS``,
        else every core in the main process and 1 inside worker processes; see
        :func:`table_build_workers`).
    quantity : {"total", "polarised"}
        Tabulate the total intensity (default) or the polarised intensity
        ``|S1|^2 - |S2|^2`` (Mie phase function only; a cache folder of its own).
    f_max : float, optional
        Tabulate the hollow-sphere distribution with this largest core
        fraction (:mod:`motes.optics.hollow`; a cache folder of its own per
        f_max) instead of solid spheres (None, the default).
    """

    def __init__(self, geometry, spec: TableSpec | None = None, folder=None, progress: bool = True,
                 workers: int | None = None, quantity: str = "total", f_max: float | None = None):
        if quantity not in QUANTITIES:
            raise InputError(f"quantity must be one of {QUANTITIES}, got {quantity!r}", where="quantity")
        if quantity == "polarised" and geometry.phase != "mie":
            raise InputError("the Henyey-Greenstein phase function carries no polarisation; polarised "
                             "intensity needs phase = 'mie'", where="[geometry] phase")
        self.quantity = quantity
        self.f_max = None if f_max is None else float(f_max)
        self.geometry = geometry
        self.spec = spec or TableSpec()
        key = self.spec.key(channel_key(geometry, quantity, self.f_max))
        self.folder = Path(folder) if folder is not None else cache_directory() / "tables" / key
        self.progress = progress
        self.workers = int(workers) if workers is not None else table_build_workers()
        self.n_channels = 1 if (geometry.phase == "mie" or quantity == "polarised") else 2
        self._ray = rayleigh_exponents(geometry)
        self._tiles: dict[tuple[int, int], tuple] = {}
        self._slots = None          # tile (i, j) -> slot in the compact arrays
        self._order = []
        self._stack = None          # (first q index, array); grows by _Q_MARGIN slices
        self._tails = None
        self.build_seconds = 0.0
        self.tiles_built = 0        # tile builds (a tile given more nodes or x bins later counts again)
        self.nodes_built = 0        # node builds (likewise)
        t = self.spec.tile
        self._loaded = np.zeros((-(-self.spec.n_count // t), -(-self.spec.k_count // t)), dtype=bool)
        #: x bins in memory per (n, k) node, on the axes padded to whole tiles (0: not built or not
        #: loaded; ``n_bins``: the whole x range; ``_full = n_bins + 1``: and the tail above it, a whole
        #: node); nodes beyond the axes count as whole
        self.n_bins = self.spec.x_count - 1
        self._full = self.n_bins + 1
        self._nbins = np.zeros((self._loaded.shape[0] * t, self._loaded.shape[1] * t), dtype=np.int64)
        self._nbins[self.spec.n_count:, :] = self._full
        self._nbins[:, self.spec.k_count:] = self._full
        self._block = None          # min of _nbins over each 4 x 4 stencil (see _block_min)

    # -------------------------------------------------------------- tiles
    def _write_spec(self):
        self.folder.mkdir(parents=True, exist_ok=True)
        meta = self.folder / "spec.json"
        if not meta.exists():
            payload = json.dumps({"spec": asdict(self.spec),
                                  "geometry": channel_key(self.geometry, self.quantity, self.f_max),
                                  "format": FORMAT_VERSION, "motes": __version__,
                                  "miepython": mie.miepython.__version__}, indent=1, sort_keys=True)
            write_text_atomic(meta, payload)

    def _real_nodes(self, ij) -> np.ndarray:
        """bool [t, t]: the nodes of tile ij that lie on the axes."""
        t = self.spec.tile
        rows = np.arange(ij[0] * t, ij[0] * t + t) < self.spec.n_count
        cols = np.arange(ij[1] * t, ij[1] * t + t) < self.spec.k_count
        return rows[:, None] & cols[None, :]

    def _read_tile(self, ij):
        """(moments, start, tail, bins [t, t]) from the cache (NaN where not built), or None."""
        path = tile_path(self.folder, *ij)
        if not path.exists():
            return None
        t = self.spec.tile
        try:
            with np.load(path) as z:
                fmt = int(z["format"])
                if fmt == FORMAT_VERSION:
                    return z["moments"], z["start"], z["tail"], np.full((t, t), self._full, dtype=np.int64)
                if fmt == PARTIAL_FORMAT:
                    moments, bins = z["moments"], z["bins"].astype(np.int64)
                    if bins.shape != (t, t) or moments.shape[-2] != self.n_bins or (bins > self._full).any():
                        return None
                    return moments, z["start"], z["tail"], bins
        except (OSError, ValueError, KeyError):
            pass  # unreadable or foreign: rebuild
        return None

    def _write_tile(self, ij, moments, start, tail, bins):
        real = self._real_nodes(ij)
        with atomic_write(tile_path(self.folder, *ij)) as tmp:
            if (bins[real] >= self._full).all():
                np.savez(tmp, moments=moments, start=start, tail=tail, format=np.int64(FORMAT_VERSION))
            else:
                np.savez(tmp, moments=moments, start=start, tail=tail, bins=bins.astype(np.int64),
                         format=np.int64(PARTIAL_FORMAT))

    def _tile_bins(self, ij) -> np.ndarray:
        t = self.spec.tile
        return self._nbins[ij[0] * t:(ij[0] + 1) * t, ij[1] * t:(ij[1] + 1) * t]

    def _enter(self, ij, arrays, bins) -> None:
        """Put a tile (any of its nodes) in memory; a tile new to memory gets a slot at the next use."""
        new = ij not in self._tiles
        self._tiles[ij] = arrays
        view = self._tile_bins(ij)
        real = self._real_nodes(ij)
        view[real] = bins[real]
        self._block = None
        if new:
            self._loaded[ij] = True
            # new tiles get new slots at the end: the q slices already assembled stay valid and are
            # extended by the new tiles alone (no re-assembly of the whole table, see _stacked)
            self._slots = None
        else:
            self._refresh(ij)       # nodes added to a tile in use: its slot is re-assembled alone

    def _load_or_build(self, tiles, need=None) -> None:
        """Make tiles ready: ``need`` (int [n, k] on the padded node axes) gives the x bins each node
        must hold (``n_bins + 1``: all and the tail; default: every node of the tiles, whole).

        Nodes not built yet, or built up to a smaller x, are built (their missing bins appended);
        a node's bins do not depend on how its x range was split nor on the other nodes
        (:func:`~motes.dust.model.tablebuild.build_node`), so every value equals a whole build
        bit for bit.
        """
        import time

        t = self.spec.tile
        todo = []
        for ij in tiles:
            if ij not in self._tiles:
                got = self._read_tile(ij)
                if got is not None:
                    self._enter(ij, got[:3], got[3])
            have = self._tile_bins(ij)
            want = (np.full((t, t), self._full) if need is None else
                    np.minimum(need[ij[0] * t:(ij[0] + 1) * t, ij[1] * t:(ij[1] + 1) * t], self._full))
            jobs = [(a, b, int(have[a, b]), int(want[a, b])) for a in range(t) for b in range(t)
                    if want[a, b] > have[a, b]]
            if jobs:
                todo.append((ij, jobs))
        if not todo:
            return
        self._write_spec()
        bar = None
        if self.progress:
            from ...progress import progress_bar

            bar = progress_bar(total=len(todo), desc="motes: building optics lookup tiles", unit="tile",
                               leave=False)
        t0 = time.perf_counter()
        for ij, results in self._built(todo):
            if ij in self._tiles:
                moments, start, tail = (np.array(a) for a in self._tiles[ij])     # writable copies
                bins = self._tile_bins(ij).copy()
            else:
                # unbuilt nodes NaN (a read of them shows as a NaN result, never as a value), nodes
                # beyond the axes zero (as in a whole build)
                n_ch = results[0][4].shape[0]
                real = self._real_nodes(ij)
                moments = np.zeros((t, t, n_ch, self.n_bins, N_MOMENTS))
                start, tail = np.zeros((t, t, n_ch)), np.zeros((t, t, n_ch))
                moments[real], start[real] = np.nan, np.nan
                bins = np.where(real, 0, self._full)
            for a, b, b0, b1, mo, st, ta in results:
                moments[a, b, :, min(b0, self.n_bins):min(b1, self.n_bins)] = mo
                if b0 == 0:
                    start[a, b] = st
                if b1 > self.n_bins:
                    tail[a, b] = ta
                bins[a, b] = b1
            # another process (a demo part running alongside, a grid worker) may have written nodes of
            # this tile since it was read: keep those that hold more x bins than ours (the same values,
            # bit for bit), so that neither process's nodes are lost from the cache
            disk = self._read_tile(ij)
            if disk is not None:
                more = disk[3] > bins
                if more.any():
                    moments[more], start[more], tail[more] = disk[0][more], disk[1][more], disk[2][more]
                    bins[more] = disk[3][more]
            self._write_tile(ij, moments, start, tail, bins)
            self._enter(ij, (moments, start, tail), bins)
            self.tiles_built += 1
            self.nodes_built += len(results)
            if bar is not None:
                bar.update(1)
        if bar is not None:
            bar.close()
        self.build_seconds += time.perf_counter() - t0

    def _refresh(self, ij) -> None:
        """Re-assemble the q slices and the tail of a tile given more nodes or x bins (its slot stays)."""
        if ij not in self._order:
            return
        slot = self._order.index(ij)
        if self._stack is not None and slot < self._stack[1].shape[2]:
            slo, arr = self._stack
            for iq in range(slo, slo + arr.shape[1]):
                arr[:, iq - slo, slot] = self._slice(iq, [ij])[:, 0]
        if self._tails is not None and slot < self._tails.shape[1]:
            self._tails[:, slot] = np.moveaxis(self._tiles[ij][2], 2, 0)

    def _built(self, todo):
        """Yield (tile, node results) for the (tile, node jobs) in ``todo``, in worker processes if asked."""
        import multiprocessing

        # a table inherited by a forked daemonic worker (a fit's pool) keeps the driver's setting,
        # but such a process may not start processes of its own
        daemonic = multiprocessing.current_process().daemon
        if self.workers <= 1 or daemonic or sum(len(jobs) for _, jobs in todo) == 1:   # (one node: no pool)
            for ij, jobs in todo:
                yield ij, build_nodes(self.spec, self.geometry, *ij, self.quantity, self.f_max, jobs)
            return
        import concurrent.futures

        method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
        with concurrent.futures.ProcessPoolExecutor(
                max_workers=self.workers, mp_context=multiprocessing.get_context(method)) as pool:
            # weakly absorbing tiles (low k index) cost ~10x the opaque ones: submitted first, so that no core
            # waits for one of them at the end; slots do not depend on the build order (see _slot_map).
            # One job per node, so that the few nodes a sampler needs mid-run are built on every worker
            # too; a tile is yielded when its nodes are in.
            order = sorted(todo, key=lambda item: (item[0][1], item[0][0]))
            futures, left, parts = {}, {}, {}
            for ij, jobs in order:
                left[ij], parts[ij] = len(jobs), []
                for job in jobs:
                    fut = pool.submit(build_nodes, self.spec, self.geometry, *ij, self.quantity, self.f_max, [job])
                    futures[fut] = ij
            for fut in concurrent.futures.as_completed(futures):
                ij = futures.pop(fut)
                parts[ij].extend(fut.result())
                left[ij] -= 1
                if left[ij] == 0:
                    yield ij, sorted(parts.pop(ij), key=lambda r: (r[0], r[1]))

    def _stencil_tiles(self, pn, pk):
        """Tile indices (lowest and highest per axis) of each query's 4 x 4 stencil."""
        t, spec = self.spec.tile, self.spec
        fn = np.clip(np.floor(pn).astype(int), 1, spec.n_count - 3)
        fk = np.clip(np.floor(pk).astype(int), 1, spec.k_count - 3)
        return (fn - 1) // t, (fn + 2) // t, (fk - 1) // t, (fk + 2) // t

    def tiles_for(self, m) -> set:
        """Tiles whose nodes an interpolation at indices ``m`` touches."""
        pn, pk = self._positions(np.asarray(m).ravel())
        i0, i1, j0, j1 = self._stencil_tiles(pn, pk)
        width = self._loaded.shape[1]       # one integer per tile: np.unique of ints, not of rows (faster)
        codes = np.unique(np.concatenate([i * width + j for i in (i0, i1) for j in (j0, j1)]))
        return set(zip((codes // width).tolist(), (codes % width).tolist()))

    def _block_min(self) -> np.ndarray:
        """[n - 3, k - 3]: the fewest x bins among the 4 x 4 nodes of the stencil starting at each node."""
        if self._block is None:
            nb = self._nbins
            h, w = nb.shape[0] - 3, nb.shape[1] - 3
            block = nb[:h, :w].copy()
            for a in range(4):
                for b in range(4):
                    np.minimum(block, nb[a:a + h, b:b + w], out=block)
            self._block = block
        return self._block

    def _stencil_nodes(self, pn, pk):
        """First (n, k) node of each query's 4 x 4 stencil."""
        spec = self.spec
        fn = np.clip(np.floor(pn).astype(int), 1, spec.n_count - 3)
        fk = np.clip(np.floor(pk).astype(int), 1, spec.k_count - 3)
        return fn - 1, fk - 1

    def _all_loaded(self, pn, pk, need=None) -> bool:
        """True when every node of every query's stencil is in memory with ``need`` x bins (default: all)."""
        if not self._tiles:
            return False
        n0, k0 = self._stencil_nodes(pn, pk)
        return bool((self._block_min()[n0, k0] >= (self._full if need is None else need)).all())

    def bins_needed(self, x) -> np.ndarray:
        """x bins a tile must hold for interpolations up to size parameter ``x`` (any shape).

        The 4-point stencil at ``x`` reads C at nodes up to two above x's node, and C at node l
        sums bins 0 .. l - 1; rounded up to steps of ``_X_QUANTUM`` bins (at most every bin); above
        the table's top ``n_bins + 1``: every bin and the geometric-optics tail.
        """
        spec = self.spec
        pos = (np.log(np.asarray(x, dtype=float)) - np.log(spec.x_min)) / spec.dln_x
        node = np.clip(np.floor(np.nan_to_num(pos, nan=spec.x_count)), 1, spec.x_count - 3).astype(np.int64)
        need = -(-(node + 2) // _X_QUANTUM) * _X_QUANTUM
        # (the margin: the kernel tests ``ln x > ln x_top`` in its own rounding; tail where in doubt)
        return np.where(pos > spec.x_count - 1 - 1e-9, self._full, np.minimum(need, self.n_bins))

    def _positions(self, m):
        """Fractional positions of indices on the global n and k axes."""
        spec = self.spec
        n, k = m.real, np.maximum(m.imag, 0.0)
        pn = (np.log(n) - np.log(spec.n_min)) / spec.dln_n
        pk = np.log1p(k / spec.k_shift) / spec.dln_k
        bad = (pn < 1) | (pn > spec.n_count - 3) | (pk > spec.k_count - 3)
        if bad.any():
            b = m[bad][0]
            raise ModelError(
                f"effective index {b.real:.4g} + {b.imag:.4g}i lies outside the fast path's table "
                f"(n {spec.n_min * np.exp(spec.dln_n):.3g}-{spec.n_min * np.exp(spec.dln_n * (spec.n_count - 3)):.3g}, "
                f"k <= {spec.k[-3]:.3g}); use method='exact'")
        return pn, pk

    def ensure(self, m, x=None) -> None:
        """Load or build every node the interpolations at indices ``m`` (any shape) read.

        ``x``: the largest size parameter those interpolations reach (a number, or one per index);
        nodes then hold their x bins up to there only (more are built when a later query needs
        them, see :meth:`bins_needed`). Default: the whole x range. Only the 4 x 4 nodes of each
        index's stencil are built; tiles are the unit of the cache files.
        """
        m = np.asarray(m).ravel()
        pn, pk = self._positions(m)
        if x is None:
            per = np.full(m.shape, self._full, dtype=np.int64)
        else:
            per = np.broadcast_to(self.bins_needed(np.asarray(x, dtype=float)).ravel()
                                  if np.ndim(x) else self.bins_needed(float(x)), m.shape)
        n0, k0 = self._stencil_nodes(pn, pk)
        if self._tiles and (self._block_min()[n0, k0] >= per).all():
            return
        need = np.zeros(self._nbins.shape, dtype=np.int64)
        for a in range(4):
            for b in range(4):
                np.maximum.at(need, (n0 + a, k0 + b), per)
        short = need > self._nbins
        if not short.any():
            return
        t = self.spec.tile
        rows, cols = np.nonzero(short)
        tiles = sorted(set(zip((rows // t).tolist(), (cols // t).tolist())))
        self._load_or_build(tiles, need)

    # -------------------------------------------------------------- q slices
    def _slot_map(self) -> np.ndarray:
        """Tile (i, j) -> slot in the compact arrays (-1: not loaded)."""
        if self._slots is None:
            slots = np.full(self._loaded.shape, -1, dtype=np.int64)
            known = set(self._order)
            self._order = list(self._order) + sorted(ij for ij in self._tiles if ij not in known)
            for s_, ij in enumerate(self._order):
                slots[ij] = s_
            self._slots = slots
        return self._slots

    def _slice(self, iq: int, tiles=None) -> np.ndarray:
        """C for q = q_min + iq q_step on ``tiles`` (default: every loaded tile, in slot order).

        float32 [n_ch, len(tiles), t, t, n_x]; each tile's values are computed
        on their own, so they do not depend on which other tiles are loaded.
        """
        spec = self.spec
        q = spec.q_min + iq * spec.q_step
        self._slot_map()
        tiles = self._order if tiles is None else tiles
        t = spec.tile
        out = np.empty((self.n_channels, len(tiles), t, t, spec.x_count), dtype=np.float32)
        edges = spec.ln_x
        centre = 0.5 * (edges[1:] + edges[:-1])
        coef = (-q) ** np.arange(N_MOMENTS) / FACTORIALS           # [5]
        scale = np.exp(-q * centre)                                   # [bins]
        for slot, ij in enumerate(tiles):
            moments, start, _ = self._tiles[ij]
            bins = (moments @ coef) * scale                           # [t, t, ch, bins]
            c0 = start * spec.x_min ** (1.0 - q) / (1.0 + self._ray - q)   # [t, t, ch]
            cum = np.concatenate([c0[..., None], c0[..., None] + np.cumsum(bins, axis=-1)], axis=-1)
            out[:, slot] = np.moveaxis(cum, 2, 0)
        return out

    def _tail_box(self) -> np.ndarray:
        self._slot_map()
        done = 0 if self._tails is None else self._tails.shape[1]
        if done == len(self._order):
            return self._tails
        t = self.spec.tile
        out = np.empty((self.n_channels, len(self._order) - done, t, t))
        for slot, ij in enumerate(self._order[done:]):
            out[:, slot] = np.moveaxis(self._tiles[ij][2], 2, 0)
        self._tails = out if self._tails is None else np.concatenate([self._tails, out], axis=1)
        return self._tails

    def _stacked(self, q) -> tuple[int, np.ndarray]:
        spec = self.spec
        lo = int(np.floor((q.min() - spec.q_min) / spec.q_step)) - 1
        hi = int(np.floor((q.max() - spec.q_min) / spec.q_step)) + 3
        lo, hi = max(lo, 0), min(hi, spec.q_count)
        self._slot_map()
        old = self._stack
        if old is not None and old[1].shape[2] < len(self._order):
            # tiles loaded since: assemble their slices alone and append them (slots are appended too)
            slo, arr = old
            new = self._order[arr.shape[2]:]
            ext = np.stack([self._slice(iq, new) for iq in range(slo, slo + arr.shape[1])], axis=1)
            self._stack = old = None
            old = self._stack = (slo, np.concatenate([arr, ext], axis=2))
            del arr, ext
        if old is not None:
            slo, arr = old
            if slo <= lo and slo + arr.shape[1] >= hi:
                return old
            # grow with a margin, so that a run exploring q (one point at a time) re-assembles a few
            # times, not at every new slice; slices already assembled are copied, never recomputed
            lo = max(min(lo, slo) - (_Q_MARGIN if lo < slo else 0), 0)
            hi = min(max(hi, slo + arr.shape[1]) + (_Q_MARGIN if hi > slo + arr.shape[1] else 0), spec.q_count)
        t = spec.tile
        arr = np.empty((self.n_channels, hi - lo, len(self._slot_map_order()), t, t, spec.x_count), dtype=np.float32)
        for iq in range(lo, hi):
            if old is not None and old[0] <= iq < old[0] + old[1].shape[1]:
                arr[:, iq - lo] = old[1][:, iq - old[0]]
            else:
                arr[:, iq - lo] = self._slice(iq)
        self._stack = None
        del old
        self._stack = (lo, arr)
        return self._stack

    def _slot_map_order(self):
        self._slot_map()
        return self._order

    # -------------------------------------------------------------- evaluate
    def integrals(self, m, x1, x2, q) -> np.ndarray:
        """``C(x2) - C(x1)`` per channel for flattened queries.

        Parameters
        ----------
        m : complex ndarray[n]
        x1, x2 : ndarray[n]
        q : ndarray[n]

        Returns
        -------
        ndarray[n_channels, n]
        """
        m = np.asarray(m, dtype=complex).ravel()
        q = np.asarray(q, dtype=float).ravel()
        spec = self.spec
        if (q < spec.q_min + spec.q_step).any() or (q > spec.q_max - 2 * spec.q_step).any():
            raise ModelError(f"q must lie in [{spec.q_min + spec.q_step:g}, {spec.q_max - 2 * spec.q_step:g}] "
                             "for the fast path; use method='exact'")
        pn, pk = self._positions(m)
        x_hi = np.maximum(np.asarray(x1, dtype=float).ravel(), np.asarray(x2, dtype=float).ravel())
        need = self.bins_needed(x_hi)
        if not self._all_loaded(pn, pk, need):
            self.ensure(m, x_hi)
        q_lo, stack = self._stacked(q)
        out = np.empty((self.n_channels, m.size))
        _interpolate_batch(stack, self._tail_box(), self._slot_map(), spec.tile, self._ray,
                           spec.q_min + q_lo * spec.q_step, spec.q_step, pn, pk,
                           np.log(np.asarray(x1, dtype=float).ravel()), np.log(np.asarray(x2, dtype=float).ravel()),
                           q, np.log(spec.x_min), spec.dln_x, out)
        if not np.isfinite(out).all():
            raise ModelError("the fast path hit an unbuilt part of its table (internal error)")
        return out


@accepts_quantities
def rainbow_indices(angles_deg, p_max: int = 6) -> np.ndarray:
    """Real refractive indices at which a geometric-optics rainbow sits at one of the angles.

    The order-p rainbow (p - 1 internal reflections) of a sphere deviates light
    by ``D = (p - 1) pi + 2 i - 2 p r`` at ``cos i = sqrt((n^2 - 1) / (p^2 - 1))``,
    ``sin r = sin i / n`` (e.g. van de Hulst 1957, sec. 13.2). Near these
    indices the size-integrated side scattering of weakly absorbing spheres
    changes abruptly with n, faster than the table's n step can follow.

    Returns
    -------
    ndarray
        Sorted indices in (1, 3) for orders 2..``p_max``.
    """
    n = np.linspace(1.0005, 3.0, 40000)
    out = []
    for p in range(2, p_max + 1):
        ci = np.sqrt((n**2 - 1) / (p * p - 1))
        ok = ci <= 1
        i = np.arccos(np.clip(ci, 0, 1))
        r = np.arcsin(np.sin(i) / n)
        theta = np.degrees(np.arccos(np.cos((p - 1) * np.pi + 2 * i - 2 * p * r)))
        for a in np.atleast_1d(angles_deg):
            sign = np.sign(theta - a)
            idx = np.flatnonzero((np.diff(sign) != 0) & ok[1:])
            out.extend(n[idx].tolist())
    return np.unique(np.round(out, 4))


#: weak absorbers near a rainbow index (|n - n_c| < _CAUSTIC_DN, k < _CAUSTIC_K) get a note (k < 2e-3:
#: at 0.6 um the rainbow still shows for grains up to ~100 um, k x ~ 1)
_CAUSTIC_DN, _CAUSTIC_K = 0.02, 2e-3


class ModelTable:
    """The fast path bound to one :class:`~motes.dust.model.colours.DiskColourModel`.

    ``table`` holds the total intensity; ``polarised`` (a :class:`LookupTable`
    of quantity ``"polarised"``) is there only when the model has polarised
    colours.
    """

    def __init__(self, model, table: LookupTable, polarised: LookupTable | None = None):
        self.model = model
        self.table = table
        self.polarised = polarised
        self._rainbows = rainbow_indices(model.geometry.angles_deg) if model.geometry.phase == "mie" \
            else np.array([])

    @accepts_quantities
    def node_values(self, m, wavelength, a_min, q, a_max, quantity: str = "total") -> np.ndarray:
        """Monochromatic flux ratios R at the band nodes, ``ndarray[N, L]``.

        ``quantity="polarised"``: the polarised-intensity ratio (signed), from
        the polarised table.
        """
        from ...optics.sizes import power_law_cross_section

        table = self.table
        if quantity == "polarised":
            if self.polarised is None:
                raise ModelError("this model has no polarised lookup table (no polarised colours)")
            table = self.polarised

        m = np.asarray(m, dtype=complex)
        n_pts, n_lam = m.shape
        lam = np.asarray(wavelength, dtype=float)[None, :]
        a_min = np.asarray(a_min, dtype=float)[:, None]
        a_max = np.asarray(a_max, dtype=float)[:, None]
        q2 = np.broadcast_to(np.asarray(q, dtype=float)[:, None], (n_pts, n_lam))
        wn = 2 * np.pi / lam
        x_max = wn * a_max
        if x_max.max() > table.spec.x_top:
            note = (f"fast path: grains beyond x = {table.spec.x_top:.3g} (a > "
                    f"{table.spec.x_top * lam.min() / (2 * np.pi):.3g} um at {lam.min():.3g} um) use the "
                    "geometric-optics continuation of the table")
            if note not in self.model.notes:
                self.model.notes = self.model.notes + (note,)
        if self._rainbows.size:
            weak = m.imag < _CAUSTIC_K
            if weak.any():
                near = np.min(np.abs(m.real[weak][:, None] - self._rainbows[None, :]), axis=1) < _CAUSTIC_DN
                if near.any():
                    note = ("fast path: some mixtures are weakly absorbing (k < 2e-3) with n within 0.02 of "
                            "an index where a Mie rainbow crosses the scattering angle; their side scattering "
                            "changes abruptly with n there and the table smooths it (errors up to ~0.1 mag "
                            "measured); use method='exact' or several angles for such grains")
                    if note not in self.model.notes:
                        self.model.notes = self.model.notes + (note,)
        ints = table.integrals(m, (wn * a_min).ravel(), x_max.ravel(), q2.ravel())
        ints = ints.reshape(table.n_channels, n_pts, n_lam)
        if self.model.geometry.phase == "mie" or quantity == "polarised":
            value = ints[0]
        else:
            value = ints[0] * self.model.geometry.hg_phase(ints[1] / ints[0])
        norm = np.pi * power_law_cross_section(a_min[:, 0], a_max[:, 0], np.asarray(q, dtype=float))
        return (lam / (2 * np.pi)) ** (3.0 - q2) * value / norm[:, None]


def reachable_indices(model, porosity_max: float = 0.95, step: float = 0.1) -> np.ndarray:
    """Effective indices of the model's mixtures over a lattice of the parameter space.

    Fractions on a simplex lattice of ``step`` (vertices included) times
    porosity 0..``porosity_max``, at every band node. Used to decide which
    table tiles to build in advance.
    """
    k = len(model.materials)
    div = int(round(1 / step))
    combos = [c for c in _compositions(div, k)]
    f = np.asarray(combos, dtype=float) / div
    por = np.linspace(0.0, porosity_max, int(round(porosity_max / step)) + 1)
    ff = np.repeat(f, por.size, axis=0)
    pp = np.tile(por, f.shape[0])
    return model.effective_index(ff, pp)


def _compositions(total: int, parts: int):
    if parts == 1:
        yield (total,)
        return
    for first in range(total + 1):
        for rest in _compositions(total - first, parts - 1):
            yield (first,) + rest


_TABLES: dict[tuple, LookupTable] = {}

#: f_max nodes of the tables a per-point f_max (a fitted f_max, ``f_max_tables="nodes"``) is
#: interpolated between: step 0.05 from 0 (the solid sphere's table) to 0.9; 4-point Lagrange in
#: f_max. Step 0.1 left polarised ratios off by up to 4% (total within 0.15%); interpolation
#: error against the exact path at the f_max itself measured by benchmarks/bench_hollow_fmax.py
#: (docs/optics.md, "f_max per point") and tests/test_dust_hollow_fmax.py.
F_MAX_NODES = tuple(round(0.05 * i, 10) for i in range(19))
#: f_max an interpolated (fitted) f_max may take on the fast path. Below 0.1 the hollow-sphere
#: average of weak absorbers changes faster than the nodes follow (the core first shifts the sphere
#: resonances): measured up to 1.1% in R and 10% in polarised R at f_max 0.005-0.065, k 1.7e-4-1e-2
#: (benchmarks/bench_hollow_fmax.py; within 0.09% and 0.3% for f_max >= 0.1).
F_MAX_FAST_RANGE = (0.1, F_MAX_NODES[-1])


def f_max_terms(f_max, how: str = "nodes", nodes=None):
    """Split per-point f_max values into tables: ``[(table f_max, rows, weight[rows]), ...]``.

    ``how="values"``: one table per distinct value, weight 1. ``how="nodes"``:
    4-point Lagrange interpolation between the tables at :data:`F_MAX_NODES`
    (the stencil clamped inside the nodes; a value on a node uses that node's
    table alone). With the default nodes, f_max outside :data:`F_MAX_FAST_RANGE`
    (0.1-0.9) is refused: above, the fast path has no table; below, the
    interpolation misses the fast change of weak absorbers (measured; see the
    constant). ``nodes``: other equally spaced nodes from 0 (no range check;
    benchmarks compare node steps).

    Examples
    --------
    >>> [(f, rows.tolist(), w.round(3).tolist()) for f, rows, w in f_max_terms([0.3], "nodes")]
    [(0.3, [True], [1.0])]
    >>> [f for f, _, _ in f_max_terms([0.37])]
    [0.3, 0.35, 0.4, 0.45]
    """
    values = np.atleast_1d(np.asarray(f_max, dtype=float))
    if how == "values":
        return [(float(v), values == v, np.ones(int((values == v).sum()))) for v in np.unique(values)]
    lo, hi = F_MAX_FAST_RANGE if nodes is None else (0.0, float(np.max(nodes)))
    nodes = np.asarray(F_MAX_NODES if nodes is None else nodes, dtype=float)
    step = nodes[1] - nodes[0]
    outside = (values > hi + 1e-12) | (values < lo - 1e-12)
    if outside.any():
        raise ModelError(f"f_max = {values[outside][0]:g}: the fast path interpolates a fitted f_max between "
                         f"tables at f_max nodes (step {step:g}) for f_max in [{lo:g}, {hi:g}] only; keep the "
                         "prior within that range, list the values as a grid axis, or use method = 'exact'")
    pos = values / step
    near = np.abs(pos - np.round(pos)) < 1e-9            # on a node: that table alone
    first = np.clip(np.floor(pos).astype(int) - 1, 0, nodes.size - 4)
    frac = pos - first - 1.0
    weights = np.stack([-frac * (frac - 1) * (frac - 2) / 6, (frac + 1) * (frac - 1) * (frac - 2) / 2,
                        -(frac + 1) * frac * (frac - 2) / 2, (frac + 1) * frac * (frac - 1) / 6], axis=1)
    index = first[:, None] + np.arange(4)[None, :]
    on = np.round(pos).astype(int)
    weights = np.where(near[:, None], (index == on[:, None]).astype(float), weights)
    out = []
    for j, node in enumerate(nodes):
        w = np.where(index == j, weights, 0.0).sum(axis=1)
        rows = (index == j).any(axis=1) & (w != 0.0)
        if rows.any():
            out.append((float(node), rows, w[rows]))
    return out

#: hollow-sphere tables: x range cut to the model's a_max in steps of this many ln x nodes
_HOLLOW_X_QUANTUM = 20


def _default_spec(model) -> TableSpec:
    """The default table; for hollow spheres its x range cut to what the model's a_max needs.

    A hollow-sphere node costs ~60x a sphere node over the full x range (measured at
    m = 2 + 0.8i: 4.7 s against 0.076 s), most of it at the largest x, so the table
    stops above ``2 pi a_max / lambda_min`` (rounded up to ``_HOLLOW_X_QUANTUM`` nodes,
    so that nearby a_max share a table); a larger a_max given per call uses the
    geometric-optics continuation above the table, with its note.
    """
    spec = TableSpec()
    if not getattr(model, "hollow", getattr(model, "f_max", None) is not None):
        return spec
    x_need = 2 * np.pi * model.a_max / float(np.min(model.node_wavelength)) * 1.02
    count = int(np.ceil(np.log(max(x_need, spec.x_min) / spec.x_min) / spec.dln_x)) + 4
    count = _HOLLOW_X_QUANTUM * -(-count // _HOLLOW_X_QUANTUM)
    return dataclasses.replace(spec, x_count=min(spec.x_count, max(count, _HOLLOW_X_QUANTUM)))


#: hollow-sphere tables reaching beyond this size parameter are announced before they are built:
#: a node over the full x range (to 1.26e4, a_max = 1 mm at 0.5 um) costs ~60x a sphere node
#: (4.7 s against 0.076 s measured at m = 2 + 0.8i; weak absorbers cost more), so their first
#: build takes hours on a 2-core machine (docs/optics.md, "First-run cost")
HOLLOW_X_WARN = 2000.0
HOLLOW_LARGE_NOTE = ("fast path: hollow-sphere grains with a_max = {a_max:g} um need lookup tables up to x = "
                     "{x_top:.3g}; one table node there costs ~60x a sphere node (4.7 s measured at m = 2 + 0.8i, "
                     "more for weak absorbers), so building the tiles a run needs can take hours on first use "
                     "(cached afterwards); a smaller a_max, or grains = 'spheres', avoids it")


def _warn_large_hollow_table(model, spec: TableSpec, progress: bool) -> None:
    """Add the large-table note to the model; say it on stderr once before a build can start."""
    import sys

    note = HOLLOW_LARGE_NOTE.format(a_max=float(getattr(model, "a_max", float("nan"))), x_top=spec.x_top)
    if note in getattr(model, "notes", ()):
        return
    model.notes = tuple(getattr(model, "notes", ())) + (note,)
    if progress:
        print(f"motes: {note}", file=sys.stderr)


def _x_reach(model, shape):
    """Largest size parameter per index of ``effective_index`` ([N, L] at the band nodes): the model's
    a_max at each node wavelength; None (the whole x range) for a model without both."""
    a_max, lam = getattr(model, "a_max", None), getattr(model, "node_wavelength", None)
    if a_max is None or lam is None or len(shape) != 2 or shape[1] != np.size(lam):
        return None
    return np.broadcast_to(2 * np.pi * float(a_max) / np.asarray(lam, dtype=float)[None, :], shape)


def table_for_model(model, spec: TableSpec | None = None, progress: bool = True,
                    fractions=None, porosity=None, lazy: bool = False, f_max: float | None = None) -> ModelTable:
    """The fast path for ``model``: loads cached tiles, builds the missing ones.

    Parameters
    ----------
    model : DiskColourModel
    spec : TableSpec, optional
    progress : bool
        Progress bar on stderr while building.
    fractions, porosity : ndarray, optional
        Build only the tiles these mixtures need (e.g. the points of a grid);
        default: every mixture on a 10% lattice with porosity 0-0.95
        (:func:`reachable_indices`). Tiles missing later are built on demand.
    lazy : bool
        Build nothing now; every evaluation builds the tiles it needs.
    f_max : float, optional
        The tables of this f_max instead of the model's own (a model with f_max
        per point; f_max = 0 is the solid sphere's table, same axes).

    Tables are shared between models of the same geometry (and grain model) in one process. A
    hollow-sphere model (``model.f_max`` not None) uses tables of its own f_max, in cache folders
    of their own, built only for runs that use them.
    The polarised-intensity table is made ready only for a model with
    polarised colours (``model.has_polarised``), so total-intensity runs
    build and load exactly what they did before.
    """
    spec = spec or model.table_spec or _default_spec(model)
    wanted = ["total"]
    if getattr(model, "has_polarised", False):
        wanted.append("polarised")
    tables = []
    if f_max is None:
        f_max = getattr(model, "f_max", None)
    elif float(f_max) == 0.0:
        f_max = None        # the solid sphere (Min et al. 2005: f_max = 0), on the hollow-sphere axes
    if f_max is not None and spec.x_top > HOLLOW_X_WARN:
        _warn_large_hollow_table(model, spec, progress)
    for quantity in wanted:
        key = (channel_key(model.geometry, quantity, f_max), spec)
        table = _TABLES.get(key)
        if table is None:
            table = LookupTable(model.geometry, spec, progress=progress, quantity=quantity, f_max=f_max)
            _TABLES[key] = table
        if lazy or (quantity == "total" and not getattr(model, "has_total", True)):
            pass    # nothing to build now (a polarised-only model builds no total tiles)
        else:
            if fractions is None:
                m = reachable_indices(model)
            else:
                f = np.atleast_2d(np.asarray(fractions, dtype=float))
                p = np.broadcast_to(np.asarray(0.0 if porosity is None else porosity, dtype=float), (f.shape[0],))
                m = model.effective_index(f, p)
            table.ensure(m, _x_reach(model, m.shape))
        tables.append(table)
    return ModelTable(model, tables[0], tables[1] if len(tables) > 1 else None)
