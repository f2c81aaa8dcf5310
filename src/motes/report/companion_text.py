"""Text summary and table files of a companion classification.

:func:`format_classification` renders a :class:`~motes.companion.Classification`
for the terminal; :func:`write_classification` writes its rankings as ECSV
(and CSV on request), each file written to a temporary name and renamed.
"""

from __future__ import annotations

import math
from pathlib import Path

from ..companion.results import Classification, Ranking
from ..errors import InputError
from ..files import atomic_writes
from .photometry_text import target_slug

__all__ = ["format_classification", "write_classification", "classification_file_stem"]

_MODE_NAMES = {"distance": "distance-known mode", "colours": "colours-only mode"}


def _fmt(value, spec, width, blank="-"):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return blank.rjust(width)
    return format(value, spec).rjust(width)


def _ranking_lines(r: Ranking, top: int) -> list[str]:
    lines = [f"== {r.source}, {_MODE_NAMES[r.mode]} =="]
    used = " ".join(r.bands)
    mapped = [f"{b}->{t}" for b, t in zip(r.bands, r.template_bands) if t and t != b]
    lines.append(f"bands used: {used}" + (f"  (mapped: {', '.join(mapped)})" if mapped else ""))
    if r.unused_bands:
        lines.append(f"bands not used: {' '.join(r.unused_bands)}")
    offset_name = "dm" if r.mode == "colours" else "delta"
    width = max(8, min(40, max(len(row.label) for row in r.rows[:top])))
    lines.append(f"{'rank':>4}  {'template':<{width}} {'Teff[K]':>7} {'mass[Msun]':>10} {'chi2':>7} {'dof':>3} "
                 f"{'prob':>6} {offset_name + '[mag]':>9} {'dist[pc]':>9}" + ("  A_V[mag]" if r.extra.get("av") else ""))
    has_av = any(row.av > 0 for row in r.rows)
    for i, row in enumerate(r.rows[:top], 1):
        text = (f"{i:>4}  {row.label:<{width}} {_fmt(row.teff, '.0f', 7)} {_fmt(row.mass, '.3f', 10)} "
                f"{_fmt(row.chi2, '.2f', 7)} {row.dof:>3} {_fmt(row.probability, '.3f', 6)} "
                f"{_fmt(row.offset, '+.2f', 9)} {_fmt(row.distance_pc, '.4g', 9)}")
        if has_av:
            text += f" {row.av:4.1f}"
        lines.append(text)
    if len(r.rows) > top:
        rest = sum(row.probability for row in r.rows[top:])
        lines.append(f"      ... {len(r.rows) - top} more rows (total probability {rest:.3f})")
    lines.extend(f"  note: {n}" for n in r.notes)
    return lines


def format_classification(result: Classification, top: int = 8) -> str:
    """The classification as text: estimate, flags, ranked tables, notes, caveats.

    Parameters
    ----------
    result : Classification
    top : int
        Rows printed per ranking.

    Returns
    -------
    str
    """
    phot = result.photometry
    lines = [f"motes classify: {result.target}"]
    if phot is not None:
        n_lim = sum(r.is_limit for r in phot.rows)
        dist = (f"host distance {phot.distance_pc:.4g} ± {phot.distance_pc_error:.2g} pc "
                f"(distance modulus {phot.distance_modulus:.3f} ± {phot.distance_modulus_error:.3f})"
                if math.isfinite(phot.distance_pc) else "no distance")
        n_det = len(phot.rows) - n_lim
        lines.append(f"photometry: {len(phot.rows)} bands ({n_det} detection{'s' * (n_det != 1)}, "
                     f"{n_lim} upper limit{'s' * (n_lim != 1)}); {dist}")
    lines.append("")
    est = result.estimate
    if est is not None:
        lines.append(f"spectral type : {est.label}  [{est.source}, {_MODE_NAMES[est.mode]}]")
        lines.append(f"Teff          : {est.teff.format('.0f')}")
        if math.isfinite(est.mass.median):
            lines.append(f"mass          : {est.mass.format('.3f')}  (depends on the assumed age; see caveats)")
        else:
            lines.append("mass          : no mass (the template set gives none for these types; a mass needs "
                         "an age: see caveats)")
        for other in result.estimates:
            if other is not est and math.isfinite(other.median):
                lines.append(f"  also        : {other.label}  [{other.source}, {_MODE_NAMES[other.mode]}]")
    else:
        lines.append("spectral type : no estimate (no template with spectral types could be ranked)")
    for e in result.estimates:
        if not math.isfinite(e.median):
            lines.append(f"colour temperature: {e.teff.format('.0f')}  [{e.source}, {_MODE_NAMES[e.mode]}]")
    if result.distance_check is not None:
        lines.append(f"distance check: {result.distance_check.message}")
    if result.flags:
        lines.append("")
        lines.append("FLAGS")
        lines.extend(f"  ! {f}" for f in result.flags)
    for r in result.rankings:
        lines.append("")
        lines.extend(_ranking_lines(r, top))
    lines.append("")
    lines.append("notes")
    lines.extend(f"  - {n}" for n in result.notes)
    lines.append("caveats")
    lines.extend(f"  - {c}" for c in result.caveats)
    return "\n".join(lines)


def classification_file_stem(target_name: str) -> str:
    """File-name stem for a target's classification files: ``<slug>_classification``."""
    return f"{target_slug(target_name)}_classification"


def write_classification(result: Classification, folder, csv: bool = False) -> list[Path]:
    """Write the rankings as ECSV (and CSV) into ``folder``.

    Parameters
    ----------
    result : Classification
    folder : str or Path
        Created if missing.
    csv : bool
        Also write a CSV copy (summary as comment lines).

    Returns
    -------
    list of Path
    """
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create output folder: {exc}", folder) from None
    stem = classification_file_stem(result.target)
    table = result.to_table()
    plans = [(folder / f"{stem}.ecsv", "ascii.ecsv", table, {})]
    if csv:
        flat = table.copy()
        comments = []
        for key, value in table.meta.items():
            for item in (value if isinstance(value, list) else [value]):
                comments.append(f"{key}: {item}")
        flat.meta = {"comments": comments}
        plans.append((folder / f"{stem}.csv", "ascii.csv", flat, {"comment": "# "}))
    try:
        with atomic_writes([final for final, _, _, _ in plans]) as temps:
            for tmp, (_, fmt, tab, kw) in zip(temps, plans):
                tab.write(tmp, format=fmt, overwrite=True, **kw)
    except OSError as exc:
        raise InputError(f"cannot write output: {exc}", folder) from None
    return [final for final, _, _, _ in plans]
