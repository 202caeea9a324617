"""Per-dataset fits against statsmodels (reference library): ``OLS`` for classical fits, ``OLS(cov_type="HC3")``
for the linear probability model and ``Logit`` for logistic strategies.

Source: statsmodels 0.15, ``statsmodels.api.OLS(...).fit()`` (classical SE, t interval with n - p degrees of
freedom), ``.fit(cov_type="HC3")`` (MacKinnon & White 1985 HC3, normal interval) and ``Logit(...).fit()``.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import workbench as wb
from workbench.analysis.estimate import estimate
from workbench.engine.generate import draw, draw_rows
from workbench.engine.replicates import run_replicates
from workbench.engine.streams import block_seed
from workbench.graph.defaults import with_default_strategies

ORCHARD = wb.loads_scenario(
    """
title = "Pruning and apple yield"
[question]
exposure = "pruning_hours"
outcome = "apple_yield"
[variables.slope]
[variables.pruning_hours]
baseline = 8.0
noise_sd = 2.0
[variables.irrigation]
[variables.apple_yield]
baseline = 40.0
noise_sd = 5.0
[[arrows]]
from = "slope"
to = "pruning_hours"
effect = -0.8
[[arrows]]
from = "slope"
to = "apple_yield"
effect = -2.0
[[arrows]]
from = "irrigation"
to = "apple_yield"
effect = 3.0
[[arrows]]
from = "pruning_hours"
to = "apple_yield"
effect = 0.7
[[strategies]]
name = "unadjusted"
[[strategies]]
name = "adjust_slope"
adjust = ["slope"]
[[strategies]]
name = "adjust_all"
adjust = ["slope", "irrigation"]
[study]
n = 60
alpha = 0.1
"""
)

DEPOT = wb.loads_scenario(
    """
title = "Forklift training and accidents in warehouses"
[question]
exposure = "trained"
outcome = "accident"
[variables.shift_length]
[variables.trained]
type = "binary"
proportion = 0.5
[variables.accident]
type = "binary"
proportion = 0.25
[[arrows]]
from = "shift_length"
to = "trained"
effect = 0.5
[[arrows]]
from = "shift_length"
to = "accident"
effect = 0.8
[[arrows]]
from = "trained"
to = "accident"
effect = -0.6
[[strategies]]
name = "lpm"
adjust = ["shift_length"]
[[strategies]]
name = "logit"
adjust = ["shift_length"]
model = "logit"
[study]
n = 400
"""
)


def statsmodels_ols(df, exposure, outcome, adjust, alpha, cov_type="nonrobust"):
    fit = sm.OLS(df[outcome], sm.add_constant(df[[exposure, *adjust]])).fit(cov_type=cov_type)
    low, high = fit.conf_int(alpha=alpha).loc[exposure]
    return fit.params[exposure], fit.bse[exposure], low, high, fit.pvalues[exposure], fit.df_resid


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_estimate_matches_statsmodels_ols(seed):
    """statsmodels OLS: estimate, SE, 90% t interval and p-value of every strategy to 1e-8."""
    df = draw(ORCHARD, 60, seed=seed)
    table = estimate(ORCHARD, df).set_index("strategy")
    for s in ORCHARD.strategies:
        expected = statsmodels_ols(df, "pruning_hours", "apple_yield", s.adjust, 0.1)
        row = table.loc[s.name]
        got = (row["estimate"], row["se"], row["ci_low"], row["ci_high"], row["p_value"], row["df"])
        np.testing.assert_allclose(got, expected, rtol=1e-8, atol=1e-10)


def test_batched_engine_matches_statsmodels_per_replicate():
    """statsmodels OLS on each replicate's rows vs the raw engine's cross-product fits (1e-8).

    The first block's stream gives the replicates' rows in order, so the data can be rebuilt."""
    R, n = 6, 40
    arrays = run_replicates(ORCHARD, n, R, seed=17, engine="raw", alpha=0.1)
    rows = draw_rows(ORCHARD, n, R, np.random.default_rng(block_seed(17, 0)))
    for r in range(R):
        df = pd.DataFrame(np.array(rows[r]), columns=ORCHARD.names)
        for s_index, s in enumerate(ORCHARD.strategies):
            expected = statsmodels_ols(df, "pruning_hours", "apple_yield", s.adjust, 0.1)
            got = (
                arrays.estimate[r, s_index],
                arrays.se[r, s_index],
                arrays.ci_low[r, s_index],
                arrays.ci_high[r, s_index],
                arrays.p_value[r, s_index],
                arrays.df[s_index],
            )
            np.testing.assert_allclose(got, expected, rtol=1e-8, atol=1e-10)


def test_also_coefficients_match_statsmodels():
    """statsmodels OLS: the coefficient and SE of an adjusted variable named in question.also (1e-8)."""
    sc = ORCHARD.replace(
        question=ORCHARD.question.__class__("pruning_hours", "apple_yield", also=("irrigation",))
    )
    arrays = run_replicates(sc, 50, 3, seed=4, engine="raw")
    rows = draw_rows(sc, 50, 3, np.random.default_rng(block_seed(4, 0)))
    for r in range(3):
        df = pd.DataFrame(np.array(rows[r]), columns=sc.names)
        fit = sm.OLS(df["apple_yield"], sm.add_constant(df[["pruning_hours", "slope", "irrigation"]])).fit()
        np.testing.assert_allclose(arrays.also_estimate[r, 2, 0], fit.params["irrigation"], rtol=1e-8)
        np.testing.assert_allclose(arrays.also_se[r, 2, 0], fit.bse["irrigation"], rtol=1e-8)
        assert np.isnan(arrays.also_estimate[r, 0, 0])


def test_linear_probability_model_matches_statsmodels_hc3():
    """statsmodels OLS(cov_type="HC3"): estimate, robust SE, normal interval and p-value (1e-8)."""
    df = draw(DEPOT, 400, seed=5)
    row = estimate(DEPOT, df).set_index("strategy").loc["lpm"]
    expected = statsmodels_ols(df, "trained", "accident", ["shift_length"], 0.05, cov_type="HC3")
    got = (row["estimate"], row["se"], row["ci_low"], row["ci_high"], row["p_value"])
    np.testing.assert_allclose(got, expected[:5], rtol=1e-8)


def test_logit_strategy_matches_statsmodels_logit():
    """statsmodels Logit: coefficient and SE of the exposure (1e-6)."""
    df = draw(DEPOT, 400, seed=6)
    row = estimate(DEPOT, df).set_index("strategy").loc["logit"]
    fit = sm.Logit(df["accident"], sm.add_constant(df[["trained", "shift_length"]])).fit(disp=0)
    np.testing.assert_allclose(
        [row["estimate"], row["se"]], [fit.params["trained"], fit.bse["trained"]], rtol=1e-6
    )
    assert row["ci_low"] == pytest.approx(fit.conf_int().loc["trained", 0], rel=1e-6)


def test_estimate_names_the_bad_column():
    """Common practice, no source: a data set without a scenario variable gets a one-line error naming the
    missing column; a bad column is named as ``data['name']``."""
    df = draw(ORCHARD, 30, seed=1)
    with pytest.raises(wb.DataError, match="^data: no column 'slope'"):
        estimate(ORCHARD, df.drop(columns="slope"))
    df["slope"] = df["slope"].astype(str)
    with pytest.raises(wb.DataError, match=r"^data\['slope'\]: must be numeric"):
        estimate(ORCHARD, df)
    df = draw(ORCHARD, 30, seed=1)
    df.loc[3, "irrigation"] = np.nan
    with pytest.raises(wb.DataError, match=r"^data\['irrigation'\]: has 1 missing value"):
        estimate(ORCHARD, df)


def test_estimate_refuses_a_non_binary_binary_column_and_too_few_rows():
    """Common practice, no source: a binary variable of the scenario must hold 0 and 1 only, and a
    regression needs more rows than coefficients."""
    df = draw(DEPOT, 30, seed=1)
    binary = next(v.name for v in DEPOT.variables if v.is_binary and v.name in df)
    df.loc[0, binary] = 2.0
    with pytest.raises(wb.DataError, match=rf"^data\['{binary}'\]: is binary in the scenario"):
        estimate(DEPOT, df)
    widest = max(s.n_coefficients for s in ORCHARD.strategies)
    small = draw(ORCHARD, widest, seed=1)
    with pytest.raises(wb.DataError, match=rf"^data: {widest} rows are too few for strategy"):
        estimate(ORCHARD, small)
    assert len(estimate(ORCHARD, draw(ORCHARD, widest + 1, seed=1))) == len(ORCHARD.strategies)


def test_estimate_fills_in_the_default_strategies():
    """Common practice, no source: a scenario without strategies is estimated with the defaults the graph
    layer gives it, as a simulation would be."""
    bare = dataclasses.replace(ORCHARD, strategies=())
    table = estimate(bare, draw(ORCHARD, 50, seed=2))
    assert list(table["strategy"]) == [s.name for s in with_default_strategies(bare).strategies]
