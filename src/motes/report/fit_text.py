"""Text report of a disk-colour fit: what ``motes fit`` prints and writes to ``summary.txt``.

:func:`format_fit_report` renders a :class:`motes.dust.fit.results.FitResult`;
:func:`write_fit_report` writes a run's report files into its run folder (the
figures of :mod:`motes.report.fit_figures`, then ``summary.txt``, which lists
every file of the run and what to cite, and the report page ``report.html``).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np

from ..dust.fit.evidence import EVIDENCE_VS_PROFILE_NOTE, VERDICT_RULE, best_fit_contrasts, parameter_unit
from ..dust.fit.results import FitResult
from ..files import write_text_atomic

__all__ = ["format_fit_report", "write_fit_report"]


def _fmt(x, digits=3):
    if x is None or not np.isfinite(x):
        return "-"
    ax = abs(x)
    if ax != 0 and (ax < 1e-2 or ax >= 1e4):
        return f"{x:.{digits - 1}e}"
    return f"{x:.{digits}g}" if ax < 1 else f"{x:.{max(digits - int(math.log10(ax)) - 1, 0) + 1}f}"


def _thermal_header(result) -> list[str]:
    """The thermal data line of a joint fit (none for a scattered-light fit)."""
    t = getattr(result, "thermal_observations", None)
    if t is None:
        return []
    return [f"thermal data: {len(t.bands)} bands ({t.n_detections} detections), flux densities from {t.path}; "
            "fitted jointly with the scattered light (each data set with its own flux scale)"]


def _by_data_lines(result) -> list[str]:
    """Per material: ln B from the scattered light alone, the thermal data alone and both (joint fits)."""
    table = result.verdict_table
    if not getattr(result, "by_data", None) or "ln_b_thermal" not in table.colnames:
        return []
    lines = ["", "Which data drove the verdicts (ln B of the same pair of models, each data set alone and jointly):",
             f"  {'material':<16} {'scattered':>15} {'thermal':>15} {'joint':>15}  driven by"]

    def pair(v, e):
        return "-" if not np.isfinite(v) else f"{v:+.2f} ± {e:.2f}"

    for row in table:
        lines.append(f"  {row['material']:<16} {pair(row['ln_b_scattered'], row['ln_b_scattered_err']):>15} "
                     f"{pair(row['ln_b_thermal'], row['ln_b_thermal_err']):>15} {pair(row['ln_b'], row['ln_b_err']):>15}"
                     f"  {row['driven_by']}")
    from ..dust.fit.joint_run import DRIVEN_BY_RULE

    lines.append("  " + DRIVEN_BY_RULE)
    return lines


def _thermal_model_lines(m) -> list[str]:
    """The thermal side of one model of a joint fit: derived quantities and fluxes per band."""
    d, t = getattr(m, "thermal", None), getattr(m, "thermal_fluxes", None)
    if not d:
        return []
    where = (f"ring radius {_fmt(d['radius_au'])} au" if "belt_au" not in d else
             f"belt {d['belt_au'][0]:g}-{d['belt_au'][1]:g} au (Σ ∝ r^{d['surface_density_index']:g}, mean radius "
             f"{_fmt(d['radius_au'])} au)")
    lines = [f"  thermal (best fit, exact path): L_dust/L_star = {_fmt(d['fractional_luminosity'])}, {where}"
             f", blackbody radius {_fmt(d['blackbody_radius_au'])} au, r / r_bb = "
             f"{_fmt(d['radius_over_blackbody_radius'])}, dust temperature {_fmt(d['dust_temperature_K'])} K; "
             f"chi2 scattered {d['best_chi2_scattered']:.2f}, thermal {d['best_chi2_thermal']:.2f}"]
    flags = [f"  FLAG: {f}" for f in d.get("flags", ())]
    lines += flags or ["  ice sublimation: no material above its sublimation temperature at the best fit"]
    if t is not None and len(t):
        lines.append(f"  {'band':<22} {'data [mJy]':>14} {'model best':>11} {'median':>10}  68% interval")
        for row in t:
            data = (f"< {1e3 * row['value']:.4g}" if row["is_limit"] else
                    f"{1e3 * row['value']:.4g}±{1e3 * row['error']:.2g}")
            lines.append(f"  {row['band']:<22} {data:>14} {1e3 * row['model_best']:11.4g} "
                         f"{1e3 * row['model_median']:10.4g}  [{1e3 * row['model_lo68']:.4g}, "
                         f"{1e3 * row['model_hi68']:.4g}]")
    return lines


def format_fit_report(result: FitResult, references=None) -> str:
    """The text summary printed by ``motes fit`` and written to ``summary.txt``.

    ``references`` (what to cite) default to
    :func:`motes.report.run_citations.fit_citations` of ``result``; ``()`` leaves them out.
    """
    obs = result.observations
    lines = [f"motes fit of {result.source}",
             f"data: {len(obs.bands)} bands ({obs.n_detections} detections), {obs.normalisation} "
             f"from {obs.path}"
             + (f"; {int(obs.is_polarised.sum())} of the rows in polarised intensity "
                f"({', '.join(b for b, p in zip(obs.band_names, obs.is_polarised) if p)}), one flux scale with "
                "the total-intensity rows" if getattr(obs, "has_polarised", False) else "")]
    lines += _thermal_header(result)
    lines.append("")
    lines.append("Models ranked by evidence (ln B = ln Z - ln Z(best), and vs the full set):")
    lines.append(f"  {'rank':>4}  {'model':<40} {'ln Z':>9} {'±':>5}  {'ln B best':>9}  {'reading':<13}"
                 f" {'ln B full':>9}  {'P(model)':>8}")
    for row in result.ranking:
        lines.append(f"  {row['rank']:>4}  {row['model']:<40} {row['ln_z']:9.2f} {row['ln_z_err']:5.2f}  "
                     f"{row['ln_b_best']:9.2f}  {row['strength_vs_best']:<13} "
                     f"{_fmt(row['ln_b_full']):>9}  {row['posterior_probability']:8.3f}")
    lines += ["", "Verdicts per material:"]
    for v, row in zip(result.verdicts, result.verdict_table):
        text = "  " + v.sentence()
        if v.verdict in ("not needed", "undecided") and np.isfinite(row["fraction_upper95"]):
            text += f"; its fraction in {v.with_model}: 95% upper limit {row['fraction_upper95']:.3f}"
        lines.append(text)
    lines.append("  " + VERDICT_RULE)
    lines += _by_data_lines(result)
    contrasts = best_fit_contrasts(result.verdicts, result.models)
    if contrasts:       # only for materials the verdicts judged: what a chi-square profile would say of them
        lines += ["", "Verdicts as best fit plus prior volume (ln B = Delta ln L_max + Delta ln Occam factor; "
                  "best fits from the sampled points):"]
        lines += [f"  {c.sentence()}" for c in contrasts]
        lines.append("  " + EVIDENCE_VS_PROFILE_NOTE)
    for m in result.models[: min(2, len(result.models))]:
        lines += ["", f"Model {m.name}: posterior median, 68% and 95% intervals"]
        for row in m.summary:
            unit = parameter_unit(row["parameter"])
            name = f"{row['parameter']} [{unit}]" if unit else row["parameter"]
            lines.append(f"  {name:<28} {_fmt(row['median']):>9}  "
                         f"[{_fmt(row['lo68'])}, {_fmt(row['hi68'])}]  [{_fmt(row['lo95'])}, {_fmt(row['hi95'])}]"
                         f"  95% upper {_fmt(row['upper95'])}")
        best = ", ".join(f"{k} = {_fmt(v)}" + (f" {parameter_unit(k)}" if parameter_unit(k) else "")
                         for k, v in m.best.items())
        lines.append(f"  maximum likelihood: chi2 = {m.best_chi2:.2f} for {m.dof} dof; {best}")
        lines += _thermal_model_lines(m)
    if result.priors:
        lines += ["", "Priors:"] + [f"  {name}: {text}" for name, text in result.priors]
    lines += ["", "Caveats:"] + [f"  - {c}" for c in result.caveats]
    if result.notes:
        lines += ["", "Notes:"] + [f"  - {n}" for n in result.notes]
    if references is None:
        from .run_citations import fit_citations

        references = fit_citations(result)
    if references:
        from ..citations import format_references

        lines += [""] + format_references(references)
    if result.files:
        lines += ["", "Files written:"] + [f"  {p}" for p in result.files]
    return "\n".join(lines)


def write_fit_report(result: FitResult, folder=None, figures: bool = True, page: bool = True,
                     formats=None, curves=None, truth=None) -> FitResult:
    """Write a fit's report files: the figures (optional), ``summary.txt`` and ``report.html``.

    Parameters
    ----------
    result : FitResult
        As returned by :func:`motes.dust.fit.run.run_fit`.
    folder : path-like, optional
        Where the files go; default the run folder, ``result.run_dir``.
    figures : bool
        Write the colour, corner and evidence figures.
    formats : sequence of str, optional
        Figure formats (default PNG), see :func:`motes.report.save_figure`.
    curves : dict, optional
        Monochromatic model curves for the colour figure
        (:func:`motes.dust.fit.curves.posterior_curves`).
    truth : dict, optional
        Invented truth (demo), drawn on the corner figure.
    page : bool
        Write the self-contained report page ``report.html``
        (:func:`motes.report.html_page.write_fit_page`): the summary text,
        tables, figures, verdicts, what to cite and versions.

    Returns
    -------
    FitResult
        ``result`` with ``files`` listing the run's tables, ``summary.txt``,
        the figures, ``report.html`` and the per-model folders (the list
        ``summary.txt`` ends with).
    """
    folder = Path(folder) if folder is not None else Path(result.run_dir)
    model_folders = [m.folder for m in result.models]
    files = [p for p in result.files if p not in model_folders] + [folder / "summary.txt"]
    summary = files[-1]
    if figures:
        from .fit_figures import write_fit_figures

        files += list(write_fit_figures(result, folder, formats=formats, curves=curves, truth=truth))
    if page:
        files.append(folder / "report.html")
    files += model_folders
    result = dataclasses.replace(result, files=tuple(files))
    from .run_citations import fit_citations

    references = fit_citations(result)
    text = format_fit_report(result, references)
    write_text_atomic(summary, text + "\n")
    if page:
        from .html_page import write_fit_page

        write_fit_page(result, text, references, folder)
    return result
