"""Magnitudes, flux densities, contrasts and distances: the conversions.

Pure functions on floats or numpy arrays (they broadcast), in internal units:
f_nu [Jy], magnitudes [mag], distance [pc], parallax [mas]. They are what
:func:`motes.photometry.calibrate` uses, and what its uncertainty model is
tested against.

Zero-point uncertainties
------------------------
Converting between a Vega-based magnitude and a physical flux (or an AB
magnitude) goes through the band's Vega zero point, whose absolute
calibration is uncertain by one to two per cent. The fractional 1-sigma
values assumed per photometric system (:data:`ZERO_POINT_FRACTIONAL_ERROR`):

==================  =====  ==========================================================
system              error  basis
==================  =====  ==========================================================
2MASS               0.018  Cohen, Wheaton & Megeath (2003) quote 1.7-2.0 % for J/H/Ks
                           (from memory)
WISE                0.015  Jarrett et al. (2011), ~1.5 % (from memory)
Spitzer/IRAC        0.020  Reach et al. (2005), ~2 % absolute calibration (from memory)
Gaia                0.010  common practice, no source
Pan-STARRS          0.010  common practice, no source
SDSS                0.020  AB offsets of a few hundredths (u, z; from memory)
Johnson-Cousins     0.020  common practice, no source
Bessell             0.020  common practice, no source
user bands          0.020  synthetic Vega zero point on CALSPEC Vega, whose absolute
                           flux is good to ~1-2 % in the near infrared (common
                           practice, no source)
==================  =====  ==========================================================

These can be overridden per band or per system
(:class:`~motes.photometry.targets.CalibrationSettings`).
"""

from __future__ import annotations

import math

import numpy as np

from ..parameters import accepts_quantities
from .bands import Band

__all__ = [
    "MAG_PER_LN",
    "ZERO_POINT_FRACTIONAL_ERROR",
    "zero_point_error",
    "magnitude_to_flux",
    "flux_to_magnitude",
    "ratio_to_delta_mag",
    "delta_mag_to_ratio",
    "distance_modulus",
    "distance_from_parallax",
    "distance_modulus_error",
]

#: 2.5 / ln 10 = 1.0857...: sigma_m = MAG_PER_LN * sigma_f / f.
MAG_PER_LN = 2.5 / math.log(10.0)

#: Fractional Vega zero-point uncertainty per photometric system (module notes).
ZERO_POINT_FRACTIONAL_ERROR = {
    "2MASS": 0.018,
    "WISE": 0.015,
    "Spitzer/IRAC": 0.020,
    "Gaia": 0.010,
    "Pan-STARRS": 0.010,
    "SDSS": 0.020,
    "Johnson-Cousins": 0.020,
    "Bessell": 0.020,
    "user": 0.020,
}


def zero_point_error(band: Band, overrides: dict | None = None) -> float:
    """Fractional 1-sigma uncertainty of ``band``'s Vega zero point.

    Parameters
    ----------
    band : Band
    overrides : dict of str to float, optional
        Keyed by band name (checked first) or system name.

    Returns
    -------
    float
        sigma_ZP / ZP (dimensionless).
    """
    overrides = overrides or {}
    if band.name in overrides:
        return float(overrides[band.name])
    if band.system in overrides:
        return float(overrides[band.system])
    system = band.system if band.system in ZERO_POINT_FRACTIONAL_ERROR else "user"
    return ZERO_POINT_FRACTIONAL_ERROR[system]


@accepts_quantities
def magnitude_to_flux(magnitude, zero_point_jy):
    """f_nu [Jy] of a magnitude: f = ZP 10^(-0.4 m).

    Parameters
    ----------
    magnitude : float or ndarray [mag]
    zero_point_jy : float or ndarray [Jy]
        Flux density of magnitude 0 (``band.vega_zero_point_jy`` for Vega
        magnitudes, 3631 Jy for AB).

    Examples
    --------
    >>> f"{magnitude_to_flux(0.0, 3631.0):.1f}"
    '3631.0'
    """
    return np.asarray(zero_point_jy) * 10.0 ** (-0.4 * np.asarray(magnitude, dtype=float))


@accepts_quantities
def flux_to_magnitude(flux_jy, zero_point_jy):
    """Magnitude of a flux density: m = -2.5 log10(f / ZP).

    Parameters
    ----------
    flux_jy : float or ndarray [Jy], > 0
    zero_point_jy : float or ndarray [Jy]
    """
    return -2.5 * np.log10(np.asarray(flux_jy, dtype=float) / np.asarray(zero_point_jy))


def ratio_to_delta_mag(ratio):
    """Contrast in magnitudes of a flux ratio (companion/host): Δm = -2.5 log10 r."""
    return -2.5 * np.log10(np.asarray(ratio, dtype=float))


def delta_mag_to_ratio(delta_mag):
    """Flux ratio (companion/host) of a contrast in magnitudes: r = 10^(-0.4 Δm)."""
    return 10.0 ** (-0.4 * np.asarray(delta_mag, dtype=float))


@accepts_quantities
def distance_modulus(distance_pc):
    """Distance modulus mu = 5 log10(d / 10 pc) [mag] of a distance [pc]."""
    return 5.0 * np.log10(np.asarray(distance_pc, dtype=float) / 10.0)


@accepts_quantities
def distance_modulus_error(distance_pc, distance_pc_error):
    """1-sigma of the distance modulus [mag] by linear propagation: 5/ln10 σ_d/d."""
    return 2.0 * MAG_PER_LN * np.asarray(distance_pc_error, dtype=float) / np.asarray(distance_pc, dtype=float)


@accepts_quantities
def distance_from_parallax(parallax_mas, parallax_mas_error):
    """Distance and distance modulus from a parallax, with linear errors.

    Parameters
    ----------
    parallax_mas, parallax_mas_error : float or ndarray [mas], parallax > 0

    Returns
    -------
    distance_pc, distance_pc_error, mu, mu_error : ndarray or float
        d = 1000 / ϖ [pc]; σ_d = 1000 σ_ϖ / ϖ² [pc];
        mu = 5 log10(d / 10) [mag]; σ_mu = (5 / ln 10) σ_ϖ / ϖ [mag].

    Notes
    -----
    Inverting the parallax and propagating linearly is unbiased only when the
    fractional parallax error is small: for ϖ/σ_ϖ below about 5 the inverse
    is a biased distance estimator with a skewed error (Bailer-Jones 2015,
    PASP 127, 994) and a prior-based distance is better.
    """
    p = np.asarray(parallax_mas, dtype=float)
    pe = np.asarray(parallax_mas_error, dtype=float)
    d = 1000.0 / p
    de = 1000.0 * pe / p**2
    mu = distance_modulus(d)
    mue = 2.0 * MAG_PER_LN * pe / p
    if d.ndim == 0:
        return float(d), float(de), float(mu), float(mue)
    return d, de, mu, mue

