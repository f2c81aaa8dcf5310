"""The Planck function: the one implementation both bottom layers use.

photometry/ (stellar spectra, blackbody templates) and optics/ (grain
temperatures, thermal emission) may not import each other, so B_lambda lives
here, in the basement. Wavelengths in um, temperatures in K.
"""

from __future__ import annotations

import numpy as np
from astropy import constants as const
import astropy.units as u

from .parameters import accepts_quantities

__all__ = ["planck_lambda", "HC_OVER_K_UM_K"]

#: h c / k_B [um K] (CODATA values through astropy.constants).
HC_OVER_K_UM_K = (const.h * const.c / const.k_B).to_value(u.um * u.K)
_TWO_HC2 = (2 * const.h * const.c**2).to_value(u.W * u.um**4 / u.m**2)  # W m^-2 um^4 (per sr)


@accepts_quantities
def planck_lambda(wavelength, temperature):
    """Planck surface brightness B_lambda(T) [W m^-2 um^-1 sr^-1].

    Parameters
    ----------
    wavelength : float or ndarray [um]
    temperature : float or ndarray [K]
        Broadcasts against ``wavelength``.

    Returns
    -------
    ndarray
        B_lambda = 2 h c^2 / lambda^5 / (exp(h c / lambda k T) - 1) (0 where it underflows).

    Examples
    --------
    >>> f"{planck_lambda(0.5, 5772.0):.3e}"
    '2.624e+07'
    """
    wavelength = np.asarray(wavelength, dtype=float)
    temperature = np.asarray(temperature, dtype=float)
    x = HC_OVER_K_UM_K / (wavelength * temperature)
    with np.errstate(over="ignore"):
        return _TWO_HC2 / wavelength**5 / np.expm1(x)
