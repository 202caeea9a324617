"""Exact matching strategies: scenario key, errors, round trip, engine, reproducibility, kept units, outputs."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import workbench as wb
from workbench import load_preset, loads_scenario
from workbench.analysis.check import check
from workbench.analysis.simulate import simulate
from workbench.engine.design import matching_mask
from workbench.engine.replicates import choose_engine, run_replicates
from workbench.errors import ScenarioError, SimulationError
from workbench.formatting.phrases import strategy_text
from workbench.scenario.write import dumps_scenario

PRESET = load_preset("restriction")

BASE = """
title = "t"
[question]
exposure = "x"
outcome = "y"
[variables.shift]
type = "binary"
proportion = 0.3
[variables.site]
type = "binary"
proportion = 0.5
[variables.c]
[variables.hidden]
type = "binary"
proportion = 0.5
observed = false
[variables.x]
type = "binary"
proportion = 0.4
[variables.y]
[[arrows]]
from = "shift"
to = "x"
effect = 1.0
[[arrows]]
from = "shift"
to = "y"
effect = 1.0
[[arrows]]
from = "c"
to = "x"
effect = 0.5
[[arrows]]
from = "c"
to = "y"
effect = 0.5
[[arrows]]
from = "x"
to = "y"
effect = 0.3
[[strategies]]
name = "unadjusted"
[[strategies]]
name = "matched"
{strategy}
[study]
n = 200
"""


def scenario(strategy, base=BASE):
    return loads_scenario(base.format(strategy=strategy))


def test_match_loads_and_round_trips():
    sc = scenario('adjust = ["c"]\nmatch = ["shift", "site"]')
    assert sc.strategy("matched").match == ("shift", "site")
    again = loads_scenario(dumps_scenario(sc))
    assert again == sc
    assert "match = [" in dumps_scenario(sc)
    assert scenario("adjust = []").strategy("matched").match == ()


@pytest.mark.parametrize(
    ("strategy", "message"),
    [
        ('match = ["nobody"]', "strategies[2].match[1]: unknown variable 'nobody'"),
        ('match = ["x"]', "'x' is the exposure and cannot be matched on"),
        ('match = ["y"]', "'y' is the outcome and cannot be matched on"),
        ('match = ["hidden"]', "'hidden' is latent (observed = false) and cannot be matched on"),
        ('match = ["c"]', "'c' is continuous; exact matching needs a binary variable"),
        ('match = ["shift", "shift"]', "strategies[2].match[2]: 'shift' is listed twice"),
        ('match = "shift"', "strategies[2].match"),
    ],
)
def test_match_errors_name_the_place(strategy, message):
    with pytest.raises(ScenarioError) as info:
        scenario(strategy)
    assert message in str(info.value)
    assert "\n" not in str(info.value)


def test_match_needs_a_binary_exposure_and_a_continuous_outcome():
    continuous_x = BASE.replace('[variables.x]\ntype = "binary"\nproportion = 0.4', "[variables.x]")
    with pytest.raises(ScenarioError, match=r"strategies\[2\]\.match: matching needs a binary exposure; 'x'"):
        scenario('match = ["shift"]', continuous_x)
    binary_y = BASE.replace("[variables.y]", '[variables.y]\ntype = "binary"\nproportion = 0.4')
    with pytest.raises(ScenarioError, match="matching needs a continuous outcome; 'y' is binary"):
        scenario('match = ["shift"]', binary_y)


def test_matching_runs_on_the_raw_engine_only():
    sc = scenario('match = ["shift"]')
    assert choose_engine(sc, 200) == "raw"
    with pytest.raises(SimulationError, match="'exact' cannot match the sample"):
        simulate(sc, replicates=10, engine="exact")


def test_matching_mask_keeps_the_first_pairs_in_row_order():
    # one replicate: exposure, shift over 8 rows
    x = [1, 1, 0, 1, 0, 0, 1, 0]
    shift = [0, 0, 0, 1, 1, 1, 0, 1]
    data = np.array([[x, shift]], dtype=float)
    keep = matching_mask(data, 0, (1,), np.ones((1, 8), dtype=bool))[0]
    # shift 0: exposed rows 0, 1, 6; unexposed row 2 -> one pair (rows 0, 2)
    # shift 1: exposed row 3; unexposed rows 4, 5, 7 -> one pair (rows 3, 4)
    assert keep.tolist() == [True, False, True, True, True, False, False, False]


def test_results_do_not_depend_on_the_chunk_size():
    sc = scenario('adjust = ["c"]\nmatch = ["shift", "site"]')
    a = run_replicates(sc, 120, 90, seed=5, chunk_size=7)
    b = run_replicates(sc, 120, 90, seed=5, chunk_size=90)
    np.testing.assert_array_equal(a.estimate, b.estimate)
    np.testing.assert_array_equal(a.retained_n, b.retained_n)


def test_retained_units_are_even_and_at_most_n():
    sc = scenario('match = ["shift"]')
    arrays = run_replicates(sc, 100, 200, seed=6)
    j = arrays.strategies.index("matched")
    kept = arrays.retained_n[:, j]
    assert np.all(kept % 2 == 0) and np.all(kept <= 100) and kept.min() > 0
    assert np.isnan(arrays.retained_n[:, 0]).all()
    ok = ~arrays.failed[:, j]
    np.testing.assert_allclose(
        (arrays.ci_high[ok, j] - arrays.ci_low[ok, j]) / arrays.se[ok, j] / 2,
        stats.t.ppf(0.975, kept[ok] - 2),
        rtol=1e-10,
    )


def test_table_and_outputs_show_the_matching(tmp_path):
    result = simulate(PRESET, replicates=200, seed=2)
    t = result.table.set_index("name")
    assert t.loc["match_shift", "match"] == ["night_shift"]
    assert t.loc["adjust_both", "match"] == []
    assert 0 < t.loc["match_shift", "mean_retained_n"] < PRESET.study.n
    assert t.loc["match_shift", "mean_retained_n"] == t.loc["match_shift_adjust_both", "mean_retained_n"]
    assert np.isnan(t.loc["adjust_both", "mean_retained_n"])
    data = json.loads(result.to_json())
    row = next(s for s in data["strategies"] if s["name"] == "match_shift")
    assert row["match"] == ["night_shift"]
    assert "matched 1:1 on night_shift; mean units kept" in result.as_text()
    result.to_csv(tmp_path / "out.csv")
    csv = pd.read_csv(tmp_path / "out.csv").set_index("name")
    assert csv.loc["match_shift", "match"] == "night_shift"
    assert strategy_text(["experience"], None, {}, row["match"]) == "experience; matched on night_shift"


def test_check_counts_matched_variables_as_conditioned_on():
    rows = {s["name"]: s for s in check(scenario('adjust = []\nmatch = ["shift"]')).strategies}
    assert rows["matched"]["valid"] is False  # c still confounds
    assert rows["matched"]["match"] == ["shift"]
    rows = {s["name"]: s for s in check(PRESET).strategies}
    both = rows["match_shift_adjust_both"]
    assert both["valid"] is True
    assert "matching on night_shift balances it between exposure groups by design" in both["reasons"]
    # beside another covariate the balance is marginal only: the matched variable must be adjusted for too
    assert rows["match_shift"]["valid"] is False
    assert any("balances it only marginally" in r for r in rows["match_shift"]["reasons"])
    assert "matched on night_shift" in check(PRESET).as_text()


def test_estimate_reports_the_matched_rows():
    data = wb.draw(PRESET, 400, seed=3)
    table = wb.estimate(PRESET, data).set_index("strategy")
    expected = 0
    for _, group in data.groupby("night_shift"):
        expected += 2 * min(int((group["scanner"] == 1).sum()), int((group["scanner"] == 0).sum()))
    assert table.loc["match_shift", "n"] == expected
    assert table.loc["match_shift", "df"] == expected - 3
    assert table.loc["adjust_both", "n"] == 400


def test_planner_runs_with_matched_strategies():
    result = wb.plan(PRESET, sample_sizes=[100, 400], replicates=100, seed=4)
    assert "match_shift" in set(result.table["strategy"])


def test_dashboard_state_renames_and_prunes_matched_variables():
    """Common practice, no source: renaming, hiding or retyping a matched variable never leaves a strategy
    that the scenario format refuses, and the strategy rows carry ``match``."""
    from workbench.app.state import ScenarioState

    state = ScenarioState(preset="restriction")
    rows = {r["name"]: r for r in state.strategy_rows()}
    assert rows["match_shift"]["match"] == ["night_shift"]
    assert state.set_variable("night_shift", "name", "late_shift")
    assert state.scenario.strategy("match_shift").match == ("late_shift",)
    assert state.set_variable("late_shift", "type", "continuous")
    assert state.scenario.strategy("match_shift").match == ()
    state = ScenarioState(preset="restriction")
    assert state.remove_variable("night_shift")
    assert state.scenario.strategy("match_shift").match == ()
