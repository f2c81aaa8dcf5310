"""Mixtures on a simplex grid as integer compositions, counted and ranked exactly.

A grid of volume fractions with step ``1/n`` over K materials is the set of
integer compositions ``c = (c_0, ..., c_{K-1})`` with ``sum(c) = n`` and
``c_j >= 0``; the fractions are ``c / n``. Working on the integers keeps the
enumeration exact (no float drift in ``0.1 + 0.2``) and lets every mixture carry
a stable integer rank, so any slice of ranks can be generated on its own, in any
process, and always gives the same mixtures.

Order: reverse lexicographic, so rank 0 is the first material pure,
``(n, 0, ..., 0)``, and the last rank is the last material pure.
Per-material bounds ``lo_j <= c_j <= hi_j`` restrict the set; counting and
(un)ranking then use a small table of completions instead of the binomial.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from ...errors import GridError

__all__ = ["SimplexGrid", "count_compositions"]

# ranks are int64; refuse grids whose composition count would not fit with room to spare
_MAX_RANKS = 2**62


def count_compositions(total: int, parts: int) -> int:
    """Number of ways to write ``total`` as an ordered sum of ``parts`` integers >= 0.

    Parameters
    ----------
    total : int
        The integer sum n (= 1/Δ for a fraction step Δ).
    parts : int
        Number of components K (>= 1).

    Returns
    -------
    int
        C(n + K - 1, K - 1), exact.

    Notes
    -----
    "Stars and bars": n indistinguishable units in K ordered boxes
    (Feller 1968, *An Introduction to Probability Theory*, ch. II.5).

    Examples
    --------
    >>> count_compositions(20, 4)   # 4 materials in steps of 5 %
    1771
    """
    if parts < 1 or total < 0:
        raise GridError(f"compositions need parts >= 1 and total >= 0, got parts={parts}, total={total}")
    return math.comb(total + parts - 1, parts - 1)


@dataclass(frozen=True)
class SimplexGrid:
    """Integer compositions of ``divisions`` into ``len(lower)`` bounded parts.

    Parameters
    ----------
    divisions : int
        n = 1/Δ, the number of fraction steps.
    lower, upper : tuple of int
        Inclusive bounds on each part, 0 <= lower_j <= upper_j <= n.
    """

    divisions: int
    lower: tuple[int, ...]
    upper: tuple[int, ...]

    def __post_init__(self):
        n = self.divisions
        if not isinstance(n, int) or n < 1:
            raise GridError(f"the number of fraction steps must be a positive integer, got {n!r}")
        if len(self.lower) != len(self.upper) or not self.lower:
            raise GridError("need at least one material, with one lower and one upper bound each")
        for j, (lo, hi) in enumerate(zip(self.lower, self.upper)):
            if not (0 <= lo <= hi <= n):
                raise GridError(f"material {j}: bounds {lo}/{n}..{hi}/{n} are not within 0..1 with lower <= upper")
        # ways[j, s]: number of bounded compositions of s into parts j..K-1 (ways[K, 0] = 1)
        k = len(self.lower)
        ways = [[0] * (n + 1) for _ in range(k + 1)]
        ways[k][0] = 1
        for j in range(k - 1, -1, -1):
            # ways[j][s] = sum_{v = lo..min(hi, s)} ways[j+1][s - v], by prefix sums (exact Python ints)
            prefix = [0, *itertools.accumulate(ways[j + 1])]          # prefix[t] = sum of ways[j+1][:t]
            lo, hi = self.lower[j], self.upper[j]
            for s in range(n + 1):
                top, bottom = s - lo, s - hi            # indices of ways[j+1] from bottom..top
                ways[j][s] = prefix[top + 1] - prefix[max(bottom, 0)] if top >= 0 else 0
        object.__setattr__(self, "_ways_exact", ways)
        total = ways[0][n]
        if total >= _MAX_RANKS:
            raise GridError(f"{total} mixtures is beyond what a grid can enumerate (limit {_MAX_RANKS})")
        object.__setattr__(self, "_ways", np.array(ways, dtype=np.int64))

    @classmethod
    def from_step(cls, n_materials: int, divisions: int, bounds=None) -> "SimplexGrid":
        """Unbounded (or bounded) grid of ``n_materials`` parts of ``divisions`` steps.

        Parameters
        ----------
        n_materials : int
        divisions : int
        bounds : sequence of (int, int), optional
            Per-material (lower, upper) in steps; default (0, divisions) each.
        """
        if bounds is None:
            bounds = [(0, divisions)] * n_materials
        return cls(divisions, tuple(int(b[0]) for b in bounds), tuple(int(b[1]) for b in bounds))

    @property
    def n_parts(self) -> int:
        return len(self.lower)

    @property
    def size(self) -> int:
        """Number of compositions (exact Python int)."""
        return self._ways_exact[0][self.divisions]

    def unrank(self, ranks) -> np.ndarray:
        """Compositions for the given ranks.

        Parameters
        ----------
        ranks : int or array_like of int, shape (N,)
            0 <= rank < :attr:`size`.

        Returns
        -------
        ndarray[N, K] of int64
            Integer parts; fractions are ``parts / divisions``.
        """
        ranks = np.atleast_1d(np.asarray(ranks, dtype=np.int64))
        if ranks.size and (ranks.min() < 0 or ranks.max() >= self.size):
            raise GridError(f"composition rank out of range 0..{self.size - 1}")
        n, k = self.divisions, self.n_parts
        out = np.empty((ranks.size, k), dtype=np.int64)
        rem = ranks.copy()
        left = np.full(ranks.size, n, dtype=np.int64)
        rows = np.arange(ranks.size)
        for j in range(k - 1):
            values = np.arange(self.upper[j], self.lower[j] - 1, -1, dtype=np.int64)  # descending
            rest = left[:, None] - values[None, :]
            counts = np.where(rest >= 0, self._ways[j + 1][np.clip(rest, 0, n)], 0)
            cum = np.cumsum(counts, axis=1)
            pick = np.sum(cum <= rem[:, None], axis=1)
            before = np.where(pick > 0, cum[rows, np.maximum(pick - 1, 0)], 0)
            out[:, j] = values[pick]
            rem -= before
            left -= values[pick]
        out[:, k - 1] = left
        return out

    def rank(self, parts) -> np.ndarray:
        """Ranks of compositions (inverse of :meth:`unrank`).

        Parameters
        ----------
        parts : array_like of int, shape (N, K) or (K,)

        Returns
        -------
        ndarray[N] of int64
        """
        parts = np.atleast_2d(np.asarray(parts, dtype=np.int64))
        n, k = self.divisions, self.n_parts
        if parts.shape[1] != k:
            raise GridError(f"expected compositions of {k} parts, got shape {parts.shape}")
        lo, hi = np.array(self.lower), np.array(self.upper)
        if np.any(parts.sum(axis=1) != n) or np.any(parts < lo) or np.any(parts > hi):
            raise GridError(f"compositions must sum to {n} and respect the per-material bounds")
        ranks = np.zeros(parts.shape[0], dtype=np.int64)
        left = np.full(parts.shape[0], n, dtype=np.int64)
        for j in range(k - 1):
            # add the completions of every larger value of part j
            for v in range(self.upper[j], self.lower[j] - 1, -1):
                larger = parts[:, j] < v
                rest = left - v
                ok = larger & (rest >= 0)
                ranks[ok] += self._ways[j + 1][rest[ok]]
            left -= parts[:, j]
        return ranks

    def nearest(self, fractions) -> np.ndarray:
        """Closest composition to given fractions (largest-remainder rounding).

        Parameters
        ----------
        fractions : array_like, shape (N, K) or (K,)
            Rows summing to 1.

        Returns
        -------
        ndarray[N, K] of int64

        Notes
        -----
        Floors ``f * n`` and hands the missing units to the largest remainders
        (Hamilton's method); the result minimises the maximum absolute
        fraction difference among compositions of n. Bounds are not applied.
        """
        f = np.atleast_2d(np.asarray(fractions, dtype=float)) * self.divisions
        base = np.floor(f).astype(np.int64)
        missing = self.divisions - base.sum(axis=1)
        order = np.argsort(-(f - base), axis=1, kind="stable")
        for i in range(f.shape[0]):
            base[i, order[i, : missing[i]]] += 1
        return base
