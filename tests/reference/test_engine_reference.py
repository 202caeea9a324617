"""The Monte Carlo engine against outside facts: scipy's Wishart distribution, the omitted-variable-bias formula,
the exactness of the t interval, path tracing, and the practitioner's reading of confounders and instruments."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

import workbench as wb
from workbench.analysis.simulate import simulate
from workbench.engine import truth
from workbench.engine.generate import calibrate_intercepts
from workbench.engine.replicates import run_replicates
from workbench.engine.wishart import draw_wishart
from workbench.graph import linear


def build(arrows, exposure, outcome, strategies, variables=None, study=""):
    variables = dict(variables or {})
    names = []
    for a, b, _ in arrows:
        for v in (a, b):
            if v not in names:
                names.append(v)
    text = f'title = "t"\n[question]\nexposure = "{exposure}"\noutcome = "{outcome}"\n'
    for name in names:
        text += f"[variables.{name}]\n{variables.get(name, '')}\n"
    for a, b, e in arrows:
        text += f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = {e!r}\n'
    for name, adjust in strategies:
        items = ", ".join(f'"{v}"' for v in adjust)
        text += f'[[strategies]]\nname = "{name}"\nadjust = [{items}]\n'
    return wb.loads_scenario(text + study)


# A farm: soil quality drives both fertiliser use and yield; rainfall only raises yield.
FARM = build(
    [
        ("soil", "fertiliser", 0.6),
        ("soil", "crop_yield", 0.5),
        ("fertiliser", "crop_yield", 0.25),
        ("rainfall", "crop_yield", 0.4),
    ],
    "fertiliser",
    "crop_yield",
    [("unadjusted", ()), ("adjust_soil", ("soil",)), ("adjust_soil_rain", ("soil", "rainfall"))],
    variables={"crop_yield": "baseline = 5.0\nnoise_sd = 1.5"},
)


def test_wishart_mean_matches_scipy():
    """scipy.stats.wishart(df, scale).mean() = df x Sigma; every entry within 4 Monte Carlo SEs
    (the SEs from scipy.stats.wishart(...).var())."""
    sigma = np.array([[2.0, 0.6, -0.3], [0.6, 1.0, 0.2], [-0.3, 0.2, 0.5]])
    df, N = 12, 40_000
    draws = draw_wishart(sigma, df, N, np.random.default_rng(3))
    reference = stats.wishart(df=df, scale=sigma)
    mcse = np.sqrt(reference.var() / N)
    assert np.all(np.abs(draws.mean(axis=0) - reference.mean()) < 4 * mcse)
    assert np.allclose(draws, draws.transpose(0, 2, 1))


def test_wishart_variance_matches_scipy():
    """scipy.stats.wishart(...).var(): entrywise variance df (s_ij^2 + s_ii s_jj), within 10%."""
    sigma = np.array([[1.0, 0.5], [0.5, 2.0]])
    draws = draw_wishart(sigma, 7, 40_000, np.random.default_rng(4))
    np.testing.assert_allclose(draws.var(axis=0), stats.wishart(df=7, scale=sigma).var(), rtol=0.1)


def test_exact_engine_is_distributed_as_the_raw_engine():
    """Wishart theory (Anderson 2003, sec. 7.2, from memory): the centred cross-products of Gaussian rows are
    Wishart(n - 1, Sigma), so both engines give the same distribution of estimates. Two-sample KS test
    (scipy.stats.ks_2samp) on each strategy's estimates and SEs; means and SDs within 4 combined MCSEs."""
    R, n = 3000, 25
    exact = run_replicates(FARM, n, R, seed=101, engine="exact")
    raw = run_replicates(FARM, n, R, seed=202, engine="raw")
    for s in range(3):
        for field in ("estimate", "se"):
            a, b = getattr(exact, field)[:, s], getattr(raw, field)[:, s]
            assert stats.ks_2samp(a, b).pvalue > 1e-3, (s, field)
        a, b = exact.estimate[:, s], raw.estimate[:, s]
        sd_a, sd_b = a.std(ddof=1), b.std(ddof=1)
        assert abs(a.mean() - b.mean()) < 4 * np.hypot(sd_a, sd_b) / np.sqrt(R)
        assert abs(sd_a - sd_b) < 4 * np.hypot(sd_a, sd_b) / np.sqrt(2 * (R - 1))


def test_unadjusted_mean_matches_the_omitted_variable_bias_formula():
    """Wooldridge, Introductory Econometrics, sec. 3.3: E[short-regression slope] = beta_1 + beta_2 delta_1 with
    delta_1 the slope of the omitted soil on fertiliser, cov(soil, fertiliser) / var(fertiliser) = 0.6 / 1.36."""
    result = simulate(FARM, n=80, replicates=4000, seed=9)
    row = result.table.set_index("name").loc["unadjusted"]
    expected = 0.25 + 0.5 * 0.6 / 1.36
    assert abs(row["mean"] - expected) < 4 * row["bias_mcse"]
    assert row["bias"] == pytest.approx(0.5 * 0.6 / 1.36, abs=4 * row["bias_mcse"])


def test_valid_strategy_covers_at_the_nominal_rate():
    """Classical linear model with Gaussian errors (Seber & Lee 2003, ch. 5): the t interval is exact, so the
    coverage of a valid strategy is 0.95 within 3 MCSEs; the confounded one undercovers."""
    result = simulate(FARM, n=40, replicates=4000, seed=12)
    table = result.table.set_index("name")
    for name in ("adjust_soil", "adjust_soil_rain"):
        assert abs(table.loc[name, "coverage"] - 0.95) < 3 * table.loc[name, "coverage_mcse"]
        assert abs(table.loc[name, "bias"]) < 4 * table.loc[name, "bias_mcse"]
    assert table.loc["unadjusted", "coverage"] < 0.9


def test_confounder_moves_estimate_instrument_inflates_se():
    """Common practice, no source: adjusting for a true confounder moves the estimate a lot while its SE barely
    changes, whereas adjusting for a strong cause of the exposure alone (an instrument) inflates the SE."""
    sc = build(
        [
            ("workload", "overtime", 1.0),
            ("workload", "errors", 0.5),
            ("overtime", "errors", 0.25),
            ("rota_rule", "overtime", 2.0),
        ],
        "overtime",
        "errors",
        [("unadjusted", ()), ("adjust_workload", ("workload",)), ("adjust_rota", ("rota_rule",))],
    )
    table = simulate(sc, n=200, replicates=2000, seed=4).table.set_index("name")
    confounder, instrument = table.loc["adjust_workload"], table.loc["adjust_rota"]
    assert abs(confounder["change_in_estimate_median"]) > 0.2
    assert confounder["share_change_over_10pct"] > 0.5
    assert 0.9 < confounder["se_ratio"] < 1.1  # large-sample value 0.996
    assert instrument["se_ratio"] > 1.4  # large-sample value sqrt((1.125 / 2) / (1.2083 / 6)) = 1.67
    assert instrument["vif"] > 2.5  # var(overtime) / var(overtime | rota_rule) = 6 / 2


def test_simulated_truth_agrees_with_path_tracing():
    """Wright (1934): the total effect is the sum over directed paths of the products of effects. The simulated
    intervention (common random numbers) on a linear-Gaussian graph must give the same number."""
    sc = build(
        [
            ("demand", "staff", 0.5),
            ("staff", "packing_speed", 0.8),
            ("packing_speed", "shipped", 1.2),
            ("staff", "shipped", 0.3),
            ("demand", "shipped", 0.7),
        ],
        "staff",
        "shipped",
        [("unadjusted", ())],
    )
    closed = truth.true_effect(sc)
    assert closed.method == "closed form"
    names = sc.names
    assert closed.value == pytest.approx(
        linear.total_effects(sc)[names.index("staff"), names.index("shipped")]
    )
    value, mcse = truth.simulated_effect(sc.variables, sc.arrows, "staff", "shipped", "difference")
    assert value == pytest.approx(0.3 + 0.8 * 1.2, abs=1e-9)
    assert abs(value - closed.value) <= 4 * mcse + 1e-9


def test_simulated_truth_with_binary_exposure_follows_path_tracing():
    """Wright (1934) with a binary exposure: descendants are linear in the exposure, so
    E[Y | do(X=1)] - E[Y | do(X=0)] is still the sum of path products (1.0 x 0.5 + 0.4 = 0.9)."""
    sc = build(
        [
            ("depot_size", "new_scanner", 0.7),
            ("new_scanner", "pick_rate", 1.0),
            ("pick_rate", "orders", 0.5),
            ("new_scanner", "orders", 0.4),
            ("depot_size", "orders", 1.0),
        ],
        "new_scanner",
        "orders",
        [("unadjusted", ())],
        variables={"new_scanner": 'type = "binary"\nproportion = 0.4'},
    )
    t = truth.true_effect(sc)
    assert t.method == "simulated intervention" and t.mcse < 1e-9
    assert t.value == pytest.approx(0.9, abs=max(4 * t.mcse, 1e-9))


def test_binary_outcome_truth_matches_the_logistic_model():
    """Logistic model definition (from memory): with a randomised binary exposure as the outcome's only cause,
    the marginal risk difference is expit(a + b) - expit(a) and the marginal log odds ratio equals b."""
    sc = build(
        [("free_shipping", "repeat_order", 0.9)],
        "free_shipping",
        "repeat_order",
        [("unadjusted", ())],
        variables={
            "free_shipping": 'type = "binary"\nproportion = 0.5',
            "repeat_order": 'type = "binary"\nproportion = 0.3',
        },
    )
    a = calibrate_intercepts(sc)["repeat_order"]
    rd = truth.true_effect(sc, "difference")
    assert rd.value == pytest.approx(special.expit(a + 0.9) - special.expit(a), abs=1e-9)
    assert truth.true_effect(sc, "log_odds_ratio").value == pytest.approx(0.9, abs=1e-9)
    # the calibrated intercept reproduces the 30% share, up to the calibration's own Monte Carlo error
    # (2**20 draws of the exposure: SE of its share 0.0005, times the slope of the share in it, about 0.2)
    assert 0.5 * special.expit(a) + 0.5 * special.expit(a + 0.9) == pytest.approx(0.3, abs=4e-4)
