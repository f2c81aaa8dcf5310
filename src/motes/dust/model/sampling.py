"""Quadrature rules over grain size parameter and over a band's wavelengths.

Size parameter
--------------
The disk-colour integrand ``t^-q (|S1|^2 + |S2|^2)`` at a fixed scattering angle
is smooth for ``t = 2 pi a / lambda`` below a few, but above that it carries
interference and resonance ("ripple") structure on scales down to ~0.01 in
``t`` for weak absorbers, at every ``t`` up to the largest grains. A grid of a
few hundred sizes aliases that structure (errors of several per cent at 90 deg
for weak absorbers). Sampled more finely than the structure's correlation
length but not finely enough to resolve every ripple, the quadrature error
behaves like random noise with a per-sample scatter of ~45% (silica at 90
deg), so it falls only as the square root of the number of samples; resolving
every ripple instead would cost ~100x more. :class:`SizeSampling` spends the
samples where the integral needs them (relative step growing slowly with t,
coarse where the grains are opaque); convergence is checked by refinement
(:meth:`SizeSampling.refined`) and the measured figures are in
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

from ...errors import InputError
from ...parameters import accepts_quantities

__all__ = ["SizeSampling", "bin_rule", "size_parameter_rule", "weighted_gauss_nodes"]


@dataclass(frozen=True)
class SizeSampling:
    """Quadrature settings in size parameter ``t = 2 pi a / lambda``.

    The rule works on bins of at most ``bin_width`` in ``ln t``. Bins below
    ``smooth_below`` get ``gauss_nodes`` Gauss-Legendre nodes in ``ln t``;
    the others get a midpoint rule in ``ln t`` with relative step
    (``h / t``)::

        c(t) = min(c_max, c0 * max(1, t / t_knee)**growth * max(1, t / t_knee2)**(growth2 - growth)
                          * exp(2 k t))

    and ``c = c_max`` where the grain is opaque (``k t > opaque_kt``: internal
    rays are absorbed, the ripple structure is gone and the integrand is
    smooth). The factor ``exp(2 k t)`` follows the damping of the ripples by
    absorption along internal rays (amplitude ~ exp(-4 k t cos r) per chord).

    Parameters
    ----------
    c0 : float
        Relative step up to ``t_knee``.
    t_knee, t_knee2 : float
    growth, growth2 : float
        Growth of the step above ``t_knee`` and above ``t_knee2``.
    c_max : float
        Largest relative step (smooth integrand).
    opaque_kt : float
        ``k t`` above which the integrand counts as smooth.
    smooth_below : float
        Gauss-Legendre below this size parameter.
    gauss_nodes : int
        Gauss-Legendre nodes per bin in the smooth region.
    bin_width : float
        Largest bin width in ``ln t``.
    """

    c0: float = 1e-4
    t_knee: float = 100.0
    growth: float = 0.5
    t_knee2: float = 1000.0
    growth2: float = 1.0
    c_max: float = 0.025
    opaque_kt: float = 4.0
    smooth_below: float = 2.0
    gauss_nodes: int = 3
    bin_width: float = 0.05

    def __post_init__(self):
        if not (self.c0 > 0 and 0 < self.t_knee <= self.t_knee2 and 0 <= self.growth <= self.growth2
                and self.c_max >= self.c0
                and self.opaque_kt > 0 and self.smooth_below > 0 and self.gauss_nodes >= 1
                and 0 < self.bin_width <= 0.5):
            raise InputError(f"invalid size sampling {self!r}")

    def refined(self, factor: float = 2.0) -> "SizeSampling":
        """The same rule with ``factor`` times more samples everywhere."""
        return replace(self, c0=self.c0 / factor, c_max=self.c_max / factor,
                       gauss_nodes=int(np.ceil(self.gauss_nodes * factor)))

    def relative_step(self, t, k=0.0) -> np.ndarray:
        """Relative midpoint step ``c(t)`` for an index with imaginary part ``k``."""
        t = np.asarray(t, dtype=float)
        kt = k * t
        c = (self.c0 * np.maximum(1.0, t / self.t_knee) ** self.growth
             * np.maximum(1.0, t / self.t_knee2) ** (self.growth2 - self.growth)
             * np.exp(2.0 * np.minimum(kt, self.opaque_kt)))
        return np.where(kt > self.opaque_kt, self.c_max, np.minimum(self.c_max, c))


def bin_rule(edges_ln, sampling: SizeSampling = SizeSampling(), k: float = 0.0):
    """Quadrature nodes inside consecutive bins of ``ln t``.

    Parameters
    ----------
    edges_ln : ndarray[n_bins + 1]
        Increasing bin edges in ``ln t``.
    sampling : SizeSampling
    k : float
        Imaginary part of the index (selects the smooth rule for opaque grains).

    Returns
    -------
    t : ndarray[n]
    w : ndarray[n]
        ``integral_bin f(t) dt ≈ sum_{i in bin} w_i f(t_i)``.
    owner : ndarray[n] of int
        Bin of each node.
    """
    edges_ln = np.asarray(edges_ln, dtype=float)
    lo, hi = edges_ln[:-1], edges_ln[1:]
    width = hi - lo
    n_bins = lo.size
    smooth = np.exp(hi) <= sampling.smooth_below
    c = sampling.relative_step(np.exp(0.5 * (lo + hi)), k)
    counts = np.where(smooth, sampling.gauss_nodes, np.maximum(1, np.ceil(width / c - 1e-9).astype(int)))
    owner = np.repeat(np.arange(n_bins), counts)
    first = np.concatenate([[0], np.cumsum(counts)[:-1]])
    j = np.arange(owner.size) - first[owner]
    # midpoint positions (fraction of the bin) and weights
    frac = (j + 0.5) / counts[owner]
    wfrac = 1.0 / counts[owner]
    if smooth.any():
        z, wz = np.polynomial.legendre.leggauss(sampling.gauss_nodes)
        sel = smooth[owner]
        frac = np.where(sel, 0.5 * (1 + z[np.minimum(j, z.size - 1)]), frac)
        wfrac = np.where(sel, 0.5 * wz[np.minimum(j, z.size - 1)], wfrac)
    ln_t = lo[owner] + frac * width[owner]
    t = np.exp(ln_t)
    return t, wfrac * width[owner] * t, owner


def size_parameter_rule(x_lo: float, x_hi: float, sampling: SizeSampling = SizeSampling(), k: float = 0.0):
    """Nodes and weights for ``integral_{x_lo}^{x_hi} f(t) dt ≈ sum w f(t)``.

    Parameters
    ----------
    x_lo, x_hi : float
        Size-parameter limits, ``0 < x_lo < x_hi``.
    sampling : SizeSampling
    k : float
        Imaginary part of the refractive index (see :class:`SizeSampling`).

    Returns
    -------
    t : ndarray[n]
    w : ndarray[n]
    """
    if not (0 < x_lo < x_hi and np.isfinite(x_hi)):
        raise InputError(f"need 0 < x_lo < x_hi, got {x_lo!r}, {x_hi!r}")
    span = np.log(x_hi / x_lo)
    n_bins = max(1, int(np.ceil(span / sampling.bin_width - 1e-9)))
    t, w, _ = bin_rule(np.linspace(np.log(x_lo), np.log(x_hi), n_bins + 1), sampling, k)
    return t, w


@accepts_quantities
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
