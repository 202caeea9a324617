"""Strategies that choose their covariates from the data: scenario keys, engines, table, check, planner."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

import workbench as wb
from workbench import load_preset, loads_scenario
from workbench.analysis.check import check
from workbench.analysis.simulate import TABLE_COLUMNS, simulate
from workbench.engine.replicates import run_replicates
from workbench.errors import ScenarioError
from workbench.scenario.write import dumps_scenario

PRESET = load_preset("selection_by_significance")

BASE = """
title = "t"
[question]
exposure = "x"
outcome = "y"
[variables.c]
[variables.w]
[variables.x]
[variables.y]
{extra_variables}
[[arrows]]
from = "c"
to = "x"
effect = 1.0
[[arrows]]
from = "c"
to = "y"
effect = 0.3
[[arrows]]
from = "w"
to = "y"
effect = 0.5
[[arrows]]
from = "x"
to = "y"
effect = 0.2
[[strategies]]
name = "unadjusted"
[[strategies]]
name = "chosen"
{strategy}
"""


def scenario(strategy, extra_variables=""):
    return loads_scenario(BASE.format(strategy=strategy, extra_variables=extra_variables))


def test_selection_key_loads_and_round_trips():
    sc = scenario('adjust = ["c", "w"]\nselection = "p_value"')
    assert sc.strategy("chosen").selection == "p_value"
    assert sc.strategy("unadjusted").selection is None
    again = loads_scenario(dumps_scenario(sc))
    assert again == sc
    assert 'selection = "p_value"' in dumps_scenario(sc)
    assert loads_scenario(dumps_scenario(PRESET)) == PRESET


@pytest.mark.parametrize(
    "strategy, message",
    [
        ('adjust = ["c"]\nselection = "stepwise"', "strategies[2].selection: must be one of"),
        ('adjust = []\nselection = "p_value"', "needs candidate covariates"),
        ('adjust = ["c"]\nselection = 1', "strategies[2].selection: must be a string"),
    ],
)
def test_bad_selection_keys_give_one_line(strategy, message):
    with pytest.raises(ScenarioError, match=message.replace("[", r"\[").replace("]", r"\]")):
        scenario(strategy)


def test_selection_needs_ols_with_a_continuous_outcome():
    text = BASE.format(strategy='adjust = ["c"]\nselection = "p_value"\nmodel = "logit"', extra_variables="")
    text = text.replace("[variables.y]", '[variables.y]\ntype = "binary"\nproportion = 0.3')
    with pytest.raises(ScenarioError, match='selection applies to model = "ols"'):
        loads_scenario(text)


def test_at_most_ten_candidates():
    extra = "\n".join(f"[variables.z{i}]" for i in range(10))
    names = ", ".join(['"c"'] + [f'"z{i}"' for i in range(10)])
    with pytest.raises(ScenarioError, match="at most 10 candidate covariates"):
        scenario(f'adjust = [{names}]\nselection = "p_value"', extra)


@pytest.mark.parametrize("rule", ["p_value", "change_in_estimate"])
def test_exact_and_raw_engines_agree_in_distribution(rule):
    """Both engines fit the same rule; their mean estimates agree within Monte Carlo error."""
    sc = scenario(f'adjust = ["c", "w"]\nselection = "{rule}"').replace(
        study=wb.scenario.Study(n=60, replicates=1500)
    )
    exact = simulate(sc, seed=1, engine="exact").table.set_index("name").loc["chosen"]
    raw = simulate(sc, seed=2, engine="raw").table.set_index("name").loc["chosen"]
    gap = abs(exact["mean"] - raw["mean"])
    assert gap < 4 * np.hypot(exact["bias_mcse"], raw["bias_mcse"])
    assert abs(exact["selected_valid_share"] - raw["selected_valid_share"]) < 0.06


def test_table_has_the_selection_columns():
    result = simulate(PRESET, replicates=500, seed=3)
    t = result.table.set_index("name")
    for key in ("selection", "restrict", "selected_valid_share", "selected_sets", "mean_retained_n"):
        assert key in TABLE_COLUMNS and key in result.table.columns
    fixed = t.loc["adjust_complexity"]
    assert fixed["selected_sets"] == [] and np.isnan(fixed["selected_valid_share"])
    chosen = t.loc["select_by_p_value"]
    assert chosen["selection"] == "p_value"
    assert 0 < chosen["selected_valid_share"] < 1
    sets = chosen["selected_sets"]
    assert 1 <= len(sets) <= 3 and sets[0]["share"] >= sets[-1]["share"]
    assert sum(s["share"] for s in sets) <= 1 + 1e-12
    assert all(set(s["adjust"]) <= {"complexity", "team_experience"} for s in sets)
    # a valid share equals the share of sets holding the confounder (the only valid ones here)
    codes = result.arrays.selected[:, list(t.index).index("select_by_p_value")]
    assert chosen["selected_valid_share"] == pytest.approx(np.mean(codes & 1 == 1))
    data = json.loads(result.to_json())
    row = next(s for s in data["strategies"] if s["name"] == "select_by_p_value")
    assert row["selected_sets"][0]["adjust"] and row["mean_retained_n"] is None
    fixed_row = next(s for s in data["strategies"] if s["name"] == "adjust_complexity")
    assert fixed_row["selected_valid_share"] is None and fixed_row["selection"] is None
    assert "chosen set valid in" in result.as_text()


def test_results_do_not_depend_on_the_chunk_size():
    a = run_replicates(PRESET, 80, 600, seed=4, engine="raw", chunk_size=64)
    b = run_replicates(PRESET, 80, 600, seed=4, engine="raw", chunk_size=600)
    np.testing.assert_array_equal(a.selected, b.selected)
    np.testing.assert_allclose(a.estimate, b.estimate, rtol=1e-12)


def test_per_replicate_df_follows_the_chosen_set():
    arrays = run_replicates(PRESET, 50, 400, seed=5)
    s = arrays.strategies.index("select_by_p_value")
    kept = np.array([bin(int(c)).count("1") for c in arrays.selected[:, s]])
    # the t quantile is that of n - 2 - (kept covariates) degrees of freedom
    half = (arrays.ci_high[:, s] - arrays.ci_low[:, s]) / 2 / arrays.se[:, s]
    from scipy import stats

    np.testing.assert_allclose(half, stats.t.ppf(0.975, 50 - 2 - kept), rtol=1e-10)
    assert arrays.df[s] == pytest.approx(np.mean(50 - 2 - kept))


def test_check_keeps_valid_a_bool_and_says_the_set_is_chosen_from_the_data():
    report = check(PRESET)
    rows = {s["name"]: s for s in report.strategies}
    chosen = rows["select_by_p_value"]
    assert chosen["valid"] is True  # the full candidate set is valid
    assert any("chosen from the data" in r for r in chosen["reasons"])
    # in large samples the rules keep the confounder (the outcome cause too for the p-value rule)
    assert chosen["large_sample_selected"] == ["complexity", "team_experience"]
    assert rows["select_by_change"]["large_sample_selected"] == ["complexity"]
    assert chosen["large_sample_bias"] == pytest.approx(0.0, abs=1e-12)
    assert rows["adjust_complexity"]["large_sample_selected"] is None
    assert "chosen by p-value from complexity, team_experience" in report.as_text()
    typed = {c.name: c for c in report.checks}
    assert typed["select_by_p_value"].large_sample_selected == ("complexity", "team_experience")
    assert typed["select_by_p_value"].as_dict() == chosen
    assert json.dumps(report.to_dict())


def test_estimate_reports_the_kept_covariates():
    data = wb.draw(PRESET, 100, seed=6)
    table = wb.estimate(PRESET, data).set_index("strategy")
    assert table.loc["adjust_complexity", "adjusted_for"] == ["complexity"]
    assert table.loc["unadjusted", "adjusted_for"] == []
    kept = table.loc["select_by_p_value", "adjusted_for"]
    assert set(kept) <= {"complexity", "team_experience"}
    assert table.loc["select_by_p_value", "df"] == 100 - 2 - len(kept)


def test_planner_runs_and_has_no_closed_form_for_a_selection():
    result = wb.plan(PRESET, sample_sizes=[40, 160], replicates=200, seed=7)
    smallest = result.smallest_n.set_index("strategy")
    assert "select_by_p_value" in smallest.index
    assert pd.isna(smallest.loc["select_by_p_value", "analytic_n_for_power"])
    assert not pd.isna(smallest.loc["adjust_complexity", "analytic_n_for_power"])


def test_planner_flags_the_optimistic_power_of_p_value_selection():
    """Common practice, no source: a strategy whose intervals under-cover has SEs that are too small, so its
    power is optimistic; the planner says so beside its smallest n."""
    from workbench import load_preset
    from workbench.analysis.plan import plan

    result = plan(load_preset("selection_by_significance"), sample_sizes=[60, 120], replicates=400, seed=3)
    notes = result.smallest_n.set_index("strategy")["note"]
    assert "chosen from the data" in notes["select_by_p_value"]
    assert notes["adjust_complexity"].startswith("power target") or notes["adjust_complexity"] == ""
    wide = plan(load_preset("selection_by_significance"), sample_sizes=[60, 1280], replicates=400, seed=3)
    wide_notes = wide.smallest_n.set_index("strategy")["note"]
    assert (
        "optimistic" in wide_notes["select_by_p_value"]
        or "chosen from the data" in wide_notes["select_by_p_value"]
    )
