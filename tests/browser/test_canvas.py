"""End-to-end: editing the graph on the Graph tab's canvas in a real headless Chromium.

One user session on the default preset (common_cause), in order: a click on empty canvas adds a variable
(the name prompt), dragging it moves it (its ``position`` in the TOML view), drawing an arrow from it into the
outcome adds the arrow (TOML view) and changes its role (the legend), Undo takes the arrow back, and an arrow
that would close a cycle is refused with the scenario parser's own message.

Common practice, no source: the reference for every expectation is the scenario file format
(docs/scenario-format.md: ``position``, ``[[arrows]]``) and the parser's cycle message, read back from the page.
"""

from __future__ import annotations

import time
import tomllib

import pytest

pytestmark = pytest.mark.browser

#: Screen coordinates of a node (``{"name": ...}``) or of a data point (``{"x": ..., "y": ...}``) on the
#: graph figure in view, from the figure's own scales.
TO_SCREEN = """
(where) => {
  const found = [];
  const seen = new Set();
  function walk(v) {
    if (v == null || seen.has(v)) return;
    seen.add(v);
    const m = v.model;
    if (m && m.type == "Figure" && m.toolbar.tools.some(t => t.type == "PointDrawTool") && v.el.isConnected)
      found.push(v);
    for (const c of (v.child_views ?? [])) walk(c);
  }
  for (const r of Bokeh.index.roots) walk(r);
  if (found.length == 0) return null;
  const view = found[found.length - 1];
  const tool = view.model.toolbar.tools.find(t => t.type == "PointDrawTool");
  const data = tool.renderers[0].data_source.data;
  let x = where.x, y = where.y;
  if (where.name !== undefined) {
    const i = data.name.indexOf(where.name);
    if (i < 0) return null;
    x = data.x[i]; y = data.y[i];
  }
  const rect = view.canvas_view.el.getBoundingClientRect();
  return [rect.left + view.frame.x_scale.compute(x), rect.top + view.frame.y_scale.compute(y)];
}
"""


def _screen(page, **where) -> tuple[float, float]:
    deadline = time.monotonic() + 20
    while True:
        point = page.page.evaluate(TO_SCREEN, where)
        if point is not None:
            return point
        assert time.monotonic() < deadline, f"no point {where} on the graph"
        time.sleep(0.1)


def _toml(page) -> dict:
    """The scenario in the TOML view (opened once; it follows every edit)."""
    page.open_editor("Scenario text")
    area = page.page.locator(".wb-toml textarea")
    return tomllib.loads(area.input_value())


def _wait_toml(page, check, timeout: float = 30.0) -> dict:
    deadline = time.monotonic() + timeout
    while True:
        data = _toml(page)
        if check(data):
            return data
        assert time.monotonic() < deadline, f"the TOML view never showed the change: {data}"
        time.sleep(0.2)


def _arrows(data: dict) -> set[tuple[str, str]]:
    return {(a["from"], a["to"]) for a in data.get("arrows", [])}


def _click_node(page, name: str) -> None:
    """Click a node as a user would: from outside the drawing (so no hover tooltip is in the way)."""
    page.page.mouse.move(5, 5)
    page.page.mouse.click(*_screen(page, name=name))


def _click_button(page, css: str) -> None:
    page.page.locator(f"{css} button").first.click()


def test_a_click_on_empty_canvas_adds_a_variable_there(page):
    page.wait_for_text(".wb-truth", "True effect under this graph: 0.25")
    # common_cause is laid out as soil_quality (0, 1), fertiliser (1, 0), wheat_yield (2, 0): (2, 1) is empty
    x, y = _screen(page, x=2.0, y=1.0)
    page.page.mouse.click(x, y)
    field = page.page.locator(".wb-canvas-name input")
    field.wait_for(state="visible", timeout=20_000)
    assert field.input_value() == "v1"  # a free name is offered
    field.fill("rainfall")
    _click_button(page, ".wb-canvas-name-ok")
    data = _wait_toml(page, lambda d: "rainfall" in d["variables"])
    px, py = data["variables"]["rainfall"]["position"]
    assert abs(px - 2.0) < 0.05 and abs(py - 1.0) < 0.05  # where the click was (a pixel is ~0.005 units)
    # the layout drawn before is kept: the first canvas edit stores every variable's drawn position
    assert data["variables"]["soil_quality"]["position"] == [0.0, 1.0]
    assert data["variables"]["wheat_yield"]["position"] == [2.0, 0.0]
    page.screenshot("canvas_01_added")


def test_dragging_a_node_stores_its_new_position(page):
    before = _toml(page)["variables"]["rainfall"]["position"]
    x, y = _screen(page, name="rainfall")
    page.page.mouse.move(x, y)
    page.page.mouse.down()
    page.page.mouse.move(x - 30, y - 10, steps=5)
    page.page.mouse.move(x - 60, y - 20, steps=5)
    page.page.mouse.up()
    data = _wait_toml(page, lambda d: d["variables"]["rainfall"]["position"] != before)
    after = data["variables"]["rainfall"]["position"]
    assert after[0] < before[0] - 0.1 and after[1] > before[1]  # moved left and up (y grows upwards)
    assert data["variables"]["fertiliser"]["position"] == [1.0, 0.0]  # the others stay


def test_connecting_two_nodes_adds_the_arrow_and_updates_the_roles(page):
    assert "outcome cause" not in page.text(".wb-graph")  # rainfall is unrelated so far
    page.page.locator(".wb-canvas-mode button", has_text="Draw arrow").click()
    page.wait_for_text(".wb-canvas-status", "Click the cause")
    _click_node(page, "rainfall")
    page.wait_for_text(".wb-canvas-status", "Arrow from rainfall")
    _click_node(page, "wheat_yield")
    effect = page.page.locator(".wb-canvas-effect input")
    effect.wait_for(state="visible", timeout=20_000)
    effect.fill("0.3")
    effect.press("Enter")
    _click_button(page, ".wb-canvas-effect-ok")
    data = _wait_toml(page, lambda d: ("rainfall", "wheat_yield") in _arrows(d))
    added = [a for a in data["arrows"] if (a["from"], a["to"]) == ("rainfall", "wheat_yield")]
    assert added[0]["effect"] == pytest.approx(0.3)
    page.wait_for_text(".wb-graph", "outcome cause")  # the role legend of the redrawn graph
    page.screenshot("canvas_02_arrow")


def test_undo_takes_the_arrow_back(page):
    _click_button(page, ".wb-undo")
    data = _wait_toml(page, lambda d: ("rainfall", "wheat_yield") not in _arrows(d))
    assert "rainfall" in data["variables"]  # only the last change is undone
    deadline = time.monotonic() + 20
    while "outcome cause" in page.text(".wb-graph"):
        assert time.monotonic() < deadline, "the roles did not follow the undo"
        time.sleep(0.1)


def test_a_cycle_drawn_on_the_canvas_is_refused_with_the_parsers_message(page):
    _click_node(page, "wheat_yield")
    page.wait_for_text(".wb-canvas-status", "Arrow from wheat_yield")
    _click_node(page, "soil_quality")
    page.page.locator(".wb-canvas-effect input").wait_for(state="visible", timeout=20_000)
    _click_button(page, ".wb-canvas-effect-ok")
    # the message of workbench.scenario.parse for a cycle, unchanged
    shown = page.wait_for_text(".wb-error-canvas", "(a causal graph must have no cycle)")
    assert "cycle: soil_quality -> fertiliser -> wheat_yield -> soil_quality" in shown
    assert ("wheat_yield", "soil_quality") not in _arrows(_toml(page))
    page.screenshot("canvas_03_cycle")
