"""The scenario editing operations of :mod:`workbench.scenario.edit`.

Common practice, no source: these are plumbing checks. An edit must follow a variable's name into every
place the file uses it (arrows, question, ``also``, adjustment sets, restrictions, matching), leave the
result parseable by the library's own loader, and never change its argument.
"""

from __future__ import annotations

import copy

import pytest

from workbench import ScenarioError, load_preset, scenario_from_dict, scenario_to_dict
from workbench.scenario import edit


@pytest.fixture
def common_cause():
    return scenario_to_dict(load_preset("common_cause"))


@pytest.fixture
def matched():
    """A scenario whose strategies use restriction, matching and ``also`` on the same variable (depot)."""
    data = scenario_to_dict(load_preset("binary_exposure"))
    data["variables"]["depot"] = {"type": "binary", "proportion": 0.5, "observed": True}
    data["arrows"].append({"from": "depot", "to": "picks_per_hour", "effect": 3.0})
    data["question"]["also"] = ["depot"]
    data["strategies"] += [
        {"name": "one_depot", "adjust": ["night_shift"], "model": "ols", "restrict": {"depot": 0}},
        {"name": "with_depot", "adjust": ["night_shift", "depot"], "model": "ols"},
        {"name": "matched", "adjust": ["night_shift"], "model": "ols", "match": ["depot"]},
    ]
    scenario_from_dict(data)  # the starting point is valid
    return data


def test_edits_never_change_their_argument(matched):
    before = copy.deepcopy(matched)
    edit.rename_variable(matched, "depot", "site")
    edit.remove_variable(matched, "depot")
    edit.set_observed(matched, "depot", False)
    edit.set_variable_type(matched, "depot", "continuous")
    edit.set_question(matched, exposure="night_shift")
    edit.prune_variables(matched, {"depot"})
    edit.add_adjustment_sets(matched, [("both", ["night_shift", "depot"]), ("depot", ["depot"])])
    assert matched == before


def test_a_rename_follows_every_reference(matched):
    data = edit.rename_variable(matched, "depot", "site").data
    sc = scenario_from_dict(data)
    assert "site" in sc.names and "depot" not in sc.names
    assert ("site", "picks_per_hour") in [(a.source, a.target) for a in sc.arrows]
    assert sc.question.also == ("site",)
    assert sc.strategy("with_depot").adjust == ("night_shift", "site")
    assert sc.strategy("one_depot").restrict == (("site", 0),)
    assert sc.strategy("matched").match == ("site",)
    exposure = scenario_from_dict(edit.rename_variable(matched, "scanner", "wearable").data)
    assert exposure.question.exposure == "wearable"


def test_a_rename_keeps_the_variable_order(common_cause):
    data = edit.rename_variable(common_cause, "fertiliser", "dose").data
    assert list(data["variables"]) == ["soil_quality", "dose", "wheat_yield"]


def test_a_rename_to_the_same_name_changes_nothing(common_cause):
    edited = edit.rename_variable(common_cause, "soil_quality", " soil_quality ")
    assert edited == (common_cause, "")


def test_a_rename_is_refused_for_unknown_and_taken_names(common_cause):
    with pytest.raises(ScenarioError, match="no variable 'soil'"):
        edit.rename_variable(common_cause, "soil", "dirt")
    with pytest.raises(ScenarioError, match="^variables.wheat_yield: there is already"):
        edit.rename_variable(common_cause, "soil_quality", "wheat_yield")


def test_removing_a_variable_removes_its_arrows_and_uses(matched):
    edited = edit.remove_variable(matched, "depot")
    sc = scenario_from_dict(edited.data)
    assert "depot" not in sc.names
    assert all("depot" not in (a.source, a.target) for a in sc.arrows)
    assert sc.question.also == ()
    assert sc.strategy("with_depot").adjust == ("night_shift",) and sc.strategy("one_depot").restrict == ()
    assert sc.strategy("matched").match == ()
    assert edited.note == "removed depot from strategies: one_depot, with_depot, matched"


def test_the_exposure_and_the_outcome_cannot_be_removed(common_cause):
    with pytest.raises(ScenarioError, match="is the exposure; choose another exposure first"):
        edit.remove_variable(common_cause, "fertiliser")
    with pytest.raises(ScenarioError, match="is the outcome; choose another outcome first"):
        edit.remove_variable(common_cause, "wheat_yield")


def test_a_latent_variable_leaves_the_strategies(common_cause):
    edited = edit.set_observed(common_cause, "soil_quality", False)
    sc = scenario_from_dict(edited.data)
    assert sc.latent_names == ["soil_quality"]
    assert sc.strategy("adjust_soil").adjust == ()
    assert "removed soil_quality" in edited.note
    back = edit.set_observed(edited.data, "soil_quality", True)
    assert back.data["variables"]["soil_quality"]["observed"] is True and back.note == ""


def test_a_selection_rule_with_no_candidate_left_is_dropped():
    data = scenario_to_dict(load_preset("selection_by_significance"))
    rule = next(s for s in data["strategies"] if s.get("selection"))
    edited = edit.prune_variables(data, set(rule["adjust"]))
    pruned = next(s for s in edited.data["strategies"] if s["name"] == rule["name"])
    assert pruned["adjust"] == [] and "selection" not in pruned
    scenario_from_dict(edited.data)


def test_a_type_change_drops_what_no_longer_fits(matched):
    edited = edit.set_variable_type(matched, "depot", "continuous")
    sc = scenario_from_dict(edited.data)
    assert sc.variable("depot").type == "continuous"
    assert sc.strategy("one_depot").restrict == ()
    assert sc.strategy("matched").match == ()
    assert sc.strategy("with_depot").adjust == ("night_shift", "depot")
    assert edit.set_variable_type(matched, "depot", "binary").data == matched


def test_a_binary_outcome_has_a_total_target_and_a_continuous_one_is_fitted_by_ols(common_cause):
    direct = edit.set_question(common_cause, target="direct").data
    binary = edit.set_variable_type(direct, "wheat_yield", "binary")
    assert binary.data["question"]["target"] == "total" and "total effect" in binary.note
    logit = scenario_to_dict(load_preset("binary_outcome"))
    outcome = logit["question"]["outcome"]
    back = edit.set_variable_type(logit, outcome, "continuous")
    assert back.data["question"]["scale"] == "difference"
    assert {s["model"] for s in back.data["strategies"]} == {"ols"}
    assert "model = ols" in back.note
    scenario_from_dict(back.data)


def test_a_new_exposure_leaves_the_strategies(common_cause):
    edited = edit.set_question(common_cause, exposure="soil_quality")
    sc = scenario_from_dict(edited.data)
    assert sc.question.exposure == "soil_quality"
    assert sc.strategy("adjust_soil").adjust == ()
    with pytest.raises(ScenarioError, match="^question: cannot edit 'also'"):
        edit.set_question(common_cause, also=["x"])


def test_adjustment_sets_are_added_once_with_fresh_names(common_cause):
    edited = edit.add_adjustment_sets(common_cause, [("minimal_1", ["soil_quality"]), ("unadjusted", [])])
    assert edited == (common_cause, "")
    edited = edit.add_adjustment_sets(common_cause, [("unadjusted", ["fertiliser"]), ("b", ["fertiliser"])])
    assert [s["name"] for s in edited.data["strategies"]][-1] == "unadjusted_2"
    assert edited.note == "added unadjusted_2"
    logit = edit.add_adjustment_sets(common_cause, [("m", ["soil_quality"])], model="logit", standardize=True)
    assert logit.data["strategies"][-1] == {
        "name": "m",
        "adjust": ["soil_quality"],
        "model": "logit",
        "standardize": True,
    }


def test_a_restriction_round_trips_through_its_text():
    table = {"shift": 0, "distance": [10.0, 50.0]}
    text = edit.restriction_toml(table)
    assert text == "shift = 0, distance = [10, 50]"
    assert edit.parse_restriction(text, where="x") == {"shift": 0, "distance": [10, 50]}
    assert edit.parse_restriction("{ shift = 1 }", where="x") == {"shift": 1}
    assert edit.parse_restriction(table, where="x") == table
    with pytest.raises(ScenarioError, match="^strategies.a.restrict: write the units to keep"):
        edit.parse_restriction("shift = [", where="strategies.a.restrict")


def test_renaming_and_removing_follow_modifiers_and_interactions():
    """A rename reaches varies_with keys and interactions; removing the modifier drops it from the arrows
    and from the strategies' adjust and interactions (the interaction needs the covariate adjusted for),
    and the note says so (common practice, no source: an edit must leave a file that parses)."""
    from workbench import load_preset, scenario_from_dict, scenario_to_dict
    from workbench.scenario.edit import remove_variable, rename_variable

    data = scenario_to_dict(load_preset("varying_effect"))
    renamed = scenario_from_dict(rename_variable(data, "skill", "prior_skill").data)
    assert any(dict(a.varies_with).get("prior_skill") == 1.5 for a in renamed.arrows)
    assert any(s.interactions == ("prior_skill",) for s in renamed.strategies)
    edited = remove_variable(data, "skill")
    sc = scenario_from_dict(edited.data)
    assert all(not a.varies_with for a in sc.arrows) and all(not s.interactions for s in sc.strategies)
    assert "no longer vary with skill" in edited.note
