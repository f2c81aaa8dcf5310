"""Finding standard bands: the band index and a search by text, wavelength or facility.

Computing the pivot and the Vega zero point of all ~280 standard bands takes
seconds, too long for ``motes bands``. Their values are therefore kept in an
index, ``motes/data/band_index.txt``, written by
``tools/export_band_index.py`` from the curves themselves (nothing in it is
typed by hand) and checked against a fresh computation by
``tests/test_photometry_bands_names.py``. Photometry never reads the index: a
band used in a calculation is always built from its curve
(:func:`motes.photometry.get_band`). Zero points for energy-counting detectors
are computed when asked for, for the selected bands only.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from importlib import resources

from ..conventions import AB_ZERO_POINT_JY
from ..errors import BandError, InputError
from .band_names import band_entries, entries_for_keys, library_keys

__all__ = ["IndexedBand", "band_index", "find_bands", "search_bands", "compute_band_index",
           "format_band_index", "BAND_INDEX_FILE"]

#: Name of the bundled index file inside ``motes.data``.
BAND_INDEX_FILE = "band_index.txt"

_COLUMNS = ("name", "key", "response", "pivot_um", "fwhm_um", "wavelength_min_um", "wavelength_max_um",
            "vega_zero_point_jy")


@dataclass(frozen=True)
class IndexedBand:
    """One standard band as listed by ``motes bands``.

    Attributes
    ----------
    name, facility, system : str
        Identifier, its facility part, the photometric system.
    response : {"photon", "energy"}
        Kind of curve.
    pivot_um, fwhm_um, wavelength_min_um, wavelength_max_um : float
        Pivot wavelength, FWHM, and the range of non-zero throughput [um].
    vega_zero_point_jy : float
        f_nu [Jy] of Vega magnitude 0, photon counting; nan where the Vega
        spectrum does not cover the band.
    vega_magnitude : float
        Magnitude the system assigns to Vega [mag].
    native_system : str
        "Vega" or "AB".
    approximate : bool
        True for a top-hat built from half-power points.
    note : str
        The band's caveats.
    """

    name: str
    facility: str
    system: str
    response: str
    pivot_um: float
    fwhm_um: float
    wavelength_min_um: float
    wavelength_max_um: float
    vega_zero_point_jy: float
    vega_magnitude: float
    native_system: str
    approximate: bool
    note: str

    @property
    def ab_minus_vega(self) -> float:
        """m_AB - m_Vega [mag] (nan without a Vega zero point)."""
        if not self.vega_zero_point_jy > 0:
            return math.nan
        return -2.5 * math.log10(self.vega_zero_point_jy / AB_ZERO_POINT_JY)


def compute_band_index() -> list[dict]:
    """Index rows computed from every curve of the filter library and the MKO top-hats (takes seconds)."""
    from .bands import _load_standard

    rows = []
    entries = entries_for_keys(library_keys())
    for name, entry in entries.items():
        band = _load_standard(name, entry)
        try:
            zp = band.vega_zero_point_jy
        except BandError:  # the Vega spectrum does not reach the band (far infrared)
            zp = math.nan
        rows.append({"name": name, "key": entry.key or "-", "response": band.response, "pivot_um": band.pivot_wavelength,
                     "fwhm_um": band.fwhm, "wavelength_min_um": band.wavelength_min,
                     "wavelength_max_um": band.wavelength_max, "vega_zero_point_jy": zp})
    return rows


def format_band_index(rows, header: str) -> str:
    """The text of the index file: ``#`` header lines, then one row per band."""
    lines = [f"# {line}" if line else "#" for line in header.splitlines()]
    lines.append(" ".join(_COLUMNS))
    for row in rows:
        lines.append(" ".join(repr(row[c]) if isinstance(row[c], float) else str(row[c]) for c in _COLUMNS))
    return "\n".join(lines) + "\n"


@functools.lru_cache(maxsize=1)
def band_index() -> dict[str, IndexedBand]:
    """Every standard band as an :class:`IndexedBand`, by identifier.

    Raises
    ------
    LookupError
        When the index and the band list disagree (the index is stale: rerun
        ``tools/export_band_index.py``).
    """
    text = resources.files("motes.data").joinpath(BAND_INDEX_FILE).read_text()
    rows = {}
    lines = [line for line in text.splitlines() if line.strip() and not line.startswith("#")]
    for line in lines[1:]:
        values = dict(zip(_COLUMNS, line.split()))
        rows[values["name"]] = values
    entries = band_entries()
    if set(rows) != set(entries):
        missing = sorted(set(entries) - set(rows)) + sorted(set(rows) - set(entries))
        raise LookupError(f"{BAND_INDEX_FILE} is stale ({', '.join(missing[:5])} ...): "
                          "rerun tools/export_band_index.py")
    out = {}
    for name, entry in entries.items():
        r = rows[name]
        out[name] = IndexedBand(
            name=name, facility=entry.facility, system=entry.system, response=r["response"],
            pivot_um=float(r["pivot_um"]), fwhm_um=float(r["fwhm_um"]),
            wavelength_min_um=float(r["wavelength_min_um"]), wavelength_max_um=float(r["wavelength_max_um"]),
            vega_zero_point_jy=float(r["vega_zero_point_jy"]), vega_magnitude=entry.vega_magnitude,
            native_system=entry.native_system, approximate=entry.half_power_um is not None, note=entry.note,
        )
    return out


def find_bands(text: str | None = None, wavelength_range=None, facility: str | None = None) -> list[IndexedBand]:
    """Standard bands matching a search, in order of pivot wavelength.

    Parameters
    ----------
    text : str, optional
        Words (case-insensitive) each found in the identifier, system or
        note; the word ``ice`` stands for the 3 µm water-ice band, i.e. bands
        whose range overlaps 2.8-3.7 µm.
    wavelength_range : (float, float), optional
        [um]: bands whose pivot lies in this range.
    facility : str, optional
        Start of the identifier's facility part (``"jwst"``, ``"hst-wfc3"``,
        ``"hst-nicmos"``) or system name (``"JWST/NIRCam"``, ``"HST"``),
        case-insensitive.

    Returns
    -------
    list of IndexedBand

    Raises
    ------
    InputError
        For a wavelength range that is not two increasing positive numbers.
    """
    bands = list(band_index().values())
    if wavelength_range is not None:
        try:
            lo, hi = (float(x) for x in wavelength_range)
        except (TypeError, ValueError):
            raise InputError(f"wavelength range must be two numbers in um, got {wavelength_range!r}") from None
        if not (0 < lo < hi):
            raise InputError(f"wavelength range must be two increasing positive numbers in um, got {lo:g} {hi:g}")
        bands = [b for b in bands if lo <= b.pivot_um <= hi]
    if facility:
        f = facility.strip().lower()
        bands = [b for b in bands if b.facility.startswith(f) or b.system.lower() == f
                 or b.system.lower().startswith(f + "/")]
    for word in (text or "").lower().split():
        if word == "ice":
            bands = [b for b in bands if b.wavelength_min_um < _ICE_BAND_UM[1] and b.wavelength_max_um > _ICE_BAND_UM[0]]
        else:
            bands = [b for b in bands if word in b.name or word in b.system.lower() or word in b.note.lower()]
    return sorted(bands, key=lambda b: (b.pivot_um, b.name))


def search_bands(words=(), wavelength_range=None, facility: str | None = None) -> list[IndexedBand]:
    """The search of ``motes bands WORDS``: like :func:`find_bands`, for typed words.

    A single word that is the band part of identifiers (``w1``, ``ks``,
    ``f444w``) is taken as an incomplete band name, not a search: it is
    refused with the identifiers it may mean.

    Raises
    ------
    BandError
        For an incomplete band name, or a search that finds no band.
    """
    from .bands import get_band

    words = [w for w in words if w.strip()]
    if len(words) == 1:
        word = words[0].strip().lower()
        if any(entry.name.split("_", 1)[1] == word for entry in band_entries().values()):
            get_band(word)  # raises the unknown-band error with its suggestions
    found = find_bands(" ".join(words), wavelength_range, facility)
    if not found:
        asked = [repr(" ".join(words))] if words else []
        if wavelength_range is not None:
            asked.append(f"pivot in {wavelength_range[0]:g}-{wavelength_range[1]:g} um")
        if facility:
            asked.append(f"facility {facility!r}")
        raise BandError(f"no standard band matches {', '.join(asked)} (`motes bands` lists them all)")
    return found


# The 3 um O-H stretch band of water ice: ice absorbs strongly from ~2.8 to ~3.7 um
# (the k of Warren & Brandt 2008; from memory).
_ICE_BAND_UM = (2.8, 3.7)
