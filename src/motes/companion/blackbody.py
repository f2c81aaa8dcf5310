"""Blackbody templates: Teff only, through any band by synthetic photometry.

Blackbodies are the transparent fallback for bands that neither the dwarf
sequence nor a user library covers (narrow bands, L′, M′ ...). A cool dwarf
is far from a blackbody (molecular absorption in H2O, CH4, CO), so a
blackbody fit gives a colour temperature, not a spectral type: the output
says whenever it was used.

Scale: magnitudes are those of a sphere of radius ``radius_rjup`` seen from
10 pc, F_lambda = pi B_lambda(T) (R / 10 pc)^2. With no radius given the
radius is a placeholder (1 R_Jup) and the templates carry no absolute scale
(``absolute = False``): they take part only in colours-only fits.
"""

from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np
from astropy import constants as const

from ..errors import InputError
from ..parameters import accepts_quantities
from ..photometry.bands import Band
from ..photometry.spectra import blackbody_flux_lambda
from .magnitude_cache import band_key
from .templates import TemplateGrid

__all__ = ["BlackbodySet", "DEFAULT_BLACKBODY_TEFFS", "R_JUP_PC", "blackbody_magnitudes"]

#: Jupiter's equatorial radius in parsec (IAU 2015 Resolution B3 nominal value).
R_JUP_PC = float((const.R_jup / const.pc).decompose())

#: Default temperature grid [K]: 250-12000 K, 2% steps.
DEFAULT_BLACKBODY_TEFFS = np.round(np.geomspace(250.0, 12000.0, 197), 1)

# Wavelength nodes per band for the synthesis; the blackbody is smooth, so
# this is converged to far better than 1e-4 mag (tests compare with quad).
_NODES = 1500


@accepts_quantities
def blackbody_magnitudes(teff, band: Band, radius_rjup: float = 1.0) -> np.ndarray:
    """Vega magnitudes of spheres of radius ``radius_rjup`` at 10 pc.

    Parameters
    ----------
    teff : float or ndarray[n] [K]
    band : Band
    radius_rjup : float [R_Jup]

    Returns
    -------
    ndarray[n] [mag]

    Notes
    -----
    F_lambda = pi B_lambda(T) (R / 10 pc)^2 (Planck 1901), band-averaged with
    the band's own convention (:meth:`motes.photometry.bands.Band.average_flux_lambda`).
    """
    teff = np.atleast_1d(np.asarray(teff, dtype=float))
    wl = np.geomspace(band.wavelength_min, band.wavelength_max, _NODES)
    scale = math.pi * (radius_rjup * R_JUP_PC / 10.0) ** 2
    flux = scale * blackbody_flux_lambda(wl[None, :], teff[:, None])
    mean = np.atleast_1d(band.average_flux_lambda(wl, flux))
    with np.errstate(divide="ignore"):
        return np.asarray(band.vega_magnitude_of(mean), dtype=float)


class BlackbodySet:
    """A set of blackbody templates.

    Parameters
    ----------
    teffs : array of float [K], optional
        Temperatures (default :data:`DEFAULT_BLACKBODY_TEFFS`).
    radius_rjup : float [R_Jup], optional
        A radius known from elsewhere. With it the templates have an absolute
        scale (distance-known fits become possible); without it they are
        colours only.
    """

    kind = "blackbody"
    # (band hash, temperatures, radius) -> magnitudes; blackbodies are cheap
    # but not free to synthesise, and the same bands recur between calls.
    _memo: dict = {}

    @accepts_quantities
    def __init__(self, teffs=None, radius_rjup: float | None = None):
        teffs = DEFAULT_BLACKBODY_TEFFS if teffs is None else np.asarray(teffs, dtype=float)
        if teffs.ndim != 1 or teffs.size < 2 or not np.all(np.isfinite(teffs)) or np.any(teffs <= 0):
            raise InputError("blackbody temperatures must be a 1-D array of at least two positive values [K]")
        if radius_rjup is not None and not (math.isfinite(radius_rjup) and radius_rjup > 0):
            raise InputError(f"blackbody radius must be a positive number of Jupiter radii, got {radius_rjup!r}")
        self.teffs = np.sort(teffs)
        self.radius_rjup = radius_rjup
        self.name = ("blackbodies" if radius_rjup is None
                     else f"blackbodies (R = {radius_rjup:g} R_Jup)")

    def grid(self, bands: Sequence[Band], mapping: Mapping[str, str] | None = None) -> TemplateGrid:
        """Blackbody magnitudes in the observed bands (through their own curves).

        ``mapping`` is ignored: a blackbody is integrated over the real band.
        """
        radius = 1.0 if self.radius_rjup is None else self.radius_rjup
        columns = []
        for band in bands:
            key = (band_key(band), self.teffs.tobytes(), radius)
            if key not in self._memo:
                if len(self._memo) > 256:
                    self._memo.clear()
                self._memo[key] = blackbody_magnitudes(self.teffs, band, radius)
            columns.append(self._memo[key])
        mags = np.column_stack(columns) if bands else np.zeros((self.teffs.size, 0))
        mags[~np.isfinite(mags)] = np.nan
        n = self.teffs.size
        note = ("blackbody templates: a colour temperature, not a spectral type; cool dwarfs are far "
                "from blackbodies")
        return TemplateGrid(
            source=self.name, kind="blackbody",
            labels=tuple(f"BB {t:.0f} K" for t in self.teffs), type_code=np.full(n, np.nan),
            teff=self.teffs.copy(), mass=np.full(n, np.nan), magnitudes=mags,
            absolute=np.full(n, self.radius_rjup is not None),
            band_names=tuple(b.name for b in bands), template_bands=tuple(b.name for b in bands),
            notes=(note,), extra={"radius_rjup": radius},
        )
