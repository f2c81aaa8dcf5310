"""Grain size distributions and the radiation-pressure blow-out size.

Size distributions
------------------
:class:`PowerLaw` is ``dn/da ∝ a^-q`` on ``[a_min, a_max]`` (``q = 3.5`` for a
collisional cascade, Dohnanyi 1969, JGR 74, 2531); :class:`LogNormal` is
``dn/d ln a ∝ exp(-(ln a - ln a_0)^2 / 2 sigma^2)``. Both are normalised to
**unit total geometric cross-section**, ``integral n(a) pi a^2 da = 1`` [um^-2
per um], so that a cross-section-weighted average of a grain property ``f(a)``
is ``integral f(a) n(a) pi a^2 da``. Quadratures are Gauss-Legendre in ``ln a``
(panels of at most one e-fold), which integrate power laws and their
products with smooth functions to machine precision.

Blow-out size
-------------
Radiation pressure over gravity for a grain of radius a and density rho
(Burns, Lamy & Soter 1979, Icarus 40, 1, eq. 19)::

    beta(a) = 3 L* <Q_pr>(a) / (16 pi G M* c rho a)

with ``Q_pr = Q_ext - g Q_sca`` averaged over the stellar spectrum (F_lambda
weighted). Grains released from bound orbits leave the system for
``beta >= 1/2``: the blow-out size is the largest a with ``beta(a) = 1/2``.
For constant Q_pr, ``a_blow = 3 L* Q_pr / (8 pi G M* c rho)`` (about 0.5 um for
the Sun and rho = 2.5 g cm^-3; common practice, no source).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from astropy import constants as const
import astropy.units as u

from ..errors import InputError
from ..parameters import accepts_quantities

__all__ = [
    "PowerLaw",
    "LogNormal",
    "gauss_legendre_log",
    "power_law_cross_section",
    "radiation_pressure_beta",
    "blowout_size",
    "BlowoutResult",
    "find_blowout_size",
]

# a_blow [um] = _BLOWOUT_UM * (L/Lsun) * Q_pr / ((M/Msun) * rho[g cm^-3])
_BLOWOUT_UM = (3 * const.L_sun / (8 * np.pi * const.G * const.M_sun * const.c * (1 * u.g / u.cm**3))).to_value(u.um)


@accepts_quantities
def gauss_legendre_log(a_min, a_max, n_per_efold: int = 8, min_nodes: int = 8):
    """Gauss-Legendre nodes and weights in ln a between two sizes.

    Parameters
    ----------
    a_min, a_max : float [um]
    n_per_efold : int
        Nodes per panel; panels span at most one e-fold of a.
    min_nodes : int
        At least this many nodes in total.

    Returns
    -------
    a : ndarray[n] [um]
    w : ndarray[n]
        Weights for ``integral f(a) d ln a ≈ sum w f(a)``.
    """
    a_min, a_max = float(a_min), float(a_max)
    if not (0 < a_min < a_max and np.isfinite(a_max)):
        raise InputError(f"need 0 < a_min < a_max, got a_min={a_min!r}, a_max={a_max!r} um")
    span = np.log(a_max / a_min)
    n_panels = max(int(np.ceil(span)), int(np.ceil(min_nodes / n_per_efold)), 1)
    t, wt = np.polynomial.legendre.leggauss(n_per_efold)
    edges = np.linspace(np.log(a_min), np.log(a_max), n_panels + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    ln_a = (mid[:, None] + half[:, None] * t[None, :]).ravel()
    w = (half[:, None] * wt[None, :]).ravel()
    return np.exp(ln_a), w


@accepts_quantities
def power_law_cross_section(a_min, a_max, q):
    """``integral_{a_min}^{a_max} a^(2-q) da`` [um^(3-q)], vectorised.

    Equals ``(a_max^(3-q) - a_min^(3-q)) / (3 - q)``, and ``ln(a_max/a_min)``
    at q = 3 (a series is used within 1e-6 of 3 to avoid cancellation).
    """
    a_min, a_max, q = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (a_min, a_max, q)))
    s = 3.0 - q
    la, lb = np.log(a_min), np.log(a_max)
    near = np.abs(s) < 1e-6
    s_safe = np.where(near, 1.0, s)
    general = (np.exp(s_safe * lb) - np.exp(s_safe * la)) / s_safe
    # (e^{s lb} - e^{s la}) / s = (lb - la) [1 + s (lb + la)/2 + ...]
    series = (lb - la) * (1 + s * (lb + la) / 2 + s**2 * (lb**2 + lb * la + la**2) / 6)
    return np.where(near, series, general)


def _check_sizes(a_min, a_max):
    if not (np.isfinite(a_min) and np.isfinite(a_max)) or a_min <= 0 or a_max <= a_min:
        raise InputError(f"need 0 < a_min < a_max [um], got a_min={a_min!r}, a_max={a_max!r}",
                         where="a_min/a_max")


@accepts_quantities
@dataclass(frozen=True)
class PowerLaw:
    """``dn/da ∝ a^-q`` on ``[a_min, a_max]`` [um], normalised to unit cross-section.

    Parameters
    ----------
    a_min, a_max : float [um]
    q : float
        Power-law index (3.5 for a collisional cascade, Dohnanyi 1969).
    """

    a_min: float
    a_max: float
    q: float = 3.5

    def __post_init__(self):
        _check_sizes(self.a_min, self.a_max)
        if not np.isfinite(self.q):
            raise InputError(f"q must be finite, got {self.q!r}", where="q")

    @property
    def norm(self) -> float:
        """Constant C in ``n(a) = C a^-q`` giving unit total cross-section [um^(q-3)]."""
        return float(1.0 / (np.pi * power_law_cross_section(self.a_min, self.a_max, self.q)))

    @accepts_quantities
    def number_density(self, a) -> np.ndarray:
        """dn/da [um^-3 per unit cross-section], zero outside ``[a_min, a_max]``."""
        a = np.asarray(a, dtype=float)
        inside = (a >= self.a_min) & (a <= self.a_max)
        return np.where(inside, self.norm * a ** (-self.q), 0.0)

    def quadrature(self, n_per_efold: int = 8) -> tuple[np.ndarray, np.ndarray]:
        """Nodes a [um] and cross-section weights w (sum 1): ``<f> = sum w f(a)``.

        ``w_i = n(a_i) pi a_i^2 a_i dlna_i``; exact for the total cross-section.
        """
        a, wl = gauss_legendre_log(self.a_min, self.a_max, n_per_efold)
        w = wl * np.pi * a**3 * self.number_density(a)
        return a, w


@accepts_quantities
@dataclass(frozen=True)
class LogNormal:
    """``dn/d ln a ∝ exp(-(ln a - ln a_0)^2 / (2 sigma^2))``, normalised to unit cross-section.

    Parameters
    ----------
    a_0 : float [um]
        Median radius of the number distribution.
    sigma : float
        Width in ln a (> 0).
    a_min, a_max : float [um], optional
        Truncation; default ``a_0 exp(-/+ 5 sigma)``.
    """

    a_0: float
    sigma: float
    a_min: float | None = None
    a_max: float | None = None

    def __post_init__(self):
        if not (np.isfinite(self.a_0) and self.a_0 > 0 and np.isfinite(self.sigma) and self.sigma > 0):
            raise InputError(f"need a_0 > 0 um and sigma > 0, got a_0={self.a_0!r}, sigma={self.sigma!r}")
        lo = self.a_0 * np.exp(-5 * self.sigma) if self.a_min is None else self.a_min
        hi = self.a_0 * np.exp(5 * self.sigma) if self.a_max is None else self.a_max
        _check_sizes(lo, hi)
        object.__setattr__(self, "a_min", float(lo))
        object.__setattr__(self, "a_max", float(hi))

    def _shape(self, a):
        return np.exp(-0.5 * (np.log(a / self.a_0) / self.sigma) ** 2) / a

    @property
    def norm(self) -> float:
        """Constant C in ``n(a) = C shape(a)`` giving unit total cross-section."""
        a, w = gauss_legendre_log(self.a_min, self.a_max, 16)
        return float(1.0 / np.sum(w * np.pi * a**3 * self._shape(a)))

    @accepts_quantities
    def number_density(self, a) -> np.ndarray:
        """dn/da [um^-3 per unit cross-section], zero outside ``[a_min, a_max]``."""
        a = np.asarray(a, dtype=float)
        inside = (a >= self.a_min) & (a <= self.a_max)
        return np.where(inside, self.norm * self._shape(np.where(inside, a, self.a_0)), 0.0)

    def quadrature(self, n_per_efold: int = 8) -> tuple[np.ndarray, np.ndarray]:
        """Nodes a [um] and cross-section weights w (sum 1)."""
        a, wl = gauss_legendre_log(self.a_min, self.a_max, n_per_efold, min_nodes=32)
        w = wl * np.pi * a**3 * self.number_density(a)
        return a, w / w.sum()


# ------------------------------------------------------------- blow-out size
def _check_star(luminosity_lsun, mass_msun, density):
    for name, v in (("luminosity_lsun", luminosity_lsun), ("mass_msun", mass_msun), ("density", density)):
        if not (np.all(np.isfinite(v)) and np.all(np.asarray(v) > 0)):
            raise InputError(f"{name} must be finite and > 0, got {v!r}", where=name)


@accepts_quantities
def radiation_pressure_beta(a, luminosity_lsun, mass_msun, density, q_pr=1.0):
    """Ratio of radiation pressure to gravity, ``beta(a)``.

    Parameters
    ----------
    a : float or ndarray [um]
        Grain radius.
    luminosity_lsun : float [L_sun]
    mass_msun : float [M_sun]
    density : float [g cm^-3]
        Grain (bulk, porosity included) density.
    q_pr : float or ndarray
        Radiation-pressure efficiency averaged over the stellar spectrum.

    Returns
    -------
    ndarray
        ``beta = 3 L Q_pr / (16 pi G M c rho a)`` (Burns, Lamy & Soter 1979, eq. 19).

    Examples
    --------
    >>> print(f"{radiation_pressure_beta(1.0, 1.0, 1.0, 1.0):.3f}")
    0.574
    """
    _check_star(luminosity_lsun, mass_msun, density)
    a = np.asarray(a, dtype=float)
    return 0.5 * _BLOWOUT_UM * luminosity_lsun * np.asarray(q_pr) / (mass_msun * density * a)


@accepts_quantities
def blowout_size(luminosity_lsun, mass_msun, density, q_pr=1.0) -> float:
    """Blow-out radius [um] for a size-independent Q_pr.

    ``a_blow = 3 L Q_pr / (8 pi G M c rho)`` (Burns, Lamy & Soter 1979), where
    ``beta = 1/2``. See :func:`find_blowout_size` for Q_pr from Mie theory.

    Examples
    --------
    >>> print(f"{blowout_size(1.0, 1.0, 2.5):.2f}")
    0.46
    """
    _check_star(luminosity_lsun, mass_msun, density)
    if not (np.isfinite(q_pr) and q_pr >= 0):
        raise InputError(f"q_pr must be finite and >= 0, got {q_pr!r}", where="q_pr")
    return float(_BLOWOUT_UM * luminosity_lsun * q_pr / (mass_msun * density))


@dataclass(frozen=True)
class BlowoutResult:
    """Outcome of a blow-out size search.

    Attributes
    ----------
    size : float or None [um]
        Radius where beta falls through 1/2 (the smallest such radius when it
        does so more than once); ``None`` when beta < 1/2 at every size.
    beta_max : float
        Largest beta over the sizes searched.
    size_of_beta_max : float [um]
    a : ndarray [um]
        Radii searched; ``beta`` and ``q_pr`` are their values there.
    beta, q_pr : ndarray
    message : str
        One readable line (also says when no blow-out size exists).
    notes : tuple of str
    """

    size: float | None
    beta_max: float
    size_of_beta_max: float
    a: np.ndarray
    beta: np.ndarray
    q_pr: np.ndarray
    message: str
    notes: tuple[str, ...] = ()

    @property
    def exists(self) -> bool:
        """True when some grains are blown out (beta reaches 1/2)."""
        return self.size is not None


@accepts_quantities
def find_blowout_size(q_pr_of_size, luminosity_lsun, mass_msun, density,
                      a_range=(0.01, 100.0), n_sizes: int = 121, notes=()) -> BlowoutResult:
    """Blow-out radius from a size-dependent, spectrum-averaged Q_pr(a).

    Parameters
    ----------
    q_pr_of_size : callable
        ``q_pr_of_size(a) -> ndarray``: Q_pr averaged over the stellar spectrum
        for radii ``a`` [um] (e.g. ``DiskColourModel.radiation_pressure_efficiency``).
    luminosity_lsun, mass_msun : float
    density : float [g cm^-3]
        Density of the (porous) grains.
    a_range : (float, float) [um]
        Radii searched.
    n_sizes : int
        Log-spaced radii at which beta is evaluated before refining the root.
    notes : tuple of str
        Carried into the result (e.g. optical-constant caveats).

    Returns
    -------
    BlowoutResult
        ``size`` is None, and the message says so, when beta < 1/2 everywhere
        (a faint or massive star: no grain is blown out).

    Notes
    -----
    beta(a) = 3 L <Q_pr>(a) / (16 pi G M c rho a) (Burns, Lamy & Soter 1979).
    The blow-out size is where beta falls through 1/2 with growing a: grains
    just larger are bound. When beta crosses 1/2 downwards more than once
    (Mie resonances can lift it above 1/2 again in a band of larger sizes),
    ``size`` is the *smallest* such crossing and the message names every
    size interval with beta >= 1/2. Each crossing is bracketed on the grid
    and refined by bisection in ln a (Q_pr interpolated linearly in ln a
    between 16 extra evaluations).
    """
    _check_star(luminosity_lsun, mass_msun, density)
    lo, hi = a_range
    _check_sizes(lo, hi)
    a = np.geomspace(lo, hi, n_sizes)
    q = np.asarray(q_pr_of_size(a), dtype=float)
    beta = radiation_pressure_beta(a, luminosity_lsun, mass_msun, density, q)
    i_max = int(np.argmax(beta))
    above = beta >= 0.5
    notes = tuple(notes)
    if not above.any():
        msg = (f"no blow-out size: beta stays below 0.5 at every radius {lo:g}-{hi:g} um "
               f"(largest beta {beta[i_max]:.3g} at {a[i_max]:.3g} um); all grains stay bound")
        return BlowoutResult(None, float(beta[i_max]), float(a[i_max]), a, beta, q, msg, notes)
    falls = np.flatnonzero(above[:-1] & ~above[1:])     # beta >= 0.5 at a[j], < 0.5 at a[j+1]
    if falls.size == 0:
        msg = (f"beta >= 0.5 up to the largest radius searched ({hi:g} um): blow-out size "
               "lies beyond the search range")
        return BlowoutResult(float(hi), float(beta[i_max]), float(a[i_max]), a, beta, q, msg,
                             notes + (msg,))

    def refine(j):
        fine = np.geomspace(a[j], a[j + 1], 17)
        qf = np.asarray(q_pr_of_size(fine), dtype=float)
        bf = radiation_pressure_beta(fine, luminosity_lsun, mass_msun, density, qf)
        k = min(int(np.flatnonzero(bf >= 0.5)[-1]), fine.size - 2)
        l0, l1 = np.log(fine[k]), np.log(fine[k + 1])
        for _ in range(60):
            mid = 0.5 * (l0 + l1)
            qm = np.interp(mid, np.log(fine), qf)
            if radiation_pressure_beta(np.exp(mid), luminosity_lsun, mass_msun, density, qm) >= 0.5:
                l0 = mid
            else:
                l1 = mid
        return float(np.exp(0.5 * (l0 + l1)))

    size = refine(int(falls[0]))
    msg = f"blow-out radius {size:.3g} um (beta = 0.5; largest beta {beta[i_max]:.3g} at {a[i_max]:.3g} um)"
    if falls.size > 1 or above[-1]:
        rises = np.flatnonzero(~above[:-1] & above[1:]) + 1
        starts = ([0] if above[0] else []) + list(rises)
        ends = list(falls + 1) + ([a.size - 1] if above[-1] else [])
        spans = ", ".join(f"{a[s]:.3g}-{a[e]:.3g}" for s, e in zip(starts, ends))
        note = (f"beta crosses 0.5 more than once (beta >= 0.5 over about {spans} um): the blow-out size "
                f"given is the smallest radius where beta falls below 0.5, {size:.3g} um")
        msg += f"; {note}"
        notes = notes + (note,)
    return BlowoutResult(size, float(beta[i_max]), float(a[i_max]), a, beta, q, msg, notes)
