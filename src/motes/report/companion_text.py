"""Text summary and table files of a companion classification.

:func:`format_classification` renders a :class:`~motes.companion.Classification`
for the terminal; :func:`write_classification` writes its rankings as ECSV
(and CSV on request), each file written to a temporary name and renamed.
"""

from __future__ import annotations

import math
from pathlib import Path

from ..companion.results import Classification, Ranking
from ..companion.summary_stats import FIT_P_THRESHOLD
from ..errors import InputError
from ..files import atomic_writes
from .photometry_text import target_slug

__all__ = ["format_classification", "format_boundness", "write_classification", "classification_file_stem",
           "write_classification_report"]

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
                 f"{'p_fit':>7} {'prob':>6} {offset_name + '[mag]':>9} {'dist[pc]':>9}"
                 + ("  A_V[mag]" if r.extra.get("av") else ""))
    has_av = any(row.av > 0 for row in r.rows)
    for i, row in enumerate(r.rows[:top], 1):
        p_fit = _chi2_sf(row.chi2, row.dof)
        mark = "!" if math.isfinite(p_fit) and p_fit < FIT_P_THRESHOLD else " "
        text = (f"{i:>4}  {row.label:<{width}} {_fmt(row.teff, '.0f', 7)} {_fmt(row.mass, '.3f', 10)} "
                f"{_fmt(row.chi2, '.2f', 7)} {row.dof:>3} {_fmt(p_fit, '.1e', 7)}{mark}{_fmt(row.probability, '.3f', 6)} "
                f"{_fmt(row.offset, '+.2f', 9)} {_fmt(row.distance_pc, '.4g', 9)}")
        if has_av:
            text += f" {row.av:4.1f}"
        lines.append(text)
    if len(r.rows) > top:
        rest = sum(row.probability for row in r.rows[top:])
        lines.append(f"      ... {len(r.rows) - top} more rows (total probability {rest:.3f})")
    if any(math.isfinite(p) and p < FIT_P_THRESHOLD for p in (_chi2_sf(row.chi2, row.dof) for row in r.rows[:top])):
        lines.append(f"  ! marks p_fit < {FIT_P_THRESHOLD:g}: that template does not fit")
    lines.extend(f"  note: {n}" for n in r.notes)
    return lines


def _chi2_sf(chi2: float, dof: int) -> float:
    from scipy.stats import chi2 as chi2_dist

    if dof <= 0 or not math.isfinite(chi2):
        return math.nan
    return float(chi2_dist.sf(chi2, dof))


def _estimate_detail(est, indent: str) -> list[str]:
    """Fit quality, flat-prior twin, photometric distance and separating bands of one estimate."""
    out = [f"{indent}fit         : {est.fit_text}"]
    if est.flat is not None:
        out.append(f"{indent}flat prior  : {est.flat.label}")
    if est.distance is not None and math.isfinite(est.distance.median):
        out.append(f"{indent}phot. dist. : {est.distance.format('.3g')} (colours only)")
    if est.separating_bands:
        parts = ", ".join(f"{b} {d:+.1f} mag" for b, d in est.separating_bands[:4])
        out.append(f"{indent}to separate : the peaks differ by {parts} (predicted; bands you did not give)")
    return out


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
        lines.append(f"spectral type : {est.label}  [{est.source}, {_MODE_NAMES[est.mode]}, "
                     f"{est.prior} type prior]")
        lines.extend(_estimate_detail(est, "  "))
        lines.append(f"Teff          : {est.teff.format('.0f')}")
        if math.isfinite(est.mass.median):
            lines.append(f"mass          : {est.mass.format('.3f')}  (depends on the assumed age; see caveats)")
        else:
            lines.append("mass          : no mass (the template set gives none for these types; a mass needs "
                         "an age: see caveats)")
        for other in result.estimates:
            if other is not est and math.isfinite(other.median):
                lines.append(f"  also        : {other.label}  [{other.source}, {_MODE_NAMES[other.mode]}, "
                             f"{other.prior} type prior]")
                lines.extend(_estimate_detail(other, "    "))
    else:
        lines.append("spectral type : no estimate (no template with spectral types could be ranked)")
    for e in result.estimates:
        if not math.isfinite(e.median):
            lines.append(f"colour temperature: {e.teff.format('.0f')}  [{e.source}, {_MODE_NAMES[e.mode]}]")
    if result.distance_check is not None:
        lines.append(f"distance check: {result.distance_check.message}")
    if getattr(result, "boundness", None) is not None:
        lines.append("")
        lines.extend(format_boundness(result.boundness).splitlines())
    elif phot is not None and math.isfinite(phot.distance_modulus):
        lines.append("is it bound? (photometry): not run (motes classify runs it unless --no-boundness; "
                     "from Python: classify(..., boundness=True) or with_boundness(result))")
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
    """Write the rankings and the estimates as ECSV (and CSV) into ``folder``.

    Files: ``<stem>.ecsv`` (every ranked row; the summary in the header) and
    ``<stem>_estimates.ecsv`` (one row per type estimate and its flat-prior
    twin, numeric columns: :meth:`Classification.estimates_table`), all
    written together or not at all.

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
    from .run_citations import classification_citations

    # what to cite for this run, as printed under "What to cite for this run:" (one line per reference)
    table.meta["cite"] = [ref.line() for ref in classification_citations(result)]
    plans = [(folder / f"{stem}.ecsv", "ascii.ecsv", table, {}),
             (folder / f"{stem}_estimates.ecsv", "ascii.ecsv", result.estimates_table(), {})]
    if getattr(result, "boundness", None) is not None:
        plans.append((folder / f"{stem}_boundness.ecsv", "ascii.ecsv", result.boundness.to_table(), {}))
    if csv:
        flat = table.copy()
        comments = []
        for key, value in table.meta.items():
            for item in (value if isinstance(value, list) else [value]):
                comments.append(f"{key}: {item}")
        flat.meta = {"comments": comments}
        plans.append((folder / f"{stem}.csv", "ascii.csv", flat, {"comment": "# "}))
        estimates = result.estimates_table()
        estimates.meta = {"comments": [f"{k}: {v}" for k, v in estimates.meta.items()]}
        plans.append((folder / f"{stem}_estimates.csv", "ascii.csv", estimates, {"comment": "# "}))
    try:
        with atomic_writes([final for final, _, _, _ in plans]) as temps:
            for tmp, (_, fmt, tab, kw) in zip(temps, plans):
                tab.write(tmp, format=fmt, overwrite=True, **kw)
    except OSError as exc:
        raise InputError(f"cannot write output: {exc}", folder) from None
    return [final for final, _, _, _ in plans]


_BAND_NAMES = {"johnson_v": "V", "gaia_bp": "Gaia BP", "gaia_g": "Gaia G", "cousins_r": "Rc", "gaia_rp": "Gaia RP",
               "cousins_i": "Ic", "2mass_j": "J", "2mass_h": "H", "2mass_ks": "Ks", "wise_w1": "W1", "wise_w2": "W2"}


def format_boundness(test) -> str:
    """The photometric boundness test as text: verdict, B, prior odds, both readings, what separates them.

    Parameters
    ----------
    test : BoundnessTest

    Returns
    -------
    str
    """
    from ..companion.spectral_types import type_label

    ln_b = test.ln_bayes_factor
    b_text = f"{math.exp(ln_b):.3g}" if abs(ln_b) < 690 else f"10^{ln_b / math.log(10):.0f}"
    lines = [f"is it bound? (photometry): {test.verdict.upper()}  "
             f"B = {b_text} (ln B = {ln_b:+.2f}), at the host's distance vs anywhere on the line of sight"]
    if math.isfinite(test.p_bound):
        lines.append(f"  prior odds    : O = {test.prior_odds:.3g} from N = {test.expected_number:.3g} unrelated "
                     f"source(s) expected with {test.count_band} <= {test.count_magnitude:.2f} within "
                     f"{test.settings.separation_mas / 1000:.3g}\" (Sigma = {test.surface_density * 3600**2:.3g} "
                     f"per deg², {test.surface_density_source})")
        p_text = f"{test.p_bound:.4g}" if test.p_bound < 0.99995 else f"1 - {1 - test.p_bound:.2g}" \
            if test.p_bound < 1.0 else "1 (to double precision)"
        lines.append(f"  P(bound)      : {p_text} = B O / (1 + B O)")
    else:
        lines.append("  P(bound)      : not computed (no separation given: --separation, or separation_arcsec in "
                     "[boundness]); B alone is the photometric evidence")
    lines.append(f"  bound reading : {test.bound.describe()}")
    lines.append(f"  background    : {test.background.describe()}")
    lines.append(f"  rule          : {test.rule}")
    for text, lb in test.sensitivity:
        alt = f"{math.exp(lb):.3g}" if abs(lb) < 690 else f"10^{lb / math.log(10):.0f}"
        lines.append(f"  with {text}: B = {alt}")
    if test.degenerate:
        lines.append(f"  both readings fit: {type_label(test.bound.type.median)} at the host or "
                     f"{type_label(test.background.type.median)} at {test.background.distance.median:.3g} pc")
    if test.separating_bands:
        lines.append("  bands that would separate the readings (predicted Vega magnitude, bound vs background): "
                     + "; ".join(f"{_BAND_NAMES.get(n, n)} {a:.1f} vs {c:.1f} mag"
                                 for n, a, c in test.separating_bands[:4]))
    elif test.degenerate and not getattr(test, "left_out_checks", ()):
        lines.append("  no band of the sequence is tabulated for both readings' types: a visible band, W1/L′ "
                     "(3.4-3.8 µm) or a methane band (1.6 or 2.2 µm) would separate them (compare with a "
                     "spectral library, --library)")
    checks = getattr(test, "left_out_checks", ())
    if checks:
        def one(pred, z):
            return f"{pred:.2f} ({z:+.1f} sigma)" if math.isfinite(pred) else "no value"

        lines.append("  left out of B (some types have no value there), checked against each reading's best "
                     "template (observed; bound; background):")
        lines.extend(f"    {_BAND_NAMES.get(n, n)}: {m:.2f} ± {s:.2f}; {one(pb, zb)}; {one(pg, zg)}"
                     for n, m, s, pb, pg, zb, zg in checks)
    lines.extend(f"  note: {n}" for n in test.notes)
    return "\n".join(lines)


def write_classification_report(text: str, result: Classification, folder) -> Path:
    """Save the printed report of a classification as ``<stem>_report.txt`` in ``folder``.

    Parameters
    ----------
    text : str
        The report as printed (UTF-8).
    result : Classification
        Names the file (its target).
    folder : str or Path
        Created if missing.

    Returns
    -------
    Path
        Written to a temporary name and renamed: never a partial file.
    """
    from ..files import atomic_write

    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        final = folder / f"{classification_file_stem(result.target)}_report.txt"
        with atomic_write(final) as tmp:
            Path(tmp).write_text(text if text.endswith("\n") else text + "\n", encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write the report: {exc}", folder) from None
    return final
