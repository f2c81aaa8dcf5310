"""The Galaxy along a line of sight: star density, mean reddening and star counts.

Pure functions for the photometric boundness test (:mod:`motes.companion.boundness`):
:class:`GalacticModel` (thin disk, thick disk and halo of Jurić et al. 2008), the mean
A_V out to a distance through a dust layer (:func:`extinction_along_sight`), the prior
weights of log-spaced distance nodes (:func:`distance_prior_weights`), the local space
density of field dwarfs per subtype (:func:`field_type_density`, the "field" type prior
of :mod:`motes.companion.type_prior` in absolute units), the number of field dwarfs per
arcsec^2 brighter than a magnitude (:func:`cumulative_surface_density`) and the prior
odds from an expected number of unrelated sources (:func:`prior_odds`). Distances [pc],
angles [deg].
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import astropy.units as u
import numpy as np

from ..errors import InputError
from ..parameters import BoundaryQuantity, accepts_quantities

__all__ = [
    "GalacticModel",
    "AV_PER_KPC",
    "DUST_SCALE_HEIGHT_PC",
    "D_MIN_PC",
    "DEFAULT_B_DEG",
    "field_type_density",
    "extinction_along_sight",
    "distance_prior_weights",
    "cumulative_surface_density",
    "prior_odds",
]

#: Mean visual extinction per kpc in the Galactic plane [mag/kpc]: values of 0.7-1.8 mag/kpc
#: are quoted (common practice, no single source); 1 mag/kpc is taken.
AV_PER_KPC = 1.0
#: Scale height of the dust layer [pc] (~125-135 pc: Marshall et al. 2006, A&A 453, 635;
#: Drimmel & Spergel 2001, ApJ 556, 181; from memory).
DUST_SCALE_HEIGHT_PC = 125.0
#: Nearest distance of the line-of-sight prior [pc].
D_MIN_PC = 1.0
#: |b| assumed for the reddening when no coordinates are given (median |b| of the sky).
DEFAULT_B_DEG = 30.0
_ARCSEC2_PER_SR = (180.0 / math.pi * 3600.0) ** 2


@dataclass(frozen=True)
class GalacticModel:
    """Stellar number density of the Galaxy relative to the Sun's neighbourhood.

    Thin and thick exponential disks and a flattened power-law halo, the fit of
    Jurić et al. 2008 (ApJ 673, 864, Table 10, bias-corrected values; from memory)::

        rho(R, Z) ∝ exp(-(R - R0)/L1 - |Z|/H1) + f_thick exp(-(R - R0)/L2 - |Z|/H2)
                    + f_halo (R0 / sqrt(R^2 + (Z/q)^2))^n

    with R the Galactocentric cylindrical radius and Z the height above the plane (the Sun
    at Z = z_sun), normalised to 1 at the Sun.
    The Sun's distance from the centre is Bland-Hawthorn & Gerhard 2016
    (ARA&A 54, 529; from memory). Lengths [pc].
    """

    r_sun_pc: float = 8200.0
    z_sun_pc: float = 25.0
    thin_scale_height_pc: float = 300.0
    thin_scale_length_pc: float = 2600.0
    thick_scale_height_pc: float = 900.0
    thick_scale_length_pc: float = 3600.0
    thick_fraction: float = 0.12
    halo_fraction: float = 0.0051
    halo_index: float = 2.77
    halo_flattening: float = 0.64

    def __post_init__(self):
        for f in fields(self):
            value = getattr(self, f.name)
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value >= 0):
                raise InputError(f"Galactic model {f.name} must be a number >= 0, got {value!r}")

    def scaled(self, factor: float) -> "GalacticModel":
        """The model with every scale height and length multiplied by ``factor``."""
        return GalacticModel(self.r_sun_pc, self.z_sun_pc, factor * self.thin_scale_height_pc,
                             factor * self.thin_scale_length_pc, factor * self.thick_scale_height_pc,
                             factor * self.thick_scale_length_pc, self.thick_fraction, self.halo_fraction,
                             self.halo_index, self.halo_flattening)

    def _raw(self, x, y, z):
        r_cyl = np.hypot(x, y)
        zz = np.abs(z)
        thin = np.exp(-(r_cyl - self.r_sun_pc) / self.thin_scale_length_pc - zz / self.thin_scale_height_pc)
        thick = self.thick_fraction * np.exp(-(r_cyl - self.r_sun_pc) / self.thick_scale_length_pc
                                             - zz / self.thick_scale_height_pc)
        r_sph = np.sqrt(r_cyl**2 + (z / self.halo_flattening) ** 2)
        halo = self.halo_fraction * (self.r_sun_pc / np.maximum(r_sph, 1.0)) ** self.halo_index
        return thin + thick + halo

    def density(self, d, l_deg: float, b_deg: float) -> np.ndarray:
        """Relative number density at distance ``d`` [pc] towards (l, b) [deg]; 1 at the Sun."""
        d = np.asarray(d, dtype=float)
        lr, br = math.radians(l_deg), math.radians(b_deg)
        x = self.r_sun_pc - d * math.cos(br) * math.cos(lr)
        y = -d * math.cos(br) * math.sin(lr)
        z = self.z_sun_pc + d * math.sin(br)
        return self._raw(x, y, z) / self._raw(self.r_sun_pc, 0.0, self.z_sun_pc)


def field_type_density(code) -> np.ndarray:
    """Local space density of field dwarfs per unit type code [pc^-3 per subtype].

    The "field" type prior's bins (:data:`motes.companion.type_prior.FIELD_DENSITY`, in
    1e-3 pc^-3 per subtype, with their sources there), used in absolute units by the
    counts model; zero beyond the end of class T.

    Examples
    --------
    >>> f"{float(field_type_density(64.0)):.2e}"
    '1.18e-02'
    """
    from .type_prior import FIELD_DENSITY, FIELD_LAST_CODE, TypePrior

    code = np.asarray(code, dtype=float)
    w = 1e-3 * TypePrior("field", FIELD_DENSITY).weights(code)
    return np.where(code <= FIELD_LAST_CODE + 0.5, w, 0.0)


_DISTANCE = BoundaryQuantity(u.pc, "distance", u.kpc)
_SKY = BoundaryQuantity(u.deg, "Galactic coordinate", u.rad)


@accepts_quantities(extra={"d": _DISTANCE, "b_deg": _SKY, "dust_scale_height_pc": _DISTANCE})
def extinction_along_sight(d, b_deg: float = DEFAULT_B_DEG, av_per_kpc: float = AV_PER_KPC,
                           dust_scale_height_pc: float = DUST_SCALE_HEIGHT_PC, z_sun_pc: float = 25.0) -> np.ndarray:
    """Mean A_V [mag] out to distance ``d`` [pc] at Galactic latitude ``b_deg``.

    Notes
    -----
    A_V(d) = a_V ∫_0^d exp(-|z_sun + s sin b| / h) ds (a_V in mag/pc), integrated in closed
    form piecewise on either side of the plane crossing.

    Examples
    --------
    >>> f"{float(extinction_along_sight(1000.0, 0.0, z_sun_pc=0.0)):.2f}"
    '1.00'
    """
    d = np.asarray(d, dtype=float)
    a = av_per_kpc / 1000.0
    h = dust_scale_height_pc
    sb = math.sin(math.radians(b_deg))
    if abs(sb) < 1e-9:
        return a * d * math.exp(-abs(z_sun_pc) / h)

    def primitive(z):
        # ∫ exp(-|z|/h) dz from 0 to z (odd function of z)
        return np.sign(z) * h * (1.0 - np.exp(-np.abs(z) / h))

    z0 = z_sun_pc
    z1 = z_sun_pc + d * sb
    return a * (primitive(z1) - primitive(z0)) / sb


def distance_prior_weights(d, kind: str, *, limit: float, l_deg: float = math.nan, b_deg: float = math.nan,
                           galaxy: GalacticModel | None = None) -> np.ndarray:
    """Normalised prior weights of log-spaced distance nodes ``d`` [pc].

    w_j ∝ rho(d_j) d_j^3 (d ln d = dd / d: the volume element d^2 dd), zero beyond ``limit``.
    ``kind`` is ``"galaxy"`` (needs l, b) or ``"uniform"``.
    """
    d = np.asarray(d, dtype=float)
    if kind == "galaxy":
        rho = (galaxy or GalacticModel()).density(d, l_deg, b_deg)
    elif kind == "uniform":
        rho = np.ones_like(d)
    else:
        raise InputError(f"distance prior must be 'galaxy' or 'uniform', got {kind!r}")
    w = np.where(d <= limit * (1 + 1e-9), rho * d**3, 0.0)
    w[[0, -1]] *= 0.5     # trapezoid in ln d
    total = w.sum()
    if not total > 0:
        raise InputError(f"the distance prior has no weight below {limit:g} pc")
    return w / total


def cumulative_surface_density(m_limit: float, absolute_mag, type_weights, *, kind: str = "galaxy",
                               limit: float = 30000.0, l_deg: float = math.nan, b_deg: float = math.nan,
                               extinction_coeff: float = 0.0, av_per_kpc: float = AV_PER_KPC,
                               dust_scale_height_pc: float = DUST_SCALE_HEIGHT_PC,
                               galaxy: GalacticModel | None = None, n_nodes: int = 600) -> float:
    """Number of field dwarfs per arcsec^2 brighter than ``m_limit`` in one band.

    Parameters
    ----------
    m_limit : float [mag]
    absolute_mag : ndarray[n_t] [mag]
        Absolute magnitude of each type in the band.
    type_weights : ndarray[n_t] [pc^-3]
        Local space density of each type (density per subtype x grid step).
    kind, limit, l_deg, b_deg, galaxy
        The distance model (see :func:`distance_prior_weights`).
    extinction_coeff : float
        A_band / A_V for the reddening along the sight line.

    Notes
    -----
    Sigma(<m) = sum_t n_t ∫ rho(s) s^2 [M_t + 5 log10(s/10 pc) + A(s) <= m] ds per steradian.
    With rho = 1 and no dust this is sum_t n_t d_t^3 / 3, d_t = 10^((m - M_t + 5)/5) pc.
    """
    absolute_mag = np.asarray(absolute_mag, dtype=float)
    n_t = np.asarray(type_weights, dtype=float)
    d = np.geomspace(D_MIN_PC * 1e-3, limit, n_nodes)
    rho = ((galaxy or GalacticModel()).density(d, l_deg, b_deg) if kind == "galaxy" else np.ones_like(d))
    b = b_deg if math.isfinite(b_deg) else DEFAULT_B_DEG
    av = extinction_along_sight(d, b, av_per_kpc, dust_scale_height_pc,
                                (galaxy or GalacticModel()).z_sun_pc if kind == "galaxy" else 0.0)
    apparent = absolute_mag[:, None] + 5.0 * np.log10(d / 10.0)[None, :] + extinction_coeff * av[None, :]
    bright = apparent <= m_limit
    # ∫ rho s^2 ds on the log grid: integrand rho s^3 in ln s, trapezoid; below the first node analytic
    integrand = np.where(bright, (rho * d**3)[None, :], 0.0)
    dln = np.diff(np.log(d))
    cum = np.concatenate([np.zeros((len(n_t), 1)), np.cumsum(0.5 * (integrand[:, 1:] + integrand[:, :-1]) * dln,
                                                            axis=1)], axis=1)
    per_type = cum[:, -1] + np.where(bright[:, 0], d[0] ** 3 / 3.0, 0.0)
    return float(np.sum(n_t * per_type) / _ARCSEC2_PER_SR)


def prior_odds(expected_number: float) -> float:
    """O = (1 - p) / p with p = 1 - exp(-N): odds bound vs unrelated before the photometry."""
    if not (math.isfinite(expected_number) and expected_number > 0):
        return math.nan
    p = -math.expm1(-expected_number)
    return math.exp(-expected_number) / p
