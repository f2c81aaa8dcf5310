"""Placing point labels so that they overlap neither each other nor the data.

:func:`place_labels` tries, for each label in turn, a ring of positions
around its point (nearest first) and keeps the first whose text box lies
inside the axes and clear of every box already taken: the other labels, and
the obstacles the caller names (markers, error bars, curves' points). When
no candidate is clear, the one with the least overlap is kept. A greedy
search, enough for the handful of labels of an SED.
"""

from __future__ import annotations

import numpy as np

__all__ = ["place_labels", "artist_boxes", "boxes_overlap", "marker_boxes", "curve_boxes"]

#: candidate offsets [points] from the anchor, tried in order: right, left, above, below, diagonals, farther
_DIRECTIONS = ((1, 0), (-1, 0), (0, 1), (0, -1), (1, 1), (-1, 1), (1, -1), (-1, -1))
_DISTANCES = (6.0, 11.0, 17.0, 25.0)


def boxes_overlap(a, b, pad: float = 0.0) -> bool:
    """Whether two display boxes ``(x0, y0, x1, y1)`` [pixels] overlap (``pad`` widens ``a``)."""
    return not (a[2] + pad <= b[0] or b[2] <= a[0] - pad or a[3] + pad <= b[1] or b[3] <= a[1] - pad)


def _area(a, b) -> float:
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    return max(w, 0.0) * max(h, 0.0)


def artist_boxes(artists, renderer=None) -> list[tuple]:
    """Display boxes ``(x0, y0, x1, y1)`` of artists (texts, lines, collections)."""
    out = []
    for a in artists:
        bb = a.get_window_extent(renderer)
        out.append((bb.x0, bb.y0, bb.x1, bb.y1))
    return out


def place_labels(ax, anchors, texts, obstacles=(), fontsize=None, color="0.3", pad_points: float = 1.0):
    """Write ``texts`` beside the data points ``anchors`` without collisions.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Its figure's layout must be final (call ``tight_layout`` first): the
        positions are found in display coordinates.
    anchors : sequence of (x, y)
        Data coordinates of the labelled points.
    texts : sequence of str
    obstacles : sequence of (x0, y0, x1, y1)
        Display boxes [pixels] no label may cover (markers, error bars).
    fontsize, color
        Text properties.
    pad_points : float
        Clearance kept around each label [points].

    Returns
    -------
    list of matplotlib.text.Annotation
        The labels, in the order of ``texts``.
    """
    fig = ax.figure
    renderer = fig._get_renderer()
    scale = fig.dpi / 72.0
    pad = pad_points * scale
    frame = ax.get_window_extent(renderer)
    taken = [tuple(o) for o in obstacles]
    placed = []
    for (x, y), text in zip(anchors, texts):
        best, best_cost, best_offset = None, np.inf, ((0.0, 0.0), 0.0)
        for dist in _DISTANCES:
            for dx, dy in _DIRECTIONS:
                norm = np.hypot(dx, dy)
                off = (dist * dx / norm, dist * dy / norm)
                ha = "left" if dx > 0 else ("right" if dx < 0 else "center")
                va = "bottom" if dy > 0 else ("top" if dy < 0 else "center")
                ann = ax.annotate(text, (x, y), xytext=off, textcoords="offset points", ha=ha, va=va,
                                  fontsize=fontsize, color=color, annotation_clip=False)
                bb = ann.get_window_extent(renderer)
                box = (bb.x0, bb.y0, bb.x1, bb.y1)
                outside = (box[0] < frame.x0 + pad or box[2] > frame.x1 - pad or box[1] < frame.y0 + pad
                           or box[3] > frame.y1 - pad)
                cost = sum(_area(box, t) for t in taken if boxes_overlap(box, t, pad)) + (1e9 if outside else 0.0)
                cost += 1e-3 * dist          # among clear places, the nearest
                if cost < best_cost:
                    if best is not None:
                        best[0].remove()
                    best, best_cost, best_offset = (ann, box), cost, (off, dist)
                else:
                    ann.remove()
                if best_cost < 1.0:          # clear (the distance term is below one pixel squared)
                    break
            if best_cost < 1.0:
                break
        taken.append(best[1])
        placed.append(best[0])
        (ox, oy), dist = best_offset
        if dist > _DISTANCES[1]:          # far from its point: a thin leader line says which point it names
            ax.annotate("", (x, y), xytext=(0.8 * ox, 0.8 * oy), textcoords="offset points",
                        arrowprops={"arrowstyle": "-", "lw": 0.4, "color": "0.55", "shrinkA": 0, "shrinkB": 3},
                        annotation_clip=False)
    return placed


def curve_boxes(ax, lines, size: float = 1.5):
    """Small display boxes along drawn curves (lines with a line style), so labels avoid them too."""
    out = []
    for a in lines:
        if a.get_linestyle() in ("None", "none", "") or len(a.get_xdata()) < 2:
            continue
        pts = ax.transData.transform(np.column_stack([np.asarray(v, dtype=float) for v in a.get_data()]))
        out += [(x - size, y - size, x + size, y + size) for x, y in pts if np.isfinite(x) and np.isfinite(y)]
    return out


def marker_boxes(ax, artists):
    """Display boxes of each marker / stroke of template artists (not of their whole extent)."""
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D

    out = []
    for a in artists:
        if isinstance(a, Line2D) and a.get_marker() not in ("None", None, "", " ") and a.get_linestyle() in ("None", "none", ""):
            pts = ax.transData.transform(np.column_stack([np.asarray(v, dtype=float) for v in a.get_data()]))
            r = 0.5 * a.get_markersize() * ax.figure.dpi / 72.0
            out += [(x - r, y - r, x + r, y + r) for x, y in pts if np.isfinite(x) and np.isfinite(y)]
        elif isinstance(a, LineCollection):
            for seg in a.get_segments():
                p = ax.transData.transform(seg)
                out.append((p[:, 0].min() - 2, p[:, 1].min() - 2, p[:, 0].max() + 2, p[:, 1].max() + 2))
    return out
