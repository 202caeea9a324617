"""Canvas editing without a browser: the undo/redo history of the scenario state, drawing positions, and the
canvas's clicks, prompts and drag callback (:mod:`workbench.app.canvas`).

Common practice, no source: an undo history gives back exactly the scenarios in effect before (equality of
the frozen :class:`~workbench.scenario.model.Scenario`), at most 20 deep, and a new change drops the redo
list. The messages of refused edits are the scenario parser's own (compared with
:func:`workbench.graph.defaults.scenario_from_dict` on the same tables), and positions follow
docs/scenario-format.md (``position = [x, y]``).
"""

from __future__ import annotations

import pytest

from workbench import load_preset
from workbench.app.canvas import ARROW, CanvasEditor, free_name, hit_test
from workbench.app.state import ScenarioState
from workbench.errors import ScenarioError
from workbench.graph.defaults import scenario_from_dict
from workbench.report.graph_drawing import graph_figure, graph_layout
from workbench.scenario.write import dumps_scenario, scenario_to_dict

SCALE = (200.0, 120.0)  # pixels per data unit, about the Graph tab's drawing of common_cause


@pytest.fixture
def state():
    return ScenarioState(preset="common_cause")


# --- undo and redo ------------------------------------------------------------------------------------
def test_undo_and_redo_step_through_every_kind_of_edit(state):
    seen = [state.scenario]
    assert state.set_arrow(0, effect=0.9)  # a table edit
    seen.append(state.scenario)
    text = state.text.replace('title = "', 'title = "New: ', 1)
    assert state.apply_text(text)  # the TOML editor
    seen.append(state.scenario)
    assert state.move_variable("fertiliser", 1.0, -0.5)  # the canvas
    seen.append(state.scenario)
    for expected in reversed(seen[:-1]):
        assert state.undo()
        assert state.scenario == expected
        assert state.text == dumps_scenario(expected)
    assert not state.undo() and not state.can_undo  # nothing left to undo
    for expected in seen[1:]:
        assert state.redo()
        assert state.scenario == expected
    assert not state.redo() and not state.can_redo


def test_a_new_edit_drops_the_redo_list(state):
    state.set_arrow(0, effect=0.9)
    state.undo()
    assert state.can_redo
    state.set_arrow(1, effect=0.1)
    assert not state.can_redo and not state.redo()
    assert state.scenario.arrows[0].effect == 0.6 and state.scenario.arrows[1].effect == 0.1


def test_the_history_keeps_the_last_20_changes(state):
    for i in range(25):
        assert state.set_arrow(0, effect=round(0.01 * (i + 1), 2))
    steps = 0
    while state.undo():
        steps += 1
    assert steps == ScenarioState.HISTORY == 20
    assert state.scenario.arrows[0].effect == 0.05  # the state after change 5: changes 6 to 25 undone


def test_a_refused_edit_is_not_in_the_history(state):
    assert not state.add_variable("1bad")
    assert not state.can_undo


# --- positions ----------------------------------------------------------------------------------------
def test_a_canvas_edit_keeps_the_drawn_layout(state):
    drawn = graph_layout(state.scenario)
    assert all(v.position is None for v in state.scenario.variables)
    assert state.move_variable("soil_quality", 0.5, 1.5)
    assert state.scenario.variable("soil_quality").position == (0.5, 1.5)
    for name in ("fertiliser", "wheat_yield"):
        assert state.scenario.variable(name).position == drawn[name]
    # a variable added in a table then joins without moving the others
    assert state.add_variable("rainfall")
    assert state.scenario.variable("rainfall").position is not None
    assert graph_layout(state.scenario)["fertiliser"] == drawn["fertiliser"]


def test_a_table_edit_writes_no_positions_into_a_file_without_them(state):
    assert state.add_variable("rainfall")
    assert all(v.position is None for v in state.scenario.variables)
    assert "position" not in state.text


def test_a_bad_position_gets_the_parsers_message(state):
    assert not state.move_variable("soil_quality", 5e6, 0.0)
    data = scenario_to_dict(state.scenario)
    data["variables"]["soil_quality"]["position"] = [5e6, 0.0]
    with pytest.raises(ScenarioError) as parsed:
        scenario_from_dict(data)
    assert state.error == str(parsed.value)
    assert state.error.startswith("variables.soil_quality.position") and state.error_section == "canvas"
    assert not state.move_variable("soil_quality", "left", 0.0)
    assert state.error.startswith("variables.soil_quality.position: must be two numbers")


# --- the canvas ---------------------------------------------------------------------------------------
def test_free_names_and_the_hit_test():
    assert free_name([]) == "v1" and free_name(["v1", "v2"]) == "v3"
    sc = load_preset("common_cause")
    pos = graph_layout(sc)
    assert hit_test(sc, pos, 1.0 + 10 / SCALE[0], 0.0, SCALE).name == "fertiliser"  # 10 px off the centre
    assert hit_test(sc, pos, 1.0 + 25 / SCALE[0], 0.0, SCALE).kind == "arrow"  # on fertiliser -> wheat_yield
    assert hit_test(sc, pos, 1.0, 0.0 + 30 / SCALE[1], SCALE).kind == "empty"


def test_a_click_on_empty_canvas_adds_a_named_variable_there(state):
    canvas = CanvasEditor(state=state)
    canvas.click(2.0, 1.0, scale=SCALE)
    assert canvas.name_row.visible and canvas.name_input.value == "v1"
    canvas.name_input.value = "1bad"
    canvas.confirm_name()
    assert canvas.name_row.visible and state.error_section == "canvas"  # the prompt stays for a correction
    assert "1bad" in state.error
    canvas.name_input.value = "rainfall"
    canvas.confirm_name()
    assert not canvas.name_row.visible and canvas.selected_node == "rainfall"
    assert state.scenario.variable("rainfall").position == (2.0, 1.0)


def test_an_arrow_drawn_on_the_canvas_and_a_refused_cycle(state):
    canvas = CanvasEditor(state=state)
    canvas.mode.value = ARROW
    canvas.state.add_variable("rainfall", position=(2.0, 1.0), section="canvas")
    canvas.click(2.0, 1.0, scale=SCALE)
    canvas.click(2.0, 0.0, scale=SCALE)
    assert canvas.effect_row.visible
    canvas.effect_input.value = 0.3
    canvas.confirm_effect()
    added = [a for a in state.scenario.arrows if (a.source, a.target) == ("rainfall", "wheat_yield")]
    assert added and added[0].effect == 0.3
    assert {r for r, _ in state.report.roles["rainfall"]} == {"outcome_cause"}
    canvas.click(2.0, 0.0, scale=SCALE)
    canvas.click(0.0, 1.0, scale=SCALE)
    canvas.confirm_effect()
    data = scenario_to_dict(state.scenario)
    data["arrows"].append({"from": "wheat_yield", "to": "soil_quality", "effect": 0.3})
    with pytest.raises(ScenarioError) as parsed:
        scenario_from_dict(data)
    assert state.error == str(parsed.value) and "cycle" in state.error
    assert canvas.effect_row.visible  # still asking


def test_delete_the_selected_node_or_arrow_and_undo(state):
    canvas = CanvasEditor(state=state)
    canvas.click(1.5, 0.0, scale=SCALE)  # the arrow fertiliser -> wheat_yield
    assert canvas.selected_arrow == ("fertiliser", "wheat_yield")
    canvas.delete_selected()
    assert ("fertiliser", "wheat_yield") not in [(a.source, a.target) for a in state.scenario.arrows]
    canvas.click(0.0, 1.0, scale=SCALE)
    canvas.delete_selected()
    assert "soil_quality" not in state.scenario.names
    canvas.click(1.0, 0.0, scale=SCALE)
    canvas.delete_selected()  # the exposure stays: the edit rules refuse it
    assert "fertiliser" in state.scenario.names and state.error_section == "canvas"
    canvas.undo.clicks += 1
    canvas.undo.clicks += 1
    preset = load_preset("common_cause")  # back to the preset's graph (now with its drawn positions)
    assert state.scenario.names == preset.names and state.scenario.arrows == preset.arrows


def test_a_drag_on_the_figure_moves_the_node(state):
    canvas = CanvasEditor(state=state)
    fig = graph_figure(state.scenario, state.report.roles, width=600, height=370)
    canvas.attach(fig, state.scenario)
    handles = canvas._handles
    data = dict(handles.data)
    i = data["name"].index("fertiliser")
    data["x"] = [x + (0.25 if k == i else 0.0) for k, x in enumerate(data["x"])]
    canvas._dragged("data", handles.data, data)
    assert state.scenario.variable("fertiliser").position == (1.25, 0.0)
    assert state.scenario.variable("soil_quality").position == (0.0, 1.0)
