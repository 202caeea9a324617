"""Drawing the causal graph as a Bokeh figure: positions, arrows, nodes coloured by role, labels, legend.

:func:`graph_figure` draws in named steps: the positions (:func:`graph_layout`), the frame that maps them to
pixels, the places of the names and effect labels (:mod:`workbench.report.graph_labels`: a greedy search
for the least covered spot), the arrows
(line width by the standardized size of the effect; thicker, black and dashed along a path a strategy leaves
open, faded along a blocked one, so the two differ in greyscale print too), the nodes (one glyph per
role, latent variables hollow and dashed, the adjustment set ringed; a variable's further roles as small
badges beside it), the names and the legend below the drawing, where it never covers a node. Every role has
its own colour and marker (:data:`workbench.report.style.ROLE_STYLE`) and a legend line.

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
from dataclasses import dataclass

import networkx as nx
from bokeh.models import Arrow, ColumnDataSource, HoverTool, Legend, LegendItem, Range1d, VeeHead
from bokeh.plotting import figure

from workbench.report.arrow_style import arrow_text as _arrow_text
from workbench.report.arrow_style import arrow_widths as _arrow_widths
from workbench.report.graph_labels import place_labels
from workbench.report.style import EDGE_COLOUR, FONT, ROLE_STYLE, fit_to_width, style_figure
from workbench.scenario.model import Scenario

__all__ = ["ROLE_STYLE", "primary_role", "graph_layout", "graph_figure"]

_ROLE_PRIORITY = (
    "confounder",
    "back_door_link",
    "mediator",
    "common_effect",
    "collider_on_path",
    "pre_exposure_collider",
    "collider_descendant",
    "mediator_descendant",
    "outcome_descendant",
    "exposure_descendant",
    "instrument",
    "outcome_cause",
    "proxy_of_confounder",
    "unrelated",
)
_RADIUS_PX = 15.0
"""A node's radius in pixels (the frame has a fixed pixel size, so arrow heads stop at the nodes' edges)."""


def primary_role(scenario: Scenario, name: str, roles: dict | None) -> str:
    """The role that decides a variable's colour and marker: exposure, outcome, then the first role of the
    variable in the order of :data:`_ROLE_PRIORITY` (back-door roles, effect roles, colliders, descendants,
    cause-only roles), else "other"; the others are shown as a badge under its name.

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


# ------------------------------------------------------------------------------------------------------
# Positions
# ------------------------------------------------------------------------------------------------------
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


@dataclass(frozen=True)
class _Frame:
    """The drawing's data ranges and its fixed pixel size; converts between data units and pixels."""

    x0: float
    x1: float
    y0: float
    y1: float
    width: int
    height: int

    @property
    def sx(self) -> float:
        """Pixels per data unit across."""
        return self.width / (self.x1 - self.x0)

    @property
    def sy(self) -> float:
        """Pixels per data unit up."""
        return self.height / (self.y1 - self.y0)

    def to_pixels(self, point: tuple[float, float]) -> tuple[float, float]:
        return (point[0] - self.x0) * self.sx, (point[1] - self.y0) * self.sy

    def to_data(self, pixel: tuple[float, float]) -> tuple[float, float]:
        return self.x0 + pixel[0] / self.sx, self.y0 + pixel[1] / self.sy

    @property
    def outside(self) -> tuple[float, float]:
        """A point outside the view, where the legend's sample glyphs are drawn."""
        return self.x0 - 10, self.y0 - 10


def _frame(pos: dict[str, tuple[float, float]], width: int, height: int) -> _Frame:
    """Data ranges with margins in pixels around the outermost nodes: room for a node and a name beside or
    below it (a single row or column is centred)."""
    xs = [p[0] for p in pos.values()]
    ys = [p[1] for p in pos.values()]
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
    return _Frame(x0, x1, y0, y1, width, height)


# ------------------------------------------------------------------------------------------------------
# Drawing
# ------------------------------------------------------------------------------------------------------
def _path_edges(paths: Iterable) -> set[tuple[str, str]]:
    """The arrows (source, target) that make up ``paths``."""
    edges = set()
    for p in paths:
        for a, b, arrow in zip(p.nodes, p.nodes[1:], p.arrows, strict=False):
            edges.add((a, b) if arrow == "->" else (b, a))
    return edges


def _blank_figure(frame: _Frame, title: str | None):
    """A figure of the frame's fixed pixel size with no axes and no grid (none made: fewer models)."""
    fig = figure(
        x_axis_type=None,
        y_axis_type=None,
        frame_width=frame.width,
        frame_height=frame.height,
        x_range=Range1d(frame.x0, frame.x1),
        y_range=Range1d(frame.y0, frame.y1),
        tools="save",
        toolbar_location=None,
        title=title,
    )
    style_figure(fig)
    return fig


def _arrow_data(scenario: Scenario, pos, frame: _Frame, verdict, label_at) -> tuple[dict, dict]:
    """The arrows' geometry and style (cut short of the nodes' edges; open paths thick and dashed, the
    rest faded when a verdict is shown) and their effect labels' places and text."""
    open_edges: set[tuple[str, str]] = set()
    blocked_edges: set[tuple[str, str]] = set()
    if verdict is not None:
        open_edges = _path_edges(verdict.open_paths)
        blocked_edges = _path_edges(verdict.blocked_paths) - open_edges
    sx, sy = frame.sx, frame.sy
    width_of = _arrow_widths(scenario)
    arrows: dict[str, list] = {k: [] for k in ("x0", "y0", "x1", "y1", "width", "alpha", "dash", "colour")}
    labels: dict[str, list] = {k: [] for k in ("x", "y", "text", "alpha")}
    for a, at in zip(scenario.arrows, label_at, strict=True):
        (ax, ay), (bx, by) = pos[a.source], pos[a.target]
        dx, dy = (bx - ax) * sx, (by - ay) * sy
        length = math.hypot(dx, dy) or 1.0
        cut = (_RADIUS_PX + 5.0) / length
        edge = (a.source, a.target)
        is_open = edge in open_edges
        faded = edge in blocked_edges or (verdict is not None and not is_open)
        arrows["x0"].append(ax + (bx - ax) * cut)
        arrows["y0"].append(ay + (by - ay) * cut)
        arrows["x1"].append(bx - (bx - ax) * cut)
        arrows["y1"].append(by - (by - ay) * cut)
        arrows["width"].append(width_of[edge] + (1.5 if is_open else 0.0))
        arrows["alpha"].append(0.3 if faded else 1.0)
        arrows["dash"].append("dashed" if is_open else "solid")
        arrows["colour"].append("#000000" if is_open else EDGE_COLOUR)
        lx, ly = frame.to_data(at)
        labels["x"].append(lx)
        labels["y"].append(ly)
        labels["text"].append(_arrow_text(a))
        labels["alpha"].append(0.7 if faded else 1.0)
    return arrows, labels


def _draw_arrows(fig, arrows: dict, labels: dict) -> None:
    """The arrows (under the nodes) and their effect labels on a white background."""
    fig.add_layout(
        Arrow(
            end=VeeHead(
                size=11, line_color="colour", fill_color="colour", line_alpha="alpha", fill_alpha="alpha"
            ),
            x_start="x0",
            y_start="y0",
            x_end="x1",
            y_end="y1",
            source=ColumnDataSource(arrows),
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
        source=ColumnDataSource(labels),
        text_font_size=FONT,
        text_align="center",
        text_baseline="middle",
        text_alpha="alpha",
        background_fill_color="#ffffff",
        background_fill_alpha=0.9,
        padding=1,
        text_color="#333333",
    )


def _node_groups(scenario: Scenario, roles: dict | None, pos, adjusted: set[str]) -> dict:
    """The nodes grouped by (role, observed), one group per legend entry, with their hover text and ring
    (thick black for the adjustment set)."""
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
    return groups


class _Samples:
    """The legend's sample glyphs, all in one scatter renderer drawn outside the view (one row per legend
    entry, picked by the entry's ``index``): fewer Bokeh models than one renderer per entry, so the page
    builds faster (docs/performance.md)."""

    _KEYS = ("marker", "size", "colour", "fill_alpha", "line_colour", "line_width", "dash")

    def __init__(self, frame: _Frame):
        self.at = frame.outside
        self.rows: dict[str, list] = {key: [] for key in self._KEYS}
        self.labels: list[str] = []

    def add(self, label: str, **style) -> None:
        """One legend entry: its label and its sample's marker, size, colours, line width and dash."""
        for key in self._KEYS:
            self.rows[key].append(style[key])
        self.labels.append(label)

    def items(self, fig) -> list[LegendItem]:
        """Draw the samples and return their legend entries (none without samples)."""
        if not self.labels:
            return []
        count = len(self.labels)
        data = {"x": [self.at[0]] * count, "y": [self.at[1]] * count, **self.rows}
        renderer = _styled_scatter(fig, data, line_color="line_colour", line_width="line_width")
        return [LegendItem(label=text, renderers=[renderer], index=i) for i, text in enumerate(self.labels)]


def _draw_nodes(fig, groups: dict, samples: _Samples):
    """All nodes in one scatter renderer, each with its role's marker and colour (latent variables hollow
    and dashed), and a legend sample per group in the legend's order (the nodes themselves are too big for
    the legend).

    Returns the node renderer (for the hover tool).
    """
    nodes: dict[str, list] = {}
    for role in ROLE_STYLE:
        for observed in (True, False):
            data = groups.get((role, observed))
            if not data:
                continue
            text, colour, marker = ROLE_STYLE[role]
            count = len(data["x"])
            style = {
                "marker": marker,
                "size": 2 * _RADIUS_PX + (4 if marker == "diamond" else 0),
                "colour": colour,
                "fill_alpha": 1.0 if observed else 0.0,
                "dash": "solid" if observed else "dashed",
            }
            for key, values in (*data.items(), *((k, [v] * count) for k, v in style.items())):
                nodes.setdefault(key, []).extend(values)
            samples.add(
                text if observed else f"{text} (latent)",
                marker=marker,
                size=13 + (2 if marker == "diamond" else 0),
                colour=colour,
                fill_alpha=1.0 if observed else 0.0,
                line_colour="#333333" if observed else colour,
                line_width=1.2 if observed else 1.8,
                dash="solid" if observed else "dashed",
            )
    return _styled_scatter(fig, nodes, line_color="ring_colour", line_width="ring")


def _styled_scatter(fig, data: dict, *, line_color: str, line_width: str):
    """A scatter renderer of ``data`` whose marker, size, fill colour and alpha, and dash are its columns
    (and the line's colour and width the columns named)."""
    return fig.scatter(
        "x",
        "y",
        source=ColumnDataSource(data),
        marker="marker",
        size="size",
        fill_color="colour",
        fill_alpha="fill_alpha",
        line_color=line_color,
        line_width=line_width,
        line_dash="dash",
    )


def _draw_badges(
    fig, scenario: Scenario, roles: dict | None, pos, frame: _Frame, samples: _Samples, shown
) -> None:
    """A small marker at the upper right of a node for each of its roles after the first (its colour and
    marker; all in one renderer), and a legend sample for each such role not in ``shown`` (the roles the
    nodes already show)."""
    q = scenario.question
    badges: dict[str, list] = {key: [] for key in ("x", "y", "marker", "colour")}
    found_roles: dict[str, None] = {}
    for name, found in (roles or {}).items():
        if name in (q.exposure, q.outcome) or name not in pos:
            continue
        first = primary_role(scenario, name, roles)
        extra = [r for r, _ in found if r != first and r in ROLE_STYLE]
        px, py = frame.to_pixels(pos[name])
        for i, role in enumerate(extra[:2]):
            x, y = frame.to_data((px + _RADIUS_PX + 2 + 13 * i, py + _RADIUS_PX))
            _, colour, marker = ROLE_STYLE[role]
            for key, value in zip(badges, (x, y, marker, colour), strict=True):
                badges[key].append(value)
            found_roles[role] = None
    if not found_roles:
        return
    fig.scatter(
        "x",
        "y",
        source=ColumnDataSource(badges),
        marker="marker",
        size=12,
        fill_color="colour",
        line_color="#333333",
        line_width=1.0,
    )
    for role in found_roles:
        if role in shown:
            continue
        text, colour, marker = ROLE_STYLE[role]
        samples.add(
            f"{text} (badge)",
            marker=marker,
            size=13,
            colour=colour,
            fill_alpha=1.0,
            line_colour="#333333",
            line_width=1.2,
            dash="solid",
        )


def _draw_names(fig, name_at: dict[str, tuple[float, float]], frame: _Frame, adjusted: set[str]) -> None:
    """The variables' names at their chosen places, bold for the adjustment set."""
    points = [frame.to_data(at) for at in name_at.values()]
    names = ColumnDataSource(
        {
            "x": [p[0] for p in points],
            "y": [p[1] for p in points],
            "text": list(name_at),
            "weight": ["bold" if n in adjusted else "normal" for n in name_at],
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


def _marking_items(fig, frame: _Frame, adjusted: set[str], verdict, samples: _Samples) -> list[LegendItem]:
    """The legend sample of the adjustment set's ring, and the legend entries of the open and blocked paths
    (lines drawn outside the view)."""
    if adjusted:
        samples.add(
            "adjusted for (bold name)",
            marker="circle",
            size=14,
            colour="#ffffff",
            fill_alpha=0.0,
            line_colour="#000000",
            line_width=3.0,
            dash="solid",
        )
    items = samples.items(fig)
    if verdict is not None:
        far_y = frame.outside[1]
        xs, ys = [frame.x0 - 10, frame.x0 - 9], [far_y, far_y]
        open_line = fig.line(xs, ys, line_width=4, line_dash="dashed", line_color="#000000")
        faded_line = fig.line(xs, ys, line_width=1.8, line_color=EDGE_COLOUR, line_alpha=0.25)
        items.append(LegendItem(label="path left open", renderers=[open_line]))
        items.append(LegendItem(label="path blocked", renderers=[faded_line]))
    return items


def _legend_columns(items: list[LegendItem], width: int) -> int:
    """As many legend entries a row (at most five) as fit ``width`` pixels at the longest label (about
    6.5 pixels a character at the figure's font, plus the glyph, standoff and spacing)."""
    longest = max((len(str(item.label.value)) for item in items), default=1)
    fits = int((width - 8) // (22 + 4 + 12 + 6.5 * longest))
    return max(1, min(5, len(items), fits))


def _add_legend_and_hover(fig, items: list[LegendItem], node_renderers: list) -> None:
    """The legend below the drawing (as many entries a row as fit, up to five) and the nodes' hover text."""
    legend = Legend(
        items=items,
        label_text_font_size=FONT,
        glyph_height=22,
        glyph_width=22,
        spacing=12,
        padding=4,
        margin=4,
        border_line_color=None,
        orientation="horizontal",
        ncols=_legend_columns(items, fig.width),
        label_standoff=4,
    )
    fig.add_layout(legend, "below")
    fig.add_tools(
        HoverTool(
            renderers=node_renderers,
            tooltips=[("variable", "@name"), ("label", "@label"), ("type", "@kind"), ("role", "@roles")],
        )
    )


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

    Names and effect labels are placed where they cover the fewest arrows and nodes; the legend sits below
    the drawing so that it never covers a node.

    Parameters
    ----------
    scenario : Scenario
    roles : dict, optional
        :func:`workbench.graph.roles.find_roles` output; without it every covariate is drawn as "other".
    verdict : Verdict, optional
        A strategy's verdict: the paths it leaves open are drawn thick and dashed, those it blocks faded.
    adjust : sequence of str
        The strategy's adjustment set (drawn with a thick black ring).
    width, height : int
        Size of the plotting area in pixels (arrow heads stop at the nodes' edges at this size); in a
        narrower container the figure shrinks in width, down to 520 pixels.

    Returns
    -------
    bokeh.plotting.figure

    Examples
    --------
    >>> from workbench.graph import find_roles, judge
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> fig = graph_figure(sc, find_roles(sc), judge(sc, []))
    >>> [item.label.value for item in fig.legend[0].items][-2:]
    ['path left open', 'path blocked']
    """
    pos = graph_layout(scenario)
    frame = _frame(pos, width, height)
    fig = _blank_figure(frame, title)
    pixels = {n: frame.to_pixels(p) for n, p in pos.items()}
    name_at, label_at = place_labels(pixels, scenario.arrows, radius=_RADIUS_PX, width=width, height=height)
    _draw_arrows(fig, *_arrow_data(scenario, pos, frame, verdict, label_at))
    adjusted = set(adjust)
    groups = _node_groups(scenario, roles, pos, adjusted)
    samples = _Samples(frame)
    nodes = _draw_nodes(fig, groups, samples)
    _draw_badges(fig, scenario, roles, pos, frame, samples, {role for role, _ in groups})
    _draw_names(fig, name_at, frame, adjusted)
    items = _marking_items(fig, frame, adjusted, verdict, samples)
    _add_legend_and_hover(fig, items, [nodes])
    fit_to_width(fig, fig.width, smallest=min(fig.width, 520))  # narrower windows: shrink, never scroll
    return fig
