"""Restriction against outside references.

Per dataset and per simulated replicate, the restricted fit is OLS on the retained rows: statsmodels 0.15
``statsmodels.api.OLS(...).fit()`` on the subset is the reference (coefficient, classical SE, t interval and
p-value with retained n - p degrees of freedom; 1e-8). That restricting to one value of a binary confounder
removes its confounding, and that a band of a continuous confounder leaves residual confounding that shrinks
as the band narrows, is common practice (no source).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import workbench as wb
from workbench import load_preset
from workbench.analysis.estimate import estimate
from workbench.analysis.simulate import simulate
from workbench.engine.generate import draw, draw_rows
from workbench.engine.replicates import run_replicates
from workbench.engine.streams import block_seed

WAREHOUSE = load_preset("restriction")

FIELD = """
title = "Drip irrigation and harvest by soil quality"
[question]
exposure = "irrigation"
outcome = "harvest"
[variables.soil]
[variables.irrigation]
[variables.harvest]
[[arrows]]
from = "soil"
to = "irrigation"
effect = 1.0
[[arrows]]
from = "soil"
to = "harvest"
effect = 1.0
[[arrows]]
from = "irrigation"
to = "harvest"
effect = 0.5
[[strategies]]
name = "unadjusted"
{bands}
[study]
n = 1000
"""


def statsmodels_subset(df, keep, adjust, alpha):
    sub = df[keep]
    fit = sm.OLS(sub["picks_per_hour"], sm.add_constant(sub[["scanner", *adjust]])).fit()
    low, high = fit.conf_int(alpha=alpha).loc["scanner"]
    return fit.params["scanner"], fit.bse["scanner"], low, high, fit.pvalues["scanner"], fit.df_resid


def _keep(df, strategy):
    keep = np.ones(len(df), dtype=bool)
    for name, value in strategy.restrict:
        if isinstance(value, tuple):
            keep &= (df[name] >= value[0]).to_numpy() & (df[name] <= value[1]).to_numpy()
        else:
            keep &= (df[name] == value).to_numpy()
    return keep


RESTRICTED = [s for s in WAREHOUSE.strategies if s.restrict]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_estimate_on_the_retained_rows_matches_statsmodels(seed):
    """Source: statsmodels OLS on the subset inside the restriction (1e-8)."""
    df = draw(WAREHOUSE, 300, seed=seed)
    table = estimate(WAREHOUSE, df).set_index("strategy")
    for s in RESTRICTED:
        keep = _keep(df, s)
        row = table.loc[s.name]
        assert row["n"] == keep.sum()
        got = (row["estimate"], row["se"], row["ci_low"], row["ci_high"], row["p_value"], row["df"])
        np.testing.assert_allclose(got, statsmodels_subset(df, keep, s.adjust, 0.05), rtol=1e-8, atol=1e-10)


def test_masked_batched_fits_match_statsmodels_per_replicate():
    """Source: statsmodels OLS on each replicate's retained rows vs the raw engine's masked cross-product fits
    (1e-8), with retained n - p degrees of freedom in each replicate. The first block's stream gives the
    replicates' rows in order, so the data can be rebuilt."""
    R, n = 8, 120
    arrays = run_replicates(WAREHOUSE, n, R, seed=17, engine="raw")
    rows = draw_rows(WAREHOUSE, n, R, np.random.default_rng(block_seed(17, 0)))
    for r in range(R):
        df = pd.DataFrame(np.array(rows[r]), columns=WAREHOUSE.names)
        for s in RESTRICTED:
            j = arrays.strategies.index(s.name)
            keep = _keep(df, s)
            assert arrays.retained_n[r, j] == keep.sum()
            got = (
                arrays.estimate[r, j],
                arrays.se[r, j],
                arrays.ci_low[r, j],
                arrays.ci_high[r, j],
                arrays.p_value[r, j],
            )
            expected = statsmodels_subset(df, keep, s.adjust, 0.05)
            np.testing.assert_allclose(got, expected[:5], rtol=1e-8, atol=1e-10)


def test_restricting_to_one_value_of_a_binary_confounder_removes_its_bias():
    """Common practice, no source: within day shifts the shift cannot confound, so restricting to them (and
    adjusting for the other confounder) is unbiased within 3 MCSE and covers at the nominal rate, while the
    unadjusted estimate is biased; the restricted estimate is less precise than adjusting on the whole sample
    because fewer units are analysed."""
    result = simulate(WAREHOUSE, replicates=2000, seed=3)
    assert result.engine == "raw"
    t = result.table.set_index("name")
    day = t.loc["day_shift_adjust_experience"]
    assert abs(day["bias"]) < 3 * day["bias_mcse"]
    assert abs(day["coverage"] - 0.95) < 3 * day["coverage_mcse"]
    assert t.loc["unadjusted", "bias"] > 10 * t.loc["unadjusted", "bias_mcse"]
    assert day["emp_se"] > 1.1 * t.loc["adjust_both", "emp_se"]
    share_day = 1 - WAREHOUSE.variable("night_shift").proportion
    assert day["mean_retained_n"] == pytest.approx(share_day * WAREHOUSE.study.n, rel=0.02)
    band = t.loc["day_shift_experience_band"]
    assert band["bias"] > 3 * band["bias_mcse"]  # the band leaves confounding by experience


def test_band_restriction_leaves_residual_bias_that_shrinks_as_the_band_narrows():
    """Common practice, no source: restricting a continuous confounder to a band leaves confounding within
    the band; the residual bias is material, shrinks with the band's width, and stays below the unadjusted
    bias."""
    bands = ""
    for width in (2.0, 1.0, 0.5):
        bands += f'[[strategies]]\nname = "band_{int(width * 10)}"\nrestrict = {{ soil = [{-width / 2}, {width / 2}] }}\n'
    sc = wb.loads_scenario(FIELD.format(bands=bands))
    result = simulate(sc, replicates=1000, seed=4)
    t = result.table.set_index("name")
    biases = [t.loc[name, "bias"] for name in ("unadjusted", "band_20", "band_10", "band_5")]
    mcse = [t.loc[name, "bias_mcse"] for name in ("unadjusted", "band_20", "band_10", "band_5")]
    for wider, narrower, m1, m2 in zip(biases, biases[1:], mcse, mcse[1:], strict=False):
        assert wider - narrower > 3 * np.hypot(m1, m2)
    assert biases[-1] > 3 * mcse[-1]
    retained = [t.loc[name, "mean_retained_n"] for name in ("band_20", "band_10", "band_5")]
    assert retained[0] > retained[1] > retained[2]
