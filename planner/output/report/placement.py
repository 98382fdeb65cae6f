"""Placing chart labels so that none hides another: value labels beside marked points, numbered badges
along an axis.  Works on a figure whose layout is final (:func:`freeze_layout`), in display pixels.

- :func:`place_labels`: each label tries positions around its point, nearest first (right-above,
  right-below, left-above, ... then further out), joined to its point by a thin leader line, and
  takes the first that stays inside the axes and clear of every label, marker and text already there.
- :func:`spread`: positions along a line at least ``gap`` apart, each as near its wish as it can be,
  within bounds (used for the sweep chart's numbered change points).
"""

from __future__ import annotations

from dataclasses import dataclass

from matplotlib.transforms import Bbox

from planner.output.report.style import PALETTE as C


def freeze_layout(fig):
    """Run the figure's layout once and keep it (later drawing moves nothing); returns a renderer."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not hasattr(fig.canvas, "get_renderer"):
        FigureCanvasAgg(fig)
    fig.draw_without_rendering()
    fig.set_layout_engine("none")
    return fig.canvas.get_renderer()


def overlap(a: Bbox, b: Bbox) -> bool:
    """True if two boxes share more than a hair of area."""
    return min(a.x1, b.x1) - max(a.x0, b.x0) > 0.5 and min(a.y1, b.y1) - max(a.y0, b.y0) > 0.5


@dataclass
class Label:
    """A value label for the point (x, y) in data units; ``size`` is the marker's size in points."""

    x: float
    y: float
    text: str
    gid: str
    size: float = 8.0


#: Directions tried around a point, nearest first: (dx, dy) signs.
_DIRS = [(1, 1), (1, -1), (-1, 1), (-1, -1), (0, 1), (0, -1), (1, 0), (-1, 0)]
#: Distances tried (points); beyond the first ring a leader line joins the label to its point.
_RINGS = (7.0, 16.0, 28.0, 42.0, 60.0, 80.0)


def _marker_box(ax, x: float, y: float, size: float, px: float) -> Bbox:
    cx, cy = ax.transData.transform((x, y))
    h = (size / 2 + 1.5) * px
    return Bbox([[cx - h, cy - h], [cx + h, cy + h]])


def place_labels(ax, renderer, labels: list[Label], obstacles: list[Bbox] | None = None,
                 fontsize: float = 8.0) -> list:
    """Annotate ``ax`` with ``labels`` (in order of priority) so that no two overlap; returns the annotations.

    ``obstacles``: other boxes to keep clear of (legends, texts), in display pixels.
    """
    px = renderer.points_to_pixels(1.0)
    frame = ax.get_window_extent(renderer)
    taken = list(obstacles or []) + [t.get_window_extent(renderer) for t in ax.texts if t.get_visible()]
    taken += [_marker_box(ax, lb.x, lb.y, lb.size, px) for lb in labels]
    out = []
    box_style = {"boxstyle": "round,pad=0.15", "fc": C["paper"], "ec": "none", "alpha": 0.85}
    for lb in labels:
        best = None
        for ring in _RINGS:
            for sx, sy in _DIRS:
                r = ring + lb.size / 2
                off = (sx * r, sy * r * (0.8 if sx else 1.0))
                ha = "left" if sx > 0 else "right" if sx < 0 else "center"
                va = "bottom" if sy > 0 else "top" if sy < 0 else "center"
                probe = ax.annotate(lb.text, (lb.x, lb.y), xytext=off, textcoords="offset points", ha=ha, va=va,
                                    fontsize=fontsize, bbox=box_style)
                box = probe.get_window_extent(renderer).padded(2.5 * px)
                probe.remove()
                inside = (box.x0 >= frame.x0 and box.x1 <= frame.x1 and box.y0 >= frame.y0
                          and box.y1 <= frame.y1)
                clashes = sum(overlap(box, t) for t in taken) + (0 if inside else 5)
                if best is None or clashes < best[0]:
                    best = (clashes, off, ha, va, ring, box)
                if clashes == 0:
                    break
            if best[0] == 0:
                break
        _, off, ha, va, ring, box = best
        # every label has its leader line: beside markers a few points apart, position alone can mislead
        arrow = {"arrowstyle": "-", "color": C["muted"], "lw": 0.7, "shrinkA": 0, "shrinkB": lb.size / 2 + 1}
        ann = ax.annotate(lb.text, (lb.x, lb.y), xytext=off, textcoords="offset points", ha=ha, va=va,
                          fontsize=fontsize, color=C["ink"], zorder=6, bbox=box_style, arrowprops=arrow)
        ann.set_gid(f"label-{lb.gid}")
        taken.append(box)
        out.append(ann)
    return out


def spread(wish: list[float], gap: float, lo: float, hi: float) -> list[float]:
    """Positions for items that want to sit at ``wish`` (any order), each at least ``gap`` from the next,
    within [lo, hi] where there is room (if there is not, they are evenly packed from ``lo``); returned
    in the order given.  Each is as near its wish as the gaps allow (push right, then back left)."""
    order = sorted(range(len(wish)), key=lambda k: wish[k])
    if not order:
        return []
    if gap * (len(order) - 1) > hi - lo:
        pos = {k: lo + gap * i for i, k in enumerate(order)}
        return [pos[k] for k in range(len(wish))]
    xs = [min(max(wish[k], lo), hi) for k in order]
    for i in range(1, len(xs)):
        xs[i] = max(xs[i], xs[i - 1] + gap)
    xs[-1] = min(xs[-1], hi)
    for i in range(len(xs) - 2, -1, -1):
        xs[i] = min(xs[i], xs[i + 1] - gap)
    pos = dict(zip(order, xs))
    return [pos[k] for k in range(len(wish))]
