"""A distribution of hollow spheres: coated spheres with a vacuum core, averaged over the core.

Min, Hovenier & de Koter (2005, A&A 432, 909) model irregular grains by
averaging, with equal weight, hollow spheres whose vacuum core fills a volume
fraction ``f`` of the sphere, for ``f`` from 0 to ``f_max``. The material
volume is held fixed: a grain of material radius ``a`` (the radius of the
solid sphere of the same material volume; its size parameter ``x = 2 pi a /
lambda`` is what the functions here take) has the outer radius
``a / (1 - f)^(1/3)``. Mass and radiation-pressure blow-out therefore refer to
the material; the core is not porosity, which stays an effective-medium vacuum
fraction of the material (:mod:`motes.optics.mixing`). ``f_max = 0`` is the
solid sphere.

The average over ``f`` uses Gauss-Legendre nodes on [0, f_max]
(:func:`hollow_sphere_nodes`). Cross-sections average linearly, so the
efficiencies returned are per *material* cross-section ``pi a^2``::

    Q = (1/f_max) integral_0^f_max (1 - f)^(-2/3) Q_coated(1, m; x (1 - f)^(-1/3), f) df,

the asymmetry parameter is the ``C_sca``-weighted mean, and the intensities
``|S1|^2``, ``|S2|^2`` (which are per ``k^2``, independent of the radius chosen
for the efficiencies) average directly, so that
``integral <|S1|^2 + |S2|^2> dOmega = 2 pi x^2 Q_sca`` with the material ``x``.

Convergence in the number of nodes: for x ~ 1 the integrand is smooth in f
but for an ``f^(5/3)`` term (a small core perturbs the sphere as its volume,
then as the fifth power of its radius), so Gauss-Legendre converges as
~``n^-5`` (6e-8 with 16 nodes at x = 1). For larger grains the coated-sphere
quantities ripple in f (the outer size parameter ``x (1 - f)^(-1/3)`` sweeps
through many ripple periods), and no fixed node count resolves a single size
at x >~ 10. The size-integrated quantities a disk model needs average those
ripples: over a decade of sizes (x 5-50, q = 3.5, 90 deg), ``DEFAULT_F_NODES``
= 16 nodes give the brightness to 3e-4 and the polarised brightness to 3e-3
of a 48-node result (``tests/test_optics_coated.py``).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..parameters import SCATTERING_ANGLE_RAD, accepts_quantities
from .coated import coated_efficiencies, coated_intensities, coated_scattering_amplitudes
from .mie import MieEfficiencies, _check_x, check_index
from .polarisation import ScatteringElements, scattering_elements

__all__ = [
    "DEFAULT_F_NODES",
    "check_f_max",
    "hollow_sphere_nodes",
    "hollow_efficiencies",
    "hollow_intensities",
    "hollow_polarisation",
]

#: Gauss-Legendre nodes over the core fraction (convergence shown in tests/test_optics_coated.py).
DEFAULT_F_NODES = 16


def check_f_max(f_max, name: str = "f_max") -> np.ndarray:
    """Validate the largest vacuum-core volume fraction: finite and in [0, 1).

    Raises
    ------
    motes.errors.InputError
        For ``f_max`` outside [0, 1) (``f = 1`` would be a grain of no material).
    """
    f = np.asarray(f_max, dtype=float)
    if not np.isfinite(f).all() or (f < 0).any() or (f >= 1).any():
        bad = f[~(np.isfinite(f) & (f >= 0) & (f < 1))].ravel()[0]
        raise InputError(f"{name} (largest vacuum-core volume fraction of the hollow spheres) must be in "
                         f"[0, 1), got {bad:.6g}", where=name)
    return f


def hollow_sphere_nodes(f_max, n_nodes: int = DEFAULT_F_NODES) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights of the equal-weight average over f in [0, f_max].

    Parameters
    ----------
    f_max : float or ndarray
        Largest core volume fraction, in [0, 1); shape ``F``.
    n_nodes : int
        Number of nodes (>= 1).

    Returns
    -------
    f, w : ndarray[*F, n_nodes]
        Core fractions and weights; the weights sum to 1 (``f_max = 0`` puts
        every node at the solid sphere).

    Examples
    --------
    >>> f, w = hollow_sphere_nodes(0.8, 4)
    >>> print(f"{w.sum():.3f} {(w * f).sum():.3f}")
    1.000 0.400
    """
    f_max = check_f_max(f_max)
    if int(n_nodes) != n_nodes or n_nodes < 1:
        raise InputError(f"n_nodes must be an integer >= 1, got {n_nodes!r}", where="n_nodes")
    t, w = np.polynomial.legendre.leggauss(int(n_nodes))
    f = f_max[..., None] * 0.5 * (1.0 + t)
    return f, np.broadcast_to(0.5 * w, f.shape).copy()


def _expanded(m, x, f_max, n_nodes):
    """Index, outer size parameter, core fraction and weight on a grid [*S, n_nodes]."""
    m = check_index(m)
    x = _check_x(x)
    f_max = check_f_max(f_max)
    m, x, f_max = np.broadcast_arrays(m, x, f_max)
    f, w = hollow_sphere_nodes(f_max, n_nodes)
    x_out = x[..., None] / np.cbrt(1.0 - f)
    return m[..., None], x_out, f, w


def hollow_efficiencies(m, x, f_max, n_nodes: int = DEFAULT_F_NODES) -> MieEfficiencies:
    """Efficiencies of a distribution of hollow spheres, per material cross-section ``pi a^2``.

    Parameters
    ----------
    m : complex or complex ndarray
        Material index ``n + i k`` (``k >= 0``).
    x : float or ndarray
        Material size parameter ``2 pi a / lambda`` (``a`` the radius of the
        solid sphere of the same material volume).
    f_max : float or ndarray
        Largest vacuum-core volume fraction, in [0, 1). ``m``, ``x`` and
        ``f_max`` broadcast to shape ``S``.
    n_nodes : int
        Gauss-Legendre nodes over f.

    Returns
    -------
    MieEfficiencies
        Arrays of shape ``S``; ``g`` is ``C_sca``-weighted.

    Raises
    ------
    motes.errors.InputError
        For ``f_max`` outside [0, 1), or the index and size checks of :mod:`motes.optics.mie`.

    Examples
    --------
    Large grains: Q_ext -> 2 per *outer* area, which is on average
    ``(1/0.8) integral_0^0.8 (1 - f)^(-2/3) df = 1.557`` times the material area:

    >>> e = hollow_efficiencies(1.5 + 0.1j, 2000.0, 0.8)
    >>> print(f"{float(e.q_ext):.2f}")
    3.13
    """
    mm, x_out, f, w = _expanded(m, x, f_max, n_nodes)
    e = coated_efficiencies(1.0, mm, x_out, f)
    area = w * (1.0 - f) ** (-2.0 / 3.0)
    q_ext, q_sca, q_back = ((q * area).sum(axis=-1) for q in (e.q_ext, e.q_sca, e.q_back))
    with np.errstate(invalid="ignore", divide="ignore"):
        g = np.asarray(np.where(q_sca > 0, (e.q_sca * e.g * area).sum(axis=-1) / q_sca, 0.0))
    return MieEfficiencies(q_ext=q_ext, q_sca=q_sca, q_abs=q_ext - q_sca, g=g, q_back=q_back)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def hollow_intensities(m, x, theta, f_max, n_nodes: int = DEFAULT_F_NODES):
    """Angle means of ``<|S1|^2 + |S2|^2>`` and ``<|S1|^2 - |S2|^2>`` over the hollow-sphere distribution.

    The counterpart of :func:`motes.optics.mie.scattered_intensity` (and of
    :func:`motes.optics.polarisation.polarised_intensity`) with ``x`` the
    material size parameter: a size integral over the material radius keeps
    its form.

    Parameters
    ----------
    m, x, f_max : broadcast to shape ``S``
        As in :func:`hollow_efficiencies`.
    theta : float or ndarray[n_theta]
        Scattering angles [rad], averaged with equal weights.
    n_nodes : int

    Returns
    -------
    total, polarised : ndarray[*S]
        ``2 S11`` and ``-2 S12`` averaged over the angles and the core fractions.
    """
    mm, x_out, f, w = _expanded(m, x, f_max, n_nodes)
    total, polarised = coated_intensities(1.0, mm, x_out, f, theta)
    return (w * total).sum(axis=-1), (w * polarised).sum(axis=-1)


@accepts_quantities(extra={"theta": SCATTERING_ANGLE_RAD})
def hollow_polarisation(m, x, theta, f_max, n_nodes: int = DEFAULT_F_NODES) -> ScatteringElements:
    """S11 and -S12 per angle, averaged over the hollow-sphere distribution.

    Parameters
    ----------
    m, x, f_max : broadcast to shape ``S``
        As in :func:`hollow_efficiencies`.
    theta : float or ndarray[n_theta]
        Scattering angles [rad].
    n_nodes : int

    Returns
    -------
    ScatteringElements
        Arrays of shape ``[*S, n_theta]`` (``[*S]`` for scalar ``theta``); the
        degree of polarisation is the ratio of the averages.
    """
    mm, x_out, f, w = _expanded(m, x, f_max, n_nodes)
    s1, s2 = coated_scattering_amplitudes(1.0, mm, x_out, f, theta)
    el = scattering_elements(s1, s2)
    node_axis = f.ndim - 1          # [*S, n_nodes] or [*S, n_nodes, n_theta]
    if s1.ndim > f.ndim:
        w = w[..., None]
    return ScatteringElements(s11=(w * el.s11).sum(axis=node_axis),
                              minus_s12=(w * el.minus_s12).sum(axis=node_axis))
