"""Editing the graph on the Graph tab's canvas: add a variable by a click, drag nodes, draw arrows, delete, undo.

:class:`CanvasEditor` adds to the Bokeh figure of :func:`workbench.report.graph_drawing.graph_figure` (whose
look it leaves alone) an invisible handle over each node that a ``PointDrawTool`` drags, a ring for the
selected node or arrow, and a ``Tap`` callback. Every edit goes through
:class:`~workbench.app.state.ScenarioState` with the section ``"canvas"``: it is validated by the scenario
parser like any other edit (a refused one shows its one-line message in the canvas's error box), it is kept
in the undo history, and the first canvas edit of a scenario without positions writes the positions it is
drawn at (:func:`~workbench.app.edits.pin_layout`), so only new nodes are ever placed.

- A click on empty canvas asks for the name of a new variable (a free name such as ``v1`` is offered), placed
  where the click was.
- Dragging a node stores its new ``position``.
- In the mode "Draw arrow", a click on the cause and then on the effect asks for the effect size; a cycle is
  refused with the parser's message.
- A click on a node or an arrow selects it; "Delete" removes it. "Undo" and "Redo" step through the last
  :attr:`~workbench.app.state.ScenarioState.HISTORY` changes of the scenario, whatever made them.

The hit test (:func:`hit_test`) runs in Python on the click's data coordinates, so it can be tested without a
browser (:meth:`CanvasEditor.click` is what a click on the canvas calls).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import panel as pn
import param
from bokeh.events import DoubleTap, Tap
from bokeh.models import ColumnDataSource, PointDrawTool, Scatter

from workbench.app.state import ScenarioState
from workbench.app.widgets import ErrorBox
from workbench.report.graph_drawing import graph_layout
from workbench.scenario.model import Scenario

__all__ = ["CanvasEditor", "Hit", "free_name", "hit_test"]

NODE_HIT_PX = 18.0
"""A click within this many pixels of a node's centre hits the node (nodes are drawn 15 pixels in radius)."""
ARROW_HIT_PX = 7.0
"""A click within this many pixels of an arrow's line (and not on a node) hits the arrow."""
MOVE = "Move and add"
ARROW = "Draw arrow"
_MARK = "#0072B2"  # the selection ring: the palette's blue (Okabe and Ito 2008)


def free_name(names, stem: str = "v") -> str:
    """The first of ``v1``, ``v2``, ... not in ``names``.

    Examples
    --------
    >>> free_name(["v1", "x", "v3"])
    'v2'
    """
    taken = set(names)
    i = 1
    while f"{stem}{i}" in taken:
        i += 1
    return f"{stem}{i}"


@dataclass(frozen=True)
class Hit:
    """What a click hit: ``kind`` is ``"node"`` (``name`` set), ``"arrow"`` (``index`` set) or ``"empty"``."""

    kind: str
    name: str = ""
    index: int = -1


def _segment_distance(p, a, b) -> float:
    """Distance of point ``p`` from the segment ``a``-``b`` (all in pixels)."""
    (px, py), (ax, ay), (bx, by) = p, a, b
    dx, dy = bx - ax, by - ay
    length2 = dx * dx + dy * dy
    t = 0.0 if length2 == 0 else max(0.0, min(1.0, ((px - ax) * dx + (py - ay) * dy) / length2))
    return math.hypot(px - ax - t * dx, py - ay - t * dy)


def hit_test(scenario: Scenario, positions: dict, x: float, y: float, scale: tuple[float, float]) -> Hit:
    """The node, else the arrow, nearest a click at data coordinates ``(x, y)``, within
    :data:`NODE_HIT_PX` or :data:`ARROW_HIT_PX` pixels; ``scale`` is pixels per data unit across and up.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> pos = graph_layout(sc)  # soil_quality (0, 1), fertiliser (1, 0), wheat_yield (2, 0)
    >>> hit_test(sc, pos, 0.02, 1.01, (200.0, 120.0))
    Hit(kind='node', name='soil_quality', index=-1)
    >>> hit_test(sc, pos, 1.5, 0.0, (200.0, 120.0))
    Hit(kind='arrow', name='', index=2)
    >>> hit_test(sc, pos, 1.5, 1.0, (200.0, 120.0)).kind
    'empty'
    """
    sx, sy = scale
    click = (x * sx, y * sy)
    pixels = {name: (px * sx, py * sy) for name, (px, py) in positions.items()}
    nodes = sorted((math.dist(click, p), name) for name, p in pixels.items())
    if nodes and nodes[0][0] <= NODE_HIT_PX:
        return Hit("node", name=nodes[0][1])
    arrows = sorted(
        (_segment_distance(click, pixels[a.source], pixels[a.target]), i)
        for i, a in enumerate(scenario.arrows)
        if a.source in pixels and a.target in pixels
    )
    if arrows and arrows[0][0] <= ARROW_HIT_PX:
        return Hit("arrow", index=arrows[0][1])
    return Hit("empty")


class CanvasEditor(pn.viewable.Viewer):
    """The canvas's editing: its tool row, its prompts and the callbacks it attaches to each new figure.

    Examples
    --------
    >>> state = ScenarioState(preset="common_cause")
    >>> canvas = CanvasEditor(state=state)
    >>> canvas.click(1.5, 1.0, scale=(200.0, 120.0))  # empty canvas: the name prompt opens
    >>> canvas.name_input.value, canvas.name_row.visible
    ('v1', True)
    >>> canvas.confirm_name()
    >>> state.scenario.variable("v1").position, state.scenario.variable("soil_quality").position
    ((1.5, 1.0), (0.0, 1.0))
    """

    state = param.ClassSelector(class_=ScenarioState)
    selected_node = param.String(default="", doc="The node selected on the canvas, '' when none.")
    selected_arrow = param.Parameter(default=(), doc="The (cause, effect) of the selected arrow, or ().")
    cause = param.String(default="", doc="In arrow mode, the cause picked so far.")

    def __init__(self, **params):
        super().__init__(**params)
        self.mode = pn.widgets.RadioButtonGroup(
            options=[MOVE, ARROW], value=MOVE, css_classes=["wb-canvas-mode"]
        )
        self.mode.param.watch(lambda _e: self._clear(), "value")
        self.delete = pn.widgets.Button(label="Delete", width=80, css_classes=["wb-canvas-delete"])
        self.undo = pn.widgets.Button(label="Undo", width=70, css_classes=["wb-undo"])
        self.redo = pn.widgets.Button(label="Redo", width=70, css_classes=["wb-redo"])
        self.delete.on_click(lambda _e: self.delete_selected())
        self.undo.on_click(lambda _e: self.state.undo())
        self.redo.on_click(lambda _e: self.state.redo())
        self.status = pn.pane.HTML(
            "", css_classes=["wb-canvas-status"], margin=(4, 5), sizing_mode="stretch_width"
        )
        self.name_input = pn.widgets.TextInput(label="Name of the new variable", width=200)
        self.effect_input = pn.widgets.FloatInput(label="Effect size", value=0.5, step=0.1, width=120)
        self.name_row = self._prompt(self.name_input, self.confirm_name, "wb-canvas-name")
        self.effect_row = self._prompt(self.effect_input, self.confirm_effect, "wb-canvas-effect")
        self.errors = ErrorBox(state=self.state, sections=["canvas"], width=None)
        self._at: tuple[float, float] = (0.0, 0.0)
        self._effect = ""
        self._handles: ColumnDataSource | None = None
        self._marks = ColumnDataSource({"x": [], "y": []})
        self._arrow_marks = ColumnDataSource({"x0": [], "y0": [], "x1": [], "y1": []})
        self._positions: dict[str, tuple[float, float]] = {}
        self._scale = (1.0, 1.0)
        self._syncing = False
        self.state.param.watch(self._history_changed, ["can_undo", "can_redo"])
        self._history_changed()
        self._show_status()

    def _prompt(self, field, confirm, css: str) -> pn.Row:
        ok = pn.widgets.Button(label="OK", color="primary", width=60, css_classes=[f"{css}-ok"])
        cancel = pn.widgets.Button(label="Cancel", width=70, css_classes=[f"{css}-cancel"])
        ok.on_click(lambda _e: confirm())
        cancel.on_click(lambda _e: self._clear())
        field.css_classes = [css]
        return pn.Row(field, ok, cancel, visible=False, margin=0)

    def _history_changed(self, *_events) -> None:
        self.undo.disabled = not self.state.can_undo
        self.redo.disabled = not self.state.can_redo

    # --- the figure --------------------------------------------------------------------------------
    def attach(self, fig, scenario: Scenario) -> None:
        """Add the handles, the drag tool, the selection marks and the click callback to ``fig``, a figure
        of ``scenario`` drawn by :func:`~workbench.report.graph_drawing.graph_figure`."""
        self._positions = graph_layout(scenario)
        self._scale = (
            fig.frame_width / (fig.x_range.end - fig.x_range.start),
            fig.frame_height / (fig.y_range.end - fig.y_range.start),
        )
        names = list(self._positions)
        self._handles = ColumnDataSource(
            {
                "x": [self._positions[n][0] for n in names],
                "y": [self._positions[n][1] for n in names],
                "name": names,
            }
        )
        handles = fig.scatter("x", "y", source=self._handles, size=34, fill_alpha=0, line_alpha=0)
        handles.selection_glyph = Scatter(
            size=38, fill_alpha=0, line_color=_MARK, line_width=2, line_dash="dashed"
        )
        handles.nonselection_glyph = Scatter(size=34, fill_alpha=0, line_alpha=0)
        tool = PointDrawTool(renderers=[handles], add=False, drag=True, description="Drag a node")
        fig.add_tools(tool)
        fig.toolbar.active_tap = tool
        fig.toolbar.active_drag = tool
        self._marks = ColumnDataSource({"x": [], "y": []})
        self._arrow_marks = ColumnDataSource({"x0": [], "y0": [], "x1": [], "y1": []})
        fig.scatter("x", "y", source=self._marks, size=42, fill_alpha=0, line_color=_MARK, line_width=3)
        fig.segment(
            "x0", "y0", "x1", "y1", source=self._arrow_marks, line_color=_MARK, line_width=9, line_alpha=0.35
        )
        self._handles.on_change("data", self._dragged)
        for kind in (Tap, DoubleTap):  # two clicks within 300 ms make a double tap, and no second tap
            fig.on_event(kind, lambda event: self.click(event.x, event.y))
        self._show_marks()

    def _dragged(self, _attr, _old, new) -> None:
        """A node dragged (or deleted with the drag tool's Backspace): store the change."""
        if self._syncing:
            return
        moved = [
            (name, x, y)
            for name, x, y in zip(new["name"], new["x"], new["y"], strict=False)
            if name in self._positions and math.dist((x, y), self._positions[name]) > 1e-9
        ]
        gone = [n for n in self._positions if n not in set(new["name"])]
        ok = False
        if gone:
            ok = self.state.remove_variable(gone[0], section="canvas")
        elif moved:
            name, x, y = moved[0]
            ok = self.state.move_variable(name, x, y)
        if not ok and self._handles is not None:  # refused: put the handles back where the nodes are
            self._syncing = True
            try:
                names = list(self._positions)
                with pn.io.unlocked():
                    self._handles.data = {
                        "x": [self._positions[n][0] for n in names],
                        "y": [self._positions[n][1] for n in names],
                        "name": names,
                    }
            finally:
                self._syncing = False

    def _show_marks(self) -> None:
        """Ring the selected node (or the cause picked in arrow mode) and shade the selected arrow."""
        # The marks are plain Bokeh sources: changed from a Panel widget's callback (OK, Cancel, Delete)
        # they must be changed with the document unlocked, as Panel changes its own models, or the
        # server refuses the change (and Bokeh's curdoc patch leaks into every later export).
        with pn.io.unlocked():
            self._set_marks()
        self._show_status()

    def _set_marks(self) -> None:
        ringed = [n for n in (self.selected_node, self.cause) if n in self._positions]
        self._marks.data = {
            "x": [self._positions[n][0] for n in ringed],
            "y": [self._positions[n][1] for n in ringed],
        }
        arrow = self.selected_arrow
        if arrow and all(n in self._positions for n in arrow):
            (x0, y0), (x1, y1) = self._positions[arrow[0]], self._positions[arrow[1]]
            self._arrow_marks.data = {"x0": [x0], "y0": [y0], "x1": [x1], "y1": [y1]}
        else:
            self._arrow_marks.data = {"x0": [], "y0": [], "x1": [], "y1": []}
        if self._handles is not None and self._handles.selected.indices:
            self._handles.selected.indices = []  # the drag tool's own selection would drag two nodes

    def _show_status(self) -> None:
        if self.mode.value == ARROW and self._effect:
            text = f"Arrow <b>{self.cause} -> {self._effect}</b>: type its effect size and press OK."
        elif self.mode.value == ARROW:
            text = f"Arrow from <b>{self.cause}</b>: click the effect." if self.cause else "Click the cause."
        elif self.selected_node:
            text = f"Selected <b>{self.selected_node}</b>: drag it, or press Delete."
        elif self.selected_arrow:
            text = f"Selected the arrow <b>{' -> '.join(self.selected_arrow)}</b>: press Delete to remove it."
        else:
            text = "Click empty canvas to add a variable, drag a node to move it, click to select."
        self.status.object = f"<span style='font-size:12px;color:#444'>{text}</span>"

    # --- clicks and prompts ------------------------------------------------------------------------
    def click(self, x: float, y: float, scale: tuple[float, float] | None = None) -> None:
        """A click on the canvas at data coordinates ``(x, y)`` (``scale``: pixels per unit, default the
        attached figure's)."""
        scenario = self.state.scenario
        self._positions = graph_layout(scenario)  # as drawn: the figure in view is of this scenario
        hit = hit_test(scenario, self._positions, x, y, scale or self._scale)
        if self.mode.value == ARROW:
            self._arrow_click(hit)
        elif hit.kind == "node":
            self._clear(selected_node=hit.name)
        elif hit.kind == "arrow":
            arrow = scenario.arrows[hit.index]
            self._clear(selected_arrow=(arrow.source, arrow.target))
        else:
            self._clear()
            self._at = (x, y)
            self.name_input.value = free_name(scenario.names)
            self.name_row.visible = True
        self._show_marks()

    def _arrow_click(self, hit: Hit) -> None:
        if hit.kind != "node" or hit.name == self.cause:
            self._clear()
        elif not self.cause:
            self.cause = hit.name
        else:
            self._effect = hit.name
            self.effect_row.visible = True

    def _clear(self, **selection) -> None:
        """Close the prompts and set the selection (none unless given)."""
        self.name_row.visible = self.effect_row.visible = False
        self.param.update(
            selected_node=selection.get("selected_node", ""),
            selected_arrow=selection.get("selected_arrow", ()),
            cause="",
        )
        self._effect = ""
        self._show_marks()

    def confirm_name(self) -> None:
        """Add the variable named in the prompt where the canvas was clicked (the prompt stays on an error)."""
        if self.state.add_variable(self.name_input.value, position=self._at, section="canvas"):
            self._clear(selected_node=self.name_input.value.strip())

    def confirm_effect(self) -> None:
        """Add the arrow from the picked cause to the picked effect (the prompt stays on an error)."""
        effect = self.effect_input.value
        if self.state.add_arrow(self.cause, self._effect, effect, section="canvas"):
            self._clear()

    def delete_selected(self) -> None:
        """Remove the selected node (with its arrows) or the selected arrow."""
        if self.selected_node:
            if self.state.remove_variable(self.selected_node, section="canvas"):
                self._clear()
        elif self.selected_arrow:
            pairs = [(a.source, a.target) for a in self.state.scenario.arrows]
            if tuple(self.selected_arrow) in pairs:
                self.state.remove_arrow(pairs.index(tuple(self.selected_arrow)), section="canvas")
            self._clear()

    def __panel__(self):
        tools = pn.Row(self.mode, self.delete, self.undo, self.redo, margin=(4, 5))
        rows = (tools, self.status, self.name_row, self.effect_row, self.errors)
        return pn.Column(*rows, margin=0, sizing_mode="stretch_width")
