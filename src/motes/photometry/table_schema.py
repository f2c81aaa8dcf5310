"""One vocabulary for the photometry tables of companions and disks.

A companion table (:func:`motes.photometry.read_photometry_table`) and a disk
table (:func:`motes.dust.observations.read_disk_photometry`) are the same kind
of file: one row per band, a ``kind`` column saying what ``value`` is, and the
same names for the same quantities. :data:`KINDS` lists every kind with its
meaning; each table accepts the subset that makes sense for it
(:data:`COMPANION_KINDS`, :data:`DISK_KINDS`).

* ``vega_mag``, ``ab_mag``, ``flux``: the object's own brightness (``flux``
  rows take a ``unit``; a disk's thermal flux densities are such rows);
* ``contrast_mag``, ``contrast_ratio``: the object relative to its star, as a
  magnitude difference or a flux ratio, in both tables;
* ``sb_contrast_mag``, ``sb_contrast_ratio``: a disk's surface brightness
  relative to the star's flux (per arcsec²).

A column ``intensity`` (``total``, the default, or ``polarised``:
``motes.dust.observations.INTENSITIES``) says which light a row measured; only
disk tables have polarised rows so far.

Names of earlier disk tables (``ratio``, ``delta_mag``, ``sb_ratio``,
``sb_delta_mag``) are refused with their new name (:func:`check_kind`).
"""

from __future__ import annotations

from types import MappingProxyType

from ..errors import InputError

__all__ = ["KINDS", "COMPANION_KINDS", "DISK_KINDS", "RENAMED_KINDS", "check_kind"]

#: Every kind of photometry row, with what ``value`` (and ``error``) then is.
KINDS = MappingProxyType({
    "vega_mag": "Vega magnitude [mag]",
    "ab_mag": "AB magnitude [mag]",
    "flux": "band-averaged flux density, in the row's unit",
    "contrast_mag": "m_object − m_star [mag]",
    "contrast_ratio": "flux of the object / flux of the star (dimensionless)",
    "sb_contrast_mag": "μ_object − m_star [mag arcsec⁻² − mag]",
    "sb_contrast_ratio": "surface brightness of the object / flux of the star [arcsec⁻²]",
})

#: Kinds a companion table accepts.
COMPANION_KINDS = ("vega_mag", "ab_mag", "flux", "contrast_mag", "contrast_ratio")
#: Kinds a disk table accepts (scattered light relative to the star).
DISK_KINDS = ("contrast_ratio", "contrast_mag", "sb_contrast_ratio", "sb_contrast_mag")

#: Kind names of earlier disk tables -> their names now (refused, named in the message).
RENAMED_KINDS = MappingProxyType({
    "ratio": "contrast_ratio",
    "delta_mag": "contrast_mag",
    "sb_ratio": "sb_contrast_ratio",
    "sb_delta_mag": "sb_contrast_mag",
})

def check_kind(kind, allowed, path=None, where=None) -> str:
    """``kind`` in lower case if it is one of ``allowed``; else one clear refusal.

    Parameters
    ----------
    kind : str
        The cell as read.
    allowed : sequence of str
        The kinds this table accepts (:data:`COMPANION_KINDS` or :data:`DISK_KINDS`).
    path, where : optional
        File and row, for the message.

    Raises
    ------
    motes.errors.InputError
        An old name (naming its new one), a kind the other table takes, or an unknown kind.

    Examples
    --------
    >>> check_kind("Contrast_Mag", DISK_KINDS)
    'contrast_mag'
    >>> check_kind("delta_mag", DISK_KINDS, path="disk.csv", where="row 2")
    Traceback (most recent call last):
    ...
    motes.errors.InputError: disk.csv, row 2: kind 'delta_mag' is now called 'contrast_mag' (one vocabulary for companion and disk tables, docs/photometry.md)
    """
    given = str(kind).strip()
    text = given.lower()
    kind = given          # shown as typed (a numpy string from a table shows as text)
    if text in allowed:
        return text
    if text in RENAMED_KINDS and RENAMED_KINDS[text] in allowed:
        raise InputError(f"kind {kind!r} is now called {RENAMED_KINDS[text]!r} (one vocabulary for companion "
                         "and disk tables, docs/photometry.md)", path, where)
    if text in KINDS:
        raise InputError(f"kind {kind!r} ({KINDS[text]}) is not accepted in this table; allowed: "
                         f"{', '.join(allowed)}", path, where)
    raise InputError(f"kind must be one of {', '.join(allowed)}, got {kind!r}", path, where)
