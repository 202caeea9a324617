"""Restricted strategies: scenario keys, engine choice, retained units, failures, verdicts, outputs."""

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
from workbench.engine.replicates import choose_engine, run_replicates
from workbench.errors import ScenarioError, SimulationError
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
[variables.c]
[variables.hidden]
observed = false
[variables.x]
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
name = "restricted"
{strategy}
[study]
n = 200
"""


def scenario(strategy):
    return loads_scenario(BASE.format(strategy=strategy))


def test_restrict_loads_and_round_trips():
    sc = scenario('adjust = ["c"]\nrestrict = { shift = 0 }')
    assert sc.strategy("restricted").restrict == (("shift", 0),)
    band = scenario("restrict = { c = [-0.5, 1] }")
    assert band.strategy("restricted").restrict == (("c", (-0.5, 1.0)),)
    for item in (sc, band, PRESET):
        assert loads_scenario(dumps_scenario(item)) == item
    assert "restrict" in dumps_scenario(band)


@pytest.mark.parametrize(
    "strategy, message",
    [
        ("restrict = { x = 0 }", "restrict.x: 'x' is the exposure"),
        ("restrict = { y = [0, 1] }", "restrict.y: 'y' is the outcome"),
        ("restrict = { hidden = [0, 1] }", "restrict.hidden: 'hidden' is latent"),
        ("restrict = { nowhere = 0 }", "restrict.nowhere: unknown variable"),
        ("restrict = { shift = 2 }", "give the value to keep, 0 or 1"),
        ("restrict = { shift = [0, 1] }", "give the value to keep, 0 or 1"),
        ("restrict = { c = 0 }", "give the interval to keep as"),
        ("restrict = { c = [1, 0] }", "finite low < high"),
        ('adjust = ["shift"]\nrestrict = { shift = 1 }', "after restriction it is constant"),
        ('restrict = "shift"', "restrict: must be a table"),
    ],
)
def test_bad_restrict_keys_give_one_line(strategy, message):
    with pytest.raises(ScenarioError) as info:
        scenario(strategy)
    assert message in str(info.value) and "\n" not in str(info.value)


def test_restrict_needs_ols_with_a_continuous_outcome():
    text = BASE.format(strategy='restrict = { shift = 0 }\nmodel = "logit"').replace(
        "[variables.y]", '[variables.y]\ntype = "binary"\nproportion = 0.4'
    )
    with pytest.raises(ScenarioError, match="restrict applies to model"):
        loads_scenario(text)


def test_restriction_runs_on_the_raw_engine_only():
    sc = scenario("restrict = { c = [-1, 1] }")
    assert sc.is_linear_gaussian is False  # the binary shift
    linear = loads_scenario(
        BASE.format(strategy="restrict = { c = [-1, 1] }").replace('type = "binary"\nproportion = 0.3', "")
    )
    assert linear.is_linear_gaussian
    assert choose_engine(linear, 200) == "raw"
    with pytest.raises(SimulationError, match="'exact' cannot restrict"):
        simulate(linear, replicates=10, engine="exact")


def test_retained_units_vary_and_too_few_fail_with_a_reason():
    sc = scenario('adjust = ["c"]\nrestrict = { shift = 1, c = [2.0, 3.0] }')
    arrays = run_replicates(sc, 60, 300, seed=1)
    j = arrays.strategies.index("restricted")
    kept = arrays.retained_n[:, j]
    assert kept.min() < 5 and np.isnan(arrays.retained_n[:, 0]).all()
    failed = arrays.failed[:, j]
    assert failed.any() and np.all(failed[kept < 5])
    reason = next(iter(arrays.reasons["restricted"]))
    assert "too few units inside the restriction" in reason
    ok = ~failed
    np.testing.assert_allclose(
        (arrays.ci_high[ok, j] - arrays.ci_low[ok, j]) / arrays.se[ok, j] / 2,
        stats.t.ppf(0.975, kept[ok] - 3),
        rtol=1e-10,
    )


def test_table_and_outputs_show_the_restriction(tmp_path):
    result = simulate(PRESET, replicates=300, seed=2)
    t = result.table.set_index("name")
    assert np.isnan(t.loc["adjust_both", "mean_retained_n"])
    assert (
        0
        < t.loc["day_shift_experience_band", "mean_retained_n"]
        < t.loc["day_shift_adjust_experience", "mean_retained_n"]
        < PRESET.study.n
    )
    assert t.loc["day_shift_adjust_experience", "restrict"] == {"night_shift": 0}
    assert t.loc["unadjusted", "reference"] == "unadjusted"
    assert t.loc["day_shift_adjust_experience", "reference"] == "unadjusted"
    data = json.loads(result.to_json())
    row = next(s for s in data["strategies"] if s["name"] == "day_shift_experience_band")
    assert row["restrict"] == {"night_shift": 0, "experience": [-1.0, 1.0]}
    assert "mean units kept" in result.as_text()
    result.to_csv(tmp_path / "out.csv")
    csv = pd.read_csv(tmp_path / "out.csv").set_index("name")
    assert csv.loc["day_shift_experience_band", "restrict"] == "night_shift = 0; experience = [-1.0, 1.0]"


def test_check_treats_restricted_variables_as_conditioned_on():
    sc = scenario("restrict = { shift = 0 }")
    rows = {s["name"]: s for s in check(sc).strategies}
    assert rows["restricted"]["valid"] is False  # c still confounds
    both = {s["name"]: s for s in check(scenario('adjust = ["c"]\nrestrict = { shift = 0 }')).strategies}
    assert both["restricted"]["valid"] is True
    assert any("restricting to shift = 0" in r for r in both["restricted"]["reasons"])
    band = {s["name"]: s for s in check(PRESET).strategies}["day_shift_experience_band"]
    # a band only approximately conditions: the set is not valid when the band was needed for validity
    assert band["valid"] is False
    assert any(
        "restricting to a band of experience only approximately conditions on it: the confounding through "
        "experience that the band was meant to remove partly remains within the band" in r
        for r in band["reasons"]
    )
    assert band["restrict"] == {"night_shift": 0, "experience": [-1.0, 1.0]}


def test_estimate_reports_the_retained_rows():
    data = wb.draw(PRESET, 400, seed=3)
    table = wb.estimate(PRESET, data).set_index("strategy")
    day = int((data["night_shift"] == 0).sum())
    assert table.loc["day_shift_adjust_experience", "n"] == day
    assert table.loc["day_shift_adjust_experience", "df"] == day - 3
    assert table.loc["adjust_both", "n"] == 400


def test_planner_runs_with_restricted_strategies():
    result = wb.plan(PRESET, sample_sizes=[100, 400], replicates=100, seed=4)
    assert "day_shift_adjust_experience" in set(result.table["strategy"])
