"""Two effects at once and sign/magnitude errors: the plan's ``n_for_all_effects``, the joint power column, the
sentence, and the type S / exaggeration columns in every output (the project's own rules)."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

import workbench as wb
from workbench.engine.metrics import sign_and_magnitude

KEYS = ("type_s", "type_s_mcse", "exaggeration", "exaggeration_mcse")


@pytest.fixture(scope="module")
def two():
    return wb.plan(wb.load_preset("two_exposures"), sample_sizes=[50, 200, 400, 800], replicates=300, seed=2)


def test_n_for_all_effects_is_the_larger_of_the_two(two):
    """Common practice, no source: every effect reaches the target only once the slowest one does."""
    row = two.n_for_all_effects.set_index("strategy").loc["adjust_heating"]
    own = two.smallest_n.set_index("strategy").loc["adjust_heating", "n_for_power"]
    also = two.also_smallest_n.set_index("strategy").loc["adjust_heating", "n_for_power"]
    assert row["n_for_all_effects"] == max(own, also)
    assert row["n_for_joint_power"] >= row["n_for_all_effects"]
    assert pd.isna(two.n_for_all_effects.set_index("strategy").loc["unadjusted", "n_for_all_effects"])


def test_joint_power_never_exceeds_either_power(two):
    """P(A and B) <= min(P(A), P(B)): a fact of probability."""
    rows = two.table[two.table["strategy"] == "adjust_heating"].set_index("n")
    also = two.also_table.set_index("n")
    assert (rows["power_all"] <= rows["power"] + 1e-12).all()
    assert (rows["power_all"] <= also["power"] + 1e-12).all()


def test_sentence_in_text_and_json(two):
    n = int(two.n_for_all_effects.set_index("strategy").loc["adjust_heating", "n_for_all_effects"])
    sentence = two.all_effects_sentence()
    assert f"about {n} units (strategy adjust_heating)" in sentence
    assert sentence in two.as_text()
    data = json.loads(two.to_json())
    assert data["n_for_all_effects"][1]["n_for_all_effects"] == n
    assert {"power_all", "power_all_mcse", *KEYS} <= set(data["table"][0])
    row = two.n_for_all_effects.set_index("strategy").loc["adjust_heating"]
    if row["n_for_joint_power"] > row["n_for_all_effects"]:  # found at grid resolution: the sentence says so
        joint = int(row["n_for_joint_power"])
        below = max(n for n in (50, 200, 400, 800) if n < joint)
        assert (
            f"at most {joint} (a size of the grid, not searched between sizes; {below} falls short)"
            in sentence
        )


def test_without_also_n_for_all_effects_is_n_for_power():
    result = wb.plan(wb.load_preset("common_cause"), sample_sizes=[50, 100, 200], replicates=200, seed=1)
    merged = result.n_for_all_effects.merge(result.smallest_n, on="strategy")
    assert (merged["n_for_all_effects"] == merged["n_for_power"]).all()
    assert (merged["n_for_joint_power"] == merged["n_for_power"]).all()
    assert np.allclose(result.table["power_all"], result.table["power"])
    assert result.all_effects_sentence() == ""


def test_run_outputs_carry_the_sign_and_magnitude_columns():
    result = wb.simulate(wb.load_preset("common_cause"), n=40, replicates=200, seed=3)
    data = json.loads(result.to_json())
    assert all(set(KEYS) <= set(s) for s in data["strategies"])
    assert "type_s" in result.to_csv().splitlines()[0]
    assert "exaggeration (MCSE)" in result.as_text() and "exaggeration (MCSE)" in result.as_html()


def test_undefined_without_significance_or_with_zero_truth():
    """NaN (null in JSON) when nothing is significant or the truth is 0: a sign or a ratio to 0 is
    meaningless."""
    est = np.array([[0.1, 0.1], [0.2, 0.2]])
    none = sign_and_magnitude(est, np.full((2, 2), 0.5), np.array([0.1, 0.1]), 0.05)
    zero = sign_and_magnitude(est, np.full((2, 2), 0.01), np.array([0.0, 0.0]), 0.05)
    for m in (none, zero):
        assert all(math.isnan(v) for key in KEYS for v in m[key])


def test_the_graph_tab_edits_the_also_list():
    """The dashboard's multi-choice writes ``question.also`` into the scenario and back (plumbing)."""
    from workbench.app.graph_tab import GraphView
    from workbench.app.state import ScenarioState

    state = ScenarioState()
    state.load_preset("two_exposures")
    view = GraphView(state=state)
    assert view.also.value == ["heating"] and "energy_budget" not in view.also.options
    view.also.value = []
    assert state.scenario.question.also == ()
    view.also.value = ["heating"]
    assert state.scenario.question.also == ("heating",)


def test_vif_of_two_correlated_inputs():
    """1 / (1 - rho^2) with rho = 4 / 5 in two_exposures (Wooldridge, Introductory Econometrics, sec. 3.4)."""
    from workbench.engine.metrics import variance_inflation

    vif = variance_inflation(wb.load_preset("two_exposures"), ["lighting", "heating"], "lighting")
    assert vif == pytest.approx(1 / (1 - 0.8**2), rel=1e-12)


def test_the_graph_tab_shows_the_implied_correlations_when_opened():
    """Issue 14 item 4: the Graph tab shows the correlations the graph implies; in two_exposures lighting and
    heating share the energy budget with standardized paths 0.894 each (from the preset: 0.8 = 0.894^2, the
    tracing rule; Wright 1934, from memory). Written when the card is opened, kept current while open."""
    from workbench.app.graph_tab import GraphView
    from workbench.app.state import ScenarioState

    state = ScenarioState(preset="two_exposures")
    view = GraphView(state=state)
    assert view.implied.object == ""
    view.implied_card.collapsed = False
    assert "0.800" in view.implied.object and "tomato_yield" in view.implied.object
    state.preset = "common_cause"
    assert "soil_quality" in view.implied.object
    view.implied_card.collapsed = True
    assert view.implied.object == ""
