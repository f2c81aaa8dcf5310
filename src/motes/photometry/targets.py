"""Reading a target: a TOML description plus a photometry table.

A *target* is one companion (or any faint source) next to a host star. It is
described by two files (the format is documented with a full example in
``docs/photometry.md``):

* a TOML file with the ``[companion]`` name and photometry-table path, the
  ``[host]`` star (catalogue magnitudes, distance or parallax, Teff or a
  spectrum for synthesising missing host magnitudes), user ``[bands.NAME]``
  (curve file, top-hat or Gaussian) and optional ``[settings]``;
* a photometry table (CSV or ECSV) with one row per band and the columns
  ``band, kind, value, error`` plus ``unit`` (flux rows), ``limit_sigma``
  (upper limits) and an optional free-text ``note``.

Everything a user can get wrong raises :class:`motes.errors.InputError`
naming the file and the row or field, never a raw parser exception.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import BandError, InputError, quoted_names
from ..parameters import MAGNITUDE, STAR_TEFF, accepts_quantities
from ..tomlcheck import check_keys, check_tables, get_table, read_number
from .bands import COUNTING_MODES, Band, gaussian_band, read_band_curve, top_hat_band
from .measurement_table import Measurement, _lookup_band, read_photometry_table

__all__ = [
    "DEFAULT_SYNTHESIS_SYSTEMATIC_MAG",
    "HostMagnitude",
    "HostSpectrum",
    "HostStar",
    "CalibrationSettings",
    "Target",
    "read_target",
    "read_user_bands",
    "user_bands_from_document",
    "read_host_spectrum",
    "TARGET_KEYS",
    "USER_BAND_KEYS",
]

#: Keys each table of a target description accepts (docs/descriptions.md lists them).
TARGET_KEYS = {
    "companion": ("name", "photometry"),
    "host": ("name", "distance_pc", "parallax_mas", "teff_k", "magnitudes", "spectrum",
             "ra_deg", "dec_deg", "pm_ra_mas_yr", "pm_dec_mas_yr"),
    "host.spectrum": ("file", "wavelength_unit", "flux"),
    "host.magnitudes": ("mag", "error", "system"),
    "settings": ("synthesis_systematic_mag", "synthesis_reference_band", "counting", "zero_point_errors"),
}
#: Keys of a user band ``[bands.NAME]``, by ``shape`` (target, mixture, fit and grid files).
USER_BAND_KEYS = {
    "top-hat": ("shape", "centre_um", "width_um", "counting", "note"),
    "gaussian": ("shape", "centre_um", "fwhm_um", "counting", "note"),
    "curve": ("shape", "file", "wavelength_unit", "response", "vega_magnitude", "counting", "note"),
}


#: Default systematic uncertainty [mag] added to a host magnitude synthesised
#: from a spectrum model. 0.15 mag: between Ks and ~3.4 um, blackbody colours
#: are redder than the mean colours of real dwarfs by ~0.1 mag for G and K
#: stars and ~0.2 mag for M dwarfs, whose molecular bands (CO, H2O) a
#: blackbody lacks (comparison with the Pecaut & Mamajek 2013 sequence, see
#: tests/test_photometry_synthesis.py). Set ``[settings]
#: synthesis_systematic_mag`` to change it; use a model spectrum for M hosts.
DEFAULT_SYNTHESIS_SYSTEMATIC_MAG = 0.15



# ----------------------------------------------------------------- records
@dataclass(frozen=True)
class HostMagnitude:
    """A catalogue magnitude of the host star.

    ``system`` is ``"Vega"`` or ``"AB"``; ``error`` is 1-sigma [mag].
    """

    band: Band
    magnitude: float
    error: float
    system: str = "Vega"


@accepts_quantities
@dataclass(frozen=True)
class HostSpectrum:
    """A host-star spectrum for synthesising magnitudes.

    ``wavelength`` [um] increasing, ``flux_lambda`` F_lambda in any
    consistent unit (only colours are taken from it).
    """

    wavelength: np.ndarray
    flux_lambda: np.ndarray
    source: str = ""


@accepts_quantities
@dataclass(frozen=True)
class HostStar:
    """The host star: catalogue photometry, distance and spectrum model.

    Distances are [pc]; parallax [mas]; ``teff`` [K]. Unknown values are nan.
    When a parallax is given, ``distance_pc`` is left nan and the distance
    is derived from the parallax by :func:`motes.photometry.calibrate`.
    ``ra_deg``, ``dec_deg`` (ICRS [deg]) and the proper motion
    ``pm_ra_mas_yr`` (mu_alpha* = mu_alpha cos delta), ``pm_dec_mas_yr``
    [mas/yr] with their 1-sigma errors are used by the common-proper-motion
    test (:mod:`motes.companion.motion`); nan when not given.
    """

    name: str = "host"
    magnitudes: tuple[HostMagnitude, ...] = ()
    distance_pc: float = math.nan
    distance_pc_error: float = math.nan
    parallax_mas: float = math.nan
    parallax_mas_error: float = math.nan
    teff: float = math.nan
    spectrum: HostSpectrum | None = None
    ra_deg: float = math.nan
    dec_deg: float = math.nan
    pm_ra_mas_yr: float = math.nan
    pm_ra_mas_yr_error: float = math.nan
    pm_dec_mas_yr: float = math.nan
    pm_dec_mas_yr_error: float = math.nan

    def magnitude_in(self, band: Band) -> HostMagnitude | None:
        """The catalogue magnitude in ``band`` (matched by name), or None."""
        for entry in self.magnitudes:
            if entry.band.name == band.name:
                return entry
        return None


@dataclass(frozen=True)
class CalibrationSettings:
    """Explicit choices of a calibration (the ``[settings]`` TOML table).

    Parameters
    ----------
    synthesis_systematic_mag : float
        Systematic 1-sigma [mag] added to synthesised host magnitudes
        (default :data:`DEFAULT_SYNTHESIS_SYSTEMATIC_MAG`).
    synthesis_reference_band : str or None
        Host catalogue band to normalise synthesised magnitudes to; None picks
        the band nearest in pivot wavelength.
    counting : {"photon", "energy"}
        Detector counting mode for every band (a user band may override it).
    zero_point_errors : dict of str to float
        Fractional zero-point uncertainties overriding the defaults, keyed by
        band name or photometric system name.
    """

    synthesis_systematic_mag: float = DEFAULT_SYNTHESIS_SYSTEMATIC_MAG
    synthesis_reference_band: str | None = None
    counting: str = "photon"
    zero_point_errors: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Target:
    """A companion's photometry with everything needed to calibrate it.

    Build it with :func:`read_target`, or directly in Python.
    """

    name: str
    host: HostStar
    measurements: tuple[Measurement, ...]
    bands: dict = field(default_factory=dict)  # user bands: name -> Band
    settings: CalibrationSettings = field(default_factory=CalibrationSettings)
    path: str | None = None
    photometry_path: str | None = None


# ----------------------------------------------------------------- helpers
def _pair(value, path, where, what) -> tuple[float, float]:
    """A ``[value, error]`` pair with a positive error."""
    if not isinstance(value, list) or len(value) != 2:
        raise InputError(f"expected [{what}, uncertainty] (two numbers), got {value!r}", path, where)
    v = read_number(value[0], path=path, where=where, what=what)
    e = read_number(value[1], path=path, where=where, what="an uncertainty")
    if e <= 0:
        raise InputError(f"uncertainty must be > 0, got {e!r}", path, where)
    return v, e


# ----------------------------------------------------------------- bands
def _read_user_bands(doc: dict, path: Path, counting: str) -> dict[str, Band]:
    bands = doc.get("bands", {})
    if not isinstance(bands, dict):
        raise InputError("[bands] must be a table of named bands", path, "[bands]")
    out = {}
    for name, spec in bands.items():
        where = f"[bands.{name}]"
        if not isinstance(spec, dict):
            raise InputError("each band must be a table with a 'shape' key", path, where)
        shape = spec.get("shape")
        try:
            if shape == "top-hat":
                check_keys(spec, USER_BAND_KEYS["top-hat"], path=path, where=where)
                band = top_hat_band(name, read_number(spec.get("centre_um"), path=path, where=f"{where} centre_um",
                                                      what="centre_um [um]"),
                                    read_number(spec.get("width_um"), path=path, where=f"{where} width_um",
                                                what="width_um [um]"))
            elif shape == "gaussian":
                check_keys(spec, USER_BAND_KEYS["gaussian"], path=path, where=where)
                band = gaussian_band(name, read_number(spec.get("centre_um"), path=path, where=f"{where} centre_um",
                                                       what="centre_um [um]"),
                                     read_number(spec.get("fwhm_um"), path=path, where=f"{where} fwhm_um",
                                                 what="fwhm_um [um]"))
            elif shape == "curve":
                check_keys(spec, USER_BAND_KEYS["curve"], path=path, where=where)
                file = spec.get("file")
                if not isinstance(file, str):
                    raise InputError("a curve band needs file = \"PATH\" (relative to this file)", path, where)
                curve_path = (path.parent / file)
                if not curve_path.is_file():
                    raise InputError(f"filter curve file {str(curve_path)!r} not found", path, f"{where} file")
                response = spec.get("response", "photon")
                if response not in ("photon", "energy"):
                    raise InputError(f"response must be 'photon' or 'energy', got {response!r}", path,
                                     f"{where} response")
                band = read_band_curve(curve_path, name=name,
                                       wavelength_unit=str(spec.get("wavelength_unit", "um")),
                                       response=response)
                if "vega_magnitude" in spec:
                    vmag = read_number(spec["vega_magnitude"], path=path, where=f"{where} vega_magnitude")
                    band = Band(band.name, band.wavelength, band.throughput, band.response, band.system,
                                vmag, band.native_system, band.approximate, band.counting, band.source,
                                band.note)
            else:
                raise InputError(
                    f"shape must be 'top-hat', 'gaussian' or 'curve', got {shape!r}", path, f"{where} shape"
                )
        except BandError as exc:
            if exc.path is not None:
                raise
            raise InputError(exc.reason, path, where) from None
        band_counting = spec.get("counting", counting)
        if band_counting not in COUNTING_MODES:
            raise InputError(f"counting must be one of {quoted_names(COUNTING_MODES)}, got {band_counting!r}", path,
                             f"{where} counting")
        note = spec.get("note", "")
        if note:
            band = Band(band.name, band.wavelength, band.throughput, band.response, band.system,
                        band.vega_magnitude, band.native_system, band.approximate, band.counting,
                        band.source, str(note))
        out[name] = band.with_counting(band_counting)
    return out


# ----------------------------------------------------------------- host
def read_host_spectrum(path, wavelength_unit: str = "um", flux: str = "f_lambda") -> HostSpectrum:
    """Read a host spectrum: two columns, wavelength and flux density.

    Lines starting with ``#`` are comments. ``flux`` says whether the second
    column is ``"f_lambda"`` or ``"f_nu"`` (any unit: only colours are used).

    Raises
    ------
    InputError
        Naming the file and line of the first problem.
    """
    import astropy.units as u

    path = Path(path)
    try:
        lines = path.read_text().splitlines()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read spectrum: {exc}", path) from None
    rows = []
    for number, line in enumerate(lines, 1):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        parts = text.replace(",", " ").split()
        try:
            values = (float(parts[0]), float(parts[1]))
        except (ValueError, IndexError):
            raise InputError(f"expected two numbers (wavelength, flux), got {text!r}", path,
                             f"line {number}") from None
        if not all(math.isfinite(v) for v in values) or values[1] < 0:
            raise InputError(f"wavelength and flux must be finite, flux >= 0; got {text!r}", path,
                             f"line {number}")
        rows.append(values)
    if len(rows) < 2:
        raise InputError("a spectrum needs at least two rows", path)
    try:
        scale = (1 * u.Unit(wavelength_unit)).to_value(u.um)
    except (ValueError, TypeError, u.UnitConversionError):
        raise InputError(f"wavelength unit {wavelength_unit!r} is not a length unit", path) from None
    arr = np.asarray(rows)
    wl = arr[:, 0] * scale
    fl = arr[:, 1]
    if np.any(wl <= 0) or np.any(np.diff(wl) <= 0):
        raise InputError("wavelengths must be positive and strictly increasing (no duplicates)", path)
    if flux == "f_nu":
        fl = fl / wl**2
    elif flux != "f_lambda":
        raise InputError(f"flux must be 'f_lambda' or 'f_nu', got {flux!r}", path)
    return HostSpectrum(wl, fl, source=str(path))


def _read_host(doc, path, custom, counting) -> HostStar:
    host = doc.get("host")
    if not isinstance(host, dict):
        raise InputError("missing [host] table (host star photometry and distance)", path, "[host]")
    check_keys(host, TARGET_KEYS["host"], path=path, where="[host]")
    name = host.get("name", "host")
    if not isinstance(name, str):
        raise InputError(f"expected a string, got {name!r}", path, "[host] name")
    d = de = p = pe = math.nan
    if "distance_pc" in host and "parallax_mas" in host:
        raise InputError("give either distance_pc or parallax_mas, not both", path, "[host]")
    if "distance_pc" in host:
        d, de = _pair(host["distance_pc"], path, "[host] distance_pc", "distance [pc]")
        if d <= 0:
            raise InputError(f"distance must be > 0 pc, got {d!r}", path, "[host] distance_pc")
    if "parallax_mas" in host:
        p, pe = _pair(host["parallax_mas"], path, "[host] parallax_mas", "parallax [mas]")
        if p <= 0:
            raise InputError(
                f"parallax must be > 0 mas to give a distance, got {p!r} "
                "(a non-positive parallax carries no distance: give distance_pc or leave both out)",
                path, "[host] parallax_mas",
            )
    teff = math.nan
    if "teff_k" in host:
        teff = read_number(host["teff_k"], path=path, where="[host] teff_k", what="Teff [K]")
        if not STAR_TEFF.contains(teff):
            raise InputError(f"Teff must be in {STAR_TEFF.interval} K ({STAR_TEFF.meaning}), got {teff!r}",
                             path, "[host] teff_k")
    spectrum = None
    if "spectrum" in host:
        spec = host["spectrum"]
        where = "[host.spectrum]"
        if not isinstance(spec, dict) or not isinstance(spec.get("file"), str):
            raise InputError('expected a table with file = "PATH" (and wavelength_unit, flux)', path, where)
        check_keys(spec, TARGET_KEYS["host.spectrum"], path=path, where=where)
        spath = path.parent / spec["file"]
        if not spath.is_file():
            raise InputError(f"spectrum file {str(spath)!r} not found", path, f"{where} file")
        spectrum = read_host_spectrum(spath, str(spec.get("wavelength_unit", "um")), str(spec.get("flux", "f_lambda")))
    mags = host.get("magnitudes", {})
    if not isinstance(mags, dict):
        raise InputError("expected a table of band = [magnitude, error]", path, "[host.magnitudes]")
    entries, seen = [], {}
    for key, val in mags.items():
        where = f"[host.magnitudes] {key!r}"
        band = _lookup_band(key, custom, counting, path, where)
        if band.name in seen:
            raise InputError(f"duplicate band: {seen[band.name]!r} and {key!r} are the same band", path, where)
        seen[band.name] = key
        system = band.native_system
        if isinstance(val, dict):
            check_keys(val, TARGET_KEYS["host.magnitudes"], path=path, where=where)
            system = val.get("system", system)
            if system not in ("Vega", "AB"):
                raise InputError(f"system must be 'Vega' or 'AB', got {system!r}", path, where)
            val = [val.get("mag"), val.get("error")]
        m, e = _pair(val, path, where, "magnitude")
        if not MAGNITUDE.contains(m):
            raise InputError(f"a magnitude must be in {MAGNITUDE.interval} mag, got {m!r}", path, where)
        entries.append(HostMagnitude(band, m, e, system))
    return HostStar(name, tuple(entries), d, de, p, pe, teff, spectrum, *_read_host_motion(host, path))


def _read_host_motion(host, path) -> tuple[float, ...]:
    """``ra_deg, dec_deg, pm_ra, pm_ra_error, pm_dec, pm_dec_error`` of ``[host]`` (nan when absent)."""
    ra = dec = math.nan
    if "ra_deg" in host:
        ra = read_number(host["ra_deg"], path=path, where="[host] ra_deg", what="right ascension [deg]")
        if not 0.0 <= ra < 360.0:
            raise InputError(f"right ascension must be in [0, 360) deg, got {ra!r}", path, "[host] ra_deg")
    if "dec_deg" in host:
        dec = read_number(host["dec_deg"], path=path, where="[host] dec_deg", what="declination [deg]")
        if not -90.0 <= dec <= 90.0:
            raise InputError(f"declination must be in [-90, 90] deg, got {dec!r}", path, "[host] dec_deg")
    pm = [math.nan] * 4
    for i, key in enumerate(("pm_ra_mas_yr", "pm_dec_mas_yr")):
        if key in host:
            pm[2 * i], pm[2 * i + 1] = _pair(host[key], path, f"[host] {key}", "proper motion [mas/yr]")
    return (ra, dec, *pm)


def _read_settings(doc, path) -> CalibrationSettings:
    s = get_table(doc, "settings", path=path)
    check_keys(s, TARGET_KEYS["settings"], path=path, where="[settings]")
    kw = {}
    if "synthesis_systematic_mag" in s:
        v = read_number(s["synthesis_systematic_mag"], path=path, where="[settings] synthesis_systematic_mag",
                        what="a magnitude")
        if v < 0:
            raise InputError(f"must be >= 0 mag, got {v!r}", path, "[settings] synthesis_systematic_mag")
        kw["synthesis_systematic_mag"] = v
    if "synthesis_reference_band" in s:
        if not isinstance(s["synthesis_reference_band"], str):
            raise InputError("expected a band name", path, "[settings] synthesis_reference_band")
        kw["synthesis_reference_band"] = s["synthesis_reference_band"]
    if "counting" in s:
        if s["counting"] not in COUNTING_MODES:
            raise InputError(f"counting must be one of {quoted_names(COUNTING_MODES)}, got {s['counting']!r}", path,
                             "[settings] counting")
        kw["counting"] = s["counting"]
    if "zero_point_errors" in s:
        zp = s["zero_point_errors"]
        if not isinstance(zp, dict):
            raise InputError("expected a table of band-or-system = fractional error", path,
                             "[settings.zero_point_errors]")
        clean = {}
        for k, v in zp.items():
            v = read_number(v, path=path, where=f"[settings.zero_point_errors] {k!r}", what="a fractional error")
            if v < 0:
                raise InputError(f"must be >= 0, got {v!r}", path, f"[settings.zero_point_errors] {k!r}")
            clean[k] = v
        kw["zero_point_errors"] = clean
    return CalibrationSettings(**kw)


# ----------------------------------------------------------------- target
def _load_toml(path: Path) -> dict:
    if not path.is_file():
        raise InputError("target file not found", path)
    try:
        return tomllib.loads(path.read_text())
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"malformed TOML: {exc}", path) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read target file: {exc}", path) from None


def user_bands_from_document(doc: dict, path, counting: str = "photon") -> dict[str, Band]:
    """The user bands of an already-parsed TOML document (its ``[bands.NAME]`` tables).

    For other file formats that share the ``[bands.NAME]`` syntax.

    Parameters
    ----------
    doc : dict
        The parsed TOML document.
    path : str or Path
        The file it came from (curve files are relative to its folder; named in errors).
    counting : {"photon", "energy"}
        Default counting mode (a band's own ``counting`` key wins).
    """
    return _read_user_bands(doc, Path(path), counting)


def read_user_bands(path) -> dict[str, Band]:
    """The user bands (``[bands.NAME]`` tables) of a target file, by name.

    Only the ``[bands]`` and ``[settings]`` tables are read; the rest of the
    file is not validated.
    """
    path = Path(path)
    doc = _load_toml(path)
    settings = _read_settings(doc, path)
    return _read_user_bands(doc, path, settings.counting)


def read_target(path) -> Target:
    """Read a target description (TOML) and its photometry table.

    Parameters
    ----------
    path : str or Path
        The TOML file; paths inside it are relative to its folder.

    Returns
    -------
    Target

    Raises
    ------
    InputError
        For a missing or malformed file, naming the file and field or row.

    Notes
    -----
    The format is documented with a complete example in ``docs/photometry.md``.
    """
    path = Path(path)
    doc = _load_toml(path)
    check_tables(doc, ("companion", "host", "bands", "settings"), path=path)
    settings = _read_settings(doc, path)
    comp = doc.get("companion")
    if not isinstance(comp, dict):
        raise InputError('missing [companion] table with name = "..." and photometry = "FILE"', path, "[companion]")
    check_keys(comp, TARGET_KEYS["companion"], path=path, where="[companion]")
    name = comp.get("name")
    if not isinstance(name, str) or not name.strip():
        raise InputError("expected a non-empty name", path, "[companion] name")
    table = comp.get("photometry")
    if not isinstance(table, str):
        raise InputError('expected photometry = "FILE" (a CSV or ECSV table, relative to this file)', path,
                         "[companion] photometry")
    custom = _read_user_bands(doc, path, settings.counting)
    host = _read_host(doc, path, custom, settings.counting)
    if settings.synthesis_reference_band is not None:
        ref = _lookup_band(settings.synthesis_reference_band, custom, settings.counting, path,
                           "[settings] synthesis_reference_band")
        if host.magnitude_in(ref) is None:
            raise InputError(f"the host has no magnitude in {ref.name!r} under [host.magnitudes]", path,
                             "[settings] synthesis_reference_band")
    table_path = path.parent / table
    if not table_path.is_file():
        raise InputError(f"photometry table {str(table_path)!r} not found", path, "[companion] photometry")
    measurements = read_photometry_table(table_path, custom, settings.counting)
    return Target(name.strip(), host, measurements, custom, settings, str(path), str(table_path))
