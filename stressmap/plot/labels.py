"""Labels that do not overlap: a greedy placement of text labels around their anchor points.

Each label is tried at a ring of offsets around its anchor (nearest first); the first position
whose box stays inside the axes and overlaps no box already taken (earlier labels, and any
boxes the caller reserves) wins. When every candidate collides, the least-overlapping one is
used. Labels placed away from their anchor get a thin leader line. Boxes are measured with the
figure's renderer, so the figure's layout must be final (:func:`freeze_layout`) before placing.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["freeze_layout", "place_labels", "label_boxes_overlap", "text_box"]

#: Offset radii (points) and directions (degrees counter-clockwise from east) tried in order.
_RADII_PT = (5.0, 11.0, 18.0, 27.0, 38.0, 52.0)
_DIRECTIONS_DEG = (45.0, 135.0, 315.0, 225.0, 90.0, 0.0, 270.0, 180.0)


def freeze_layout(fig) -> None:
    """Run the figure's layout engine once and keep the result (later draws do not move axes)."""
    fig.canvas.draw()
    if fig.get_layout_engine() is not None:
        fig.set_layout_engine("none")


def _overlap(a, b) -> float:
    """Area shared by two display-space boxes (x0, y0, x1, y1)."""
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    return w * h if w > 0 and h > 0 else 0.0


def label_boxes_overlap(boxes, pad: float = 0.0) -> bool:
    """True when any two of the (x0, y0, x1, y1) boxes overlap (after growing them by ``pad``).

    Examples
    --------
    >>> label_boxes_overlap([(0, 0, 1, 1), (2, 2, 3, 3)]), label_boxes_overlap([(0, 0, 2, 2), (1, 1, 3, 3)])
    (False, True)
    """
    b = [(x0 - pad, y0 - pad, x1 + pad, y1 + pad) for x0, y0, x1, y1 in boxes]
    return any(_overlap(b[i], b[j]) > 0 for i in range(len(b)) for j in range(i + 1, len(b)))


def text_box(text, renderer=None, pad: float = 0.0) -> tuple:
    """Display box (x0, y0, x1, y1) of a text's characters (an annotation's leader excluded),
    grown by ``pad`` pixels."""
    from matplotlib.text import Text

    renderer = renderer or text.figure.canvas.get_renderer()
    if hasattr(text, "update_positions"):  # an annotation places its text at draw time
        text.update_positions(renderer)
    e = Text.get_window_extent(text, renderer)
    return (e.x0 - pad, e.y0 - pad, e.x1 + pad, e.y1 + pad)


def _box(text, renderer, pad: float = 1.5):
    """Display box of a text, grown by ``pad`` pixels so neighbours never touch."""
    return text_box(text, renderer, pad)


def place_labels(ax, xy, texts, *, reserved=(), fontsize: float = 7.0, gid: str = "label",
                 color: str = "0.1", leader_color: str = "0.45", optional: bool = False) -> list:
    """Annotate each ``xy`` (data coordinates, (n, 2)) with ``texts`` without overlaps.

    Parameters
    ----------
    reserved : sequence of (x0, y0, x1, y1)
        Display-space boxes to keep clear (e.g. other labels already on the axes).
    optional : bool
        Leave out a label that finds no free place (instead of placing it where it overlaps
        least).

    Returns
    -------
    list of matplotlib.text.Annotation
        The labels drawn, in the order of ``texts``; each has ``gid`` and is excluded from
        layout.
    """
    from matplotlib.patheffects import withStroke

    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    taken = [tuple(b) for b in reserved]
    axes_box = ax.get_window_extent(renderer)
    out = []
    px_per_pt = fig.dpi / 72.0
    for (x, y), label in zip(np.asarray(xy, dtype=float).reshape(-1, 2), texts):
        best, best_cost = None, math.inf
        for radius in _RADII_PT:
            for direction in _DIRECTIONS_DEG:
                a = math.radians(direction)
                dx, dy = radius * math.cos(a), radius * math.sin(a)
                ha = "left" if dx > 0.5 else "right" if dx < -0.5 else "center"
                va = "bottom" if dy > 0.5 else "top" if dy < -0.5 else "center"
                ann = ax.annotate(str(label), (x, y), xytext=(dx, dy), textcoords="offset points",
                                  ha=ha, va=va, fontsize=fontsize, color=color)
                box = _box(ann, renderer)
                ann.remove()
                inside = (box[0] >= axes_box.x0 and box[2] <= axes_box.x1
                          and box[1] >= axes_box.y0 and box[3] <= axes_box.y1)
                cost = sum(_overlap(box, t) for t in taken) + (0.0 if inside else 1e6)
                if cost < best_cost:
                    best, best_cost = (dx, dy, ha, va, box), cost
                if cost == 0.0:
                    break
            if best_cost == 0.0:
                break
        if optional and best_cost > 0.0:
            continue
        dx, dy, ha, va, box = best
        far = math.hypot(dx, dy) * px_per_pt > 8.0 * px_per_pt
        ann = ax.annotate(str(label), (x, y), xytext=(dx, dy), textcoords="offset points",
                          ha=ha, va=va, fontsize=fontsize, color=color, gid=gid, zorder=6,
                          path_effects=[withStroke(linewidth=2.2, foreground="white")],
                          arrowprops=(dict(arrowstyle="-", color=leader_color, lw=0.5,
                                           shrinkA=0, shrinkB=2) if far else None))
        ann.set_in_layout(False)
        taken.append(box)
        out.append(ann)
    return out
