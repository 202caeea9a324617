"""The Monte Carlo engine: argument checks, reproducibility, failures, result objects."""

from __future__ import annotations

import importlib
import json
import re

import numpy as np
import pandas as pd
import pytest

import workbench as wb
from workbench.analysis.simulate import REQUIRED_KEYS, simulate
from workbench.engine.replicates import run_replicates
from workbench.errors import Cancelled, SimulationError
from workbench.graph.defaults import default_strategies


def build(variables, arrows, exposure, outcome, strategies, study="", question=""):
    """A scenario from {name: table text}, (from, to, effect) triples and (name, adjust, extra) strategies."""
    text = f'title = "t"\n[question]\nexposure = "{exposure}"\noutcome = "{outcome}"\n{question}\n'
    for name, body in variables.items():
        text += f"[variables.{name}]\n{body}\n"
    for a, b, e in arrows:
        text += f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = {e!r}\n'
    for name, adjust, *extra in strategies:
        items = ", ".join(f'"{v}"' for v in adjust)
        text += f'[[strategies]]\nname = "{name}"\nadjust = [{items}]\n' + (extra[0] if extra else "") + "\n"
    return wb.loads_scenario(text + study)


WORKSHOP = build(
    {"skill": "", "training": "", "output": "baseline = 20.0", "tooling": ""},
    [
        ("skill", "training", 0.7),
        ("skill", "output", 0.6),
        ("training", "output", 0.3),
        ("tooling", "output", 0.5),
    ],
    "training",
    "output",
    [("unadjusted", ()), ("adjust_skill", ("skill",)), ("adjust_both", ("skill", "tooling"))],
    study="[study]\nn = 120\nreplicates = 600\nseed = 5\n",
    question='also = ["tooling"]',
)

SOFTWARE = build(
    {
        "team_size": "",
        "code_review": 'type = "binary"\nproportion = 0.5',
        "bug_reported": 'type = "binary"\nproportion = 0.3',
    },
    [
        ("team_size", "code_review", 0.8),
        ("team_size", "bug_reported", 0.6),
        ("code_review", "bug_reported", -0.7),
    ],
    "code_review",
    "bug_reported",
    [
        ("lpm", ()),
        ("lpm_team", ("team_size",)),
        ("logit_team", ("team_size",), 'model = "logit"'),
        ("standardised", ("team_size",), 'model = "logit"\nstandardize = true'),
    ],
    study="[study]\nn = 300\nreplicates = 300\nseed = 8\n",
)


# ---- argument checks ------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"engine": "fast"}, "engine: must be one of"),
        ({"replicates": 0}, "replicates: must be an integer from 1 to 1,000,000, got 0"),
        ({"n": 4}, "n = 4 is too small for strategy 'adjust_both' .4 coefficients.; n must be at least 6"),
        ({"alpha": 0.9}, r"alpha: must be a number in \(0, 0.5\], got 0.9"),
        ({"seed": -1}, "seed: must be None, a non-negative integer"),
    ],
)
def test_bad_arguments_fail_before_work(kwargs, message):
    calls = []
    with pytest.raises(SimulationError, match=message):
        simulate(WORKSHOP, progress=lambda d, t: calls.append(d), **kwargs)
    assert calls == []


def test_exact_forced_on_binary_graph_is_refused():
    with pytest.raises(SimulationError, match="'exact' needs every variable continuous; binary: code_review"):
        simulate(SOFTWARE, engine="exact")


def test_auto_picks_exact_for_linear_gaussian_and_raw_otherwise():
    assert simulate(WORKSHOP, replicates=50, seed=1).engine == "exact"
    assert simulate(SOFTWARE, replicates=20, seed=1).engine == "raw"
    assert simulate(WORKSHOP, replicates=50, seed=1, engine="raw").engine == "raw"


# ---- reproducibility ------------------------------------------------------------------------------------
@pytest.mark.parametrize("engine", ["raw", "exact"])
def test_same_seed_same_numbers_whatever_the_chunk_size(engine):
    runs = [run_replicates(WORKSHOP, 60, 620, seed=3, engine=engine, chunk_size=c) for c in (7, 250, 10_000)]
    for other in runs[1:]:
        np.testing.assert_array_equal(runs[0].estimate, other.estimate)
        np.testing.assert_array_equal(runs[0].se, other.se)


def test_raw_binary_runs_are_chunk_independent():
    a = run_replicates(SOFTWARE, 80, 260, seed=1, chunk_size=13)
    b = run_replicates(SOFTWARE, 80, 260, seed=1)
    np.testing.assert_array_equal(a.estimate, b.estimate)


def test_different_seeds_differ_and_none_records_its_entropy():
    a = run_replicates(WORKSHOP, 60, 50, seed=1)
    b = run_replicates(WORKSHOP, 60, 50, seed=2)
    assert not np.array_equal(a.estimate, b.estimate)
    c = run_replicates(WORKSHOP, 60, 50, seed=None)
    again = run_replicates(WORKSHOP, 60, 50, seed=c.seed)
    np.testing.assert_array_equal(c.estimate, again.estimate)


# ---- failures -------------------------------------------------------------------------------------------
def test_rank_deficient_replicates_are_counted_not_fatal():
    sc = build(
        {"rare_fault": 'type = "binary"\nproportion = 0.03', "speed": "", "throughput": ""},
        [("rare_fault", "throughput", 1.0), ("speed", "throughput", 0.5)],
        "speed",
        "throughput",
        [("unadjusted", ()), ("adjust_fault", ("rare_fault",))],
        study="[study]\nn = 20\nreplicates = 400\nseed = 3\n",
    )
    result = simulate(sc, seed=sc.study.seed)
    row = result.table.set_index("name").loc["adjust_fault"]
    # P(no fault among 20) = 0.97^20 = 0.54: about half the replicates have a constant column
    assert 150 < row["failures"] < 290
    assert row["failure_reasons"] == {"rank-deficient: regressor 'rare_fault' is constant": row["failures"]}
    assert row["failures"] + row["n_ok"] == 400
    failed = result.estimates.query("strategy == 'adjust_fault'")
    assert failed["failed"].sum() == row["failures"]
    assert failed.loc[failed["failed"], "estimate"].isna().all()
    assert result.table.set_index("name").loc["unadjusted", "failures"] == 0
    assert np.isfinite(row["bias"])


# ---- progress and cancel --------------------------------------------------------------------------------
def test_progress_reaches_the_total_and_cancel_propagates():
    seen = []
    run_replicates(
        WORKSHOP, 50, 700, seed=1, engine="raw", progress=lambda d, t: seen.append((d, t)), chunk_size=300
    )
    assert seen == [(300, 700), (600, 700), (700, 700)]

    def cancel(done, total):
        raise Cancelled("cancelled by the user")

    with pytest.raises(Cancelled):
        run_replicates(WORKSHOP, 50, 700, seed=1, progress=cancel)


# ---- result objects -------------------------------------------------------------------------------------
def test_json_follows_the_contract():
    result = simulate(WORKSHOP, seed=WORKSHOP.study.seed)
    data = json.loads(result.to_json())
    for key in ("title", "n", "replicates", "seed", "alpha", "engine", "truth", "truth_mcse", "strategies"):
        assert key in data
    assert data["n"] == 120 and data["replicates"] == 600 and data["seed"] == 5 and data["engine"] == "exact"
    assert data["truth"] == pytest.approx(0.3)
    assert [s["name"] for s in data["strategies"]] == ["unadjusted", "adjust_skill", "adjust_both"]
    for s in data["strategies"]:
        assert set(REQUIRED_KEYS) <= set(s)
        assert isinstance(s["adjust"], list)
    unadjusted = data["strategies"][0]
    assert unadjusted["relative_bias"] is not None
    assert unadjusted["change_in_estimate_median"] == 0.0 and unadjusted["se_ratio"] == 1.0
    assert [s["valid"] for s in data["strategies"]] == [False, True, True]
    assert {row["strategy"] for row in data["also"]} == {"adjust_both"}


def test_zero_truth_gives_null_relative_bias_in_json():
    sc = build({"a": "", "b": ""}, [], "a", "b", [("unadjusted", ())])
    data = json.loads(simulate(sc, n=30, replicates=100, seed=1).to_json())
    assert data["truth"] == 0.0
    assert data["strategies"][0]["relative_bias"] is None


def test_table_estimates_text_and_csv(tmp_path):
    result = simulate(WORKSHOP, replicates=300, seed=WORKSHOP.study.seed)
    assert list(result.table["name"]) == ["unadjusted", "adjust_skill", "adjust_both"]
    assert result.estimates.shape == (900, 8)
    assert list(result.estimates.columns) == [
        "replicate",
        "strategy",
        "estimate",
        "se",
        "ci_low",
        "ci_high",
        "p_value",
        "failed",
    ]
    also = result.also_estimates
    assert set(also["strategy"]) == {"adjust_both"} and len(also) == 300
    text = result.as_text()
    assert "adjust_skill" in text and "assumption" in text
    path = tmp_path / "table.csv"
    result.to_csv(path)
    back = pd.read_csv(path)
    assert list(back["name"]) == ["unadjusted", "adjust_skill", "adjust_both"]
    assert back.loc[2, "adjust"] == "skill tooling"


def test_change_in_estimate_and_se_ratio_against_an_internal_reference():
    sc = WORKSHOP.replace(strategies=WORKSHOP.strategies[1:])  # no unadjusted strategy
    table = simulate(sc, replicates=400, seed=sc.study.seed).table.set_index("name")
    # skill confounds: adjusting moves the estimate from about 0.55 down to 0.3
    assert table.loc["adjust_skill", "change_in_estimate_median"] < -0.3
    assert table.loc["adjust_skill", "share_change_over_10pct"] > 0.9
    assert len(table) == 2


def test_binary_outcome_strategies_name_their_estimand_and_truth():
    result = simulate(SOFTWARE, seed=SOFTWARE.study.seed)
    table = result.table.set_index("name")
    assert table.loc["lpm", "estimand"] == "marginal risk difference"
    assert table.loc["logit_team", "estimand"] == "conditional log odds ratio"
    assert "non-collapsibility" in table.loc["logit_team", "note"]
    assert table.loc["standardised", "truth"] == pytest.approx(result.truth)
    assert table.loc["logit_team", "truth"] < 0 and table.loc["logit_team", "truth"] != result.truth
    assert result.conditional_log_odds_ratio == -0.7
    assert np.isinf(table.loc["lpm", "df"])
    data = json.loads(result.to_json())
    assert data["conditional_log_odds_ratio"] == -0.7
    assert "conditional log odds ratio" in result.as_text()


def test_simulation_defaults_come_from_the_study():
    result = simulate(WORKSHOP, seed=WORKSHOP.study.seed)
    assert (result.n, result.replicates, result.seed, result.alpha) == (120, 600, 5, 0.05)


def test_no_seed_means_fresh_entropy_and_the_result_repeats_the_run():
    """As numpy: seed=None draws fresh entropy (common practice, no source); passing the recorded seed back
    repeats the run number for number."""
    a = simulate(WORKSHOP, replicates=50)
    b = simulate(WORKSHOP, replicates=50)
    assert a.seed != b.seed and a.seed != WORKSHOP.study.seed
    again = simulate(WORKSHOP, replicates=50, seed=a.seed)
    pd.testing.assert_frame_equal(a.table, again.table)


def test_a_scenario_edited_without_strategies_gets_the_defaults_of_its_new_graph():
    sc = build(
        {"skill": "", "training": "", "output": ""},
        [("skill", "training", 0.7), ("skill", "output", 0.6), ("training", "output", 0.3)],
        "training",
        "output",
        [],
    )
    edited = sc.replace(arrows=sc.arrows[1:])  # skill no longer causes training: no confounder
    assert edited.strategies == ()
    result = simulate(edited, replicates=50, seed=1)
    names = list(result.table["name"])
    assert names == [s.name for s in default_strategies(edited)]
    assert names != [s.name for s in sc.strategies]  # the old graph's defaults are not reused


def test_huge_n_is_drawn_in_row_groups_with_the_same_numbers(monkeypatch):
    """A replicate larger than the memory budget is drawn and accumulated in row groups; the stream order
    (pieces of PIECE rows) makes the result equal to the whole-replicate path up to rounding."""
    from workbench.engine.fitplan import fit_plan
    from workbench.engine.generate import PIECE

    chunks = importlib.import_module("workbench.engine.chunks")

    n = 2 * PIECE + 123
    whole = run_replicates(WORKSHOP, n, 2, seed=6, engine="raw")
    assert not chunks.draws_piecewise(n, 4, fit_plan(WORKSHOP))
    monkeypatch.setattr(chunks, "MEMORY_BUDGET", 2**20)
    assert chunks.draws_piecewise(n, 4, fit_plan(WORKSHOP))
    pieces = run_replicates(WORKSHOP, n, 2, seed=6, engine="raw")
    np.testing.assert_allclose(pieces.estimate, whole.estimate, rtol=1e-9)
    np.testing.assert_allclose(pieces.se, whole.se, rtol=1e-9)


def test_direct_target_is_the_arrow_and_also_variables_are_reported():
    sc = WORKSHOP.replace(
        question=WORKSHOP.question.__class__("training", "output", "direct", also=("tooling",))
    )
    result = simulate(sc, replicates=400, seed=sc.study.seed)
    assert result.truth == 0.3 and result.truth_method == "closed form"
    table = result.table.set_index("name")
    assert table.loc["adjust_both", "estimand"].startswith("direct effect")
    also = result.also_table()
    assert list(also["strategy"]) == ["adjust_both"] and also.loc[0, "truth"] == 0.5
    assert abs(also.loc[0, "bias"]) < 4 * also.loc[0, "bias_mcse"]
    text = result.as_text()
    assert "Also estimated: direct effects of further variables" in text
    assert re.search(r"tooling\s+adjust_both\s+0\.5", text)  # variable, strategy, truth
