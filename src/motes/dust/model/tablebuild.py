"""Building the fast path's lookup tables: axes, per-node moments.

See :mod:`motes.dust.model.tables` for what the tables hold and how they are used.
Each (n, k) node samples the size-parameter integrand with the exact path's
rule (:func:`motes.dust.model.sampling.bin_rule`) inside every ``ln x`` bin and
keeps five moments per bin, ``M_j = sum w s (ln t - ln t_c)^j / 2``, from
which the bin integral of ``t^-q s / 2`` follows for any q as
``t_c^-q sum_j (-q)^j M_j / j!`` (``|q ln(t/t_c)| <= 0.17``: truncation
error below 1e-6).
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from ...optics import hollow, mie
from .sampling import SizeSampling, bin_rule

__all__ = [
    "FORMAT_VERSION",
    "N_MOMENTS",
    "QUANTITIES",
    "TableSpec",
    "build_node",
    "build_tile",
    "build_nodes",
    "tail_first_bin",
    "tile_rows",
    "channel_key",
    "rayleigh_exponents",
    "tile_path",
]

FORMAT_VERSION = 1
#: builder of the solid-sphere Mie-phase channels (total and polarised intensity), in their cache key:
#: since it, :func:`motes.optics.mie.intensities_for_index` (node values moved by rounding only, at most
#: 8e-13 of a moment, benchmarks/bench_tilebuild.py), so tiles of the per-x miepython loop before it sit
#: in other folders and are never mixed with these. Henyey-Greenstein and hollow-sphere tables keep
#: their builder and their keys.
SPHERE_BUILDER = "one-index-1"
N_MOMENTS = 5
FACTORIALS = np.array([math.factorial(j) for j in range(N_MOMENTS)], dtype=float)


@dataclass(frozen=True)
class TableSpec:
    """Axes and sampling of a lookup table (all grids uniform in the log).

    Parameters
    ----------
    n_min, dln_n, n_count : float, float, int
        ``n_i = n_min exp(i dln_n)``.
    k_shift, dln_k, k_count : float, float, int
        ``k_j = k_shift (exp(j dln_k) - 1)``: uniform in ``ln(k + k_shift)``, so
        that k = 0 is a node, the grid is linear in k well below ``k_shift``
        (where absorption hardly matters) and logarithmic above.
    x_min, dln_x, x_count : float, float, int
        Size-parameter nodes ``x_l = x_min exp(l dln_x)``.
    q_min, q_step, q_count : float, float, int
        q grid on which C is assembled and interpolated.
    tile : int
        Tiles hold ``tile x tile`` (n, k) nodes.
    sampling : SizeSampling
        Quadrature rule inside the x bins.
    """

    n_min: float = 0.8
    dln_n: float = 0.005
    n_count: int = 463
    k_shift: float = 1e-6
    dln_k: float = 0.4
    k_count: int = 46
    x_min: float = 0.02
    dln_x: float = 0.025
    x_count: int = 535
    q_min: float = 1.5
    q_step: float = 0.1
    q_count: int = 51
    tile: int = 4
    sampling: SizeSampling = field(default_factory=lambda: SizeSampling(c0=2e-4, c_max=0.05))

    @property
    def ln_n(self) -> np.ndarray:
        return np.log(self.n_min) + self.dln_n * np.arange(self.n_count)

    @property
    def k(self) -> np.ndarray:
        return self.k_shift * np.expm1(self.dln_k * np.arange(self.k_count))

    @property
    def ln_x(self) -> np.ndarray:
        return np.log(self.x_min) + self.dln_x * np.arange(self.x_count)

    @property
    def x_top(self) -> float:
        return float(np.exp(self.ln_x[-1]))

    @property
    def q_max(self) -> float:
        return self.q_min + self.q_step * (self.q_count - 1)

    def key(self, channel_key: str) -> str:
        """Hash naming the cache folder of this spec for one tabulated quantity."""
        fields = {"spec": asdict(self), "channels": channel_key, "format": FORMAT_VERSION,
                  "miepython": mie.miepython.__version__}
        if _one_index_built(channel_key):
            fields["builder"] = SPHERE_BUILDER
        payload = json.dumps(fields, sort_keys=True)
        return hashlib.sha256(payload.encode()).hexdigest()[:20]


#: What a table tabulates: the total intensity (``|S1|^2 + |S2|^2``, or the Henyey-Greenstein
#: channels) or the polarised intensity (``|S1|^2 - |S2|^2``, Mie phase function only).
QUANTITIES = ("total", "polarised")


def channel_key(geometry, quantity: str = "total", f_max: float | None = None) -> str:
    # the Henyey-Greenstein channels do not depend on the angles; the polarised table is its own
    # cache folder (built only for runs with polarised colours), the total one keeps its key; hollow
    # spheres (f_max not None) get folders of their own per f_max, built only for runs that use them
    if quantity == "polarised":
        key = "polarised:" + geometry.key()
    else:
        key = "hg" if geometry.phase == "hg" else geometry.key()
    if f_max is not None:
        key = f"hollow{float(f_max)!r}:n{hollow.DEFAULT_F_NODES}:" + key
    return key


def _one_index_built(channel_key: str) -> bool:
    """True for the channels :func:`_channels` builds with the one-index kernel (solid spheres, Mie phase)."""
    return not (channel_key == "hg" or channel_key.startswith("hollow"))


# ------------------------------------------------------------------- building
def _channels(geometry, m: np.ndarray, t: np.ndarray, quantity: str = "total",
              f_max: float | None = None) -> np.ndarray:
    """Integrand channels s(t) [n_channels, n] for one index (m: that index repeated, same length as t);
    hollow spheres with f_max."""
    if f_max is not None:
        if quantity == "polarised" or geometry.phase == "mie":
            total, polarised = hollow.hollow_intensities(m, t, geometry.angles_rad, f_max)
            return (polarised if quantity == "polarised" else total)[None, :]
        e = hollow.hollow_efficiencies(m, t, f_max)
        base = 2.0 * np.pi * t**2 * e.q_sca
        return np.stack([base, base * e.g])
    if quantity == "polarised" or geometry.phase == "mie":
        # one index per node: the one-index kernel (miepython's series, ~1.6x faster per x; same
        # values up to rounding, measured in benchmarks/bench_tilebuild.py)
        total, polarised = mie.intensities_for_index(m[0], t, geometry.angles_rad)
        return (polarised if quantity == "polarised" else total)[None, :]
    e = mie.efficiencies(m, t)
    base = 2.0 * np.pi * t**2 * e.q_sca
    return np.stack([base, base * e.g])


def rayleigh_exponents(geometry) -> np.ndarray:
    # small-x power of s(t): |S|^2 ~ t^6; t^2 Q_sca ~ t^6; t^2 Q_sca g ~ t^8
    return np.array([6.0]) if geometry.phase == "mie" else np.array([6.0, 8.0])


def tail_first_bin(spec: TableSpec) -> int:
    """First x bin holding samples of the top decade (``t > x_top / 10``) the tail is the mean over."""
    return max(int(np.floor((np.log(spec.x_top / 10) - spec.ln_x[0]) / spec.dln_x)) - 1, 0)


def build_node(spec: TableSpec, geometry, m: complex, quantity: str = "total", f_max: float | None = None,
               bins=None, tail: bool | None = None):
    """Moments of one (n, k) node (``quantity``: one of :data:`QUANTITIES`; hollow spheres with ``f_max``).

    ``bins``: ``(b0, b1)``, build only x bins b0 .. b1 - 1 (default: all). Every bin's
    samples and moments depend on that bin alone, so a node built in x ranges equals the
    whole build bit for bit (tests/test_dust_tiles_lazy_x.py); the tail needs the samples of
    the top decade, so a range reaching the top also evaluates (without storing them) the
    samples of that decade below b0. ``tail``: compute the tail (default: when the range
    reaches the top bin; True needs b1 at the top, and then allows the empty range b0 = b1, the
    tail alone).

    Returns
    -------
    moments : ndarray[n_channels, b1 - b0, 5]
        Per bin, ``sum w s (ln t - ln t_c)^j / 2`` (t_c the bin centre).
    start : ndarray[n_channels]
        ``s(x_min) / 2``, for the Rayleigh part below the table.
    tail : ndarray[n_channels]
        ``mean s / (2 t^2)`` over the top decade, for the tail above the table
        (0 unless computed).
    """
    n_bins_all = spec.x_count - 1
    b0, b1 = (0, n_bins_all) if bins is None else (int(bins[0]), int(bins[1]))
    top_needed = b1 == n_bins_all if tail is None else bool(tail)
    if not (0 <= b0 < b1 <= n_bins_all or (top_needed and b0 == b1 == n_bins_all)) or \
            (top_needed and b1 != n_bins_all):
        raise ValueError(f"bin range {bins!r} outside 0..{n_bins_all} (tail {top_needed})")
    s0 = min(b0, tail_first_bin(spec)) if top_needed else b0
    edges = spec.ln_x[s0:b1 + 1]
    t, w, owner = bin_rule(edges, spec.sampling, m.imag)
    mm = np.full(t.size, m)
    s = 0.5 * _channels(geometry, mm, t, quantity, f_max)
    n_ch = s.shape[0]
    tail = np.zeros(n_ch)
    if top_needed:
        top = t > spec.x_top / 10
        tail = (w[top] * s[:, top] / t[top] ** 2).sum(axis=1) / w[top].sum()
    if s0 < b0:      # samples evaluated for the tail only
        keep = owner >= b0 - s0
        t, w, owner, s = t[keep], w[keep], owner[keep] - (b0 - s0), s[:, keep]
        edges = spec.ln_x[b0:b1 + 1]
    centre = 0.5 * (edges[1:] + edges[:-1])
    u = np.log(t) - centre[owner]
    n_bins = edges.size - 1
    moments = np.empty((n_ch, n_bins, N_MOMENTS))
    upow = np.ones_like(u)
    for j in range(N_MOMENTS):
        for c in range(n_ch):
            moments[c, :, j] = np.bincount(owner, w * s[c] * upow, minlength=n_bins)
        upow = upow * u
    start = 0.5 * _channels(geometry, np.array([m]), np.array([spec.x_min]), quantity, f_max)[:, 0]
    return moments, start, tail


def tile_path(folder: Path, i: int, j: int) -> Path:
    return folder / f"tile_{i:03d}_{j:03d}.npz"


def tile_rows(spec: TableSpec, i: int) -> int:
    """Number of n rows tile row ``i`` holds (``spec.tile``, fewer at the top of the n axis)."""
    return len(range(i * spec.tile, min((i + 1) * spec.tile, spec.n_count)))


def build_tile(spec: TableSpec, geometry, i: int, j: int, quantity: str = "total", f_max: float | None = None,
               rows=None, bins=None):
    """Moments of the (n, k) nodes of tile (i, j); returns (moments, start, tail).

    ``rows``: build only these local n rows (0 .. tile - 1) and leave the others zero, so
    that one tile can be split over processes; each node's values do not depend on it.
    ``bins``: ``(b0, b1)``, only these x bins (moments ``[..., b1 - b0, 5]``; see
    :func:`build_node`).
    """
    ln_n, kk = spec.ln_n, spec.k
    rows_all = range(i * spec.tile, min((i + 1) * spec.tile, spec.n_count))
    rows = rows_all if rows is None else [rows_all[a] for a in rows]
    cols = range(j * spec.tile, min((j + 1) * spec.tile, spec.k_count))
    n_ch = 1 if (geometry.phase == "mie" or quantity == "polarised") else 2
    n_bins = spec.x_count - 1 if bins is None else int(bins[1]) - int(bins[0])
    moments = np.zeros((spec.tile, spec.tile, n_ch, n_bins, N_MOMENTS))
    start = np.zeros((spec.tile, spec.tile, n_ch))
    tail = np.zeros((spec.tile, spec.tile, n_ch))
    for r in rows:
        a = r - i * spec.tile
        for b, c in enumerate(cols):
            m = complex(np.exp(ln_n[r]), kk[c])
            moments[a, b], start[a, b], tail[a, b] = build_node(spec, geometry, m, quantity, f_max, bins)
    return moments, start, tail


def build_nodes(spec: TableSpec, geometry, i: int, j: int, quantity: str = "total", f_max: float | None = None,
                jobs=()):
    """Some nodes of tile (i, j), each over an x bin range: ``jobs`` of ``(a, b, b0, b1)`` (local n row a,
    local k column b, bins b0 .. b1 - 1; ``b1 = x_count`` (one past the last bin) asks for every bin up
    to the top and the tail); returns ``[(a, b, b0, b1, moments, start, tail), ...]`` as
    :func:`build_node` gives them (a node's values do not depend on the others or on the split)."""
    ln_n, kk = spec.ln_n, spec.k
    top = spec.x_count - 1
    out = []
    for a, b, b0, b1 in jobs:
        m = complex(np.exp(ln_n[i * spec.tile + a]), kk[j * spec.tile + b])
        arrays = build_node(spec, geometry, m, quantity, f_max, (min(b0, top), min(b1, top)), tail=b1 > top)
        out.append((a, b, b0, b1) + tuple(arrays))
    return out
