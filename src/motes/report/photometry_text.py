"""Printing and writing calibrated photometry (what ``motes photometry`` shows).

Tables are written as ECSV (units and metadata kept) and, on request, CSV
(metadata as ``#`` comment lines). Files are written to a temporary name in
the destination folder and renamed only when every file is complete, so an
error never leaves a partial output.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np

from ..errors import InputError, PhotometryError
from ..files import atomic_writes
from ..photometry.measurements import CalibratedPhotometry

__all__ = ["format_photometry", "write_photometry", "photometry_file_stem", "target_slug"]


def _fmt(value, spec, width):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-".rjust(width)
    return format(value, spec).rjust(width)


def _limit(sign, value, spec, width):
    """A value with its limit sign (">" fainter than, "<" less than); "-" when there is none."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-".rjust(width)
    return (sign + format(value, spec)).rjust(width)


def format_photometry(result: CalibratedPhotometry) -> str:
    """A plain-text table of calibrated photometry with the shared distance term.

    Parameters
    ----------
    result : CalibratedPhotometry

    Returns
    -------
    str
        Multi-line text: one row per band (Vega apparent magnitude, f_nu in
        mJy, absolute magnitude, flags), the distance modulus once, then notes.
    """
    head = (f"{'band':<12} {'pivot[um]':>9} {'input':<14} {'m_Vega':>8} {'±':>6} {'f_nu[mJy]':>10} "
            f"{'±':>9} {'M_Vega':>8} {'±':>6}  flags")
    lines = [f"Calibrated photometry of {result.target}", "", head, "-" * len(head)]
    footnotes = []
    for r in result.rows:
        flags = []
        if r.is_limit:
            flags.append(f"<{r.limit_sigma:g}σ")
        if r.host_synthesised:
            flags.append("S")
        if r.band.approximate:
            flags.append("A")
        mark = ""
        if r.notes:
            footnotes.append((r.band.name, r.notes))
            mark = f"[{len(footnotes)}]"
        faint, bright = (">", "<") if r.is_limit else ("", "")   # a limit: fainter than, less flux than
        lines.append(
            f"{r.band.name:<12} {r.band.pivot_wavelength:9.3f} {r.input_kind:<14} "
            f"{_limit(faint, r.apparent_mag, '.3f', 8)} {_fmt(r.apparent_mag_error, '.3f', 6)} "
            f"{_limit(bright, r.flux_jy * 1e3, '.4g', 10)} {_fmt(r.flux_jy_error * 1e3, '.2g', 9)} "
            f"{_limit(faint, r.absolute_mag, '.3f', 8)} {_fmt(r.absolute_mag_error, '.3f', 6)}  "
            f"{' '.join(flags + [mark]).strip()}"
        )
    lines.append("")
    lines.append("flags: <Nσ = N-sigma upper limit (values shown as > magnitude, < flux; '±' of f_nu is "
                 "the 1-sigma noise), "
                 "S = host magnitude synthesised from a spectrum model, A = approximate band (top-hat/Gaussian "
                 "from a centre and width)")
    if math.isfinite(result.distance_modulus):
        lines.append(
            f"distance {result.distance_pc:.3f} ± {result.distance_pc_error:.3f} pc; distance modulus "
            f"{result.distance_modulus:.4f} ± {result.distance_modulus_error:.4f} mag — one term shared by "
            "all bands, NOT included in σ(M)"
        )
    else:
        lines.append("no distance: absolute magnitudes not computed")
    for i, (name, notes) in enumerate(footnotes, 1):
        lines.append(f"[{i}] {name}: " + "; ".join(notes))
    if result.notes:
        lines.append("notes:")
        lines.extend(f"  - {n}" for n in result.notes)
    return "\n".join(lines)


def target_slug(target_name: str) -> str:
    """A target name made safe for file names: lower case, runs of other characters as ``_``."""
    return re.sub(r"[^A-Za-z0-9]+", "_", target_name).strip("_").lower() or "target"


def photometry_file_stem(target_name: str) -> str:
    """File-name stem for a target's tables: ``<slug>_photometry``."""
    return f"{target_slug(target_name)}_photometry"


def write_photometry(result: CalibratedPhotometry, folder, csv: bool = False,
                     stem: str | None = None) -> list[Path]:
    """Write calibrated photometry as ECSV (and CSV) into ``folder``.

    Parameters
    ----------
    result : CalibratedPhotometry
    folder : str or Path
        Created if missing.
    csv : bool
        Also write a CSV copy (metadata as comment lines).
    stem : str, optional
        File-name stem; default :func:`photometry_file_stem` of the target.

    Returns
    -------
    list of Path
        The files written.
    """
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create output folder: {exc}", folder) from None
    stem = stem or photometry_file_stem(result.target)
    table = result.to_table()
    # last check before anything is written: every row's magnitude and flux are finite numbers
    for name in ("apparent_mag", "ab_mag", "flux", "flux_lambda"):
        values = np.asarray(table[name], dtype=float)
        bad = ~np.isfinite(values) | ((values <= 0) if name.startswith("flux") else False)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise PhotometryError(f"the calibrated {name} of band {table['band'][i]} is {values[i]!r}, not a "
                                  "finite number; nothing was written. Check that band's inputs (value, "
                                  "host magnitude, teff_k)", folder)
    plans = [(folder / f"{stem}.ecsv", "ascii.ecsv", table)]
    if csv:
        flat = table.copy()
        flat.meta = {"comments": [f"{k}: {v}" for k, v in table.meta.items() if k != "notes"]
                     + [f"note: {n}" for n in table.meta["notes"]]}
        plans.append((folder / f"{stem}.csv", "ascii.csv", flat))
    try:
        with atomic_writes([final for final, _, _ in plans]) as temps:
            for tmp, (_, fmt, tab) in zip(temps, plans):
                kw = {"comment": "# "} if fmt == "ascii.csv" else {}
                tab.write(tmp, format=fmt, overwrite=True, **kw)
    except OSError as exc:
        raise InputError(f"cannot write output: {exc}", folder) from None
    return [final for final, _, _ in plans]
