"""Benchmark: vectorised Bruggeman mixing against a per-element polynomial baseline.

Prints elements per second of

* the baseline: for each element, all roots of the Bruggeman polynomial
  (``numpy.polynomial.polynomial.polyroots``) and the one in the sector
  spanned by the components (the same root motes returns), in a Python loop;
* ``motes.optics.mixing.mix_refractive_index`` (vectorised Newton with its
  fallbacks) on the same kind of mixture;

and their ratio, plus the largest difference between the two answers on the
baseline's elements. Mixture: four solid components (ice-, silica-, carbon-
and iron-like indices at one wavelength) plus porosity, random fractions.

Run: ``python benchmarks/bench_mixing.py [--elements 1000000]``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from numpy.polynomial import polynomial as P

from motes.optics.mixing import mix_refractive_index, whole_grain_fractions

INDICES = np.array([1.30 + 0.01j, 1.45 + 1e-5j, 2.0 + 0.8j, 3.0 + 4.0j])


def _baseline(eps, phi):
    out = np.empty(eps.shape[1], dtype=complex)
    for j in range(eps.shape[1]):
        e, f = eps[:, j], phi[:, j]
        poly = np.zeros(1, dtype=complex)
        for i in range(len(e)):
            term = np.array([f[i] * e[i], -f[i]], dtype=complex)
            for k in range(len(e)):
                if k != i:
                    term = P.polymul(term, [e[k], 2.0])
            poly = P.polyadd(poly, term)
        roots = P.polyroots(poly)
        arg = np.angle(e[f > 0])
        inside = (np.angle(roots) >= arg.min() - 1e-9) & (np.angle(roots) <= arg.max() + 1e-9)
        out[j] = roots[inside][0]
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--elements", type=int, default=1_000_000)
    parser.add_argument("--baseline-elements", type=int, default=2000)
    args = parser.parse_args(argv)
    rng = np.random.default_rng(1)

    n_el = args.elements
    f = rng.dirichlet(np.ones(4), n_el).T
    p = rng.uniform(0.0, 0.9, n_el)
    t0 = time.perf_counter()
    m = mix_refractive_index(INDICES[:, None], f, p)
    t_fast = time.perf_counter() - t0

    nb = args.baseline_elements
    phi = whole_grain_fractions(f[:, :nb], p[:nb])
    eps = np.concatenate([np.repeat(INDICES[:, None] ** 2, nb, axis=1), np.ones((1, nb))])
    t0 = time.perf_counter()
    ref = _baseline(eps, phi)
    t_base = time.perf_counter() - t0

    rate_fast, rate_base = n_el / t_fast, nb / t_base
    worst = np.max(np.abs(m[:nb] ** 2 - ref) / np.abs(ref))
    print(f"baseline (per-element polynomial roots): {rate_base:12.0f} elements/s ({nb} elements)")
    print(f"motes mix_refractive_index (vectorised): {rate_fast:12.0f} elements/s ({n_el} elements)")
    print(f"ratio: {rate_fast / rate_base:.0f}x; largest relative difference in eps: {worst:.1e}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
