"""Grid summaries as text: what ``motes grid summarize`` prints, one plain-language line per material.

The numbers are those of :class:`motes.dust.grid.summary.GridSummary` (the
chi-square profile of each material's fraction); this module only words them.
"""

from __future__ import annotations

import numpy as np

from ..dust.grid.summary import ABSENCE_DELTA_CHI2, GridSummary

__all__ = ["format_grid_verdicts", "format_grid_summary"]


def format_grid_summary(summary: GridSummary, top: int = 10) -> list[str]:
    """The lines ``motes grid summarize`` prints: counts, best mixtures, one line per material, notes.

    Parameters
    ----------
    summary : GridSummary
    top : int
        Best mixtures listed (at most those the summary kept).

    Returns
    -------
    list of str
    """
    lines = [f"store {summary.store}: {summary.n_rows:,} of {summary.n_points:,} points; "
             f"chi2_min = {summary.chi2_min:.3f} for {summary.dof} degrees of freedom",
             f"bands: {', '.join(summary.band_labels)}",
             "best mixtures:"]
    grains = (summary.provenance or {}).get("grains")
    if grains:
        lines.insert(1, f"grains: {grains}")
    best = summary.best
    for row in best[:min(len(best), top)]:
        mix = ", ".join(f"{m} {row['f_' + m]:.3g}" for m in summary.materials)
        lines.append(f"  #{row['rank']:<3d} Δχ² = {row['delta_chi2']:7.3f}  {mix}; porosity {row['porosity']:.3g}, "
                     f"a_min {row['a_min']:.3g} µm, q {row['q']:.3g}, a_max {row['a_max']:.4g} µm"
                     + (f", f_max {row['f_max']:.3g}" if "f_max" in best.colnames else ""))
    lines.append("materials (chi-square profile over everything else):")
    lines += [f"  {line}" for line in format_grid_verdicts(summary)]
    lines += [f"note: {note}" for note in summary.notes]
    return lines


def format_grid_verdicts(summary: GridSummary) -> list[str]:
    """One plain-language line per material from its chi2 profile.

    Parameters
    ----------
    summary : GridSummary

    Returns
    -------
    list of str
        The best fraction, the range with Δχ² ≤ 1 and what leaving the
        material out costs (``disfavoured`` above ``ABSENCE_DELTA_CHI2``).
    """
    lines = []
    prof = summary.fraction_profiles
    for name in summary.materials:
        rows = prof[prof["material"] == name]
        f, d = np.asarray(rows["fraction"]), np.asarray(rows["delta_chi2"])
        ok = f[d <= 1.0]
        best = f[np.argmin(d)]
        text = f"{name}: best fraction {best:.3g}"
        if ok.size:
            text += f" (Δχ² ≤ 1 for {ok.min():.3g}–{ok.max():.3g})"
        if f[0] == 0.0:
            absent = d[0]
            word = f"disfavoured: > {ABSENCE_DELTA_CHI2:g}" if absent > ABSENCE_DELTA_CHI2 else "allowed"
            text += f"; leaving it out costs Δχ² = {absent:.2f} ({word})"
        else:
            text += "; the grid does not include 0 for this material"
        lines.append(text)
    return lines
