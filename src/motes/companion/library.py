"""User spectral libraries: a folder of labelled spectra used as templates.

Folder convention
-----------------
A library is a folder of spectrum files (``.txt .dat .csv .tsv .spec`` text,
``.fits .fit .fts`` FITS; ``.gz`` allowed for both). Every spectrum needs a
spectral-type label; Teff, mass and an absolute calibration are optional.
They are given either in an index file ``motes-library.toml`` in the folder,
or in each file's own header; the index wins where both speak.

``motes-library.toml``::

    [library]                      # defaults for every spectrum (all optional)
    name = "my field dwarfs"
    wavelength_unit = "um"         # any astropy length unit (um, nm, Angstrom)
    flux_unit = "W m-2 um-1"       # astropy flux-density unit, or "f_lambda" / "f_nu"
                                   # for arbitrary units per wavelength / per frequency
    calibration = "relative"

    [[spectrum]]
    file = "dwarf_l3.txt"
    spectral_type = "L3"
    teff_k = 1900                  # optional
    mass_msun = 0.074              # optional
    calibration = "observed"       # see below
    distance_pc = 14.2             # needed for "observed"

Text files: two or more whitespace- or comma-separated columns, wavelength
then flux (further columns are ignored). Comment lines start with ``#``; a
comment of the form ``# key: value`` with a key from the index keys above
(``spectral_type``, ``teff_k``, ``mass_msun``, ``calibration``,
``distance_pc``, ``radius_rjup``, ``wavelength_unit``, ``flux_unit``) sets it.

FITS files: a binary table with a wavelength column (name starting with
``wave`` or ``lam``) and a flux column (name starting with ``flux``), units
from ``TUNITn``; or a 1-D primary image with a linear wavelength solution
(``CRVAL1``, ``CDELT1`` or ``CD1_1``, ``CRPIX1``, unit ``CUNIT1``, flux unit
``BUNIT``). Header keywords ``SPTYPE``, ``TEFF``, ``MASS_SUN``, ``CALIB``,
``DIST_PC``, ``RAD_RJUP`` play the roles of the index keys.

Calibration
-----------
``relative`` (default)
    arbitrary scale: the spectrum gives colours only;
``observed``
    flux as received at Earth from an object at ``distance_pc``;
``at_10pc``
    flux the object would have at 10 pc;
``surface``
    flux at the surface of an object of radius ``radius_rjup`` (model atmospheres).

Absolutely calibrated spectra (all but ``relative``) also take part in the
distance-known mode. Synthetic magnitudes are cached on disk
(:mod:`motes.companion.magnitude_cache`).
"""

from __future__ import annotations

import gzip
import hashlib
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

import numpy as np
import astropy.units as u

from ..errors import BandError, InputError
from ..files import cache_directory
from ..parameters import accepts_quantities
from ..tomlcheck import check_keys, check_tables, get_table
from ..photometry.bands import Band
from .blackbody import R_JUP_PC
from .magnitude_cache import MagnitudeCache, band_key
from .spectral_types import type_code, type_label
from .templates import TemplateGrid

__all__ = [
    "LibrarySpectrum",
    "SpectralLibrary",
    "read_library",
    "read_spectrum_file",
    "INDEX_FILE",
    "CALIBRATIONS",
    "SPECTRUM_SUFFIXES",
]

INDEX_FILE = "motes-library.toml"
CALIBRATIONS = ("relative", "observed", "at_10pc", "surface")
SPECTRUM_SUFFIXES = (".txt", ".dat", ".csv", ".tsv", ".spec", ".fits", ".fit", ".fts")
_KEYS = ("spectral_type", "teff_k", "mass_msun", "calibration", "distance_pc", "radius_rjup",
         "wavelength_unit", "flux_unit")
_FITS_KEYS = {"SPTYPE": "spectral_type", "TEFF": "teff_k", "MASS_SUN": "mass_msun", "CALIB": "calibration",
              "DIST_PC": "distance_pc", "RAD_RJUP": "radius_rjup"}
_FLAM = u.W / u.m**2 / u.um


@accepts_quantities
@dataclass(frozen=True, eq=False)
class LibrarySpectrum:
    """One labelled spectrum of a library.

    Attributes
    ----------
    path : str
    label : str
        Spectral type as given (e.g. ``"L3.5"``).
    type_code : float
    teff : float [K]   (nan if not given)
    mass : float [M_sun] (nan if not given)
    calibration : str
        One of :data:`CALIBRATIONS`.
    distance_pc, radius_rjup : float
        For ``observed`` / ``surface`` calibrations (nan otherwise).
    wavelength : ndarray[n] [um], increasing
    flux_lambda : ndarray[n] [W m^-2 um^-1] (arbitrary scale for ``relative``)
    digest : str
        Hash of the file bytes and the unit interpretation (cache key).
    notes : tuple of str
    """

    path: str
    label: str
    type_code: float
    teff: float
    mass: float
    calibration: str
    distance_pc: float
    radius_rjup: float
    wavelength: np.ndarray
    flux_lambda: np.ndarray
    digest: str
    notes: tuple[str, ...] = ()

    @property
    def absolute(self) -> bool:
        """True when the spectrum has an absolute flux scale."""
        return self.calibration != "relative"

    @property
    def absolute_offset(self) -> float:
        """Magnitude shift [mag] from the file's flux to the flux at 10 pc (0 for relative)."""
        if self.calibration == "observed":
            return -5.0 * math.log10(self.distance_pc / 10.0)
        if self.calibration == "surface":
            return -5.0 * math.log10(self.radius_rjup * R_JUP_PC / 10.0)
        return 0.0


# ------------------------------------------------------------------ reading
def _read_bytes(path: Path) -> bytes:
    try:
        data = path.read_bytes()
        return gzip.decompress(data) if path.suffix == ".gz" else data
    except (OSError, EOFError, gzip.BadGzipFile) as exc:
        raise InputError(f"cannot read spectrum: {exc}", path) from None


def _core_suffix(path: Path) -> str:
    suffixes = [s.lower() for s in path.suffixes]
    if suffixes and suffixes[-1] == ".gz":
        suffixes = suffixes[:-1]
    return suffixes[-1] if suffixes else ""


def _read_text(path: Path, raw: bytes):
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text spectrum (binary file with a text suffix?)", path) from None
    meta, rows = {}, []
    for number, line in enumerate(text.splitlines(), 1):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            key, sep, value = stripped.lstrip("#").partition(":")
            key = key.strip().lower()
            if sep and key in _KEYS:
                meta[key] = value.strip()
            continue
        parts = stripped.replace(",", " ").replace("\t", " ").split()
        if len(parts) < 2:
            raise InputError("expected at least two columns: wavelength and flux", path, f"line {number}")
        try:
            rows.append((float(parts[0]), float(parts[1])))
        except ValueError:
            if not rows:
                continue  # a column-name line before the data
            raise InputError(f"cannot read numbers from {stripped[:60]!r}", path, f"line {number}") from None
    if not rows:
        raise InputError("no data rows (expected wavelength and flux columns)", path)
    arr = np.asarray(rows)
    return arr[:, 0], arr[:, 1], meta


def _read_fits(path: Path, raw: bytes):
    import io

    from astropy.io import fits

    try:
        with fits.open(io.BytesIO(raw)) as hdul:
            meta = {}
            for hdu in hdul:
                for key, name in _FITS_KEYS.items():
                    if key in hdu.header and name not in meta:
                        meta[name] = str(hdu.header[key]).strip()
            for hdu in hdul:
                if isinstance(hdu, (fits.BinTableHDU, fits.TableHDU)) and hdu.data is not None:
                    names = list(hdu.columns.names)
                    wcol = next((n for n in names if n.lower().startswith(("wave", "lam"))), None)
                    fcol = next((n for n in names if n.lower().startswith("flux")), None)
                    if wcol is None or fcol is None:
                        continue
                    wl = np.asarray(hdu.data[wcol], dtype=float).ravel()
                    fl = np.asarray(hdu.data[fcol], dtype=float).ravel()
                    for col, key in ((wcol, "wavelength_unit"), (fcol, "flux_unit")):
                        unit = hdu.columns[col].unit
                        if unit and key not in meta:
                            meta[key] = str(unit).strip()
                    return wl, fl, meta
            primary = hdul[0]
            if primary.data is not None and np.ndim(primary.data) == 1:
                h = primary.header
                step = h.get("CDELT1", h.get("CD1_1"))
                if "CRVAL1" not in h or step is None:
                    raise InputError("1-D FITS image without a linear wavelength solution "
                                     "(CRVAL1 and CDELT1 or CD1_1)", path)
                pix = np.arange(primary.data.size) + 1.0
                wl = h["CRVAL1"] + (pix - h.get("CRPIX1", 1.0)) * step
                if h.get("DC-FLAG", 0) == 1:
                    wl = 10.0**wl
                if "CUNIT1" in h and "wavelength_unit" not in meta:
                    meta["wavelength_unit"] = str(h["CUNIT1"]).strip()
                if "BUNIT" in h and "flux_unit" not in meta:
                    meta["flux_unit"] = str(h["BUNIT"]).strip()
                return wl, np.asarray(primary.data, dtype=float), meta
    except InputError:
        raise
    except (OSError, ValueError, TypeError, KeyError, IndexError) as exc:
        raise InputError(f"cannot read FITS spectrum: {exc}", path) from None
    raise InputError("no spectrum found: expected a table with WAVE*/LAM* and FLUX* columns "
                     "or a 1-D primary image", path)


def _flux_to_flam(flux, wavelength_um, unit_text: str, path: Path, calibration: str):
    """Flux column -> F_lambda [W m^-2 um^-1] (arbitrary scale for f_lambda/f_nu)."""
    text = unit_text.strip()
    if text.lower() in ("f_lambda", "flambda"):
        if calibration != "relative":
            raise InputError("flux_unit 'f_lambda' (arbitrary units) needs calibration = 'relative'; "
                             "give a physical unit for an absolute calibration", path, "flux_unit")
        return flux
    if text.lower() in ("f_nu", "fnu"):
        if calibration != "relative":
            raise InputError("flux_unit 'f_nu' (arbitrary units) needs calibration = 'relative'; "
                             "give a physical unit for an absolute calibration", path, "flux_unit")
        return flux / wavelength_um**2
    try:
        unit = u.Unit(text)
    except ValueError:
        raise InputError(f"flux unit {text!r} does not parse (astropy syntax, e.g. 'W m-2 um-1', "
                         "'erg s-1 cm-2 Angstrom-1', 'mJy'), or use 'f_lambda' / 'f_nu'", path,
                         "flux_unit") from None
    try:
        return (flux * unit).to_value(_FLAM, equivalencies=u.spectral_density(wavelength_um * u.um))
    except u.UnitConversionError:
        raise InputError(f"flux unit {text!r} is not a flux density per wavelength or per frequency",
                         path, "flux_unit") from None


def _float(meta, key, path, where, default=math.nan, positive=False) -> float:
    if key not in meta or meta[key] in (None, ""):
        return default
    try:
        value = float(meta[key])
    except (TypeError, ValueError):
        raise InputError(f"{key} must be a number, got {meta[key]!r}", path, where) from None
    if not math.isfinite(value) or (positive and value <= 0):
        raise InputError(f"{key} must be a {'positive ' if positive else ''}finite number, got {meta[key]!r}",
                         path, where)
    return value


def read_spectrum_file(path, settings: Mapping | None = None, where: str | None = None,
                       defaults: Mapping | None = None) -> LibrarySpectrum:
    """Read one labelled spectrum.

    Parameters
    ----------
    path : str or Path
    settings : mapping, optional
        Index entries (keys as in the module notes) overriding the file's header.
    where : str, optional
        Where ``settings`` came from (for messages).
    defaults : mapping, optional
        Library-wide defaults, used where neither ``settings`` nor the header speaks.

    Raises
    ------
    InputError
        Unreadable or unlabelled spectrum, unknown units, bad values.
    """
    path = Path(path)
    raw = _read_bytes(path)
    if _core_suffix(path) in (".fits", ".fit", ".fts"):
        wl, fl, meta = _read_fits(path, raw)
    else:
        wl, fl, meta = _read_text(path, raw)
    meta = {**(defaults or {}), **meta, **{k: v for k, v in (settings or {}).items() if v is not None}}
    where = where or "header"
    label = meta.get("spectral_type")
    if not label:
        raise InputError("unlabelled spectrum: give spectral_type in motes-library.toml "
                         "or in the file header ('# spectral_type: L3' / FITS SPTYPE)", path)
    try:
        code = type_code(str(label))
    except InputError as exc:
        raise InputError(exc.reason, path, f"{where} spectral_type") from None
    calibration = str(meta.get("calibration", "relative")).strip().lower()
    if calibration not in CALIBRATIONS:
        raise InputError(f"calibration must be one of {', '.join(CALIBRATIONS)}, got {calibration!r}",
                         path, f"{where} calibration")
    distance = _float(meta, "distance_pc", path, where, positive=True)
    radius = _float(meta, "radius_rjup", path, where, positive=True)
    if calibration == "observed" and math.isnan(distance):
        raise InputError("calibration 'observed' needs distance_pc", path, where)
    if calibration == "surface" and math.isnan(radius):
        raise InputError("calibration 'surface' needs radius_rjup", path, where)
    wunit_text = str(meta.get("wavelength_unit", "") or "")
    funit_text = str(meta.get("flux_unit", "") or "")
    if not wunit_text:
        raise InputError("wavelength unit unknown: give wavelength_unit (e.g. 'um', 'Angstrom')", path, where)
    if not funit_text:
        raise InputError("flux unit unknown: give flux_unit (e.g. 'W m-2 um-1', 'mJy', or 'f_lambda' "
                         "for arbitrary units per wavelength)", path, where)
    try:
        scale = (1 * u.Unit(wunit_text)).to_value(u.um)
    except (ValueError, u.UnitConversionError):
        raise InputError(f"wavelength unit {wunit_text!r} is not a length unit", path,
                         f"{where} wavelength_unit") from None
    wl = np.asarray(wl, dtype=float) * scale
    fl = np.asarray(fl, dtype=float)
    notes = []
    good = np.isfinite(wl) & np.isfinite(fl)
    if (~good).any():
        notes.append(f"{int((~good).sum())} rows with non-finite values skipped")
    wl, fl = wl[good], fl[good]
    order = np.argsort(wl, kind="stable")
    wl, fl = wl[order], fl[order]
    if wl.size < 2:
        raise InputError("a spectrum needs at least two finite rows", path)
    if np.any(np.diff(wl) <= 0):
        raise InputError("duplicated wavelengths in spectrum", path)
    if np.any(wl <= 0):
        raise InputError("wavelengths must be positive", path)
    if not np.any(fl > 0):
        raise InputError("flux is nowhere positive", path)
    flam = _flux_to_flam(fl, wl, funit_text, path, calibration)
    digest = hashlib.sha256(raw + f"|{wunit_text}|{funit_text}".encode()).hexdigest()[:32]
    return LibrarySpectrum(
        path=str(path), label=str(label).strip(), type_code=code,
        teff=_float(meta, "teff_k", path, where, positive=True),
        mass=_float(meta, "mass_msun", path, where, positive=True),
        calibration=calibration, distance_pc=distance, radius_rjup=radius,
        wavelength=wl, flux_lambda=np.asarray(flam, dtype=float), digest=digest, notes=tuple(notes),
    )


# ----------------------------------------------------------------- library
class SpectralLibrary:
    """A set of labelled spectra usable as templates in any band.

    Parameters
    ----------
    spectra : sequence of LibrarySpectrum
    name : str
    cache : MagnitudeCache, optional
        Where synthetic magnitudes are cached (default: in memory).
    """

    kind = "library"

    def __init__(self, spectra: Sequence[LibrarySpectrum], name: str = "library",
                 cache: MagnitudeCache | None = None):
        if not spectra:
            raise InputError(f"spectral library {name!r} holds no spectra")
        self.spectra = tuple(spectra)
        self.name = name
        self.cache = cache if cache is not None else MagnitudeCache(None)
        self.notes: tuple[str, ...] = (self.cache.note,) if self.cache.note else ()

    def __len__(self) -> int:
        return len(self.spectra)

    def raw_magnitudes(self, bands: Sequence[Band]) -> np.ndarray:
        """Synthetic Vega magnitudes of the files' fluxes, ndarray[n_spectra, n_bands] (nan = not covered)."""
        out = np.full((len(self.spectra), len(bands)), np.nan)
        keys = [band_key(b) for b in bands]
        for j, (band, bkey) in enumerate(zip(bands, keys)):
            for i, spec in enumerate(self.spectra):
                key = f"{spec.digest}|{bkey}"
                value = self.cache.get(key)
                if value is None:
                    value = _synthesise(spec, band)
                    self.cache.put(key, value)
                out[i, j] = value
        try:
            self.cache.save()
        except OSError as exc:
            self.notes = self.notes + (f"synthetic magnitudes not cached on disk ({exc})",)
        return out

    def grid(self, bands: Sequence[Band], mapping: Mapping[str, str] | None = None) -> TemplateGrid:
        """Library magnitudes in the observed bands, through their own curves.

        ``mapping`` is ignored: spectra are integrated over the real band.
        Absolutely calibrated spectra give absolute magnitudes (at 10 pc);
        relative ones keep the file's arbitrary scale.
        """
        raw = self.raw_magnitudes(bands)
        offsets = np.array([s.absolute_offset for s in self.spectra])
        spectra = np.empty(len(self.spectra), dtype=object)
        for i, s in enumerate(self.spectra):
            spectra[i] = s
        return TemplateGrid(
            source=f"library '{self.name}'", kind="library",
            labels=tuple(f"{type_label(s.type_code)} ({Path(s.path).name})" for s in self.spectra),
            type_code=np.array([s.type_code for s in self.spectra]),
            teff=np.array([s.teff for s in self.spectra]),
            mass=np.array([s.mass for s in self.spectra]),
            magnitudes=raw + offsets[:, None],
            absolute=np.array([s.absolute for s in self.spectra]),
            band_names=tuple(b.name for b in bands), template_bands=tuple(b.name for b in bands),
            notes=self.notes, extra={"spectra": spectra, "offsets": offsets},
        )


def _synthesise(spec: LibrarySpectrum, band: Band) -> float:
    try:
        mean = band.average_flux_lambda(spec.wavelength, spec.flux_lambda)
    except BandError:
        return math.nan  # the spectrum does not cover the band
    if not (math.isfinite(mean) and mean > 0):
        return math.nan
    return float(band.vega_magnitude_of(mean))


def _index(folder: Path) -> tuple[dict, list[tuple[str, dict, str]]]:
    path = folder / INDEX_FILE
    if not path.is_file():
        return {}, []
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"malformed TOML: {exc}", path) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read library index: {exc}", path) from None
    check_tables(doc, ("library", "spectrum"), path=path, arrays=("spectrum",))
    defaults = check_keys(get_table(doc, "library", path=path), ("name", *_KEYS), path=path, where="[library]")
    entries = doc.get("spectrum", [])
    if not isinstance(entries, list):
        raise InputError("spectra are listed as [[spectrum]] tables", path, "[[spectrum]]")
    out = []
    for i, entry in enumerate(entries, 1):
        where = f"[[spectrum]] #{i}"
        if not isinstance(entry, dict) or not isinstance(entry.get("file"), str):
            raise InputError('each [[spectrum]] needs file = "NAME"', path, where)
        check_keys(entry, ("file", *_KEYS), path=path, where=where)
        out.append((entry["file"], {k: v for k, v in entry.items() if k != "file"}, where))
    return defaults, out


def read_library(folder, cache_dir="default") -> SpectralLibrary:
    """Read a spectral-library folder (see the module notes for the convention).

    Parameters
    ----------
    folder : str or Path
    cache_dir : str, Path, None or "default"
        Folder of the synthetic-magnitude cache; ``"default"`` uses
        :func:`motes.files.cache_directory`, None keeps
        it in memory.

    Returns
    -------
    SpectralLibrary

    Raises
    ------
    InputError
        Missing folder, malformed index, an index entry naming a missing file,
        and any unreadable or unlabelled spectrum (naming the file).
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError("spectral library folder not found", folder)
    defaults, entries = _index(folder)
    name = str(defaults.get("name", folder.name))
    base = {k: v for k, v in defaults.items() if k != "name"}
    index_path = folder / INDEX_FILE
    spectra, listed = [], set()
    for file, settings, where in entries:
        path = folder / file
        if not path.is_file():
            raise InputError(f"listed spectrum {file!r} not found in {folder}", index_path, where)
        listed.add(path.resolve())
        spectra.append(read_spectrum_file(path, settings, f"{INDEX_FILE} {where}", defaults=base))
    for path in sorted(folder.iterdir()):
        if path.name.startswith(".") or not path.is_file() or path.resolve() in listed:
            continue
        if _core_suffix(path) not in SPECTRUM_SUFFIXES:
            continue
        spectra.append(read_spectrum_file(path, None, defaults=base))
    if not spectra:
        raise InputError(f"no spectra found (files ending in {', '.join(SPECTRUM_SUFFIXES)})", folder)
    cache = MagnitudeCache(None if cache_dir is None else
                           (cache_directory() if cache_dir == "default" else cache_dir))
    return SpectralLibrary(spectra, name, cache)
