"""Reading a companion's photometry table (CSV or ECSV) into validated measurements.

Columns (case-insensitive, any order): ``band, kind, value, error`` and
optionally ``unit`` (flux rows), ``limit_sigma`` (N of an N-sigma upper limit)
and ``note``. Kinds: :data:`INPUT_KINDS`. The format is documented in
``docs/photometry.md``. Every problem raises :class:`motes.errors.InputError`
naming the file and the data row.
"""

from __future__ import annotations

import csv
import math
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import BandError, InputError
from ..parameters import MAGNITUDE
from .bands import Band, get_band
from .table_schema import COMPANION_KINDS, check_kind

__all__ = ["INPUT_KINDS", "Measurement", "read_photometry_table", "read_table_rows", "parse_flux_unit"]

#: Kinds of measurement a photometry row may hold (the names of :mod:`motes.photometry.table_schema`).
INPUT_KINDS = COMPANION_KINDS

_TABLE_COLUMNS = ("band", "kind", "value", "error", "unit", "limit_sigma", "note")


@dataclass(frozen=True)
class Measurement:
    """One input row of a photometry table, validated but not calibrated.

    Parameters
    ----------
    band : Band
    kind : str
        One of :data:`INPUT_KINDS`.
    value : float
        Magnitude [mag], flux density [``unit``], Δmag [mag] or flux ratio
        (companion/host). For an upper limit, the N-sigma limiting value.
    error : float
        1-sigma uncertainty in the unit of ``value`` (nan for upper limits).
    unit : str
        Flux-density unit for ``kind == "flux"`` (astropy syntax), else "".
    limit_sigma : float
        N of an N-sigma upper limit; nan for a detection.
    row : int
        1-based data row in the file (for messages).
    note : str
        Free text from the file's ``note`` column.
    """

    band: Band
    kind: str
    value: float
    error: float
    unit: str = ""
    limit_sigma: float = math.nan
    row: int = 0
    note: str = ""

    @property
    def is_limit(self) -> bool:
        """True for an N-sigma upper limit."""
        return not math.isnan(self.limit_sigma)


def parse_flux_unit(text: str):
    """Parse a flux-density unit (f_nu or F_lambda) with astropy.

    A lone ``A`` is read as angstrom (``erg s-1 cm-2 A-1``), since ampere
    makes no sense in a flux density.

    Returns
    -------
    astropy.units.UnitBase

    Raises
    ------
    ValueError
        When the text does not parse or is not a flux density.
    """
    import astropy.units as u

    text = str(text).strip()
    if not text:
        raise ValueError("a flux row needs a unit (e.g. Jy, mJy, W m-2 um-1, erg s-1 cm-2 AA-1)")
    candidates = [text]
    tokens = text.replace("/", " / ").split()
    if any(t.split("^")[0].rstrip("-0123456789") == "A" for t in tokens):
        candidates.append(" ".join(
            "AA" + t[1:] if t.split("^")[0].rstrip("-0123456789") == "A" else t for t in tokens
        ))
    parsed = False
    for cand in candidates:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                unit = u.Unit(cand, parse_strict="raise")
        except (ValueError, TypeError):
            continue
        parsed = True
        if unit.is_equivalent(u.Jy) or unit.is_equivalent(u.W / u.m**2 / u.um):
            return unit
    if not parsed:
        raise ValueError(
            f"unit {text!r} does not parse (astropy unit syntax, e.g. Jy, mJy, uJy, W m-2 um-1, "
            "erg s-1 cm-2 AA-1, erg s-1 cm-2 Hz-1)"
        )
    raise ValueError(
        f"unit {text!r} is not a flux density: use f_nu (Jy, mJy, erg s-1 cm-2 Hz-1) or "
        "F_lambda (W m-2 um-1, erg s-1 cm-2 AA-1)"
    )


def _lookup_band(name, custom, counting, path, where) -> Band:
    try:
        return get_band(name, custom, counting=custom[name].counting if name in custom else counting)
    except BandError as exc:
        raise InputError(exc.reason, path, where) from None


def read_table_rows(path, what: str = "photometry table",
                    example: str = "band,kind,value,error,...") -> tuple[list[str], list[dict[str, str]]]:
    """Header (lower case) and rows (cells as stripped strings) of a CSV or ECSV table.

    The one reader of the small user tables of motes (photometry, astrometry,
    evolutionary models): ``#`` comment lines and a UTF-8 byte-order mark are
    allowed, missing trailing cells are empty, extra cells are refused.

    Parameters
    ----------
    path : str or os.PathLike
    what : str
        What the table is, for messages.
    example : str
        A header line to show when the file is empty.

    Raises
    ------
    motes.errors.InputError
        Unreadable file, malformed CSV or ECSV, empty table, a row with too
        many cells (naming the row).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")      # a spreadsheet's "CSV UTF-8" starts with a BOM
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {what}: {exc}", path) from None
    if text.lstrip().startswith("# %ECSV"):
        from astropy.table import Table

        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                table = Table.read(text.splitlines(), format="ascii.ecsv")
        except Exception as exc:  # astropy raises many types for a malformed ECSV
            raise InputError(f"malformed ECSV table: {exc}", path) from None
        names = [n.strip().lower() for n in table.colnames]
        rows = []
        for rec in table:
            row = {}
            for n, col in zip(names, table.colnames):
                cell = rec[col]
                masked = np.ma.is_masked(cell)
                row[n] = "" if masked else str(cell).strip()
            rows.append(row)
        return names, rows
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError(f"{what} is empty (expected a header line, e.g. {example})", path)
    try:
        reader = csv.reader(lines)
        header = [h.strip().lower() for h in next(reader)]
        rows = []
        for number, cells in enumerate(reader, 1):
            if len(cells) > len(header):
                raise InputError(f"{len(cells)} cells but the header has {len(header)} columns", path,
                                 f"row {number}")
            cells = cells + [""] * (len(header) - len(cells))
            rows.append({h: c.strip() for h, c in zip(header, cells)})
    except csv.Error as exc:
        raise InputError(f"malformed CSV: {exc}", path) from None
    return header, rows


def _cell_float(text, path, where, column):
    if text == "":
        return math.nan
    try:
        return float(text)
    except ValueError:
        raise InputError(f"column {column!r}: expected a number, got {text!r}", path, where) from None


def read_photometry_table(path, custom: dict | None = None, counting: str = "photon") -> tuple[Measurement, ...]:
    """Read and validate a companion photometry table (CSV or ECSV).

    Parameters
    ----------
    path : str or Path
    custom : dict of str to Band, optional
        User bands (searched before the standard ones).
    counting : {"photon", "energy"}
        Counting mode for standard bands.

    Returns
    -------
    tuple of Measurement

    Raises
    ------
    InputError
        Naming the file and row: unknown band, unknown kind, missing/NaN/non-
        positive value or uncertainty, flux without a parsable unit,
        duplicate band, non-positive limit_sigma.
    """
    path = Path(path)
    custom = custom or {}
    if not path.is_file():
        raise InputError("photometry table not found", path)
    header, rows = read_table_rows(path)
    missing = [c for c in ("band", "kind", "value", "error") if c not in header]
    if missing:
        raise InputError(
            f"missing column(s) {', '.join(missing)}; expected columns {', '.join(_TABLE_COLUMNS)}", path, "header"
        )
    extra = [c for c in header if c not in _TABLE_COLUMNS]
    if extra:
        raise InputError(f"unknown column(s) {', '.join(extra)}; allowed: {', '.join(_TABLE_COLUMNS)}", path, "header")
    if not rows:
        raise InputError("photometry table has no rows", path)
    out, seen = [], {}
    for number, row in enumerate(rows, 1):
        where = f"row {number}" + (f" (band {row['band']!r})" if row.get("band") else "")
        name = row["band"]
        if not name:
            raise InputError("empty band name", path, where)
        band = _lookup_band(name, custom, counting, path, where)
        if band.name in seen:
            raise InputError(f"duplicate band: {band.name!r} is also in row {seen[band.name]}", path, where)
        seen[band.name] = number
        kind = check_kind(row["kind"], INPUT_KINDS, path, where)
        value = _cell_float(row["value"], path, where, "value")
        error = _cell_float(row["error"], path, where, "error")
        sigma = _cell_float(row.get("limit_sigma", ""), path, where, "limit_sigma")
        if math.isnan(value):
            raise InputError("value is missing or NaN", path, where)
        if not math.isfinite(value):
            raise InputError(f"value must be finite, got {value!r}", path, where)
        if row.get("limit_sigma", "") != "":
            if not (math.isfinite(sigma) and sigma > 0):
                raise InputError(f"limit_sigma must be a positive number (N of an N-sigma limit), got "
                                 f"{row['limit_sigma']!r}", path, where)
            if row["error"] != "" and not math.isnan(error):
                raise InputError("an upper limit (limit_sigma set) takes no error: leave error empty",
                                 path, where)
            error = math.nan
        else:
            if row["error"] == "" or math.isnan(error):
                raise InputError("uncertainty (error) is missing or NaN; every detection needs a 1-sigma "
                                 "uncertainty (use limit_sigma for an upper limit)", path, where)
            if not math.isfinite(error) or error <= 0:
                raise InputError(f"uncertainty must be a positive finite number, got {error!r}", path, where)
        unit = row.get("unit", "")
        if kind == "flux":
            try:
                parse_flux_unit(unit)
            except ValueError as exc:
                raise InputError(str(exc), path, where) from None
            if value <= 0:
                raise InputError(f"flux must be > 0 (give an upper limit for a non-detection), got {value!r}",
                                 path, where)
        elif unit:
            raise InputError(f"unit {unit!r} given for kind {kind!r}; only flux rows take a unit", path, where)
        if kind.endswith("_mag") and not MAGNITUDE.contains(value):
            raise InputError(f"a {kind} value must be in {MAGNITUDE.interval} mag ({MAGNITUDE.meaning}); "
                             f"got {value!r}", path, where)
        if kind == "contrast_ratio" and value <= 0:
            raise InputError(f"a flux ratio must be > 0 (give an upper limit for a non-detection), got {value!r}",
                             path, where)
        out.append(Measurement(band, kind, value, error, unit, sigma, number, row.get("note", "")))
    return tuple(out)
