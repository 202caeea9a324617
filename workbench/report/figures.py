"""Bokeh figures built from library results (no Panel import), for the dashboard and the HTML report.

Every function takes plain library objects (a :class:`~workbench.scenario.parse.Scenario`, a check report, a
simulation or plan result, a DataFrame) and returns a Bokeh layout object. Nothing here computes a statistic
the library already computes; the figures only draw.

Colours follow the Okabe-Ito colour-blind-safe palette (Okabe M., Ito K. (2008). Color Universal Design):
roles in the graph use fixed colours (:data:`ROLE_STYLE`); strategies take colours in a fixed order
(:func:`strategy_colours`) so one strategy has the same colour in every figure.

Examples
--------
>>> from workbench import load_preset
>>> fig = graph_figure(load_preset("common_cause"))
>>> type(fig).__name__
'figure'
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

import networkx as nx
import numpy as np
import pandas as pd
from bokeh.layouts import gridplot
from bokeh.models import (
    Arrow,
    ColorBar,
    ColumnDataSource,
    FixedTicker,
    HoverTool,
    Legend,
    LegendItem,
    LinearColorMapper,
    Range1d,
    Span,
    VeeHead,
)
from bokeh.palettes import Cividis256
from bokeh.plotting import figure

from workbench.scenario.model import Scenario

__all__ = [
    "ROLE_STYLE",
    "OKABE_ITO",
    "primary_role",
    "graph_layout",
    "graph_figure",
    "strategy_colours",
    "truth_groups",
    "estimates_figure",
    "se_figure",
    "interval_figure",
    "power_figure",
    "by_n_figure",
    "separation_figure",
    "dataset_scatter",
    "dataset_groups",
]

#: The eight Okabe-Ito colours.
OKABE_ITO = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7")

#: Role -> (legend text, fill colour, marker). The order is the legend's order.
ROLE_STYLE = {
    "exposure": ("exposure", "#E69F00", "square"),
    "outcome": ("outcome", "#CC79A7", "diamond"),
    "confounder": ("confounder", "#D55E00", "circle"),
    "mediator": ("mediator", "#56B4E9", "circle"),
    "common_effect": ("common effect", "#F0E442", "circle"),
    "instrument": ("instrument", "#0072B2", "circle"),
    "outcome_cause": ("outcome cause", "#009E73", "circle"),
    "other": ("other", "#999999", "circle"),
}
_ROLE_PRIORITY = ("confounder", "mediator", "common_effect", "instrument", "outcome_cause")
_STRATEGY_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000", "#999999")
_EDGE = "#4d4d4d"
_FONT = "11px"


def _style(fig, title: str | None = None) -> None:
    fig.toolbar.logo = None
    if title is not None and fig.title is None:
        from bokeh.models import Title

        fig.title = Title(text=title)
    if fig.title is not None:
        fig.title.text_font_size = "13px"
        fig.title.text_font_style = "bold"
    for axis in (*fig.xaxis, *fig.yaxis):
        axis.axis_label_text_font_size = "12px"
        axis.axis_label_text_font_style = "normal"
        axis.major_label_text_font_size = _FONT
    fig.outline_line_color = None
    fig.background_fill_color = "#ffffff"


def _n_axis(fig, sizes) -> None:
    """Label a log-scaled sample-size axis at the sizes simulated (at most nine labels)."""
    ticks = sorted({int(n) for n in sizes})
    if len(ticks) > 9:
        step = math.ceil(len(ticks) / 9)
        ticks = ticks[::step]
    fig.xaxis.ticker = FixedTicker(ticks=ticks, minor_ticks=[])


def _legend_above(fig, items) -> None:
    fig.add_layout(
        Legend(
            items=items,
            label_text_font_size=_FONT,
            border_line_color=None,
            orientation="horizontal",
            padding=2,
            margin=2,
            spacing=8,
        ),
        "above",
    )


def strategy_colours(names: Sequence[str]) -> dict[str, str]:
    """A colour per strategy, in the order given (cycling through eight Okabe-Ito colours).

    Examples
    --------
    >>> strategy_colours(["unadjusted", "adjusted"])
    {'unadjusted': '#0072B2', 'adjusted': '#D55E00'}
    """
    return {name: _STRATEGY_COLOURS[i % len(_STRATEGY_COLOURS)] for i, name in enumerate(names)}


# ------------------------------------------------------------------------------------------------------
# The graph
# ------------------------------------------------------------------------------------------------------
def primary_role(scenario: Scenario, name: str, roles: dict | None) -> str:
    """The role that decides a variable's colour: exposure, outcome, then the first of confounder,
    mediator, common effect, instrument, outcome cause that applies, else "other".

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> primary_role(sc, "fertiliser", {}), primary_role(sc, "soil_quality", {"soil_quality": [("confounder", "")]})
    ('exposure', 'confounder')
    """
    q = scenario.question
    if name == q.exposure:
        return "exposure"
    if name == q.outcome:
        return "outcome"
    found = {role for role, _ in (roles or {}).get(name, [])}
    for role in _ROLE_PRIORITY:
        if role in found:
            return role
    return "other"


def graph_layout(scenario: Scenario) -> dict[str, tuple[float, float]]:
    """Positions for drawing: the scenario's own when every variable has one; otherwise layered left to
    right by topological generation, with the exposure and the outcome on the middle row.

    Within a layer the other variables take rows above and below the middle one, ordered by the mean row of
    their causes already placed (the barycentre heuristic of Sugiyama K., Tagawa S., Toda M. (1981).
    Methods for visual understanding of hierarchical system structures. IEEE Transactions on Systems, Man,
    and Cybernetics 11(2):109-125), which keeps arrows short and reduces crossings.

    Examples
    --------
    >>> from workbench import load_preset
    >>> graph_layout(load_preset("common_cause"))
    {'soil_quality': (0.0, 1.0), 'fertiliser': (1.0, 0.0), 'wheat_yield': (2.0, 0.0)}
    """
    if all(v.position is not None for v in scenario.variables):
        return {v.name: (float(v.position[0]), float(v.position[1])) for v in scenario.variables}
    G = nx.DiGraph()
    G.add_nodes_from(scenario.names)
    G.add_edges_from((a.source, a.target) for a in scenario.arrows)
    order = scenario.names.index
    q = scenario.question
    positions: dict[str, tuple[float, float]] = {}
    for x, generation in enumerate(nx.topological_generations(G)):
        members = sorted(generation, key=order)
        main = [m for m in members if m in (q.exposure, q.outcome)]
        rest = [m for m in members if m not in main]
        for m in main:
            positions[m] = (float(x), 0.0)
        # rows 1, -1, 2, -2, ...: the ones nearest the middle first; then hand them out top to bottom in
        # the order of each variable's barycentre (mean row of its placed causes; file order breaks ties)
        rows = sorted(
            (float((i // 2 + 1) * (1 if i % 2 == 0 else -1)) for i in range(len(rest))), reverse=True
        )

        def barycentre(m: str) -> float:
            placed = [positions[p][1] for p in G.predecessors(m) if p in positions]
            return sum(placed) / len(placed) if placed else 0.0

        ranked = sorted(rest, key=lambda m: (-barycentre(m), order(m))) if x > 0 else rest
        for m, y in zip(ranked, rows, strict=True):
            positions[m] = (float(x), y)
    return {name: positions[name] for name in scenario.names}


def _path_edges(paths: Iterable) -> set[tuple[str, str]]:
    edges = set()
    for p in paths:
        for a, b, arrow in zip(p.nodes, p.nodes[1:], p.arrows, strict=False):
            edges.add((a, b) if arrow == "->" else (b, a))
    return edges


def _effect_text(effect: float) -> str:
    """An arrow's label: at most three significant digits, no plus sign.

    Examples
    --------
    >>> _effect_text(0.25), _effect_text(-0.08), _effect_text(1.0), _effect_text(0.123456)
    ('0.25', '-0.08', '1', '0.123')
    """
    return f"{effect:.3g}"


def _box_overlap(a: tuple[float, float, float, float], b: tuple[float, float, float, float]) -> float:
    """Overlapping area of two boxes given as (x_min, y_min, x_max, y_max)."""
    w = min(a[2], b[2]) - max(a[0], b[0])
    h = min(a[3], b[3]) - max(a[1], b[1])
    return w * h if w > 0 and h > 0 else 0.0


def _points_inside(box, points) -> int:
    x_min, y_min, x_max, y_max = box
    return sum(1 for x, y in points if x_min <= x <= x_max and y_min <= y <= y_max)


def _place_labels(
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
    char_px, name_char_px, line_px = 6.3, 7.0, 15.0
    # sample points along every drawn arrow (between the nodes' edges)
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
    taken: list[tuple[float, float, float, float]] = []

    def outside(box) -> float:
        return (
            max(0.0, -box[0]) + max(0.0, box[2] - width) + max(0.0, -box[1]) + max(0.0, box[3] - height)
        ) * 40

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
        for rank, (cx, cy) in enumerate(candidates):
            box = (cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)
            score = (
                8 * _points_inside(box, edge_points)
                + sum(_box_overlap(box, d) for d in discs) / 4
                + sum(_box_overlap(box, t) for t in taken) / 2
                + outside(box)
                + 3 * rank
            )
            if score < best_score:
                best, best_score = (cx, cy), score
        names[name] = best
        cx, cy = best
        taken.append((cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2))

    labels: list[tuple[float, float]] = []
    for a in arrows:
        (ax, ay), (bx, by) = pixels[a.source], pixels[a.target]
        text = _effect_text(a.effect)
        w, h = char_px * len(text) + 6, line_px - 1
        best, best_score = None, math.inf
        for t in (0.5, 0.42, 0.58, 0.35, 0.65, 0.28, 0.72):
            cx, cy = ax + (bx - ax) * t, ay + (by - ay) * t
            box = (cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)
            score = (
                sum(_box_overlap(box, d) for d in discs)
                + sum(_box_overlap(box, o) for o in taken)
                + outside(box)
                + 20 * abs(t - 0.5)
            )
            if score < best_score:
                best, best_score = (cx, cy), score
        labels.append(best)
        cx, cy = best
        taken.append((cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2))
    return names, labels


def graph_figure(
    scenario: Scenario,
    roles: dict | None = None,
    verdict=None,
    *,
    adjust: Sequence[str] = (),
    width: int = 760,
    height: int = 430,
    title: str | None = None,
):
    """The causal graph: nodes coloured by role, arrows labelled with effects, optional path highlight.

    Names and effect labels are placed where they cover the fewest arrows and nodes (see
    :func:`_place_labels`); the legend sits below the drawing so that it never covers a node.

    Parameters
    ----------
    scenario : Scenario
    roles : dict, optional
        :func:`workbench.graph.adjustment.find_roles` output; without it every covariate is drawn as "other".
    verdict : Verdict, optional
        A strategy's verdict: the paths it leaves open are drawn thick and dashed, those it blocks faded.
    adjust : sequence of str
        The strategy's adjustment set (drawn with a thick black ring).
    width, height : int
        Size of the plotting area in pixels (fixed so that arrow heads stop at the nodes' edges).

    Returns
    -------
    bokeh.plotting.figure

    Examples
    --------
    >>> from workbench.graph.adjustment import find_roles, judge
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> fig = graph_figure(sc, find_roles(sc), judge(sc, []))
    >>> [item.label.value for item in fig.legend[0].items][-2:]
    ['path left open', 'path blocked']
    """
    pos = graph_layout(scenario)
    xs = [p[0] for p in pos.values()]
    ys = [p[1] for p in pos.values()]
    # Margins in pixels around the outermost nodes: room for the node and a name beside or below it.
    longest = max((len(n) for n in pos), default=8)
    left = right = max(60.0, 3.6 * longest + 24)
    top, bottom = 34.0, 40.0
    span_x, span_y = max(xs) - min(xs), max(ys) - min(ys)
    sx = (width - left - right) / span_x if span_x > 0 else 200.0
    sy = (height - top - bottom) / span_y if span_y > 0 else 120.0
    x0, x1 = min(xs) - left / sx, max(xs) + right / sx
    y0, y1 = min(ys) - bottom / sy, max(ys) + top / sy
    if span_x == 0:
        x0, x1 = min(xs) - width / (2 * sx), min(xs) + width / (2 * sx)
    if span_y == 0:
        y0, y1 = min(ys) - height / (2 * sy), min(ys) + height / (2 * sy)
    fig = figure(
        frame_width=width,
        frame_height=height,
        x_range=Range1d(x0, x1),
        y_range=Range1d(y0, y1),
        tools="save",
        toolbar_location=None,
        title=title,
    )
    _style(fig)
    fig.axis.visible = False
    fig.grid.visible = False
    sx, sy = width / (x1 - x0), height / (y1 - y0)  # pixels per unit, as drawn
    radius_px = 15.0
    pixels = {n: ((x - x0) * sx, (y - y0) * sy) for n, (x, y) in pos.items()}
    name_at, label_at = _place_labels(pixels, scenario.arrows, radius=radius_px, width=width, height=height)

    def data(point: tuple[float, float]) -> tuple[float, float]:
        return x0 + point[0] / sx, y0 + point[1] / sy

    open_edges: set[tuple[str, str]] = set()
    blocked_edges: set[tuple[str, str]] = set()
    if verdict is not None:
        open_edges = _path_edges(verdict.open_paths)
        blocked_edges = _path_edges(verdict.blocked_paths) - open_edges

    # arrows
    arrow_data: dict[str, list] = {
        k: [] for k in ("x0", "y0", "x1", "y1", "width", "alpha", "dash", "colour")
    }
    label_data: dict[str, list] = {k: [] for k in ("x", "y", "text", "alpha")}
    for a, at in zip(scenario.arrows, label_at, strict=True):
        (ax, ay), (bx, by) = pos[a.source], pos[a.target]
        dx, dy = (bx - ax) * sx, (by - ay) * sy
        length = math.hypot(dx, dy) or 1.0
        cut = (radius_px + 5.0) / length
        edge = (a.source, a.target)
        is_open = edge in open_edges
        faded = edge in blocked_edges or (verdict is not None and not is_open)
        arrow_data["x0"].append(ax + (bx - ax) * cut)
        arrow_data["y0"].append(ay + (by - ay) * cut)
        arrow_data["x1"].append(bx - (bx - ax) * cut)
        arrow_data["y1"].append(by - (by - ay) * cut)
        arrow_data["width"].append(4.0 if is_open else 1.8)
        arrow_data["alpha"].append(0.25 if faded else 1.0)
        arrow_data["dash"].append("dashed" if is_open else "solid")
        arrow_data["colour"].append("#000000" if is_open else _EDGE)
        lx, ly = data(at)
        label_data["x"].append(lx)
        label_data["y"].append(ly)
        label_data["text"].append(_effect_text(a.effect))
        label_data["alpha"].append(0.35 if faded else 1.0)
    source = ColumnDataSource(arrow_data)
    fig.add_layout(
        Arrow(
            end=VeeHead(
                size=11, line_color="colour", fill_color="colour", line_alpha="alpha", fill_alpha="alpha"
            ),
            x_start="x0",
            y_start="y0",
            x_end="x1",
            y_end="y1",
            source=source,
            line_width="width",
            line_alpha="alpha",
            line_dash="dash",
            line_color="colour",
            level="underlay",
        )
    )
    fig.text(
        "x",
        "y",
        "text",
        source=ColumnDataSource(label_data),
        text_font_size=_FONT,
        text_align="center",
        text_baseline="middle",
        text_alpha="alpha",
        background_fill_color="#ffffff",
        background_fill_alpha=0.9,
        padding=1,
        text_color="#333333",
    )

    # nodes, one renderer per legend entry
    adjusted = set(adjust)
    groups: dict[tuple[str, bool], dict[str, list]] = {}
    for v in scenario.variables:
        role = primary_role(scenario, v.name, roles)
        reasons = "; ".join(f"{r}: {why}" for r, why in (roles or {}).get(v.name, []))
        group = groups.setdefault(
            (role, v.observed),
            {k: [] for k in ("x", "y", "name", "label", "kind", "roles", "ring", "ring_colour")},
        )
        x, y = pos[v.name]
        group["x"].append(x)
        group["y"].append(y)
        group["name"].append(v.name)
        group["label"].append(v.display)
        group["kind"].append(f"{v.type}{'' if v.observed else ', latent'}")
        group["roles"].append(reasons or role)
        group["ring"].append(3.5 if v.name in adjusted else (2.0 if not v.observed else 1.2))
        group["ring_colour"].append(
            "#000000" if v.name in adjusted else ROLE_STYLE[role][1] if not v.observed else "#333333"
        )
    items = []
    node_renderers = []
    for role in ROLE_STYLE:
        for observed in (True, False):
            data_ = groups.get((role, observed))
            if not data_:
                continue
            text, colour, marker = ROLE_STYLE[role]
            renderer = fig.scatter(
                "x",
                "y",
                source=ColumnDataSource(data_),
                marker=marker,
                size=2 * radius_px + (4 if marker == "diamond" else 0),
                fill_color=colour,
                fill_alpha=1.0 if observed else 0.0,
                line_color="ring_colour",
                line_width="ring",
                line_dash="solid" if observed else "dashed",
            )
            node_renderers.append(renderer)
            # the legend shows a small copy drawn outside the view (the nodes themselves are too big for it)
            sample = fig.scatter(
                [x0 - 10],
                [y0 - 10],
                marker=marker,
                size=13 + (2 if marker == "diamond" else 0),
                fill_color=colour,
                fill_alpha=1.0 if observed else 0.0,
                line_color="#333333" if observed else colour,
                line_width=1.2 if observed else 1.8,
                line_dash="solid" if observed else "dashed",
            )
            items.append(LegendItem(label=text if observed else f"{text} (latent)", renderers=[sample]))
    name_points = [data(name_at[n]) for n in pos]
    names = ColumnDataSource(
        {
            "x": [p[0] for p in name_points],
            "y": [p[1] for p in name_points],
            "text": list(pos),
            "weight": ["bold" if n in adjusted else "normal" for n in pos],
        }
    )
    fig.text(
        "x",
        "y",
        "text",
        source=names,
        text_font_size="12px",
        text_font_style="weight",
        text_align="center",
        text_baseline="middle",
        text_color="#111111",
        background_fill_color="#ffffff",
        background_fill_alpha=0.8,
        padding=1,
    )
    if adjusted:
        ring = fig.scatter(
            [x0 - 10], [y0 - 10], marker="circle", size=14, fill_alpha=0, line_color="#000000", line_width=3
        )
        items.append(LegendItem(label="adjusted for (bold name)", renderers=[ring]))
    if verdict is not None:
        far_x, far_y = [x0 - 10, x0 - 9], [y0 - 10, y0 - 10]  # legend samples drawn outside the view
        open_line = fig.line(far_x, far_y, line_width=4, line_dash="dashed", line_color="#000000")
        faded_line = fig.line(far_x, far_y, line_width=1.8, line_color=_EDGE, line_alpha=0.25)
        items.append(LegendItem(label="path left open", renderers=[open_line]))
        items.append(LegendItem(label="path blocked", renderers=[faded_line]))
    legend = Legend(
        items=items,
        label_text_font_size=_FONT,
        glyph_height=22,
        glyph_width=22,
        spacing=12,
        padding=4,
        margin=4,
        border_line_color=None,
        orientation="horizontal",
        ncols=min(5, max(1, len(items))),
        label_standoff=4,
    )
    fig.add_layout(legend, "below")
    fig.add_tools(
        HoverTool(
            renderers=node_renderers,
            tooltips=[("variable", "@name"), ("label", "@label"), ("type", "@kind"), ("role", "@roles")],
        )
    )
    return fig


# ------------------------------------------------------------------------------------------------------
# Estimates
# ------------------------------------------------------------------------------------------------------
def _ridge(
    values: dict[str, np.ndarray],
    colours: dict[str, str],
    *,
    title: str,
    x_label: str,
    marks: dict[str, float] | None = None,
    mark_label: str = "",
    line: float | None = None,
    line_label: str = "",
    width: int = 540,
    labels: dict[str, str] | None = None,
):
    """Histograms of several samples stacked one row each, on a shared x axis."""
    names = list(values)
    finite = [v[np.isfinite(v)] for v in values.values()]
    pooled = np.concatenate(finite) if finite else np.zeros(1)
    if pooled.size == 0:
        pooled = np.zeros(1)
    lo, hi = np.quantile(pooled, [0.002, 0.998])
    if line is not None and np.isfinite(line):
        lo, hi = min(lo, line), max(hi, line)
    if hi <= lo:
        lo, hi = lo - 0.5, hi + 0.5
    edges = np.linspace(lo, hi, 41)
    pad = 0.04 * (hi - lo)
    fig = figure(
        width=width,
        height=80 + 60 * len(names),
        title=title,
        tools="save",
        toolbar_location=None,
        x_axis_label=x_label,
        y_range=Range1d(-0.15, len(names) + 0.1),
        x_range=Range1d(lo - pad, hi + pad),
    )
    _style(fig)
    for i, name in enumerate(reversed(names)):
        v = values[name]
        v = v[np.isfinite(v)]
        counts, _ = np.histogram(np.clip(v, lo, hi), bins=edges)
        top = counts / counts.max() * 0.85 if counts.max() > 0 else counts.astype(float)
        fig.quad(
            left=edges[:-1],
            right=edges[1:],
            bottom=i,
            top=i + top,
            fill_color=colours[name],
            fill_alpha=0.55,
            line_color=colours[name],
            line_alpha=0.9,
        )
        if marks and name in marks and marks[name] is not None and np.isfinite(marks[name]):
            fig.segment(
                x0=[marks[name]],
                x1=[marks[name]],
                y0=[i],
                y1=[i + 0.95],
                line_color="#000000",
                line_width=2.5,
            )
    fig.yaxis.ticker = FixedTicker(ticks=[i + 0.35 for i in range(len(names))])
    shown = labels or {}
    fig.yaxis.major_label_overrides = {i + 0.35: shown.get(n, n) for i, n in enumerate(reversed(names))}
    fig.ygrid.visible = False
    items = []
    far = [lo - 10 * (hi - lo)] * 2  # legend samples drawn outside the view
    if line is not None and np.isfinite(line):
        fig.add_layout(
            Span(location=line, dimension="height", line_color="#000000", line_dash="dashed", line_width=2)
        )
        items.append(
            LegendItem(
                label=line_label,
                renderers=[fig.line(far, [0, 0], line_color="#000000", line_dash="dashed", line_width=2)],
            )
        )
    if marks:
        items.append(
            LegendItem(
                label=mark_label, renderers=[fig.line(far, [0, 0], line_color="#000000", line_width=2.5)]
            )
        )
    if items:
        fig.add_layout(
            Legend(
                items=items,
                location="top_left",
                label_text_font_size=_FONT,
                orientation="horizontal",
                border_line_color=None,
                padding=2,
                margin=2,
            ),
            "above",
        )
    return fig


def _labels(table: pd.DataFrame) -> dict[str, str]:
    out = {}
    for _, row in table.iterrows():
        valid = row.get("valid")
        out[row["name"]] = f"{row['name']}{'' if valid is None or bool(valid) else ' (invalid)'}"
    return out


def truth_groups(result) -> list[tuple[str, float, list[str]]]:
    """Strategies grouped by the quantity they are scored against: ``(estimand, truth, names)``.

    Strategies on different scales (a risk difference and a log odds ratio) get separate figures.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> truth_groups(result)
    [('total effect (difference in means per unit)', 0.25, ['unadjusted', 'adjust_soil'])]
    """
    table = result.table
    groups: dict[tuple[str, float], list[str]] = {}
    for _, row in table.iterrows():
        truth = float(row["truth"]) if "truth" in row and pd.notna(row["truth"]) else float(result.truth)
        estimand = str(row["estimand"]) if "estimand" in row and pd.notna(row["estimand"]) else "effect"
        scale = "log odds ratio" if "log odds" in estimand else estimand
        key = next(
            (k for k in groups if k[0] == scale and math.isclose(k[1], truth, rel_tol=1e-9, abs_tol=1e-12)),
            (scale, truth),
        )
        groups.setdefault(key, []).append(str(row["name"]))
    return [(scale, truth, names) for (scale, truth), names in groups.items()]


def estimates_figure(result, *, width: int = 540) -> list:
    """Distribution of each strategy's estimates across replicates, with the truth as a dashed line.

    Returns one figure per group of :func:`truth_groups` (usually one).

    Parameters
    ----------
    result : SimulationResult
        Uses ``result.table`` (name, valid, mean, truth, estimand) and ``result.estimates``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> [f.title.text for f in estimates_figure(result)]
    ['Estimates across replicates']
    """
    table = result.table
    colours = strategy_colours(list(table["name"]))
    est = result.estimates
    means = dict(zip(table["name"], table["mean"], strict=True))
    groups = truth_groups(result)
    figs = []
    for scale, truth, names in groups:
        values = {n: est.loc[est["strategy"] == n, "estimate"].to_numpy(dtype=float) for n in names}
        title = "Estimates across replicates" + (f": {scale}" if len(groups) > 1 else "")
        figs.append(
            _ridge(
                values,
                colours,
                title=title,
                x_label="estimated effect",
                marks=means,
                mark_label="mean estimate",
                line=truth,
                line_label=f"truth {truth:.3g}",
                width=width,
                labels=_labels(table),
            )
        )
    return figs


def se_figure(result, *, width: int = 540) -> list:
    """Distribution of each strategy's model-based SEs, with its empirical SE (SD of the estimates) marked.

    Returns one figure per group of :func:`truth_groups`.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> len(se_figure(result))
    1
    """
    table = result.table
    colours = strategy_colours(list(table["name"]))
    est = result.estimates
    emp = dict(zip(table["name"], table["emp_se"], strict=True))
    groups = truth_groups(result)
    figs = []
    for scale, _truth, names in groups:
        values = {n: est.loc[est["strategy"] == n, "se"].to_numpy(dtype=float) for n in names}
        title = f"Model SEs: {scale}" if len(groups) > 1 else "Model standard errors across replicates"
        figs.append(
            _ridge(
                values,
                colours,
                title=title,
                x_label="model-based SE",
                marks=emp,
                mark_label="empirical SE",
                width=width,
                labels=_labels(table),
            )
        )
    return figs


def interval_figure(result, *, first: int = 100, columns: int = 4, width: int = 1060, grid: bool = True):
    """Ranked confidence intervals of the first ``first`` replicates per strategy, coloured by coverage.

    Each panel sorts the replicates by their estimate; an interval that misses the strategy's truth (dashed)
    is drawn in vermillion, one that covers it in grey. Returns a grid of panels, or with ``grid=False`` the
    list of panels (one per strategy).

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> [f.title.text.split(":")[0] for f in interval_figure(result, grid=False)]
    ['unadjusted (invalid)', 'adjust_soil']
    """
    table = result.table
    est = result.estimates
    est = est[est["replicate"] < est["replicate"].min() + first]
    finite = est[np.isfinite(est["ci_low"]) & np.isfinite(est["ci_high"])]
    cols = max(1, min(columns, len(table)))
    panel_width = max(220, width // cols - 10)
    labels = _labels(table)
    figs = []
    for _scale, truth, names in truth_groups(result):
        rows_all = finite[finite["strategy"].isin(names)]
        lo = float(min(rows_all["ci_low"].min(), truth)) if len(rows_all) else truth - 1
        hi = float(max(rows_all["ci_high"].max(), truth)) if len(rows_all) else truth + 1
        pad = 0.05 * (hi - lo or 1.0)
        x_range = Range1d(lo - pad, hi + pad)
        for name in names:
            rows = rows_all[rows_all["strategy"] == name].sort_values("estimate")
            covers = (rows["ci_low"] <= truth) & (truth <= rows["ci_high"])
            source = ColumnDataSource(
                {
                    "rank": np.arange(1, len(rows) + 1),
                    "low": rows["ci_low"].to_numpy(),
                    "high": rows["ci_high"].to_numpy(),
                    "estimate": rows["estimate"].to_numpy(),
                    "colour": np.where(covers, "#999999", "#D55E00"),
                }
            )
            title = f"{labels[name]}: {int(covers.sum())}/{len(rows)} cover" if len(rows) else labels[name]
            fig = figure(
                width=panel_width,
                height=280,
                x_range=x_range,
                tools="save",
                toolbar_location=None,
                title=title,
                x_axis_label="confidence interval",
                y_axis_label="replicate (ranked)",
            )
            _style(fig)
            fig.title.text_font_size = "11px"
            fig.segment(
                x0="low", x1="high", y0="rank", y1="rank", line_color="colour", line_width=1.6, source=source
            )
            fig.scatter("estimate", "rank", size=2.5, color="#000000", source=source)
            fig.add_layout(
                Span(
                    location=truth,
                    dimension="height",
                    line_color="#000000",
                    line_dash="dashed",
                    line_width=1.5,
                )
            )
            fig.ygrid.visible = False
            figs.append(fig)
    return gridplot(figs, ncols=cols, toolbar_location=None) if grid else figs


# ------------------------------------------------------------------------------------------------------
# Sample size
# ------------------------------------------------------------------------------------------------------
def power_figure(plan_result, *, target_power: float, width: int = 700):
    """Power against n per strategy, with +/- 2 MCSE bands, the analytic curve dashed, the target line and
    the smallest n reaching it marked.

    Parameters
    ----------
    plan_result : PlanResult
        Uses ``.table`` (n, strategy, power, power_mcse, analytic_power) and ``.smallest_n``.
    target_power : float

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("common_cause"), sample_sizes=[50, 100], replicates=200, seed=1)
    >>> power_figure(planned, target_power=0.8).title.text
    'Power to detect the effect'
    """
    table = plan_result.table
    names = list(dict.fromkeys(table["strategy"]))
    colours = strategy_colours(names)
    fig = figure(
        width=width,
        height=380,
        title="Power to detect the effect",
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label="power",
        y_range=Range1d(0, 1.04),
        tools="save,reset",
        toolbar_location=None,
    )
    _style(fig)
    items = []
    smallest = getattr(plan_result, "smallest_n", None)
    invalid = set()
    if smallest is not None and "valid" in smallest:
        invalid = {
            r["strategy"] for _, r in smallest.iterrows() if r["valid"] is not None and not bool(r["valid"])
        }
    for name in names:
        rows = table[table["strategy"] == name].sort_values("n")
        n = rows["n"].to_numpy(dtype=float)
        power = rows["power"].to_numpy(dtype=float)
        mcse = rows["power_mcse"].to_numpy(dtype=float) if "power_mcse" in rows else np.zeros_like(power)
        colour = colours[name]
        fig.varea(
            x=n,
            y1=np.clip(power - 2 * mcse, 0, 1),
            y2=np.clip(power + 2 * mcse, 0, 1),
            fill_color=colour,
            fill_alpha=0.18,
        )
        dash = "solid" if name not in invalid else "dotdash"
        line = fig.line(n, power, line_color=colour, line_width=2.2, line_dash=dash)
        dots = fig.scatter(n, power, color=colour, size=6)
        renderers = [line, dots]
        if "analytic_power" in rows and rows["analytic_power"].notna().any():
            renderers.append(
                fig.line(
                    n,
                    rows["analytic_power"].to_numpy(dtype=float),
                    line_color=colour,
                    line_width=1.5,
                    line_dash="dashed",
                )
            )
        label = name + (" (invalid: detects a biased quantity)" if name in invalid else "")
        items.append(LegendItem(label=label, renderers=renderers))
        if smallest is not None and len(smallest):
            found = smallest[smallest["strategy"] == name]
            if len(found) and pd.notna(found["n_for_power"].iloc[0]):
                fig.scatter(
                    [float(found["n_for_power"].iloc[0])],
                    [target_power],
                    marker="inverted_triangle",
                    size=13,
                    fill_color=colour,
                    line_color="#000000",
                )
    fig.add_layout(
        Span(
            location=target_power, dimension="width", line_color="#000000", line_dash="dotted", line_width=1.5
        )
    )
    hidden_x = [float(table["n"].min())] * 2
    hidden_y = [-5.0, -5.0]  # legend samples below the fixed y range
    items.append(
        LegendItem(
            label=f"target power {target_power:g}; ▼ smallest n",
            renderers=[fig.line(hidden_x, hidden_y, line_color="#000000", line_dash="dotted")],
        )
    )
    items.append(
        LegendItem(
            label="analytic approximation (dashed)",
            renderers=[fig.line(hidden_x, hidden_y, line_color="#555555", line_dash="dashed")],
        )
    )
    fig.add_layout(
        Legend(items=items, label_text_font_size=_FONT, border_line_color=None, spacing=2), "right"
    )
    _n_axis(fig, table["n"])
    return fig


def by_n_figure(
    plan_result, column: str, *, title: str, y_label: str, width: int = 520, zero_line: bool = False
):
    """One performance measure (``bias``, ``emp_se``, ...) against n, one line per strategy.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("common_cause"), sample_sizes=[50, 100], replicates=200, seed=1)
    >>> by_n_figure(planned, "emp_se", title="Empirical SE", y_label="SE").title.text
    'Empirical SE'
    """
    table = plan_result.table
    names = list(dict.fromkeys(table["strategy"]))
    colours = strategy_colours(names)
    fig = figure(
        width=width,
        height=300,
        title=title,
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label=y_label,
        tools="save,reset",
        toolbar_location=None,
    )
    _style(fig)
    items = []
    for name in names:
        rows = table[table["strategy"] == name].sort_values("n")
        n = rows["n"].to_numpy(dtype=float)
        y = rows[column].to_numpy(dtype=float)
        mcse_col = f"{column}_mcse"
        renderers = [
            fig.line(n, y, line_color=colours[name], line_width=2),
            fig.scatter(n, y, color=colours[name], size=5),
        ]
        if mcse_col in rows:
            m = rows[mcse_col].to_numpy(dtype=float)
            renderers.append(
                fig.varea(x=n, y1=y - 2 * m, y2=y + 2 * m, fill_color=colours[name], fill_alpha=0.15)
            )
        items.append(LegendItem(label=name, renderers=renderers))
    if zero_line:
        fig.add_layout(Span(location=0, dimension="width", line_color="#000000", line_dash="dotted"))
    _legend_above(fig, items)
    _n_axis(fig, table["n"])
    return fig


def separation_figure(
    also_table: pd.DataFrame, table: pd.DataFrame | None = None, *, width: int = 530, grid: bool = True
):
    """For ``question.also``: whether n units can tell two effects apart.

    Left: power against n for each further effect (solid) beside the exposure's own power under the same
    strategy (dashed). Right: the correlation between the two estimates across replicates (a strong
    correlation means the data cannot separate the two effects well). With ``grid=False`` the two figures
    are returned as a list (a page that lays them out itself draws them more reliably than a grid).

    Parameters
    ----------
    also_table : DataFrame
        ``PlanResult.also_table`` (n, strategy, variable, power, correlation, ...).
    table : DataFrame, optional
        ``PlanResult.table``, for the exposure's power.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("two_exposures"), sample_sizes=[100, 200], replicates=200, seed=1)
    >>> type(separation_figure(planned.also_table, planned.table)).__name__
    'GridPlot'
    """
    strategies = list(dict.fromkeys(also_table["strategy"]))
    colours = strategy_colours(list(dict.fromkeys(table["strategy"])) if table is not None else strategies)
    power = figure(
        width=width,
        height=320,
        title="Power: further effect (solid) and exposure (dashed)",
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label="power",
        y_range=Range1d(0, 1.04),
        tools="save",
        toolbar_location=None,
    )
    corr = figure(
        width=width,
        height=320,
        title="Correlation of the two estimates across replicates",
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label="correlation",
        y_range=Range1d(-1.04, 1.04),
        tools="save",
        toolbar_location=None,
    )
    for fig in (power, corr):
        _style(fig)
    power_items, corr_items = [], []
    for (strategy, variable), rows in also_table.groupby(["strategy", "variable"], sort=False):
        rows = rows.sort_values("n")
        n = rows["n"].to_numpy(float)
        colour = colours.get(strategy, "#999999")
        label = f"{variable} under {strategy}"
        rs = [
            power.line(n, rows["power"].to_numpy(float), line_color=colour, line_width=2),
            power.scatter(n, rows["power"].to_numpy(float), color=colour, size=5),
        ]
        if table is not None:
            own = table[table["strategy"] == strategy].sort_values("n")
            rs.append(
                power.line(
                    own["n"].to_numpy(float),
                    own["power"].to_numpy(float),
                    line_color=colour,
                    line_width=1.5,
                    line_dash="dashed",
                )
            )
        power_items.append(LegendItem(label=label, renderers=rs))
        corr_items.append(
            LegendItem(
                label=label,
                renderers=[
                    corr.line(n, rows["correlation"].to_numpy(float), line_color=colour, line_width=2),
                    corr.scatter(n, rows["correlation"].to_numpy(float), color=colour, size=5),
                ],
            )
        )
    corr.add_layout(Span(location=0, dimension="width", line_color="#000000", line_dash="dotted"))
    _legend_above(power, power_items)
    _legend_above(corr, corr_items)
    for fig in (power, corr):
        _n_axis(fig, also_table["n"])
    if not grid:
        return [power, corr]
    return gridplot([power, corr], ncols=2, toolbar_location=None)


# ------------------------------------------------------------------------------------------------------
# One dataset
# ------------------------------------------------------------------------------------------------------
def _is_binary(values: pd.Series) -> bool:
    return set(np.unique(values.dropna())) <= {0.0, 1.0}


def dataset_scatter(
    data: pd.DataFrame, exposure: str, outcome: str, covariate: str | None, *, width: int = 560, seed: int = 0
):
    """The outcome against the exposure in one simulated dataset, points coloured by ``covariate``.

    A binary exposure is jittered sideways so that the points do not sit on two lines.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.generate import draw
    >>> data = draw(load_preset("common_cause"), 100, seed=1)
    >>> dataset_scatter(data, "fertiliser", "wheat_yield", "soil_quality").title.text
    'wheat_yield against fertiliser, coloured by soil_quality'
    """
    x = data[exposure].to_numpy(dtype=float)
    if _is_binary(data[exposure]):
        x = x + np.random.default_rng(seed).uniform(-0.18, 0.18, size=x.size)
    y = data[outcome].to_numpy(dtype=float)
    if _is_binary(data[outcome]):
        y = y + np.random.default_rng(seed + 1).uniform(-0.08, 0.08, size=y.size)
    source = {"x": x, "y": y}
    title = f"{outcome} against {exposure}" + (f", coloured by {covariate}" if covariate else "")
    fig = figure(
        width=width,
        height=400,
        title=title,
        x_axis_label=exposure,
        y_axis_label=outcome,
        tools="save,reset,box_zoom",
        toolbar_location=None,
    )
    _style(fig)
    if covariate:
        c = data[covariate].to_numpy(dtype=float)
        source["c"] = c
        if _is_binary(data[covariate]):
            items = []
            for value, colour in ((0, "#0072B2"), (1, "#D55E00")):
                chosen = ColumnDataSource({k: np.asarray(v)[c == value] for k, v in source.items()})
                dots = fig.scatter("x", "y", source=chosen, color=colour, size=5, alpha=0.6)
                items.append(LegendItem(label=f"{covariate} = {value}", renderers=[dots]))
            _legend_above(fig, items)  # above the plot: a legend inside would cover points
        else:
            mapper = LinearColorMapper(palette=Cividis256, low=float(np.nanmin(c)), high=float(np.nanmax(c)))
            fig.scatter(
                "x",
                "y",
                source=ColumnDataSource(source),
                size=5,
                alpha=0.7,
                color={"field": "c", "transform": mapper},
            )
            fig.add_layout(
                ColorBar(
                    color_mapper=mapper,
                    title=covariate,
                    width=10,
                    title_text_font_size=_FONT,
                    major_label_text_font_size=_FONT,
                ),
                "right",
            )
    else:
        fig.scatter("x", "y", source=ColumnDataSource(source), size=5, alpha=0.6, color="#0072B2")
    return fig


def dataset_groups(data: pd.DataFrame, exposure: str, covariate: str, *, width: int = 460):
    """The covariate in each exposure group: box plots by exposure value (binary exposure) or by exposure
    quintile; for a binary covariate, the share of 1s per group.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.generate import draw
    >>> data = draw(load_preset("common_cause"), 100, seed=1)
    >>> list(dataset_groups(data, "fertiliser", "soil_quality").x_range.factors)
    ['Q1', 'Q2', 'Q3', 'Q4', 'Q5']
    """
    if _is_binary(data[exposure]):
        groups = np.where(data[exposure].to_numpy() > 0.5, f"{exposure} = 1", f"{exposure} = 0")
        order = [f"{exposure} = 0", f"{exposure} = 1"]
        x_label = exposure
    else:
        codes = pd.qcut(data[exposure], 5, labels=False, duplicates="drop").to_numpy()
        groups = np.array([f"Q{int(c) + 1}" for c in codes])
        order = sorted({str(g) for g in groups})
        x_label = f"{exposure} quintile (Q1 lowest)"
    values = data[covariate].to_numpy(dtype=float)
    binary = _is_binary(data[covariate])
    title = f"Share with {covariate} = 1 in each group" if binary else f"{covariate} in each group"
    fig = figure(
        width=width,
        height=400,
        x_range=order,
        title=title,
        x_axis_label=x_label,
        y_axis_label=(f"share {covariate} = 1" if binary else covariate),
        tools="save",
        toolbar_location=None,
    )
    _style(fig)
    if binary:
        shares = [float(values[groups == g].mean()) for g in order]
        fig.vbar(x=order, top=shares, width=0.6, fill_color="#56B4E9", line_color="#0072B2")
        fig.y_range.start = 0
        return fig
    stats = {k: [] for k in ("g", "q1", "q2", "q3", "lo", "hi")}
    for g in order:
        v = values[groups == g]
        q1, q2, q3 = np.quantile(v, [0.25, 0.5, 0.75])
        iqr = q3 - q1
        stats["g"].append(g)
        stats["q1"].append(q1)
        stats["q2"].append(q2)
        stats["q3"].append(q3)
        stats["lo"].append(max(v.min(), q1 - 1.5 * iqr))
        stats["hi"].append(min(v.max(), q3 + 1.5 * iqr))
    src = ColumnDataSource(stats)
    fig.segment("g", "lo", "g", "q1", source=src, line_color="#333333")
    fig.segment("g", "q3", "g", "hi", source=src, line_color="#333333")
    fig.vbar("g", 0.6, "q1", "q3", source=src, fill_color="#56B4E9", line_color="#0072B2", fill_alpha=0.8)
    fig.rect("g", "q2", 0.6, 0.0001, source=src, line_color="#000000", line_width=2)
    return fig
