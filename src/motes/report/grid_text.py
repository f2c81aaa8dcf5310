"""Grid summaries as text: one plain-language line per material.

The numbers are those of :class:`motes.dust.grid.summary.GridSummary` (the
chi-square profile of each material's fraction); this module only words them.
"""

from __future__ import annotations

import numpy as np

from ..dust.grid.summary import ABSENCE_DELTA_CHI2, GridSummary

__all__ = ["format_grid_verdicts"]


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
