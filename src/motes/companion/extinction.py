"""Interstellar extinction for the companion fit: per-band A_band/A_V and the A_V prior.

The extinction law comes from the maintained ``dust_extinction`` package
(Gordon 2024, JOSS 9, 7023), by default its ``G23`` Milky-Way average
(Gordon et al. 2023, ApJ 950, 86; valid 0.0912-32 um) with R_V = 3.1.
A_band / A_V is evaluated at each band's pivot wavelength: for broad bands
and the steep spectra of cool dwarfs the band-averaged value differs by a few
per cent of A_band (common practice, no source), negligible next to the
A_V uncertainty of a photometric fit.

Prior: A_V uniform on [0, A_V,max] (default 5 mag), marginalised on an even
grid with trapezoid weights.
"""

from __future__ import annotations

import numpy as np
import astropy.units as u

from ..errors import FitError, InputError

__all__ = ["extinction_coefficients", "av_prior_grid", "EXTINCTION_LAWS"]

#: Laws accepted by name (all from ``dust_extinction.parameter_averages``).
EXTINCTION_LAWS = ("G23", "F19", "G16", "CCM89", "F99", "O94")


def extinction_coefficients(bands, law: str = "G23", rv: float = 3.1) -> np.ndarray:
    """A_band / A_V of each band at its pivot wavelength.

    Parameters
    ----------
    bands : sequence of Band
    law : str
        A name from :data:`EXTINCTION_LAWS`.
    rv : float
        R_V = A_V / E(B - V).

    Returns
    -------
    ndarray[n_b]

    Raises
    ------
    FitError
        A band outside the law's wavelength range.
    """
    from dust_extinction import parameter_averages

    if law not in EXTINCTION_LAWS:
        raise InputError(f"unknown extinction law {law!r}; choose from {', '.join(EXTINCTION_LAWS)}")
    try:
        model = getattr(parameter_averages, law)(Rv=rv)
    except (ValueError, TypeError) as exc:
        raise InputError(f"extinction law {law} does not accept R_V = {rv}: {exc}") from None
    lo, hi = (1.0 / model.x_range[1], 1.0 / model.x_range[0])  # x_range is in um^-1
    out = []
    for band in bands:
        lam = band.pivot_wavelength
        if not lo <= lam <= hi:
            raise FitError(
                f"band {band.name} (pivot {lam:.3f} um) is outside the {law} extinction law's range "
                f"{lo:.3f}-{hi:.1f} um; fit without extinction or choose another law"
            )
        out.append(float(model(lam * u.um)))
    return np.array(out)


def av_prior_grid(av_max: float = 5.0, n: int = 41) -> tuple[np.ndarray, np.ndarray]:
    """Nodes [mag] and weights (summing to 1) of a uniform A_V prior on [0, av_max]."""
    if not (np.isfinite(av_max) and av_max > 0):
        raise InputError(f"A_V maximum must be a positive number of magnitudes, got {av_max!r}")
    if n < 3:
        raise InputError(f"the A_V grid needs at least 3 nodes, got {n}")
    nodes = np.linspace(0.0, av_max, n)
    weights = np.full(n, 1.0)
    weights[[0, -1]] = 0.5
    return nodes, weights / weights.sum()
