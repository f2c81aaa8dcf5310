"""Disk photometry: the measured disk/star flux ratios a dust model is fitted to.

A debris disk seen in scattered light is measured per band as its brightness
relative to the star. :func:`read_disk_photometry` reads a table of such
measurements and returns a :class:`DiskPhotometry` holding, per band, the
disk/star ratio, its 1-sigma error and whether the row is an upper limit.

Input table (CSV or ECSV; ``#`` starts a comment line in CSV)
--------------------------------------------------------------
========== ========= =========================================================
column     required  meaning
========== ========= =========================================================
band       yes       band name (standard, or a user band passed in
                     ``custom_bands``)
value      yes       the measurement, in the unit implied by ``kind``; for an
                     upper limit, the N-sigma limit itself
error      yes*      1-sigma error in the same unit (*may be empty for limits)
kind       no        ``contrast_ratio`` (default), ``contrast_mag``,
                     ``sb_contrast_ratio`` or ``sb_contrast_mag`` (see below;
                     the names of :mod:`motes.photometry.table_schema`)
limit_sigma no       N of an N-sigma upper limit; empty, 0 or ``nan`` for a
                     detection
upper_limit no       ``true``/``false`` (``yes``/``no``, 1/0): marks a limit;
                     ``limit_sigma`` then defaults to 3
intensity  no        ``total`` (default) or ``polarised`` (``polarized``):
                     whether the row is total or polarised intensity
========== ========= =========================================================

Intensity
    A row in ``polarised`` intensity is the disk's polarised brightness
    relative to the (total) stellar flux, in any of the kinds below; it may be
    negative (light polarised parallel to the scattering plane is data, not
    bad input). Total and polarised rows of one table are fitted together with
    one composition and ONE flux scale, so their ratio, the degree of
    polarisation, constrains the dust. A band may appear twice, once per
    intensity; a band given twice with no ``intensity`` column is refused
    (the table would mix kinds without saying which). The table meta
    ``intensity`` sets the default for every row. Polarised rows need the
    Mie phase function (Henyey-Greenstein carries no polarisation).

Kinds (one vocabulary with companion tables; the names of earlier releases,
``ratio``, ``delta_mag``, ``sb_ratio``, ``sb_delta_mag``, are refused with their new name)
    ``contrast_ratio``
        disk flux / star flux in the band (dimensionless).
    ``contrast_mag``
        m_disk - m_star [mag]; converted with r = 10**(-0.4 dm) and the
        linearised error sigma_r = r ln(10)/2.5 sigma_dm (a note is added when
        sigma_dm > 0.2 mag, where the linear error is poor). For a limit, the
        value is the faintest Delta-mag reached (the disk is fainter).
    ``sb_contrast_ratio``
        disk surface brightness / star flux [arcsec^-2].
    ``sb_contrast_mag``
        mu_disk - m_star [mag arcsec^-2 - mag], converted as ``contrast_mag``.

Surface-brightness kinds and flux kinds differ by an unknown solid angle, so
one file may not mix them (the fit's free flux scale absorbs one common
normalisation, not two).

The noise model that turns these measurements into a likelihood (detections,
upper limits, the systematic term, the flux scale) is :mod:`motes.dust.likelihood`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import BandError, InputError, quoted_names
from ..parameters import MAGNITUDE
from ..photometry.bands import Band, get_band
from ..photometry.table_schema import DISK_KINDS, check_kind

__all__ = [
    "DiskPhotometry",
    "DISK_PHOTOMETRY_KINDS",
    "read_disk_photometry",
    "INTENSITIES",
]

#: Accepted values of the ``intensity`` column (``polarized`` is read as ``polarised``).
INTENSITIES = ("total", "polarised")
_INTENSITY_SPELLINGS = {"total": "total", "polarised": "polarised", "polarized": "polarised"}

#: Accepted values of the ``kind`` column (:data:`motes.photometry.table_schema.DISK_KINDS`).
DISK_PHOTOMETRY_KINDS = DISK_KINDS
_MAG_KINDS = ("contrast_mag", "sb_contrast_mag")
_SB_KINDS = ("sb_contrast_ratio", "sb_contrast_mag")
_LN10_OVER_2P5 = math.log(10.0) / 2.5
_TRUE = ("true", "yes", "y", "1", "t")
_FALSE = ("false", "no", "n", "0", "f", "")


@dataclass(frozen=True, eq=False)
class DiskPhotometry:
    """Disk/star brightness ratios in several bands.

    Parameters
    ----------
    bands : tuple of Band
        One band per row, all different.
    value : ndarray[B]
        Disk/star flux ratio (dimensionless) or, when ``normalisation`` is
        ``"surface brightness"``, disk surface brightness over star flux
        [arcsec^-2]. For an upper limit: the N-sigma limit.
    error : ndarray[B]
        1-sigma error of ``value``. For an upper limit: the noise, limit / N.
    is_limit : ndarray[B] of bool
        True for N-sigma upper limits.
    limit_sigma : ndarray[B]
        N of each limit (nan for detections).
    input_kind : tuple of str
        The ``kind`` each row was given in (see module notes).
    normalisation : {"flux ratio", "surface brightness"}
        What ``value`` is relative to the star.
    notes : tuple of str
        Conversions and caveats, for reports.
    path : str or None
        File the data came from.
    intensity : tuple of str
        ``"total"`` or ``"polarised"`` per row (default: all total).
    """

    bands: tuple[Band, ...]
    value: np.ndarray
    error: np.ndarray
    is_limit: np.ndarray
    limit_sigma: np.ndarray
    input_kind: tuple[str, ...] = ()
    normalisation: str = "flux ratio"
    notes: tuple[str, ...] = ()
    path: str | None = None
    intensity: tuple[str, ...] = ()

    def __post_init__(self):
        n = len(self.bands)
        arrays = {}
        for name in ("value", "error", "limit_sigma"):
            arr = np.array(getattr(self, name), dtype=float).reshape(-1)
            if arr.shape != (n,):
                raise InputError(f"DiskPhotometry.{name} must have one entry per band ({n}), got shape {arr.shape}")
            arr.setflags(write=False)
            arrays[name] = arr
        lim = np.array(self.is_limit, dtype=bool).reshape(-1)
        if lim.shape != (n,):
            raise InputError(f"DiskPhotometry.is_limit must have one entry per band ({n}), got shape {lim.shape}")
        lim.setflags(write=False)
        intensity = tuple(self.intensity) if self.intensity else ("total",) * n
        if len(intensity) != n or any(k not in INTENSITIES for k in intensity):
            raise InputError(f"DiskPhotometry.intensity must give one of {quoted_names(INTENSITIES)} per band ({n})",
                             self.path)
        object.__setattr__(self, "intensity", intensity)
        names = [(b.name, k) for b, k in zip(self.bands, intensity)]
        if len(set(names)) != n:
            dup = sorted({x[0] for x in names if names.count(x) > 1})
            raise InputError(f"disk photometry lists band(s) {dup} more than once", self.path)
        if n == 0:
            raise InputError("disk photometry has no rows", self.path)
        det = ~lim
        if not np.all(np.isfinite(arrays["value"])):
            raise InputError("disk photometry values must be finite", self.path)
        if np.any(~np.isfinite(arrays["error"]) | (arrays["error"] <= 0)):
            raise InputError("disk photometry errors (and limit noises) must be finite and > 0", self.path)
        if np.any(lim & ~(arrays["limit_sigma"] > 0)):
            raise InputError("every upper limit needs limit_sigma > 0", self.path)
        if np.any(det & np.isfinite(arrays["limit_sigma"])):
            arrays["limit_sigma"] = np.where(det, np.nan, arrays["limit_sigma"])
            arrays["limit_sigma"].setflags(write=False)
        if self.normalisation not in ("flux ratio", "surface brightness"):
            raise InputError(f"normalisation must be 'flux ratio' or 'surface brightness', got {self.normalisation!r}")
        for name, arr in arrays.items():
            object.__setattr__(self, name, arr)
        object.__setattr__(self, "is_limit", lim)
        object.__setattr__(self, "bands", tuple(self.bands))
        if not self.input_kind:
            object.__setattr__(self, "input_kind", ("contrast_ratio",) * n)

    @property
    def band_names(self) -> tuple[str, ...]:
        """Names of the bands, in row order."""
        return tuple(b.name for b in self.bands)

    @property
    def has_polarised(self) -> bool:
        """True when some row is polarised intensity."""
        return "polarised" in self.intensity

    @property
    def is_polarised(self) -> np.ndarray:
        """ndarray[B] of bool: True for polarised-intensity rows."""
        return np.array([k == "polarised" for k in self.intensity], dtype=bool)

    @property
    def row_keys(self) -> tuple[str, ...]:
        """Band names, with ``_polarised`` appended for polarised rows (store columns, file keys)."""
        return tuple(b.name + ("_polarised" if k == "polarised" else "")
                     for b, k in zip(self.bands, self.intensity))

    @property
    def row_labels(self) -> tuple[str, ...]:
        """Band names, with `` (polarised)`` after polarised rows (for tables and messages)."""
        return tuple(b.name + (" (polarised)" if k == "polarised" else "")
                     for b, k in zip(self.bands, self.intensity))

    @property
    def n_detections(self) -> int:
        """Number of rows that are detections (not limits)."""
        return int(np.count_nonzero(~self.is_limit))

    @property
    def wavelength(self) -> np.ndarray:
        """Pivot wavelength of each band [um], ndarray[B]."""
        return np.array([b.pivot_wavelength for b in self.bands])

    def to_table(self):
        """The data as an `astropy.table.Table` (one row per band, notes in meta)."""
        from astropy.table import Table

        t = Table()
        t["band"] = list(self.band_names)
        t["pivot_wavelength"] = self.wavelength
        t["pivot_wavelength"].unit = "um"
        t["value"] = self.value
        t["error"] = self.error
        if self.normalisation == "surface brightness":   # flux ratios are pure numbers
            t["value"].unit = t["error"].unit = "1 / arcsec2"
        t["is_limit"] = self.is_limit
        t["limit_sigma"] = self.limit_sigma
        t["input_kind"] = list(self.input_kind)
        if self.has_polarised:
            t["intensity"] = list(self.intensity)
        t.meta["normalisation"] = self.normalisation
        t.meta["notes"] = list(self.notes)
        if self.path:
            t.meta["source"] = self.path
        return t


# --------------------------------------------------------------------- reading
def _read_table(path: Path):
    from astropy.io import ascii as astropy_ascii
    from astropy.table import Table

    suffix = path.suffix.lower()
    if suffix not in (".csv", ".ecsv"):
        raise InputError(f"unknown table format '{suffix}': use a .csv or .ecsv file", path)
    if not path.is_file():
        raise InputError("file not found", path)
    try:
        lines = path.read_text(encoding="utf-8-sig").splitlines()    # a spreadsheet's "CSV UTF-8" has a BOM
        if suffix == ".ecsv":
            return Table.read(lines, format="ascii.ecsv")
        return astropy_ascii.read(lines, format="csv", comment="#", fill_values=[("", "nan")])
    except Exception as exc:  # astropy raises many types for malformed tables
        raise InputError(f"cannot read the table ({type(exc).__name__}: {exc})", path) from None


def _cell(table, col, i):
    value = table[col][i]
    if np.ma.is_masked(value):
        return None
    return value


def _float_cell(table, col, i, path, where, required=True):
    value = _cell(table, col, i) if col in table.colnames else None
    if value is None or (isinstance(value, str) and value.strip() == ""):
        if required:
            raise InputError(f"column '{col}' is empty; a number is needed", path, where)
        return math.nan
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise InputError(f"column '{col}' holds {value!r}, not a number", path, where) from None
    if required and not math.isfinite(out):
        raise InputError(f"column '{col}' must be finite, got {value!r}", path, where)
    return out


def read_disk_photometry(path, custom_bands: dict[str, Band] | None = None) -> DiskPhotometry:
    """Read disk photometry (disk/star ratios per band) from a CSV or ECSV table.

    Parameters
    ----------
    path : str or os.PathLike
        The table; columns as in the module notes.
    custom_bands : dict of str to Band, optional
        User bands by name (top-hat, Gaussian or curve files), searched before
        the standard bands.

    Returns
    -------
    DiskPhotometry

    Raises
    ------
    motes.errors.InputError
        Naming the file and the row (1-based data row and band) of the first
        problem: missing column, unknown band or kind, non-positive error,
        mixed flux and surface-brightness kinds, duplicated band.
    """
    path = Path(path)
    table = _read_table(path)
    cols = {c.lower().strip(): c for c in table.colnames}
    missing = [c for c in ("band", "value", "error") if c not in cols]
    if missing:
        raise InputError(
            f"missing column(s) {missing}; expected band, value, error "
            "[, kind, limit_sigma, upper_limit, intensity]", path)
    if len(table) == 0:
        raise InputError("the table has no rows", path)
    table.rename_columns(list(cols.values()), list(cols.keys()))
    default_kind = "contrast_ratio"
    if table.meta and "kind" in table.meta:
        default_kind = check_kind(table.meta["kind"], DISK_PHOTOMETRY_KINDS, path, "meta 'kind'")
    meta_intensity = str(table.meta.get("intensity", "total")).strip().lower() if table.meta else "total"
    default_intensity = _INTENSITY_SPELLINGS.get(meta_intensity)
    if default_intensity is None:
        raise InputError(f"the table meta 'intensity' must be 'total' or 'polarised', got {meta_intensity!r}",
                         path)
    has_intensity_column = "intensity" in table.colnames

    bands, values, errors, limits, sigmas, kinds, intensities = [], [], [], [], [], [], []
    notes: list[str] = []
    seen: dict[tuple[str, str], int] = {}
    for i in range(len(table)):
        raw_band = _cell(table, "band", i)
        band_name = "" if raw_band is None else str(raw_band).strip()
        where = f"row {i + 1}" + (f" (band '{band_name}')" if band_name else "")
        if not band_name:
            raise InputError("the band name is empty", path, where)
        intensity = default_intensity
        if has_intensity_column:
            cell = _cell(table, "intensity", i)
            if cell is not None and str(cell).strip():
                text = str(cell).strip().lower()
                intensity = _INTENSITY_SPELLINGS.get(text)
                if intensity is None:
                    raise InputError(f"intensity must be 'total' or 'polarised', got {cell!r}", path, where)
        if (band_name, intensity) in seen:
            first = seen[(band_name, intensity)]
            if not has_intensity_column:
                raise InputError(
                    f"band '{band_name}' already given in row {first}; if one of the two rows is polarised "
                    "intensity, add a column 'intensity' saying which (total or polarised)", path, where)
            raise InputError(f"band '{band_name}' in {intensity} intensity already given in row {first}",
                             path, where)
        seen[(band_name, intensity)] = i + 1
        try:
            band = get_band(band_name, custom=custom_bands)
        except BandError as exc:
            raise InputError(exc.reason, path, where) from None
        kind = default_kind
        if "kind" in table.colnames:
            cell = _cell(table, "kind", i)
            if cell is not None and str(cell).strip():
                kind = check_kind(cell, DISK_PHOTOMETRY_KINDS, path, where)

        is_limit = False
        if "upper_limit" in table.colnames:
            cell = _cell(table, "upper_limit", i)
            text = "" if cell is None else str(cell).strip().lower()
            if text in _TRUE:
                is_limit = True
            elif text not in _FALSE:
                raise InputError(f"upper_limit must be true or false, got {cell!r}", path, where)
        n_sigma = _float_cell(table, "limit_sigma", i, path, where, required=False)
        if math.isfinite(n_sigma) and n_sigma != 0.0:
            if n_sigma < 0:
                raise InputError(f"limit_sigma must be > 0, got {n_sigma:g}", path, where)
            is_limit = True
        elif is_limit:
            n_sigma = 3.0
            notes.append(f"{band_name}: upper limit without limit_sigma; taken as 3-sigma")

        value = _float_cell(table, "value", i, path, where)
        error = _float_cell(table, "error", i, path, where, required=not is_limit)
        if not is_limit and not error > 0:
            raise InputError(f"error must be > 0, got {error:g}", path, where)

        if kind in _MAG_KINDS:
            if not MAGNITUDE.contains(value):
                raise InputError(f"a {kind} value must be in {MAGNITUDE.interval} mag ({MAGNITUDE.meaning}), "
                                 f"got {value:g}", path, where)
            ratio = 10.0 ** (-0.4 * value)
            if is_limit:
                noise = ratio / n_sigma
            else:
                noise = ratio * _LN10_OVER_2P5 * error
                if error > 0.2:
                    notes.append(f"{band_name}: Delta-mag error {error:.2f} mag > 0.2 mag; "
                                 "its linearised ratio error is approximate")
        else:
            ratio = value
            if is_limit:
                if not ratio > 0:
                    raise InputError(f"an upper limit must be > 0, got {value:g}", path, where)
                noise = ratio / n_sigma
            else:
                noise = error
        bands.append(band)
        values.append(ratio)
        errors.append(noise)
        limits.append(is_limit)
        sigmas.append(n_sigma if is_limit else math.nan)
        kinds.append(kind)
        intensities.append(intensity)
        if band.approximate:
            # the wording of the model's note (dust.model.colours), so a fit prints it once
            notes.append(f"band '{band.name}' is approximate ({band.source})")

    families = {k in _SB_KINDS for k in kinds}
    if len(families) > 1:
        raise InputError(
            "the table mixes flux-ratio kinds (contrast_ratio, contrast_mag) with surface-brightness kinds "
            "(sb_contrast_ratio, sb_contrast_mag); their normalisations differ by an unknown solid angle, "
            "so give every row in one family", path)
    if any(k in _MAG_KINDS for k in kinds):
        notes.append("contrast_mag rows converted to flux ratios with r = 10**(-0.4 dm)")
    return DiskPhotometry(
        bands=tuple(bands),
        value=np.array(values),
        error=np.array(errors),
        is_limit=np.array(limits),
        limit_sigma=np.array(sigmas),
        input_kind=tuple(kinds),
        normalisation="surface brightness" if families == {True} else "flux ratio",
        notes=tuple(dict.fromkeys(notes)),
        path=str(path),
        intensity=tuple(intensities),
    )
