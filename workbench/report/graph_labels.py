"""Where the graph drawing writes the variables' names and the arrows' effect labels: a greedy search, in
pixels, for the candidate place that covers the fewest arrows, nodes and labels already placed (below,
above, right or left of a node for a name; along the middle part of an arrow for an effect), used by
:func:`workbench.report.graph_drawing.graph_figure`.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> pixels = {"soil_quality": (100.0, 200.0), "fertiliser": (100.0, 50.0), "wheat_yield": (400.0, 50.0)}
>>> names, effects = place_labels(pixels, sc.arrows, radius=15.0, width=500, height=300)
>>> sorted(names) == sorted(pixels), len(effects) == len(sc.arrows)
(True, True)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from workbench.report.arrow_style import arrow_text as _arrow_text

__all__ = ["Box", "place_labels"]

Box = tuple[float, float, float, float]
"""A box in pixels: (x_min, y_min, x_max, y_max)."""


def _box_overlap(a: Box, b: Box) -> float:
    """Overlapping area of two boxes."""
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    return w * h if w > 0 and h > 0 else 0.0


def _points_inside(box: Box, points) -> int:
    x_min, y_min, x_max, y_max = box
    return sum(1 for x, y in points if x_min <= x <= x_max and y_min <= y <= y_max)


def _box(centre: tuple[float, float], w: float, h: float) -> Box:
    cx, cy = centre
    return (cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)


@dataclass
class _Obstacles:
    """What a label should not cover: sample points along the arrows, the nodes' discs, the labels placed
    so far, and the frame's edges."""

    edge_points: list[tuple[float, float]]
    discs: list[Box]
    taken: list[Box]
    width: float
    height: float

    def outside(self, box: Box) -> float:
        """A penalty for the part of ``box`` beyond the frame's edges."""
        return (
            max(0.0, -box[0])
            + max(0.0, box[2] - self.width)
            + max(0.0, -box[1])
            + max(0.0, box[3] - self.height)
        ) * 40


def _obstacles(pixels, arrows, radius: float, width: float, height: float) -> _Obstacles:
    """Sample every drawn arrow (between the nodes' edges) and the nodes' discs, in pixels."""
    edge_points: list[tuple[float, float]] = []
    for a in arrows:
        (ax, ay), (bx, by) = pixels[a.source], pixels[a.target]
        length = math.hypot(bx - ax, by - ay) or 1.0
        steps = max(4, int(length / 6))
        cut = (radius + 4) / length
        for k in range(steps + 1):
            t = cut + (1 - 2 * cut) * k / steps
            edge_points.append((ax + (bx - ax) * t, ay + (by - ay) * t))
    discs = [(x - radius - 2, y - radius - 2, x + radius + 2, y + radius + 2) for x, y in pixels.values()]
    return _Obstacles(edge_points, discs, [], width, height)


def _place_names(pixels, obstacles: _Obstacles, radius: float) -> dict[str, tuple[float, float]]:
    """Each variable's name below, above, right or left of its node, wherever it covers least (the earlier
    candidates preferred)."""
    name_char_px, line_px = 7.0, 15.0
    names: dict[str, tuple[float, float]] = {}
    gap = radius + 3
    for name, (x, y) in pixels.items():
        w, h = name_char_px * len(name) + 4, line_px
        candidates = [
            (x, y - gap - h / 2),  # below (pixel y grows upwards here)
            (x, y + gap + h / 2),  # above
            (x + gap + w / 2, y),  # right
            (x - gap - w / 2, y),  # left
        ]
        best, best_score = candidates[0], math.inf
        for rank, centre in enumerate(candidates):
            box = _box(centre, w, h)
            score = (
                8 * _points_inside(box, obstacles.edge_points)
                + sum(_box_overlap(box, d) for d in obstacles.discs) / 4
                + sum(_box_overlap(box, t) for t in obstacles.taken) / 2
                + obstacles.outside(box)
                + 3 * rank
            )
            if score < best_score:
                best, best_score = centre, score
        names[name] = best
        obstacles.taken.append(_box(best, w, h))
    return names


def _place_effects(pixels, arrows, obstacles: _Obstacles) -> list[tuple[float, float]]:
    """Each arrow's effect label along the middle part of the arrow, wherever it covers least (the middle
    preferred)."""
    char_px, line_px = 6.3, 15.0
    labels: list[tuple[float, float]] = []
    for a in arrows:
        (ax, ay), (bx, by) = pixels[a.source], pixels[a.target]
        w, h = char_px * len(_arrow_text(a)) + 6, line_px - 1
        best, best_score = None, math.inf
        for t in (0.5, 0.42, 0.58, 0.35, 0.65, 0.28, 0.72):
            centre = (ax + (bx - ax) * t, ay + (by - ay) * t)
            box = _box(centre, w, h)
            score = (
                sum(_box_overlap(box, d) for d in obstacles.discs)
                + sum(_box_overlap(box, o) for o in obstacles.taken)
                + obstacles.outside(box)
                + 20 * abs(t - 0.5)
            )
            if score < best_score:
                best, best_score = centre, score
        labels.append(best)
        obstacles.taken.append(_box(best, w, h))
    return labels


def place_labels(
    pixels: dict[str, tuple[float, float]],
    arrows,
    *,
    radius: float,
    width: float,
    height: float,
) -> tuple[dict[str, tuple[float, float]], list[tuple[float, float]]]:
    """Where to write the variables' names and the arrows' effects, in pixels, so that they overlap the
    arrows, the nodes and each other as little as possible (a greedy search over a few candidate places:
    below, above, right or left of a node; along the middle part of an arrow).

    Returns the centre of each name's box and of each arrow label's box.
    """
    obstacles = _obstacles(pixels, arrows, radius, width, height)
    names = _place_names(pixels, obstacles, radius)
    return names, _place_effects(pixels, arrows, obstacles)
