"""The dashboard's edits of the richer-model keys (count variables, noise laws, spread, arrow forms, effect
modification, splines, Poisson strategies): each reaches the TOML text and the parsed scenario, a bad one shows
the parser's located one-line message and keeps the scenario, and undo restores.

The rules themselves are the parser's (workbench/scenario/parse*.py, docs/scenario-format.md); these tests
check the plumbing of the project's own dashboard: common practice, no source.
"""

from __future__ import annotations

import tomllib

import pytest

from workbench.app.edits import parse_coefficients
from workbench.app.inspector import Inspector
from workbench.app.state import ScenarioState
from workbench.app.strategies_editor import StrategiesEditor
from workbench.errors import ScenarioError
from workbench.scenario import edit
from workbench.scenario.write import scenario_to_dict


@pytest.fixture
def state() -> ScenarioState:
    # common_cause: soil_quality -> fertiliser, soil_quality -> wheat_yield, fertiliser -> wheat_yield
    return ScenarioState(preset="common_cause")


def _toml(state: ScenarioState) -> dict:
    return tomllib.loads(state.text)


def test_variable_becomes_count_with_rate_and_undo(state):
    """A new count has rate 1.0 and keeps its label; a new rate reaches the TOML; undo restores each step."""
    label = state.scenario.variable("soil_quality").label
    assert state.set_variable("soil_quality", "type", "count", section="inspector")
    table = _toml(state)["variables"]["soil_quality"]
    assert (table["type"], table["rate"], table.get("label")) == ("count", 1.0, label)
    assert "noise_sd" not in table and "baseline" not in table
    assert state.set_variable("soil_quality", "rate", 3.5, section="inspector")
    assert state.scenario.variable("soil_quality").rate == 3.5
    assert state.undo() and state.scenario.variable("soil_quality").rate == 1.0
    assert state.undo() and state.scenario.variable("soil_quality").type == "continuous"


def test_bad_rate_shows_the_parsers_message_and_keeps_the_scenario(state):
    """A rate outside [0.001, 1e5] is refused with the parser's located line, in the inspector's box."""
    state.set_variable("soil_quality", "type", "count")
    before = state.scenario
    assert not state.set_variable("soil_quality", "rate", 0, section="inspector")
    assert state.error.startswith("variables.soil_quality.rate: must lie in [0.001, 100000]")
    assert "\n" not in state.error
    assert state.error_section == "inspector" and state.scenario is before


def test_count_outcome_switches_ratio_scale_and_logistic_models():
    """A binary outcome on the log odds ratio scale with a logistic strategy, made a count: the scale becomes
    log_rate_ratio and the logistic strategy a Poisson one, with a note; undo brings both back."""
    state = ScenarioState(preset="common_cause")
    assert state.set_variable("wheat_yield", "type", "binary")
    assert state.set_question(scale="log_odds_ratio")
    assert state.set_strategy("adjust_soil", model="logit")
    assert state.set_variable("wheat_yield", "type", "count")
    assert state.scenario.question.scale == "log_rate_ratio"
    assert state.scenario.strategy("adjust_soil").model == "poisson"
    assert "log_rate_ratio" in state.note and "model = poisson" in state.note
    assert _toml(state)["question"]["scale"] == "log_rate_ratio"
    assert state.undo()
    assert state.scenario.question.scale == "log_odds_ratio"
    assert state.scenario.strategy("adjust_soil").model == "logit"


def test_count_outcome_direct_target_becomes_total():
    """set_variable_type: a count outcome has no direct target (the parser refuses it), so it becomes total."""
    data = scenario_to_dict(ScenarioState(preset="common_cause").scenario)
    data["question"]["target"] = "direct"
    edited = edit.set_variable_type(data, "wheat_yield", "count")
    assert edited.data["question"]["target"] == "total" and "total effect" in edited.note


def test_noise_law_and_df(state):
    """Heavy-tailed noise with its df reaches the file; a df of 2 or less is refused; back to normal drops df."""
    assert state.set_variable("wheat_yield", "noise", "heavy_tailed", section="inspector")
    assert state.set_variable("wheat_yield", "noise_df", 4.0, section="inspector")
    table = _toml(state)["variables"]["wheat_yield"]
    assert (table["noise"], table["noise_df"]) == ("heavy_tailed", 4.0)
    before = state.scenario
    assert not state.set_variable("wheat_yield", "noise_df", 1.5, section="inspector")
    assert state.error.startswith("variables.wheat_yield.noise_df: must be > 2")
    assert state.scenario is before
    assert state.set_variable("wheat_yield", "noise", "normal", section="inspector")
    table = _toml(state)["variables"]["wheat_yield"]
    assert "noise" not in table and "noise_df" not in table and "noise_df" in state.note


def test_spread_with_text(state):
    """spread_with typed as text becomes a table; bad text and a descendant covariate give located lines."""
    assert state.set_variable("wheat_yield", "spread_with", "fertiliser = 0.4, soil_quality = -0.2")
    assert state.scenario.variable("wheat_yield").spread_with == (("fertiliser", 0.4), ("soil_quality", -0.2))
    assert _toml(state)["variables"]["wheat_yield"]["spread_with"] == {
        "fertiliser": 0.4,
        "soil_quality": -0.2,
    }
    before = state.scenario
    assert not state.set_variable("wheat_yield", "spread_with", "fertiliser 0.4", section="inspector")
    assert state.error.startswith("variables.wheat_yield.spread_with: write each as 'name = 0.5'")
    assert not state.set_variable("fertiliser", "spread_with", "wheat_yield = 0.4", section="inspector")
    assert state.error.startswith("variables.fertiliser.spread_with.wheat_yield: ")
    assert state.scenario is before
    assert state.set_variable("wheat_yield", "spread_with", "")
    assert state.scenario.variable("wheat_yield").spread_with == ()


def test_rename_follows_spread_and_modifier(state):
    """scenario/edit.py's rename keeps the new keys consistent: spread_with and varies_with follow the name."""
    state.set_variable("wheat_yield", "spread_with", "fertiliser = 0.4")
    assert state.set_arrow_shape(1, "varies_with", "fertiliser = 0.2")
    assert state.set_variable("fertiliser", "name", "feed")
    assert state.scenario.variable("wheat_yield").spread_with == (("feed", 0.4),)
    assert state.scenario.arrows[1].varies_with == (("feed", 0.2),)


def test_arrow_form_step_at_and_square(state):
    """A step gets a threshold (the cause's baseline) and a movable at; square drops at; at on a linear arrow
    is refused with the parser's message."""
    assert state.set_arrow_shape(1, "form", "step", section="inspector")
    arrow = _toml(state)["arrows"][1]
    assert arrow["form"] == "step" and arrow["at"] == 0.0 and "step" in state.note
    assert state.set_arrow_shape(1, "at", 0.5, section="inspector")
    assert state.scenario.arrows[1].at == 0.5
    assert state.set_arrow_shape(1, "form", "square", section="inspector")
    assert (state.scenario.arrows[1].form, state.scenario.arrows[1].at) == ("square", None)
    assert "at" not in _toml(state)["arrows"][1]
    assert state.set_arrow_shape(1, "form", "linear")
    before = state.scenario
    assert not state.set_arrow_shape(1, "at", 0.5, section="inspector")
    assert state.error == 'arrows[2].at: \'at\' applies to form = "step" only, got form = "linear"'
    assert state.scenario is before
    assert state.undo() and state.scenario.arrows[1].form == "square"


def test_varies_with_text(state):
    """varies_with typed as text reaches the arrow; bad text is refused with a located line."""
    assert state.set_arrow_shape(2, "varies_with", "soil_quality = 0.3")
    assert _toml(state)["arrows"][2]["varies_with"] == {"soil_quality": 0.3}
    assert not state.set_arrow_shape(2, "varies_with", "soil_quality = ", section="inspector")
    assert state.error.startswith("arrows[3].varies_with: write each as 'name = 0.5'")
    assert state.scenario.arrows[2].varies_with == (("soil_quality", 0.3),)


def test_parse_coefficients_reads_never_evaluates():
    """The text is the inside of a TOML inline table; anything else is refused, never evaluated."""
    assert parse_coefficients({"a": 1}, where="x") == {"a": 1}
    with pytest.raises(ScenarioError, match=r"^x: write each as"):
        parse_coefficients("__import__('os')", where="x")


def test_flexible_and_poisson_strategies(state):
    """flexible reaches the strategy (and is refused with interactions, by the parser); a count outcome offers
    the Poisson model, and leaving OLS drops flexible."""
    assert state.set_strategy("adjust_soil", flexible=["soil_quality"])
    assert _toml(state)["strategies"][1]["flexible"] == ["soil_quality"]
    assert not state.set_strategy("adjust_soil", interactions=["soil_quality"])
    assert state.error == "strategies[2].flexible: flexible cannot be combined with interactions yet"
    assert state.set_strategy("adjust_soil", flexible=[])
    assert state.scenario.strategy("adjust_soil").flexible == ()
    state.set_strategy("adjust_soil", flexible=["soil_quality"])
    assert state.set_variable("wheat_yield", "type", "count")
    assert state.scenario.strategy("adjust_soil").flexible == ()  # a count outcome: no spline
    assert state.set_strategy("adjust_soil", model="poisson", se="classical")
    assert (state.scenario.strategy("adjust_soil").model, state.scenario.strategy("adjust_soil").se) == (
        "poisson",
        "classical",
    )


def test_strategies_editor_offers_what_applies(state):
    """The editor shows the spline choice for OLS on a continuous outcome with continuous covariates, and a
    model choice of ols / poisson for a count outcome."""
    editor = StrategiesEditor(state=state)

    def classes(row):
        return [c for w in row.select() for c in (getattr(w, "css_classes", None) or [])]

    assert "wb-strategy-flexible" in classes(editor.rows[1]) and "wb-strategy-flexible" not in classes(
        editor.rows[0]
    )
    state.set_variable("wheat_yield", "type", "count")
    models = [
        w for w in editor.rows[1].select() if "wb-strategy-model" in (getattr(w, "css_classes", None) or [])
    ]
    assert models and list(models[0].options) == ["ols", "poisson"]
    assert "wb-strategy-flexible" not in classes(editor.rows[1])


def test_inspector_follows_canvas_and_edits(state):
    """The inspector picks what the canvas selects; its inputs send their edit; a refused one shows the
    scenario in effect again."""
    from workbench.app.canvas import CanvasEditor

    canvas = CanvasEditor(state=state)
    inspector = Inspector(state=state, canvas=canvas)
    canvas.selected_arrow = ("soil_quality", "wheat_yield")
    assert inspector.pick.value == "arrow:1" and inspector.form.visible and not inspector.var_type.visible
    inspector.form.value = "square"
    assert state.scenario.arrows[1].form == "square" and not inspector.at.visible
    canvas.selected_node = "fertiliser"
    assert inspector.pick.value == "variable:fertiliser" and inspector.noise.visible
    inspector.var_type.value = "count"
    assert state.scenario.variable("fertiliser").is_count and inspector.rate.value == 1.0
    inspector.rate.value = 0.0
    assert state.error_section == "inspector" and state.error.startswith("variables.fertiliser.rate:")
    assert inspector.rate.value == 1.0  # back to the rate in effect
