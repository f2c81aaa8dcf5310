"""Drawing the probability-versus-spectral-type figure (used by :func:`plot_type_probability`).

Normalisation, stated on the axis label: bars give the probability of each
integer subtype (they sum to 1 per ranking); the curve gives the fine-grid
posterior as a density per subtype, p(type) / Δtype, whose integral over the
type axis is 1, so bars and curve share one scale. The 68% interval of each
estimate is shaded and its median drawn; both appear in the legend with
their values. The axis spans the types holding 99.5% of the probability of
every ranking (0.25% left out on each side), plus one subtype of margin.
"""

from __future__ import annotations

import math

import numpy as np

from ..companion.results import Classification
from ..companion.spectral_types import type_code, type_label
from .figure_style import TRUTH_COLOUR, new_figure, series_style

__all__ = ["draw_type_probability", "probable_type_range"]

_MODE_NAMES = {"distance": "distance known", "colours": "colours only"}
#: probability left out of the axis range, on each side
_TAIL = 0.0025


def probable_type_range(codes, probability, tail: float = _TAIL) -> tuple[float, float]:
    """Type codes between which all but ``tail`` of the probability lies on each side.

    Parameters
    ----------
    codes : ndarray[n]
        Type codes of a grid, increasing.
    probability : ndarray[n]
        Probability of each grid point (any normalisation).
    """
    codes = np.asarray(codes, dtype=float)
    p = np.where(np.isfinite(probability), probability, 0.0)
    order = np.argsort(codes)
    codes, p = codes[order], p[order]
    cum = np.cumsum(p) / p.sum()
    lo = codes[min(np.searchsorted(cum, tail), codes.size - 1)]
    hi = codes[min(np.searchsorted(cum, 1.0 - tail), codes.size - 1)]
    return float(lo), float(hi)


def draw_type_probability(result: Classification, truth=None):
    """Draw the figure; return the :class:`matplotlib.figure.Figure`."""
    fig = new_figure(1, height=3.7)
    ax, key_ax = fig.subplots(2, 1, gridspec_kw={"height_ratios": [2.6, 0.8], "hspace": 0.3})
    key_ax.axis("off")          # the legend's own row: it never hides the curves
    plotted = False
    ranges = []
    typed = [r for r in result.rankings if np.any(np.isfinite(r.grid["type_code"]))]
    one_source = len({r.source for r in typed}) == 1
    for k, r in enumerate(result.rankings):
        codes = r.grid["type_code"]
        if not np.any(np.isfinite(codes)):
            continue
        style = series_style(k)
        colour = style["color"]
        label = _MODE_NAMES[r.mode] if one_source else f"{r.source}, {_MODE_NAMES[r.mode]}"
        if r.kind == "sequence":
            bins = np.array([row.type_code for row in r.rows])
            width = 0.8 if k == 0 else 0.4
            ax.bar(np.round(bins), [row.probability for row in r.rows], width=width, color=colour,
                   alpha=0.4, lw=0.0, label=f"{label}: per subtype")
            step = float(np.median(np.diff(codes))) if codes.size > 1 else 1.0
            ax.plot(codes, r.grid["probability"] / step, color=colour, ls=style["linestyle"], lw=1.1,
                    label=f"{label}: density")
            est = next((e for e in result.estimates if e.source == r.source and e.mode == r.mode), None)
            if est is not None and math.isfinite(est.median):
                # the 68% region: one interval, or several where the posterior has separate peaks
                spans = [(lo, hi) for lo, hi, *_ in (getattr(est, "intervals", None) or ())] or [(est.lower, est.upper)]
                for j, (lo, hi) in enumerate(spans):
                    ax.axvspan(lo, hi, color=colour, alpha=0.12, lw=0,
                               label=None if j else "68%: " + ", ".join(f"{type_label(a)}–{type_label(b)}"
                                                                     for a, b in spans))
                ax.axvline(est.median, color=colour, lw=0.9, ls=":", label=f"median {type_label(est.median)}")
            ranges.append(probable_type_range(codes, r.grid["probability"]))
        else:
            ax.plot(codes, r.grid["probability"], ls="none", marker="D", color=colour, ms=4.5,
                    label=f"{label}: per spectrum")
            ok = np.isfinite(codes) & (r.grid["probability"] > 0)
            if np.any(ok):
                ranges.append(probable_type_range(codes[ok], r.grid["probability"][ok]))
        plotted = True
    truth_code = None
    if truth is not None:
        truth_code = type_code(truth) if isinstance(truth, str) else float(truth)
        ax.axvline(truth_code, color=TRUTH_COLOUR, lw=1.4, ls=(0, (1, 1)),
                   label=f"invented truth {type_label(truth_code)}")
    if not plotted:
        ax.text(0.5, 0.5, "no template with a spectral type was ranked", ha="center", va="center",
                transform=ax.transAxes)
    else:
        lo = min(a for a, _ in ranges) - 1.0
        hi = max(b for _, b in ranges) + 1.0
        if truth_code is not None:
            lo, hi = min(lo, truth_code - 1.0), max(hi, truth_code + 1.0)
        ax.set_xlim(lo, hi)
        ticks = np.arange(math.ceil(lo), math.floor(hi) + 1)
        step = max(1, math.ceil(len(ticks) / 9))
        ticks = ticks[::step]
        ax.set_xticks(ticks)
        ax.set_xticklabels([type_label(t, 0) for t in ticks])
        handles, texts = ax.get_legend_handles_labels()
        key_ax.legend(handles, texts, loc="center", ncol=2, fontsize=5.8, handlelength=1.6, labelspacing=0.3,
                      columnspacing=0.8)
        ax.set_ylim(0, ax.get_ylim()[1] * 1.05)
    ax.set_xlabel("spectral type")
    ax.set_ylabel("probability per subtype\n(bars sum to 1; curves integrate to 1)")
    ax.set_title(f"{result.target}: spectral type" + (f" ({typed[0].source})" if typed and one_source else ""))
    fig.subplots_adjust(left=0.17, right=0.97, top=0.93, bottom=0.02)
    return fig
