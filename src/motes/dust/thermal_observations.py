"""Thermal photometry of a disk: flux densities (rows of kind ``flux``) for a joint fit.

A joint fit (``[data] thermal`` of a fit description, docs/fit.md) reads the
disk's thermal SED from a table in the vocabulary of
:mod:`motes.photometry.table_schema`: every row is of kind ``flux`` (the kind
reserved for flux densities), with a unit.

========== ========= =========================================================
column     required  meaning
========== ========= =========================================================
band       yes       band name (standard, or a ``[bands.NAME]`` of the description)
value      yes       the disk's band-averaged flux density (the excess over the
                     photosphere), in ``unit``; for an upper limit the N-sigma limit
error      yes*      1-sigma error in ``unit`` (*empty for limits)
unit       yes       astropy syntax: f_nu (``Jy``, ``mJy``, ``uJy``) or F_lambda
                     (``W m-2 um-1``, converted to <f_nu> at the band's pivot)
kind       no        ``flux`` (the only kind this table takes; default)
limit_sigma no       N of an N-sigma upper limit
upper_limit no       ``true``/``false``: marks a limit (``limit_sigma`` then 3)
========== ========= =========================================================

The values are the disk's own flux densities (photosphere subtracted). Colour
corrections are not applied (see :data:`motes.dust.model.thermal.COLOUR_CORRECTION_NOTE`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import BandError, InputError
from ..parameters import accepts_quantities
from ..photometry.bands import get_band
from ..photometry.measurement_table import _cell_float as _number  # one reading of a numeric cell
from ..photometry.measurement_table import parse_flux_unit, read_table_rows
from ..photometry.table_schema import check_kind

__all__ = ["ThermalPhotometry", "THERMAL_COLUMNS", "read_thermal_photometry"]

#: Columns a thermal table may have.
THERMAL_COLUMNS = ("band", "value", "error", "unit", "kind", "limit_sigma", "upper_limit", "note")
_TRUE = ("true", "yes", "y", "1", "t")
_FALSE = ("false", "no", "n", "0", "f", "")


@accepts_quantities
@dataclass(frozen=True, eq=False)
class ThermalPhotometry:
    """A disk's thermal flux densities.

    Attributes
    ----------
    bands : tuple of Band
    flux_jy : ndarray[B] [Jy]
        Band-averaged flux density (for a limit: the N-sigma limit).
    error_jy : ndarray[B] [Jy]
        1-sigma error (for a limit: limit / N).
    is_limit : ndarray[B] of bool
    limit_sigma : ndarray[B]
        nan for detections.
    units : tuple of str
        The unit each row was given in.
    path : str
    notes : tuple of str
    """

    bands: tuple
    flux_jy: np.ndarray
    error_jy: np.ndarray
    is_limit: np.ndarray
    limit_sigma: np.ndarray
    units: tuple
    path: str
    notes: tuple = ()

    @property
    def band_names(self) -> tuple[str, ...]:
        return tuple(b.name for b in self.bands)

    @property
    def n_detections(self) -> int:
        return int(np.count_nonzero(~self.is_limit))


def read_thermal_photometry(path, custom_bands=None, shown=None) -> ThermalPhotometry:
    """Read a thermal photometry table (see the module notes).

    Parameters
    ----------
    path : str or os.PathLike
    custom_bands : dict of str to Band, optional
    shown : str, optional
        The file as the user named it (for messages; default ``path``).

    Raises
    ------
    motes.errors.InputError
        Naming the file and row: missing column, a kind other than ``flux``,
        a missing or non-flux-density unit, non-positive values or errors,
        an unknown or repeated band.
    """
    import astropy.units as u

    path = Path(path)
    shown = shown or str(path)
    if not path.is_file():
        raise InputError("thermal photometry table not found", shown)
    header, rows = read_table_rows(path, what="thermal photometry table", example="band,value,error,unit")
    missing = [c for c in ("band", "value", "error", "unit") if c not in header]
    if missing:
        raise InputError(f"missing column(s) {', '.join(missing)}; expected {', '.join(THERMAL_COLUMNS)}",
                         shown, "header")
    extra = [c for c in header if c not in THERMAL_COLUMNS]
    if extra:
        raise InputError(f"unknown column(s) {', '.join(extra)}; allowed: {', '.join(THERMAL_COLUMNS)}",
                         shown, "header")
    if not rows:
        raise InputError("the thermal photometry table has no rows", shown)
    bands, flux, err, lim, sig, units, notes, seen = [], [], [], [], [], [], [], {}
    for number, row in enumerate(rows, 1):
        name = row["band"]
        where = f"row {number}" + (f" (band {name!r})" if name else "")
        if not name:
            raise InputError("empty band name", shown, where)
        try:
            band = get_band(name, custom_bands or None)
        except BandError as exc:
            raise InputError(exc.reason, shown, where) from None
        if band.name in seen:
            raise InputError(f"band {band.name!r} is also in row {seen[band.name]}", shown, where)
        seen[band.name] = number
        if row.get("kind", ""):
            check_kind(row["kind"], ("flux",), shown, where)
        try:
            unit = parse_flux_unit(row["unit"])
        except ValueError as exc:
            raise InputError(str(exc), shown, where) from None
        value = _number(row["value"], shown, where, "value")
        error = _number(row["error"], shown, where, "error")
        n_sigma = _number(row.get("limit_sigma", ""), shown, where, "limit_sigma")
        flag = row.get("upper_limit", "").lower()
        if flag not in _TRUE + _FALSE:
            raise InputError(f"upper_limit must be true or false, got {row['upper_limit']!r}", shown, where)
        is_limit = flag in _TRUE or (math.isfinite(n_sigma) and n_sigma != 0)
        if is_limit and not math.isfinite(n_sigma):
            n_sigma = 3.0
            notes.append(f"{band.name}: upper limit without limit_sigma; taken as 3-sigma")
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"value must be a flux density > 0 (give an upper limit for a non-detection), "
                             f"got {row['value']!r}", shown, where)
        if is_limit:
            if not n_sigma > 0:
                raise InputError(f"limit_sigma must be > 0, got {n_sigma:g}", shown, where)
            error = value / n_sigma
        elif not (math.isfinite(error) and error > 0):
            raise InputError(f"error must be > 0 (1-sigma, in {row['unit']}), got {row['error']!r}", shown, where)
        if unit.is_equivalent(u.Jy):
            to_jy = (1.0 * unit).to_value(u.Jy)
        else:
            to_jy = float(band.flux_lambda_to_fnu((1.0 * unit).to_value(u.W / u.m**2 / u.um)))
            notes.append(f"{band.name}: F_lambda converted to <f_nu> at the pivot {band.pivot_wavelength:.4g} um")
        bands.append(band)
        flux.append(value * to_jy)
        err.append(error * to_jy)
        lim.append(is_limit)
        sig.append(n_sigma if is_limit else math.nan)
        units.append(row["unit"])
        if band.approximate:
            notes.append(f"band '{band.name}' is approximate ({band.source})")
    return ThermalPhotometry(tuple(bands), np.array(flux), np.array(err), np.array(lim, bool), np.array(sig),
                             tuple(units), shown, tuple(dict.fromkeys(notes)))
