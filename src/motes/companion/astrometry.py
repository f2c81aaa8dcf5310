"""Relative astrometry of a companion: its offsets from the host at several epochs.

The table (CSV, or ECSV) has one row per epoch; the format is documented in
``docs/companion.md`` (section "Is it bound? Common proper motion"). Column
names are case-insensitive:

* the date, exactly one of ``date`` (ISO date or date-time, e.g.
  ``2019-04-12`` or ``2019-04-12T06:30``), ``jyear`` (Julian epoch, e.g.
  ``2016.0`` as Gaia quotes it) or ``mjd``; dates are taken as TT (see Notes);
* the position, either ``sep_mas`` or ``sep_arcsec`` with ``sep_error`` (same
  unit) and ``pa_deg`` (east of north, in [0, 360)) with ``pa_error_deg``; or
  ``dra_mas`` / ``ddec_mas`` (or ``dra_arcsec`` / ``ddec_arcsec``) with
  ``dra_error`` and ``ddec_error`` (same unit), Δα* = Δα cos δ;
* optional ``plate_scale_error`` (fractional, e.g. 0.001) and
  ``north_angle_error_deg`` [deg], which enter the errors, and a free-text
  ``label`` (instrument, programme).

Every problem raises :class:`motes.errors.InputError` naming the file, the row
and the column.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..parameters import accepts_quantities
from ..photometry.measurement_table import read_table_rows

__all__ = ["RelativeAstrometry", "offsets_from_separation", "read_astrometry", "DATE_COLUMNS"]

#: Accepted date columns and their meaning.
DATE_COLUMNS = {"date": "ISO date or date-time", "jyear": "Julian epoch [yr]", "mjd": "modified Julian date"}
_ARCSEC_MAS = 1000.0


@dataclass(frozen=True)
class RelativeAstrometry:
    """Offsets of a companion from its host at ``n`` epochs.

    Attributes
    ----------
    mjd : ndarray, shape (n,)
        Epochs, modified Julian date (TT).
    offset : ndarray, shape (n, 2) [mas]
        (Δα*, Δδ) of the companion relative to the host.
    covariance : ndarray, shape (n, 2, 2) [mas^2]
        Per-epoch covariance of ``offset``, plate-scale and north-angle terms included.
    labels : tuple of str
        Per-epoch text for figures (the date as given, plus the ``label`` column).
    path : str or None
        The file read.
    """

    mjd: np.ndarray
    offset: np.ndarray
    covariance: np.ndarray
    labels: tuple[str, ...] = ()
    path: str | None = None

    def __post_init__(self):
        n = len(self.mjd)
        if np.shape(self.offset) != (n, 2) or np.shape(self.covariance) != (n, 2, 2):
            raise InputError(f"offset must have shape ({n}, 2) and covariance ({n}, 2, 2)", self.path)
        if n < 2:
            raise InputError(f"a proper-motion test needs two or more epochs, got {n}", self.path)

    @property
    def years(self) -> np.ndarray:
        """Epochs as Julian years (2000.0 = J2000.0 TT)."""
        return 2000.0 + (np.asarray(self.mjd) - 51544.5) / 365.25

    @property
    def errors(self) -> np.ndarray:
        """1-sigma of Δα* and Δδ [mas], shape (n, 2)."""
        return np.sqrt(np.stack([self.covariance[:, 0, 0], self.covariance[:, 1, 1]], axis=1))


@accepts_quantities
def offsets_from_separation(separation_mas, separation_mas_error, pa_deg, pa_error_deg,
                            plate_scale_error=0.0, north_angle_error_deg=0.0):
    """Offsets (Δα*, Δδ) and their covariance from separation and position angle.

    Parameters
    ----------
    separation_mas, separation_mas_error : float or array [mas]
        ρ and its 1-sigma.
    pa_deg, pa_error_deg : float or array [deg]
        Position angle east of north and its 1-sigma.
    plate_scale_error : float or array
        Fractional 1-sigma of the plate scale (scales ρ).
    north_angle_error_deg : float or array [deg]
        1-sigma of the detector's north angle (adds to the PA error).

    Returns
    -------
    offset : ndarray, shape (n, 2) [mas]
    covariance : ndarray, shape (n, 2, 2) [mas^2]

    Notes
    -----
    Δα* = ρ sin PA, Δδ = ρ cos PA. First-order propagation with the Jacobian
    J = [[sin PA, ρ cos PA], [cos PA, −ρ sin PA]] of (ρ, PA):
    C = J diag(σ_ρ² + (ρ s)², σ_PA² + σ_N²) Jᵀ, with s the plate-scale and
    σ_N the north-angle error (angles in radians).

    Examples
    --------
    >>> off, cov = offsets_from_separation(1000.0, 2.0, 90.0, 0.1)
    >>> print(f"{off[0, 0]:.1f} {off[0, 1]:.1f} {cov[0, 0, 0]:.2f} {cov[0, 1, 1]:.2f}")
    1000.0 0.0 4.00 3.05
    """
    rho, srho, pa, spa, scale, north = np.broadcast_arrays(*(np.atleast_1d(np.asarray(v, dtype=float)) for v in (
        separation_mas, separation_mas_error, pa_deg, pa_error_deg, plate_scale_error, north_angle_error_deg)))
    theta = np.radians(pa)
    s, c = np.sin(theta), np.cos(theta)
    var_rho = srho**2 + (rho * scale) ** 2
    var_pa = np.radians(spa) ** 2 + np.radians(north) ** 2
    jac = np.stack([np.stack([s, rho * c], -1), np.stack([c, -rho * s], -1)], -2)   # (n, 2, 2)
    diag = np.zeros(jac.shape)
    diag[:, 0, 0], diag[:, 1, 1] = var_rho, var_pa
    return np.stack([rho * s, rho * c], axis=1), jac @ diag @ np.swapaxes(jac, 1, 2)


def _offset_covariance(dra, ddec, sra, sdec, scale, north):
    """Covariance of measured offsets plus plate-scale and north-angle terms."""
    v = np.array([dra, ddec])
    w = np.array([ddec, -dra])   # d(offset)/d(north angle) [per radian]
    return np.diag([sra**2, sdec**2]) + scale**2 * np.outer(v, v) + math.radians(north) ** 2 * np.outer(w, w)


# ------------------------------------------------------------------ reading
def _rows(path: Path, what: str = "astrometry table",
          example: str = "date,sep_mas,sep_error,pa_deg,pa_error_deg") -> tuple[list[str], list[dict[str, str]]]:
    """Header (lower case) and rows of a CSV or ECSV table (the photometry tables' reader)."""
    return read_table_rows(path, what, example)


def _number(row, column, path, where, *, required=True, default=math.nan, positive=False, nonnegative=False):
    text = row.get(column, "")
    if text == "":
        if required:
            raise InputError(f"column {column!r}: a value is required, the cell is empty", path, where)
        return default
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"column {column!r}: expected a number, got {text!r}", path, where) from None
    if not math.isfinite(value):
        raise InputError(f"column {column!r}: expected a finite number, got {text!r}", path, where)
    if positive and value <= 0:
        raise InputError(f"column {column!r}: must be > 0, got {text!r}", path, where)
    if nonnegative and value < 0:
        raise InputError(f"column {column!r}: must be >= 0, got {text!r}", path, where)
    return value


def _date(row, column, path, where) -> float:
    from astropy.time import Time

    text = row.get(column, "")
    if text == "":
        raise InputError(f"column {column!r}: a date is required, the cell is empty", path, where)
    try:
        if column == "date":
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return float(Time(text, format="isot" if "T" in text else "iso", scale="tt").mjd)
        value = float(text)
        if not math.isfinite(value):
            raise ValueError(text)
        return value if column == "mjd" else float(Time(value, format="jyear", scale="tt").mjd)
    except ValueError:
        expected = {"date": "an ISO date such as 2019-04-12 or 2019-04-12T06:30",
                    "jyear": "a Julian epoch such as 2019.28", "mjd": "a modified Julian date such as 58585.0"}
        raise InputError(f"column {column!r}: cannot read {text!r} as a date; expected {expected[column]}",
                         path, where) from None


def _pick(header, options, path, what) -> str | None:
    found = [c for c in options if c in header]
    if len(found) > 1:
        raise InputError(f"give one {what} column, not {' and '.join(map(repr, found))}", path, "header")
    return found[0] if found else None


def read_astrometry(path) -> RelativeAstrometry:
    """Read a relative-astrometry table (CSV or ECSV), one row per epoch.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    RelativeAstrometry

    Raises
    ------
    InputError
        Naming the file, the row and the column: fewer than two epochs, a
        missing column, a position angle outside [0, 360), a date that does
        not parse, a position with no (or a non-positive) error.

    Notes
    -----
    Dates are taken as TT: an ISO date in UTC differs by ~69 s, during which the
    Earth moves ~2000 km (1e-5 au), i.e. 1e-5 of the parallax: negligible, and
    no leap-second or Earth-orientation table is needed (nothing is downloaded).
    """
    path = Path(path)
    header, rows = _rows(path)
    date_col = _pick(header, tuple(DATE_COLUMNS), path, "date")
    if date_col is None:
        raise InputError(f"no date column: give one of {', '.join(DATE_COLUMNS)} ({'; '.join(DATE_COLUMNS.values())})",
                         path, "header")
    sep_col = _pick(header, ("sep_mas", "sep_arcsec"), path, "separation")
    dra_col = _pick(header, ("dra_mas", "dra_arcsec"), path, "Δα* offset")
    if (sep_col is None) == (dra_col is None):
        raise InputError("give either separation and position angle (sep_mas or sep_arcsec, sep_error, pa_deg, "
                         "pa_error_deg) or offsets (dra_mas, ddec_mas, dra_error, ddec_error), not "
                         + ("both" if sep_col else "neither"), path, "header")
    if sep_col:
        needed = (sep_col, "sep_error", "pa_deg", "pa_error_deg")
        unit = 1.0 if sep_col.endswith("_mas") else _ARCSEC_MAS
    else:
        ddec_col = dra_col.replace("dra", "ddec")
        needed = (dra_col, ddec_col, "dra_error", "ddec_error")
        unit = 1.0 if dra_col.endswith("_mas") else _ARCSEC_MAS
    missing = [c for c in needed if c not in header]
    if missing:
        raise InputError(f"missing column{'s' if len(missing) > 1 else ''} {', '.join(map(repr, missing))}",
                         path, "header")
    if len(rows) < 2:
        raise InputError(f"a proper-motion test needs two or more epochs, the table has {len(rows)} row"
                         f"{'' if len(rows) == 1 else 's'}", path)
    mjd, offsets, covs, labels = [], [], [], []
    for number, row in enumerate(rows, 1):
        where = f"row {number}"
        mjd.append(_date(row, date_col, path, where))
        scale = _number(row, "plate_scale_error", path, where, required=False, default=0.0, nonnegative=True)
        north = _number(row, "north_angle_error_deg", path, where, required=False, default=0.0, nonnegative=True)
        if sep_col:
            rho = _number(row, sep_col, path, where, positive=True) * unit
            srho = _number(row, "sep_error", path, where, positive=True) * unit
            pa = _number(row, "pa_deg", path, where)
            if not 0.0 <= pa < 360.0:
                raise InputError(f"column 'pa_deg': position angle must be in [0, 360) deg (east of north), "
                                 f"got {row['pa_deg']!r}", path, where)
            spa = _number(row, "pa_error_deg", path, where, positive=True)
            off, cov = offsets_from_separation(rho, srho, pa, spa, scale, north)
            off, cov = off[0], cov[0]
        else:
            dra = _number(row, dra_col, path, where) * unit
            ddec = _number(row, ddec_col, path, where) * unit
            sra = _number(row, "dra_error", path, where, positive=True) * unit
            sdec = _number(row, "ddec_error", path, where, positive=True) * unit
            off, cov = np.array([dra, ddec]), _offset_covariance(dra, ddec, sra, sdec, scale, north)
        offsets.append(off)
        covs.append(cov)
        label = row.get(date_col, "")
        labels.append(f"{label} {row.get('label', '')}".strip())
    return RelativeAstrometry(np.array(mjd), np.array(offsets), np.array(covs), tuple(labels), str(path))
