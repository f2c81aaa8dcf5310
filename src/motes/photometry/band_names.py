"""motes' band identifiers: the naming scheme and what each name stands for.

Every standard band has one identifier of the form

    facility[-instrument]_band

all lower case (matching is case-insensitive), where

``facility``
    the telescope, survey or photometric system (``2mass``, ``wise``,
    ``jwst``, ``johnson``, ``mko``, ...);
``instrument``
    present only where a facility has several instruments, channels or
    passband releases (``jwst-nircam``, ``hst-acs-wfc``, ``gaia-dr2``);
``band``
    the band's designation in the facility's own documentation, lower-cased
    (``ks``, ``w1``, ``f444w``); bands designated by a wavelength use it in µm
    (``spitzer-irac_3.6``, ``herschel-pacs_70``); a prime is written ``p``
    (``mko_lp`` for L′).

So the identifier is typed as it is said: "2MASS Ks" is ``2mass_ks``, "NIRCam
F444W" is ``jwst-nircam_f444w``. The full table is in ``docs/photometry.md``.

Names of an earlier motes release are refused with their new identifier
(:data:`RENAMED`); this mapping serves that message only.

Curves come from the filter library of the ``pyphot`` package (its curve key is
recorded in :attr:`BandEntry.key`), except the MKO bands, which are top-hats
built from the published half-power points (:data:`MKO_HALF_POWER_UM`).
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass

__all__ = ["BandEntry", "band_entries", "band_entry", "display_name", "entries_for_keys", "library_keys", "RENAMED",
           "MKO_HALF_POWER_UM"]

_COLOUR_CORRECTION = (
    "Catalogue fluxes assume a reference spectrum (f_nu ~ nu^-2 for WISE, nu^-1 for IRAC); "
    "sources with other spectra need colour corrections (Wright et al. 2010; IRAC handbook)."
)
_HERSCHEL_NOTE = (
    "Catalogue flux densities assume nu f_nu = constant; other spectra need colour corrections "
    "(PACS and SPIRE handbooks, from memory)."
)
_HST_JWST_NOTE = "Vega, AB or ST magnitudes in use: give the system of each value."
_VEGA_ZERO_ASSUMED = "Vega's magnitude in this system taken as 0 (not checked against the system's definition)."

#: MKO half-power points [um]: Tokunaga, Simons & Vacca (2002), PASP 114, 180, Table 1
#: (from memory). The curves are top-hats between these points (approximate).
MKO_HALF_POWER_UM = {
    "mko_j": (1.17, 1.33),
    "mko_h": (1.49, 1.78),
    "mko_k": (2.03, 2.37),
    "mko_lp": (3.42, 4.12),
    "mko_mp": (4.57, 4.79),
}


@dataclass(frozen=True)
class BandEntry:
    """What a standard band identifier stands for.

    Attributes
    ----------
    name : str
        The motes identifier (``"2mass_ks"``).
    key : str
        Curve key in the ``pyphot`` filter library, or ``""`` for a built-in
        top-hat.
    facility : str
        The identifier's part before ``_`` (``"jwst-nircam"``).
    system : str
        Photometric system recorded on the Band (``"2MASS"``, ``"JWST/NIRCam"``).
    vega_magnitude : float
        Magnitude the system assigns to Vega [mag].
    native_system : {"Vega", "AB"}
        The magnitude system of the system's catalogues.
    note : str
        Caveats carried by the Band.
    half_power_um : tuple of float or None
        For a built-in top-hat, its half-power points [um].
    """

    name: str
    key: str
    facility: str
    system: str
    vega_magnitude: float = 0.0
    native_system: str = "Vega"
    note: str = ""
    half_power_um: tuple | None = None


# ------------------------------------------------------------ the registry
# (pyphot key pattern, facility, system, Vega magnitude, native system, note, band rule)
# The band rule turns the rest of the key into the band part of the identifier.
# Vega magnitudes: 0 by definition for 2MASS (Cohen, Wheaton & Megeath 2003),
# WISE (Wright et al. 2010), IRAC (Reach et al. 2005); 0.03 for Johnson-Cousins
# UBVRI (Bessell, Castelli & Plez 1998, from memory) and Gaia (Vega G = 0.03,
# from memory). SDSS, Pan-STARRS, SkyMapper, ZTF and GALEX are AB systems
# (from memory).
_IRAC = {"36": "3.6", "45": "4.5", "58": "5.8", "80": "8.0"}
_PACS = {"BLUE": "70", "GREEN": "100", "RED": "160"}
_SPIRE = {"PSW": "250", "PMW": "350", "PLW": "500", "PSW_EXT": "250ext", "PLW_EXT": "500ext"}
_SDSS_NOTES = {
    "u": "SDSS u is ~0.04 mag off AB (u_AB = u_SDSS - 0.04; from memory).",
    "z": "SDSS z is ~0.02 mag off AB (z_AB = z_SDSS + 0.02; from memory).",
}


def _lower(rest: str) -> str:
    return rest.lower().replace("_", "")


_RULES = (
    (r"2MASS_(.+)", "2mass", "2MASS", 0.0, "Vega", "", _lower),
    (r"SDSS_(.+)", "sdss", "SDSS", 0.0, "AB", None, _lower),
    (r"PS1_(.+)", "panstarrs", "Pan-STARRS", 0.0, "AB", "", _lower),
    (r"Gaia_(G|BP|RP|rvs)", "gaia", "Gaia", 0.03, "Vega", "", _lower),
    (r"GaiaDR2_(G|BP|RP)", "gaia-dr2", "Gaia", 0.03, "Vega", "Gaia DR2 passband.", _lower),
    (r"GaiaDR2v2_(.+)", "gaia-dr2rev", "Gaia", 0.03, "Vega", "Revised Gaia DR2 passband.", _lower),
    (r"GaiaDR2_weiler_(.+)", "gaia-dr2weiler", "Gaia", 0.03, "Vega",
     "Gaia DR2 passband as revised by Weiler (2018, from memory).", _lower),
    (r"Gaia_MAW_(.+)", "gaia-maw", "Gaia", 0.03, "Vega",
     "Gaia DR2 passband of Maiz Apellaniz & Weiler (2018, from memory).", _lower),
    (r"WISE_RSR_(.+)", "wise", "WISE", 0.0, "Vega", _COLOUR_CORRECTION, _lower),
    (r"SPITZER_IRAC_(.+)", "spitzer-irac", "Spitzer/IRAC", 0.0, "Vega", _COLOUR_CORRECTION, _IRAC.get),
    (r"GROUND_JOHNSON_(.+)", "johnson", "Johnson-Cousins", 0.03, "Vega", "", _lower),
    (r"GROUND_COUSINS_(.+)", "cousins", "Johnson-Cousins", 0.03, "Vega", "", _lower),
    (r"GROUND_BESSELL_(.+)", "bessell", "Bessell", 0.0, "Vega", "", _lower),
    (r"JWST_NIRCAM_(.+)", "jwst-nircam", "JWST/NIRCam", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"HST_ACS_HRC_(.+)", "hst-acs-hrc", "HST/ACS", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"HST_ACS_WFC_(.+)", "hst-acs-wfc", "HST/ACS", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"HST_NIC2_(.+)", "hst-nicmos2", "HST/NICMOS", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"HST_NIC3_(.+)", "hst-nicmos3", "HST/NICMOS", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"HST_WFC3_(.+)", "hst-wfc3", "HST/WFC3", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"HST_WFPC2_(.+)", "hst-wfpc2", "HST/WFPC2", 0.0, "Vega", _HST_JWST_NOTE, _lower),
    (r"CFHT_WIRCAM_(.+)", "cfht-wircam", "CFHT/WIRCam", 0.0, "Vega", _VEGA_ZERO_ASSUMED, _lower),
    (r"CFHT_MEGAPRIME_(.+)", "cfht-megaprime", "CFHT/MegaPrime", 0.0, "AB", "", _lower),
    (r"CFHT_CFH12K_(.+)", "cfht-cfh12k", "CFHT/CFH12K", 0.0, "Vega", _VEGA_ZERO_ASSUMED, _lower),
    (r"GALEX_(.+)", "galex", "GALEX", 0.0, "AB", "", _lower),
    (r"HERSCHEL_PACS_(.+)", "herschel-pacs", "Herschel/PACS", 0.0, "Vega", _HERSCHEL_NOTE, _PACS.get),
    (r"HERSCHEL_SPIRE_(.+)", "herschel-spire", "Herschel/SPIRE", 0.0, "Vega", _HERSCHEL_NOTE, _SPIRE.get),
    (r"KEPLER_(Kp)", "kepler", "Kepler", 0.0, "Vega", _VEGA_ZERO_ASSUMED, _lower),
    (r"TESS()", "tess", "TESS", 0.0, "Vega", _VEGA_ZERO_ASSUMED, lambda _: "t"),
    (r"NGTS_(.+)", "ngts", "NGTS", 0.0, "Vega", _VEGA_ZERO_ASSUMED, _lower),
    (r"STROMGREN_(.+)", "stromgren", "Stromgren", 0.0, "Vega", _VEGA_ZERO_ASSUMED, _lower),
    (r"SkyMapper_(.+)", "skymapper", "SkyMapper", 0.0, "AB", "", _lower),
    (r"TYCHO_(B|V)_MvB", "tycho", "Tycho", 0.0, "Vega",
     "Tycho passband of Mann & von Braun (2015, from memory). " + _VEGA_ZERO_ASSUMED, _lower),
    (r"ZTF_(.+)", "ztf", "ZTF", 0.0, "AB", "", _lower),
)

#: Band names of earlier motes releases -> their identifiers (for the refusal message only).
RENAMED = {
    "2MASS.J": "2mass_j", "2MASS.H": "2mass_h", "2MASS.Ks": "2mass_ks",
    "SDSS.u": "sdss_u", "SDSS.g": "sdss_g", "SDSS.r": "sdss_r", "SDSS.i": "sdss_i", "SDSS.z": "sdss_z",
    "PS1.g": "panstarrs_g", "PS1.r": "panstarrs_r", "PS1.i": "panstarrs_i", "PS1.z": "panstarrs_z",
    "PS1.y": "panstarrs_y", "PS1.w": "panstarrs_w",
    "Gaia.G": "gaia_g", "Gaia.BP": "gaia_bp", "Gaia.RP": "gaia_rp",
    "WISE.W1": "wise_w1", "WISE.W2": "wise_w2", "WISE.W3": "wise_w3", "WISE.W4": "wise_w4",
    "IRAC.I1": "spitzer-irac_3.6", "IRAC.I2": "spitzer-irac_4.5", "IRAC.I3": "spitzer-irac_5.8",
    "IRAC.I4": "spitzer-irac_8.0",
    "Johnson.U": "johnson_u", "Johnson.B": "johnson_b", "Johnson.V": "johnson_v",
    "Cousins.R": "cousins_r", "Cousins.I": "cousins_i",
    "Bessell.J": "bessell_j", "Bessell.H": "bessell_h", "Bessell.K": "bessell_k",
}


def library_keys() -> list[str]:
    """Curve keys of the ``pyphot`` filter library (imports it: ~1 s)."""
    from .bands import _pyphot_library

    return sorted(_pyphot_library().get_library_content())


def _indexed_keys() -> list[str]:
    # The curve keys recorded in the band index (motes.photometry.band_search),
    # so that listing the bands needs no import of the filter library.
    from importlib import resources

    text = resources.files("motes.data").joinpath("band_index.txt").read_text()
    lines = [line.split() for line in text.splitlines() if line.strip() and not line.startswith("#")]
    column = lines[0].index("key")
    return [row[column] for row in lines[1:] if row[column] != "-"]


def _entry_for_key(key: str) -> BandEntry:
    for pattern, facility, system, vega_mag, native, note, rule in _RULES:
        match = re.fullmatch(pattern, key)
        if match is None:
            continue
        band = rule(match.group(1))
        if band is None:
            break
        if note is None:
            note = _SDSS_NOTES.get(band, "")
        return BandEntry(f"{facility}_{band}", key, facility, system, vega_mag, native, note)
    raise LookupError(f"the pyphot filter library carries a curve {key!r} that motes has no name for")


@functools.lru_cache(maxsize=1)
def band_entries() -> dict[str, BandEntry]:
    """Every standard band: identifier -> :class:`BandEntry`, in identifier order.

    The curves are those recorded in the band index (checked against the
    filter library by the tests), plus the built-in MKO top-hats.
    """
    return entries_for_keys(_indexed_keys())


def entries_for_keys(keys) -> dict[str, BandEntry]:
    """Entries for these filter-library curve keys, plus the MKO top-hats.

    Raises
    ------
    LookupError
        When a curve is not covered by the naming rules, or two curves would
        get the same identifier (a motes bug to report).
    """
    entries = {}
    for key in keys:
        entry = _entry_for_key(key)
        if entry.name in entries:
            raise LookupError(f"curves {entries[entry.name].key!r} and {key!r} both map to {entry.name!r}")
        entries[entry.name] = entry
    for name, (lo, hi) in MKO_HALF_POWER_UM.items():
        entries[name] = BandEntry(
            name, "", "mko", "MKO", 0.0, "Vega",
            f"Top-hat between the half-power points {lo:g}-{hi:g} um of Tokunaga, Simons & Vacca "
            "(2002, PASP 114, 180; from memory); the real curves have sloped edges. "
            "Vega's magnitude taken as 0.",
            (lo, hi),
        )
    return dict(sorted(entries.items()))


def band_entry(name: str) -> BandEntry | None:
    """The entry of a standard identifier (case-insensitive), or None."""
    return band_entries().get(name.strip().lower())


#: How facilities and instruments are written in figure labels (anything not listed: upper case).
_DISPLAY_FACILITY = {"bessell": "Bessell", "cousins": "Cousins", "gaia": "Gaia", "galex": "GALEX",
                     "herschel": "Herschel", "johnson": "Johnson", "kepler": "Kepler", "panstarrs": "Pan-STARRS",
                     "skymapper": "SkyMapper", "spitzer": "Spitzer", "stromgren": "Strömgren", "tycho": "Tycho"}
_DISPLAY_INSTRUMENT = {"nircam": "NIRCam", "wircam": "WIRCam", "megaprime": "MegaPrime", "dr2rev": "DR2 rev.",
                       "dr2weiler": "DR2 Weiler", "maw": "MAW"}
#: Systems whose filters are written in lower case (SDSS-like g, r, i, z).
_LOWER_CASE_BANDS = {"sdss", "panstarrs", "skymapper", "ztf", "stromgren"}
_DISPLAY_BAND = {"lp": "L′", "mp": "M′", "bpbright": "BP bright", "bpfaint": "BP faint", "kp": "Kp"}


def display_name(name: str) -> str:
    """How a band is written in figures: ``"2mass_ks"`` -> ``"2MASS Ks"``, ``"mko_lp"`` -> ``"MKO L′"``.

    The identifier is read as ``facility[-instrument]_band`` (the scheme of this
    module); a name that is not a standard identifier (a user band) is returned
    unchanged.

    Examples
    --------
    >>> print(display_name("2mass_ks"), "|", display_name("jwst-nircam_f444w"), "|",
    ...       display_name("spitzer-irac_3.6"), "|", display_name("NB3p1"))
    2MASS Ks | JWST NIRCam F444W | Spitzer IRAC 3.6 µm | NB3p1
    """
    if band_entry(name) is None:
        return name
    head, _, band = name.strip().lower().partition("_")
    facility, *instruments = head.split("-")
    words = [_DISPLAY_FACILITY.get(facility, facility.upper())]
    words += [_DISPLAY_INSTRUMENT.get(i, i.upper()) for i in instruments]
    wave = re.fullmatch(r"([0-9.]+)(ext)?", band)
    if wave:
        words.append(f"{wave.group(1)} µm" + (" (extended)" if wave.group(2) else ""))
    elif band in _DISPLAY_BAND:
        words.append(_DISPLAY_BAND[band])
    elif facility in _LOWER_CASE_BANDS:
        words.append(band)
    elif len(band) <= 2 and band[:1].isalpha() and not band[1:].isdigit():
        words.append(band.capitalize() if len(band) == 2 and band not in ("bp", "rp") else band.upper())
    else:
        words.append(band.upper())
    return " ".join(words)
