"""Quadrature rules over grain size parameter and over a band's wavelengths.

Size parameter
--------------
The disk-colour integrand ``t^-q (|S1|^2 + |S2|^2)`` at a fixed scattering angle
is smooth for ``t = 2 pi a / lambda`` below a few, but above that it carries
interference and resonance ("ripple") structure on scales down to ~0.01 in
``t`` for weak absorbers, at every ``t`` up to the largest grains. A grid of a
few hundred sizes aliases that structure (errors of several per cent at 90 deg
for weak absorbers). :class:`SizeSampling` describes the rule used instead:

* ``t < smooth_below``: Gauss-Legendre panels in ``ln t`` (smooth region);
* ``t >= smooth_below``: midpoint rule in ``t`` with step
  ``h(t) = h0 * max(1, t / t_knee)**growth``, on panels of at most 5% in ``t``.

The step grows with ``t`` because the integrand's weight per unit ``t`` falls
as ``t^(2-q)`` while the cost of one Mie evaluation grows as ``t``; the
unresolved structure then contributes a random-like error that falls as the
square root of the number of samples. Convergence is checked by halving
``h0`` (:meth:`SizeSampling.refined`); the measured figures are in
``docs/optics.md``.

Band wavelengths
----------------
:func:`weighted_gauss_nodes` returns the Gauss quadrature nodes and weights
for the discrete measure ``w(lambda) dlambda`` (filter weight times stellar
spectrum), computed with the Stieltjes procedure and the Golub-Welsch
eigenvalue method (Gautschi 2004, *Orthogonal Polynomials: Computation and
Approximation*, sections 2.2.3 and 3.1.1). n nodes integrate
``w(lambda) P(lambda)`` exactly for polynomials P of degree < 2n.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import InputError

__all__ = ["SizeSampling", "size_parameter_rule", "weighted_gauss_nodes"]


@dataclass(frozen=True)
class SizeSampling:
    """Quadrature settings in size parameter ``t = 2 pi a / lambda``.

    Parameters
    ----------
    h0 : float
        Midpoint step in ``t`` up to ``t_knee``.
    t_knee : float
        Above it the step grows as ``(t / t_knee)**growth``.
    growth : float
        Exponent of the step growth.
    smooth_below : float
        Gauss-Legendre in ``ln t`` below this size parameter.
    nodes_per_efold : int
        Gauss-Legendre nodes per e-fold of ``t`` in the smooth region.
    """

    h0: float = 0.02
    t_knee: float = 20.0
    growth: float = 1.5
    smooth_below: float = 2.0
    nodes_per_efold: int = 12

    def __post_init__(self):
        if not (self.h0 > 0 and self.t_knee > 0 and self.growth >= 0 and self.smooth_below > 0
                and self.nodes_per_efold >= 2):
            raise InputError(f"invalid size sampling {self!r}")

    def refined(self, factor: float = 2.0) -> "SizeSampling":
        """The same rule with ``factor`` times more samples everywhere."""
        return replace(self, h0=self.h0 / factor,
                       nodes_per_efold=int(np.ceil(self.nodes_per_efold * factor)))

    def step(self, t) -> np.ndarray:
        """Midpoint step h(t)."""
        t = np.asarray(t, dtype=float)
        return self.h0 * np.maximum(1.0, t / self.t_knee) ** self.growth


def _gauss_log(lo: float, hi: float, per_efold: int) -> tuple[np.ndarray, np.ndarray]:
    span = np.log(hi / lo)
    n_panels = max(1, int(np.ceil(span / 0.5)))
    n = max(2, int(np.ceil(per_efold * 0.5)))
    z, wz = np.polynomial.legendre.leggauss(n)
    edges = np.linspace(np.log(lo), np.log(hi), n_panels + 1)
    half = 0.5 * np.diff(edges)[:, None]
    mid = 0.5 * (edges[1:] + edges[:-1])[:, None]
    t = np.exp(mid + half * z).ravel()
    return t, (half * wz * np.exp(mid + half * z)).ravel()  # dt = t dln t


def size_parameter_rule(x_lo: float, x_hi: float, sampling: SizeSampling = SizeSampling()):
    """Nodes and weights for ``integral_{x_lo}^{x_hi} f(t) dt ≈ sum w f(t)``.

    Parameters
    ----------
    x_lo, x_hi : float
        Size-parameter limits, ``0 < x_lo < x_hi``.
    sampling : SizeSampling

    Returns
    -------
    t : ndarray[n]
    w : ndarray[n]
    """
    if not (0 < x_lo < x_hi and np.isfinite(x_hi)):
        raise InputError(f"need 0 < x_lo < x_hi, got {x_lo!r}, {x_hi!r}")
    parts_t, parts_w = [], []
    s = sampling.smooth_below
    if x_lo < s:
        t, w = _gauss_log(x_lo, min(x_hi, s), sampling.nodes_per_efold)
        parts_t.append(t)
        parts_w.append(w)
    if x_hi > s:
        lo = max(x_lo, s)
        # panels of at most 5% in t, each with a uniform midpoint rule
        n_panels = max(1, int(np.ceil(np.log(x_hi / lo) / np.log(1.05))))
        edges = np.geomspace(lo, x_hi, n_panels + 1)
        widths = np.diff(edges)
        counts = np.maximum(1, np.ceil(widths / sampling.step(edges[:-1])).astype(int))
        h = widths / counts
        idx = np.repeat(np.arange(n_panels), counts)
        first = np.concatenate([[0], np.cumsum(counts)[:-1]])
        j = np.arange(idx.size) - first[idx]
        parts_t.append(edges[idx] + (j + 0.5) * h[idx])
        parts_w.append(h[idx])
    return np.concatenate(parts_t), np.concatenate(parts_w)


def weighted_gauss_nodes(wavelength, weight, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss nodes for a tabulated weight function.

    Parameters
    ----------
    wavelength : ndarray[m] [um]
        Increasing grid on which ``weight`` is tabulated (piecewise linear).
    weight : ndarray[m]
        Non-negative weight (filter weight times stellar F_lambda).
    n : int
        Number of nodes.

    Returns
    -------
    nodes : ndarray[n] [um]
    weights : ndarray[n]
        Positive, summing to 1: ``<f> = integral w f / integral w ≈ sum weights f(nodes)``.

    Examples
    --------
    >>> import numpy as np
    >>> lam = np.linspace(1.0, 2.0, 2001)
    >>> x, w = weighted_gauss_nodes(lam, np.ones_like(lam), 3)   # Gauss-Legendre on [1, 2]
    >>> print(np.round(x, 6), np.round(w, 6))
    [1.112702 1.5      1.887298] [0.277778 0.444444 0.277778]
    """
    lam = np.asarray(wavelength, dtype=float)
    wt = np.asarray(weight, dtype=float)
    if lam.ndim != 1 or lam.shape != wt.shape or lam.size < 2 or (wt < 0).any() or not wt.any():
        raise InputError("weighted_gauss_nodes needs a 1-D grid and a non-negative, non-zero weight")
    # trapezoid masses of the piecewise-linear weight, refined 4x inside each interval
    fine = np.concatenate([np.linspace(lam[i], lam[i + 1], 4, endpoint=False)
                           for i in range(lam.size - 1)] + [lam[-1:]])
    wf = np.interp(fine, lam, wt)
    dx = np.diff(fine)
    mass = np.zeros_like(fine)
    mass[:-1] += 0.5 * dx * wf[:-1]
    mass[1:] += 0.5 * dx * wf[1:]
    keep = mass > 0
    fine, mass = fine[keep], mass[keep]
    n = int(min(n, fine.size))
    total = mass.sum()
    mass = mass / total
    centre, half = 0.5 * (fine[0] + fine[-1]), 0.5 * (fine[-1] - fine[0]) or 1.0
    z = (fine - centre) / half
    alpha = np.zeros(n)
    beta = np.zeros(n)
    p_prev = np.zeros_like(z)
    p = np.ones_like(z)
    for k in range(n):
        alpha[k] = np.sum(mass * z * p * p)
        p_next = (z - alpha[k]) * p - (beta[k - 1] if k else 0.0) * p_prev
        norm = np.sqrt(np.sum(mass * p_next * p_next))
        if k < n - 1:
            beta[k] = norm
        p_prev, p = p, p_next / norm if norm > 0 else p_next
    jacobi = np.diag(alpha) + np.diag(beta[:-1], 1) + np.diag(beta[:-1], -1)
    nodes, vecs = np.linalg.eigh(jacobi)
    weights = vecs[0] ** 2
    return centre + half * nodes, weights / weights.sum()
