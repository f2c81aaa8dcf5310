"""The band catalogue: tables and descriptions of bands (``motes bands``).

The plot of a band's curve is :func:`motes.report.band_figures.plot_band`.
"""

from __future__ import annotations

import math

from .band_search import IndexedBand, find_bands
from .bands import Band, get_band, standard_band_names

__all__ = ["band_table", "format_band_table", "format_band"]


def band_table(bands=None, counting: str | None = "photon"):
    """A table describing bands (pivot, FWHM, zero points, Vega's magnitude, ...).

    Parameters
    ----------
    bands : sequence of Band, IndexedBand or str, optional
        Default: every standard band, in order of pivot wavelength.
    counting : {"photon", "energy"} or None
        Detector counting mode for the zero points; None keeps each Band's
        own mode (photon for bands given by name). Standard bands with photon
        counting are listed from the band index (fast); otherwise each band's
        curve is integrated.

    Returns
    -------
    astropy.table.Table
        Columns ``name, system, pivot_wavelength [um], fwhm [um],
        vega_zero_point [Jy], ab_minus_vega [mag], vega_magnitude [mag],
        response, approximate, note``.
    """
    import astropy.units as u
    from astropy.table import Table

    if bands is None:
        bands = find_bands() if (counting or "photon") == "photon" else standard_band_names()
    bands = list(bands)
    if bands and all(isinstance(b, IndexedBand) for b in bands) and (counting or "photon") == "photon":
        resolved = bands
        info = [_indexed_info(b) for b in bands]
        counting = "photon"
    else:
        resolved = [get_band(b.name if isinstance(b, IndexedBand) else b, counting=counting or "photon")
                    if isinstance(b, (str, IndexedBand)) else (b.with_counting(counting) if counting else b)
                    for b in bands]
        info = [b.describe() for b in resolved]
    t = Table()
    t["name"] = [i["name"] for i in info]
    t["system"] = [i["system"] for i in info]
    t["pivot_wavelength"] = [i["pivot_um"] for i in info] * u.um
    t["fwhm"] = [i["fwhm_um"] for i in info] * u.um
    t["vega_zero_point"] = [i["vega_zp_jy"] for i in info] * u.Jy
    t["ab_minus_vega"] = [i["ab_minus_vega"] for i in info] * u.mag
    t["vega_magnitude"] = [i["vega_mag"] for i in info] * u.mag
    t["response"] = [i["response"] for i in info]
    t["approximate"] = [i["approximate"] for i in info]
    t["note"] = [_short_note(b) for b in resolved]
    modes = sorted({counting if isinstance(b, IndexedBand) else b.counting for b in resolved})
    t.meta["counting"] = modes[0] if len(modes) == 1 else "/".join(modes)
    return t


def _indexed_info(b: IndexedBand) -> dict:
    return {"name": b.name, "system": b.system, "pivot_um": b.pivot_um, "fwhm_um": b.fwhm_um,
            "vega_zp_jy": b.vega_zero_point_jy, "ab_minus_vega": b.ab_minus_vega,
            "vega_mag": b.vega_magnitude, "response": b.response, "approximate": b.approximate}


def _short_note(band: Band | IndexedBand) -> str:
    parts = []
    if band.approximate:
        parts.append("approximate")
    if band.system in ("WISE", "Spitzer/IRAC"):
        parts.append("colour corrections may be needed")
    elif band.note and not band.approximate:
        parts.append(_first_clause(band.note))
    if band.native_system == "AB":
        parts.append("AB system")
    return "; ".join(parts)


def _first_clause(note: str, width: int = 56) -> str:
    """A note cut for the table: its first clause, shortened at a word with "…", never mid-word."""
    import textwrap

    text = note.split(";")[0].split(" (")[0].rstrip(".")
    if len(text) > width and ":" in text:
        text = text.split(":")[0]
    return textwrap.shorten(text, width, placeholder=" …")


def format_band_table(table) -> str:
    """Plain-text listing of :func:`band_table`."""
    w = max([11] + [len(n) for n in table["name"]])
    head = (f"{'name':<{w}} {'system':<16} {'pivot[um]':>9} {'FWHM[um]':>8} {'ZP_Vega[Jy]':>11} "
            f"{'AB-Vega':>7} {'m(Vega)':>7} {'response':<8} notes")
    lines = [head, "-" * len(head)]
    for row in table:
        lines.append(
            f"{row['name']:<{w}} {row['system']:<16} {row['pivot_wavelength']:9.4f} {row['fwhm']:8.4f} "
            f"{row['vega_zero_point']:11.1f} {row['ab_minus_vega']:7.3f} {row['vega_magnitude']:7.2f} "
            f"{row['response']:<8} {row['note']}"
        )
    lines.append("")
    lines.append(f"zero points by synthetic photometry of the CALSPEC Vega spectrum, "
                 f"{table.meta.get('counting', 'photon')}-counting; m(Vega) = magnitude the system assigns "
                 "to Vega; response = kind of curve (photon or energy response)")
    return "\n".join(lines)


def format_band(band: Band) -> str:
    """A multi-line description of one band."""
    d = band.describe()
    rows = [
        ("name", d["name"]),
        ("system", d["system"]),
        ("pivot wavelength", f"{d['pivot_um']:.5f} um"),
        ("effective wavelength (Vega)", f"{d['effective_um']:.5f} um"),
        ("mean wavelength", f"{band.mean_wavelength:.5f} um"),
        ("FWHM", f"{d['fwhm_um']:.5f} um"),
        ("equivalent width", f"{d['width_um']:.5f} um"),
        ("range", f"{band.wavelength_min:.4f}-{band.wavelength_max:.4f} um"),
        ("Vega zero point", f"{d['vega_zp_jy']:.2f} Jy = {band.vega_zero_point_flux_lambda:.4e} W m-2 um-1"
         if math.isfinite(d["vega_zp_jy"]) else "none (the Vega spectrum does not cover this band)"),
        ("AB - Vega", f"{d['ab_minus_vega']:+.4f} mag"),
        ("Vega's magnitude", f"{d['vega_mag']:.2f} mag"),
        ("catalogue system", d["native"]),
        ("curve response", d["response"]),
        ("counting mode", d["counting"]),
        ("approximate", "yes (built from a centre and width)" if d["approximate"] else "no"),
        ("source", d["source"]),
    ]
    if d["note"]:
        rows.append(("note", d["note"]))
    width = max(len(k) for k, _ in rows)
    return "\n".join(f"{k:<{width}}  {v}" for k, v in rows)

