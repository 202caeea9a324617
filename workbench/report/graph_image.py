"""The causal graph as a picture to paste into slides and print: SVG text and PNG bytes, with no browser.

The picture is drawn from one list of shapes (:func:`graph_shapes`) in pixel coordinates, so the SVG and the
PNG show the same graph: each variable as a marker in its role's colour and shape (:data:`~workbench.report.
style.ROLE_STYLE`, colour-blind safe after Okabe & Ito 2008) with its label under it and its role written
above it in small capitals, so the role never rests on colour alone; an unmeasured variable has a dashed
outline and says so; each arrow carries its effect size on a white box. Positions are those of the
dashboard's drawing (:func:`workbench.report.graph_drawing.graph_layout`).

Examples
--------
>>> from workbench import load_preset
>>> svg = graph_svg(load_preset("mediator"))
>>> svg.startswith("<svg") and "MEDIATOR" in svg and "Dough-handling skill" in svg
True
>>> graph_png(load_preset("mediator"))[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
True
"""

from __future__ import annotations

import io
import math
import textwrap
from dataclasses import dataclass

from workbench.formatting.markup import attr_html, text_html
from workbench.report.graph_drawing import graph_layout
from workbench.report.style import EDGE_COLOUR, ROLE_STYLE
from workbench.scenario.model import Scenario

__all__ = ["Node", "Edge", "graph_shapes", "graph_svg", "graph_png"]

_RADIUS = 15
_MARGIN_X, _MARGIN_TOP, _MARGIN_BOTTOM = 90, 34, 48


@dataclass(frozen=True)
class Node:
    """One variable as drawn: centre, role word, colour, marker, label lines, measured or not."""

    name: str
    x: float
    y: float
    role: str
    fill: str
    marker: str
    lines: tuple[str, ...]
    observed: bool


@dataclass(frozen=True)
class Edge:
    """One arrow as drawn: from the edge of its cause's marker to the edge of its effect's, with its label."""

    x0: float
    y0: float
    x1: float
    y1: float
    label: str


def _role(scenario: Scenario, name: str, roles: dict | None) -> str:
    q = scenario.question
    if name == q.exposure:
        return "exposure"
    if name == q.outcome:
        return "outcome"
    found = (roles or {}).get(name) or []
    return found[0][0] if found and found[0][0] in ROLE_STYLE else "other"


def graph_shapes(scenario: Scenario, roles: dict | None = None, *, width: int = 640, height: int = 340):
    """The nodes and arrows of the picture, in pixels of a ``width`` x ``height`` canvas.

    ``roles`` is :func:`workbench.graph.roles.find_roles` output (found here when not given).

    Examples
    --------
    >>> from workbench import load_preset
    >>> nodes, edges = graph_shapes(load_preset("common_cause"))
    >>> [(n.name, n.role) for n in nodes], len(edges)
    ([('soil_quality', 'confounder'), ('fertiliser', 'exposure'), ('wheat_yield', 'outcome')], 3)
    """
    if roles is None:
        from workbench.graph.roles import find_roles

        roles = find_roles(scenario)
    pos = graph_layout(scenario)
    xs, ys = [p[0] for p in pos.values()], [p[1] for p in pos.values()]
    span_x, span_y = (max(xs) - min(xs)) or 1.0, (max(ys) - min(ys)) or 1.0

    def pixels(p):
        x = (
            _MARGIN_X + (p[0] - min(xs)) / span_x * (width - 2 * _MARGIN_X)
            if max(xs) > min(xs)
            else width / 2
        )
        top = _MARGIN_TOP + 10
        y = (
            top + (max(ys) - p[1]) / span_y * (height - top - _MARGIN_BOTTOM)
            if max(ys) > min(ys)
            else height / 2
        )
        return x, y

    nodes = []
    for v in scenario.variables:
        role = _role(scenario, v.name, roles)
        _, fill, marker = ROLE_STYLE[role]
        text = v.label or v.name
        lines = tuple(textwrap.wrap(text, 24, break_long_words=True)[:2]) or (v.name,)
        x, y = pixels(pos[v.name])
        nodes.append(Node(v.name, x, y, role, fill, marker, lines, v.observed))
    at = {n.name: n for n in nodes}
    edges = []
    for a in scenario.arrows:
        s, t = at[a.source], at[a.target]
        dx, dy = t.x - s.x, t.y - s.y
        length = math.hypot(dx, dy) or 1.0
        ux, uy = dx / length, dy / length
        gap = _RADIUS + 3
        edges.append(Edge(s.x + ux * gap, s.y + uy * gap, t.x - ux * gap, t.y - uy * gap, f"{a.effect:g}"))
    return nodes, edges


def _role_word(node: Node) -> str:
    word = ROLE_STYLE[node.role][0].upper() if node.role != "other" else ""
    return word if node.observed else (word + " · unmeasured").strip(" ·")


def _marker_points(marker: str, x: float, y: float, r: float) -> list[tuple[float, float]] | None:
    """The corners of a polygon marker, or None for a circle."""
    if marker == "square":
        return [(x - r, y - r), (x + r, y - r), (x + r, y + r), (x - r, y + r)]
    if marker == "diamond":
        return [(x, y - r * 1.25), (x + r * 1.1, y), (x, y + r * 1.25), (x - r * 1.1, y)]
    if marker == "triangle":
        return [(x, y - r * 1.2), (x + r * 1.1, y + r * 0.8), (x - r * 1.1, y + r * 0.8)]
    if marker == "inverted_triangle":
        return [(x, y + r * 1.2), (x + r * 1.1, y - r * 0.8), (x - r * 1.1, y - r * 0.8)]
    return None


def _head(e: Edge, size: float = 9.0) -> list[tuple[float, float]]:
    dx, dy = e.x1 - e.x0, e.y1 - e.y0
    length = math.hypot(dx, dy) or 1.0
    ux, uy = dx / length, dy / length
    bx, by = e.x1 - ux * size, e.y1 - uy * size
    return [
        (e.x1, e.y1),
        (bx - uy * size * 0.5, by + ux * size * 0.5),
        (bx + uy * size * 0.5, by - ux * size * 0.5),
    ]


def _label_at(e: Edge) -> tuple[float, float]:
    return e.x0 + 0.45 * (e.x1 - e.x0), e.y0 + 0.45 * (e.y1 - e.y0)


def graph_svg(scenario: Scenario, roles: dict | None = None, *, width: int = 640, height: int = 340) -> str:
    """The graph as standalone SVG text (system fonts, no external reference).

    Examples
    --------
    >>> from workbench import load_preset
    >>> graph_svg(load_preset("common_cause")).count("<polygon")  # three arrow heads, two polygon markers
    5
    """
    nodes, edges = graph_shapes(scenario, roles, width=width, height=height)
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} '
        f'{height}" font-family="system-ui, Arial, sans-serif" role="img" aria-label="{attr_html(scenario.title)}">',
        f'<rect width="{width}" height="{height}" fill="#ffffff"/>',
    ]
    for e in edges:
        points = " ".join(f"{x:.1f},{y:.1f}" for x, y in _head(e))
        out.append(
            f'<line x1="{e.x0:.1f}" y1="{e.y0:.1f}" x2="{e.x1:.1f}" y2="{e.y1:.1f}" stroke="{EDGE_COLOUR}" '
            f'stroke-width="1.6"/><polygon points="{points}" fill="{EDGE_COLOUR}"/>'
        )
        lx, ly = _label_at(e)
        w = 7 * len(e.label) + 6
        out.append(
            f'<rect x="{lx - w / 2:.1f}" y="{ly - 8:.1f}" width="{w}" height="15" fill="#ffffff"/>'
            f'<text x="{lx:.1f}" y="{ly + 4:.1f}" font-size="11" text-anchor="middle" fill="#222">'
            f"{text_html(e.label)}</text>"
        )
    for n in nodes:
        dash = "" if n.observed else ' stroke-dasharray="4 3"'
        fill = n.fill if n.observed else "#ffffff"
        corners = _marker_points(n.marker, n.x, n.y, _RADIUS)
        if corners is None:
            out.append(
                f'<circle cx="{n.x:.1f}" cy="{n.y:.1f}" r="{_RADIUS}" fill="{fill}" stroke="#222"'
                f' stroke-width="1.4"{dash}/>'
            )
        else:
            points = " ".join(f"{x:.1f},{y:.1f}" for x, y in corners)
            out.append(f'<polygon points="{points}" fill="{fill}" stroke="#222" stroke-width="1.4"{dash}/>')
        word = _role_word(n)
        if word:
            out.append(
                f'<text x="{n.x:.1f}" y="{n.y - _RADIUS - 7:.1f}" font-size="10" font-weight="700" '
                f'letter-spacing="0.5" text-anchor="middle" fill="#333" stroke="#fff" stroke-width="3" '
                f'paint-order="stroke">{text_html(word)}</text>'
            )
        for i, line in enumerate(n.lines):
            out.append(
                f'<text x="{n.x:.1f}" y="{n.y + _RADIUS + 15 + 13 * i:.1f}" font-size="12" '
                f'text-anchor="middle" fill="#111" stroke="#fff" stroke-width="3" paint-order="stroke">'
                f"{text_html(line)}</text>"
            )
        out.append(f"<title>{text_html(n.name)}</title>")
    out.append("</svg>")
    return "".join(out)


def graph_png(
    scenario: Scenario, roles: dict | None = None, *, width: int = 640, height: int = 340, scale: int = 2
) -> bytes:
    """The same picture as :func:`graph_svg`, as PNG bytes drawn with Pillow at ``scale`` times the size (sharp
    on slides).

    Examples
    --------
    >>> from workbench import load_preset
    >>> from PIL import Image
    >>> import io
    >>> Image.open(io.BytesIO(graph_png(load_preset("common_cause"), scale=1))).size
    (640, 340)
    """
    from PIL import Image, ImageDraw, ImageFont

    nodes, edges = graph_shapes(scenario, roles, width=width, height=height)
    image = Image.new("RGB", (width * scale, height * scale), "#ffffff")
    draw = ImageDraw.Draw(image)
    small, bold = ImageFont.load_default(size=11 * scale), ImageFont.load_default(size=10 * scale)
    label_font = ImageFont.load_default(size=12 * scale)

    def s(points):
        return [(x * scale, y * scale) for x, y in points]

    for e in edges:
        draw.line(s([(e.x0, e.y0), (e.x1, e.y1)]), fill=EDGE_COLOUR, width=max(1, int(1.6 * scale)))
        draw.polygon(s(_head(e)), fill=EDGE_COLOUR)
        lx, ly = _label_at(e)
        w = 7 * len(e.label) + 6
        draw.rectangle(s([(lx - w / 2, ly - 8), (lx + w / 2, ly + 7)]), fill="#ffffff")
        draw.text((lx * scale, ly * scale), e.label, fill="#222222", font=small, anchor="mm")
    for n in nodes:
        fill = n.fill if n.observed else "#ffffff"
        corners = _marker_points(n.marker, n.x, n.y, _RADIUS)
        if corners is None:
            box = s([(n.x - _RADIUS, n.y - _RADIUS), (n.x + _RADIUS, n.y + _RADIUS)])
            draw.ellipse(box, fill=fill, outline="#222222", width=max(1, int(1.4 * scale)))
        else:
            draw.polygon(s(corners), fill=fill, outline="#222222", width=max(1, int(1.4 * scale)))
        word = _role_word(n)
        if word:
            draw.text(
                (n.x * scale, (n.y - _RADIUS - 10) * scale),
                word,
                fill="#333333",
                font=bold,
                anchor="mm",
                stroke_width=scale * 2,
                stroke_fill="#ffffff",
            )
        for i, line in enumerate(n.lines):
            y = (n.y + _RADIUS + 11 + 13 * i) * scale
            draw.text(
                (n.x * scale, y),
                line,
                fill="#111111",
                font=label_font,
                anchor="mm",
                stroke_width=scale * 2,
                stroke_fill="#ffffff",
            )
    buffer = io.BytesIO()
    image.save(buffer, format="PNG")
    return buffer.getvalue()
