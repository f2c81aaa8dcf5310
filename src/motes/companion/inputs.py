"""Build calibrated photometry directly from magnitudes (Python use, tests, benchmarks).

The usual route is a target file read by :func:`motes.photometry.read_target`
and calibrated by :func:`motes.photometry.calibrate`. When the magnitudes are
already Vega magnitudes in known bands, :func:`photometry_from_magnitudes`
builds the same :class:`~motes.photometry.CalibratedPhotometry` in one call.
"""

from __future__ import annotations

import math
from typing import Mapping

from ..errors import InputError
from ..parameters import accepts_quantities
from ..photometry.bands import Band, get_band
from ..photometry.measurements import BandPhotometry, CalibratedPhotometry

__all__ = ["photometry_from_magnitudes"]

_MAG_PER_LN = 2.5 / math.log(10.0)


@accepts_quantities
def photometry_from_magnitudes(magnitudes: Mapping[str, tuple], *, distance_pc: float = math.nan,
                               distance_pc_error: float = 0.0, limits: Mapping[str, tuple] | None = None,
                               bands: Mapping[str, Band] | None = None, name: str = "companion",
                               absolute: bool = False) -> CalibratedPhotometry:
    """Calibrated photometry from Vega magnitudes.

    Parameters
    ----------
    magnitudes : dict of str to (float, float)
        Band name -> (Vega magnitude, 1-sigma) [mag] of detections.
    distance_pc, distance_pc_error : float [pc]
        Distance of the system (nan = unknown).
    limits : dict of str to (float, float), optional
        Band name -> (N-sigma limiting Vega magnitude, N) of non-detections.
    bands : dict of str to Band, optional
        User bands by name (standard names are looked up with
        :func:`~motes.photometry.get_band`).
    name : str
    absolute : bool
        The magnitudes are absolute (at 10 pc); ``distance_pc`` then defaults
        to 10 pc, i.e. the apparent magnitudes at 10 pc.

    Returns
    -------
    CalibratedPhotometry
        Rows sorted by pivot wavelength.

    Examples
    --------
    >>> phot = photometry_from_magnitudes({"2mass_j": (11.0, 0.05), "2mass_ks": (10.0, 0.05)}, distance_pc=20.0)
    >>> [round(r.absolute_mag, 3) for r in phot.rows]
    [9.495, 8.495]
    """
    bands = dict(bands or {})
    if absolute and not math.isfinite(distance_pc):
        distance_pc, distance_pc_error = 10.0, 0.0
    if math.isfinite(distance_pc):
        if distance_pc <= 0:
            raise InputError(f"distance must be positive, got {distance_pc!r} pc")
        mu = 5.0 * math.log10(distance_pc / 10.0)
        mu_err = 5.0 / math.log(10.0) * distance_pc_error / distance_pc
    else:
        mu = mu_err = math.nan
    rows = []

    def band_of(key):
        return bands[key] if key in bands else get_band(key)

    for key, value in magnitudes.items():
        try:
            mag, err = (float(v) for v in value)
        except (TypeError, ValueError):
            raise InputError(f"magnitude of {key!r} must be a pair (magnitude, 1-sigma), got {value!r}") from None
        band = band_of(key)
        zp = band.vega_zero_point_jy
        flux = zp * 10 ** (-0.4 * mag)
        rows.append(BandPhotometry(
            band=band, input_kind="vega_mag", is_limit=False, limit_sigma=math.nan, apparent_mag=mag,
            apparent_mag_error=err, flux_jy=flux, flux_jy_error=flux * err / _MAG_PER_LN,
            absolute_mag=mag - mu, absolute_mag_error=err, host_synthesised=False,
        ))
    for key, value in (limits or {}).items():
        try:
            mag, n_sigma = (float(v) for v in value)
        except (TypeError, ValueError):
            raise InputError(f"limit of {key!r} must be a pair (limiting magnitude, N sigma), got {value!r}") from None
        band = band_of(key)
        flux = band.vega_zero_point_jy * 10 ** (-0.4 * mag)
        rows.append(BandPhotometry(
            band=band, input_kind="vega_mag", is_limit=True, limit_sigma=n_sigma, apparent_mag=mag,
            apparent_mag_error=math.nan, flux_jy=flux, flux_jy_error=flux / n_sigma,
            absolute_mag=mag - mu, absolute_mag_error=math.nan, host_synthesised=False,
            notes=(f"{n_sigma:g}-sigma upper limit",),
        ))
    rows.sort(key=lambda r: r.band.pivot_wavelength)
    d_err = distance_pc_error if math.isfinite(distance_pc) else math.nan
    return CalibratedPhotometry(name, tuple(rows), float(distance_pc), float(d_err), float(mu), float(mu_err))
