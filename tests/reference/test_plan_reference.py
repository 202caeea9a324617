"""The sample-size planner checked against outside sources: the noncentral t distribution (scipy.stats.nct),
statsmodels' two-sample t-test power (statsmodels.stats.power.TTestIndPower), and Cohen's (1988) table of
sample sizes, from memory."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.power import TTestIndPower

from workbench import load_preset, loads_scenario
from workbench.analysis.plan import plan
from workbench.analysis.plan_search import ABSOLUTE_RESOLUTION, RELATIVE_RESOLUTION
from workbench.analysis.power import analytic_available, noncentral_t_power
from workbench.scenario.presets import list_presets

LINEAR_PRESETS = [
    name
    for name in list_presets()
    if load_preset(name).is_linear_gaussian and analytic_available(load_preset(name))
]


def two_groups(effect: float, sizes=(64, 128, 256), proportion: float = 0.5) -> str:
    """A randomised binary exposure with no covariates: the regression t test is the two-sample t test."""
    return f"""
title = "Oven retrofit and loaf height in small bakeries"
[question]
exposure = "retrofit"
outcome = "loaf_height"
[variables.retrofit]
type = "binary"
proportion = {proportion}
[variables.loaf_height]
noise_sd = 1.0
baseline = 10.0
[[arrows]]
from = "retrofit"
to = "loaf_height"
effect = {effect}
[[strategies]]
name = "unadjusted"
adjust = []
[study]
sample_sizes = {list(sizes)}
replicates = 2000
seed = 19880101
"""


@pytest.mark.parametrize("name", LINEAR_PRESETS)
def test_simulated_power_matches_noncentral_t_on_linear_gaussian_presets(name):
    """Source: the noncentral t distribution (scipy.stats.nct) of the regression t statistic with jointly
    Gaussian regressors (Anderson 2003, An Introduction to Multivariate Statistical Analysis, sec. 4.3, from
    memory). Simulated power within 3 Monte Carlo SEs of the analytic power for n >= 100, every strategy,
    valid or not (an invalid one has a biased but still exactly known population coefficient)."""
    replicates = 2000
    sc = load_preset(name)
    result = plan(sc, sample_sizes=[100, 200, 400], replicates=replicates, seed=20261202)
    # a set chosen from the data or a restricted sample has no closed form: no analytic power for those
    closed_form = [s.name for s in sc.strategies if s.selection is None and not s.restrict]
    assert result.table.loc[~result.table["strategy"].isin(closed_form), "analytic_power"].isna().all()
    table = result.table[result.table["strategy"].isin(closed_form)]
    assert table["analytic_power"].notna().all()
    mcse = np.sqrt(table["analytic_power"] * (1 - table["analytic_power"]) / replicates)
    gap = (table["power"] - table["analytic_power"]).abs()
    assert (gap <= 3 * mcse + 1.0 / replicates).all(), table[gap > 3 * mcse][
        ["n", "strategy", "power", "analytic_power"]
    ]
    if result.also_table is not None:
        also = result.also_table
        mcse = np.sqrt(also["analytic_power"] * (1 - also["analytic_power"]) / replicates)
        assert ((also["power"] - also["analytic_power"]).abs() <= 3 * mcse + 1.0 / replicates).all()


def test_noncentral_t_power_equals_statsmodels_two_sample_power():
    """Source: statsmodels.stats.power.TTestIndPower (pooled two-sample t test, equal groups): power with
    noncentrality d sqrt(n1 n2 / (n1 + n2)) and df = n1 + n2 - 2."""
    reference = TTestIndPower()
    for d in (0.2, 0.5, 0.8):
        for per_group in (10, 26, 64, 393):
            expected = reference.power(effect_size=d, nobs1=per_group, alpha=0.05, ratio=1.0)
            mine = noncentral_t_power(d * math.sqrt(per_group / 2), 2 * per_group - 2, 0.05)
            assert mine == pytest.approx(expected, abs=1e-8)


def binomial_allocation_power(d: float, n: int, alpha: float = 0.05) -> float:
    """TTestIndPower's power averaged over a Binomial(n, 1/2) group size, as the simulation allocates."""
    sizes = np.arange(2, n - 1)
    weights = stats.binom.pmf(sizes, n, 0.5)
    powers = [TTestIndPower().power(d, nobs1=k, alpha=alpha, ratio=(n - k) / k) for k in sizes]
    return float(np.dot(weights, powers) / weights.sum())


def test_randomised_binary_exposure_matches_statsmodels_two_sample_power():
    """Source: statsmodels.stats.power.TTestIndPower (pooled two-sample t test). A randomised binary exposure
    (share 0.5) with no covariates: the regression t test is the two-sample t test. The simulated allocation is
    binomial, not fixed, so the simulated power is compared, within 3 MCSE, with TTestIndPower's power averaged
    over the binomial group sizes (it is 0.006 below the fixed n/2-per-group power at n = 64); the planner's
    analytic column equals the fixed-allocation power."""
    replicates = 4000
    result = plan(loads_scenario(two_groups(0.5)), replicates=replicates, seed=64)
    reference = TTestIndPower()
    for _, row in result.table.iterrows():
        n = int(row["n"])
        expected = binomial_allocation_power(0.5, n)
        mcse = math.sqrt(expected * (1 - expected) / replicates)
        assert abs(row["power"] - expected) <= 3 * mcse
        fixed = reference.power(effect_size=0.5, nobs1=n / 2, alpha=0.05, ratio=1.0)
        assert row["analytic_power"] == pytest.approx(fixed, abs=1e-6)


def test_smallest_n_for_a_medium_effect_matches_statsmodels_and_cohen():
    """Sources: statsmodels.stats.power.TTestIndPower.solve_power (63.77 per group) and Cohen J. (1988),
    Statistical Power Analysis for the Behavioral Sciences, 2nd ed., Table 2.4.1, from memory: d = 0.5,
    alpha 0.05 two-sided, power 0.8 needs about 64 per group, 128 in all. The analytic smallest n is 128; the
    simulated one lies within the search resolution plus the Monte Carlo error of power converted to units
    through the slope of the power curve."""
    replicates = 4000
    per_group = TTestIndPower().solve_power(effect_size=0.5, alpha=0.05, power=0.8, ratio=1.0)
    assert math.ceil(per_group) == 64
    result = plan(
        loads_scenario(two_groups(0.5, sizes=(50, 100, 200, 400))), replicates=replicates, seed=1988
    )
    row = result.smallest_n.iloc[0]
    assert row["analytic_n_for_power"] == 128
    slope = (
        TTestIndPower().power(0.5, 69, 0.05) - TTestIndPower().power(0.5, 59, 0.05)
    ) / 20  # per unit of n
    mc_units = 3 * math.sqrt(0.8 * 0.2 / replicates) / slope
    resolution = max(ABSOLUTE_RESOLUTION, RELATIVE_RESOLUTION * 128)
    assert abs(row["n_for_power"] - 2 * per_group) <= resolution + mc_units
    assert row["valid"] and row["note"] == ""


@pytest.mark.parametrize("d, per_group", [(0.2, 393), (0.5, 64), (0.8, 26)])
def test_analytic_smallest_n_reproduces_cohens_table(d, per_group):
    """Source: Cohen J. (1988), Statistical Power Analysis for the Behavioral Sciences, 2nd ed., Table 2.4.1,
    from memory: at alpha 0.05 two-sided and power 0.8, n per group is 393 (d = 0.2), 64 (d = 0.5) and 26
    (d = 0.8). The planner's analytic smallest n (both groups together) within one per group."""
    result = plan(loads_scenario(two_groups(d, sizes=(40, 80))), replicates=20, seed=1)
    total = int(result.smallest_n.iloc[0]["analytic_n_for_power"])
    assert abs(total / 2 - per_group) <= 1
