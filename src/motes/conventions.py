"""Internal units and conventions, written once.

Inside motes every physics function takes bare floats/arrays in these units;
astropy units are attached or stripped only at the public boundary.

=====================  =======================  ==========================
quantity               internal unit            astropy unit
=====================  =======================  ==========================
wavelength, grain size micrometre               ``u.um``
flux density f_nu      jansky                   ``u.Jy``
flux density F_lambda  W m^-2 um^-1             ``u.W / u.m**2 / u.um``
temperature            kelvin                   ``u.K``
distance               parsec                   ``u.pc``
density                g cm^-3                  ``u.g / u.cm**3``
=====================  =======================  ==========================

Luminosity [L_sun], mass [M_sun], parallax [mas] and angles [deg; rad for
the Mie functions' ``theta``] follow from the argument names;
:mod:`motes.parameters` declares every argument name with its unit.

Refractive index: ``m = n + i k`` with ``k >= 0`` (absorbing media have a
positive imaginary part). Phase functions are normalised to
``integral p dOmega = 1``.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
from astropy import constants as const

__all__ = [
    "WAVELENGTH_UNIT",
    "FNU_UNIT",
    "FLAM_UNIT",
    "TEMPERATURE_UNIT",
    "DISTANCE_UNIT",
    "DENSITY_UNIT",
    "AB_ZERO_POINT_JY",
    "flam_to_fnu",
    "fnu_to_flam",
    "to_internal",
]

WAVELENGTH_UNIT = u.um
FNU_UNIT = u.Jy
FLAM_UNIT = u.W / u.m**2 / u.um
TEMPERATURE_UNIT = u.K
DISTANCE_UNIT = u.pc
DENSITY_UNIT = u.g / u.cm**3

#: AB magnitude zero point, Oke & Gunn (1983), ApJ 266, 713.
AB_ZERO_POINT_JY = 3631.0

# f_nu [Jy] = F_lambda [W m^-2 um^-1] * lambda^2 [um^2] * _FLAM_TO_FNU
_C_UM_PER_S = const.c.to_value(u.um / u.s)
_FLAM_TO_FNU = 1e26 / _C_UM_PER_S


def _bare(value, unit, name, equivalencies=None):
    """``value`` in ``unit`` if it is a Quantity, else unchanged (bare numbers are in ``unit``)."""
    return to_internal(value, unit, name, equivalencies) if isinstance(value, u.Quantity) else value


def flam_to_fnu(flux_lambda, wavelength):
    """Convert F_lambda [W m^-2 um^-1] at wavelength [um] to f_nu [Jy] (Quantities are converted first)."""
    flux_lambda = _bare(flux_lambda, FLAM_UNIT, "flux_lambda")
    wavelength = _bare(wavelength, WAVELENGTH_UNIT, "wavelength", u.spectral())
    return np.asarray(flux_lambda) * np.asarray(wavelength) ** 2 * _FLAM_TO_FNU


def fnu_to_flam(flux_nu, wavelength):
    """Convert f_nu [Jy] at wavelength [um] to F_lambda [W m^-2 um^-1] (Quantities are converted first)."""
    flux_nu = _bare(flux_nu, FNU_UNIT, "flux_nu")
    wavelength = _bare(wavelength, WAVELENGTH_UNIT, "wavelength", u.spectral())
    return np.asarray(flux_nu) / (np.asarray(wavelength) ** 2 * _FLAM_TO_FNU)


def to_internal(value, unit, name: str = "value", equivalencies=None, kind: str | None = None,
                where: str | None = None):
    """Strip a Quantity to the internal unit; pass bare numbers through.

    The one conversion at the public boundary (:func:`motes.parameters.accepts_quantities`
    calls it for every declared argument).

    Parameters
    ----------
    value : float, array or `~astropy.units.Quantity`
        A bare number is taken to be in ``unit`` already.
    unit : `~astropy.units.Unit`
        The internal unit.
    name : str
        Argument name used in the error message.
    equivalencies : list, optional
        astropy equivalencies (e.g. ``u.spectral()`` for a wavelength).
    kind : str, optional
        Physical type expected, added to the error message (e.g. ``"length"``).
    where : str, optional
        The callable, put in front of the error message.

    Raises
    ------
    motes.errors.InputError
        When ``value`` carries a unit that does not convert to ``unit``.
    """
    from .errors import InputError

    if isinstance(value, u.Quantity):
        try:
            v = value.to_value(unit, equivalencies=equivalencies or [])
        except u.UnitConversionError as exc:
            expected = f" ({kind})" if kind else ""
            raise InputError(
                f"{name} has unit '{value.unit}', which does not convert to '{unit}'{expected}",
                where=where,
            ) from exc
        return float(v) if np.ndim(v) == 0 else v
    return np.asarray(value, dtype=float) if np.ndim(value) else float(value)
