"""The built-in presets: each loads, survives a round trip, and teaches its lesson in numbers.

For the all-continuous presets the lesson is checked in closed form: the large-sample regression of
:mod:`workbench.graph.linear` is compared with formulas worked out by hand from the preset's effect sizes
(omitted-variable bias, Wooldridge sec. 3.3; path tracing, Wright 1934; Gaussian conditioning), so the test
checks both the preset and the algebra. Thresholds that say a bias is "material" or a power curve is
"informative" are house conventions (common practice, no source).
"""

from __future__ import annotations

import itertools
import math
import re

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import expit
from scipy.stats import norm

from workbench import load_preset, loads_scenario
from workbench.graph import find_roles, linear
from workbench.scenario.presets import DEFAULT_PRESET, list_presets
from workbench.scenario.write import dumps_scenario

PRESETS = sorted(list_presets())
MATERIAL = 0.2  # a bias of at least 20% of the true effect counts as material (common practice, no source)


# --------------------------------------------------------------------------------------------------------
# Helpers
# --------------------------------------------------------------------------------------------------------
def _effects(sc) -> dict[tuple[str, str], float]:
    return {(a.source, a.target): a.effect for a in sc.arrows}


def _sd(sc, name: str) -> float:
    return sc.variable(name).noise_sd


def _fit(sc, adjust):
    """Population (large-sample) OLS of the outcome on the exposure and ``adjust``."""
    sigma = linear.implied_covariance(sc)
    x, y = sc.question.exposure, sc.question.outcome
    return linear.population_regression(sigma, sc.names, y, [x, *adjust])


def _estimate(sc, strategy_name: str) -> tuple[float, float]:
    """(large-sample estimate, SE factor) of a named strategy."""
    fit = _fit(sc, sc.strategy(strategy_name).adjust)
    return fit.coefficients[sc.question.exposure], fit.se_factor


def _approx_power(estimate: float, se_factor: float, n: int, alpha: float) -> float:
    """Normal-approximation power of the two-sided Wald test at sample size n (common practice, no source)."""
    shift = abs(estimate) * math.sqrt(n) / se_factor
    z = norm.ppf(1 - alpha / 2)
    return float(norm.cdf(shift - z) + norm.cdf(-shift - z))


# --------------------------------------------------------------------------------------------------------
# Every preset
# --------------------------------------------------------------------------------------------------------
def test_there_are_at_least_eleven_presets_and_the_default_exists():
    """Issue 2 section 6: at least 11 presets, the common-cause one the default (project rule, no source)."""
    assert len(PRESETS) >= 11
    assert DEFAULT_PRESET in PRESETS


@pytest.mark.parametrize("name", PRESETS)
def test_preset_loads_with_the_house_conventions(name):
    """Title, a 2-3 sentence summary, a label for every variable, explicit strategies and the study settings
    the presets share (project conventions; common practice, no source)."""
    sc = load_preset(name)
    assert sc.title.strip()
    assert sc.summary and 2 <= len(re.findall(r"[.!?](\s|$)", sc.summary.strip())) <= 3
    for v in sc.variables:
        assert v.label, f"{name}: variable {v.name} has no label"
    assert sc.strategies_given and len(sc.strategies) >= 2
    assert sc.strategies[0].adjust == (), "the first strategy is the unadjusted one"
    study = sc.study
    assert study.replicates == 2000 and study.alpha == 0.05 and study.target_power == 0.8
    assert 5 <= len(study.sample_sizes) <= 8


@pytest.mark.parametrize("name", PRESETS)
def test_preset_round_trips(name):
    """dumps_scenario then load_scenario gives an equal scenario (issue 2 section 2; no outside source)."""
    sc = load_preset(name)
    again = loads_scenario(dumps_scenario(sc))
    assert again == sc
    assert dumps_scenario(again) == dumps_scenario(sc)


# --------------------------------------------------------------------------------------------------------
# Lessons of the linear presets, one check each
# --------------------------------------------------------------------------------------------------------
def lesson_common_cause(sc):
    """Omitted-variable bias (Wooldridge, Introductory Econometrics, sec. 3.3): the short regression's slope
    is beta_X + beta_C * cov(X, C) / var(X); adjusting for the common cause C removes the bias."""
    e = _effects(sc)
    a, c, b = (
        e["soil_quality", "fertiliser"],
        e["soil_quality", "wheat_yield"],
        e["fertiliser", "wheat_yield"],
    )
    var_c = _sd(sc, "soil_quality") ** 2
    var_x = a**2 * var_c + _sd(sc, "fertiliser") ** 2
    short = b + c * (a * var_c) / var_x
    assert _estimate(sc, "unadjusted")[0] == pytest.approx(short, rel=1e-10)
    assert abs(short - b) >= MATERIAL * abs(b)
    assert _estimate(sc, "adjust_soil")[0] == pytest.approx(b, rel=1e-10)
    return "adjust_soil"


def lesson_mediator(sc):
    """Path tracing (Wright 1934): total effect = direct + product along the mediated path; the unadjusted
    slope equals it, and adjusting for the mediator leaves only the direct arrow."""
    e = _effects(sc)
    direct, a, c = e["training", "output"], e["training", "skill"], e["skill", "output"]
    total = direct + a * c
    assert linear.total_effects(sc)[sc.names.index("training"), sc.names.index("output")] == pytest.approx(
        total
    )
    assert _estimate(sc, "unadjusted")[0] == pytest.approx(total, rel=1e-10)
    assert _estimate(sc, "adjust_skill")[0] == pytest.approx(direct, rel=1e-10)
    assert abs(a * c) >= MATERIAL * abs(total)
    return "unadjusted"


def lesson_common_effect(sc):
    """Adjusting for a common effect K of X and Y biases the slope (Greenland, Pearl & Robins 1999). Value by
    Gaussian conditioning (common practice, no source): with Y = bX + e_Y and K = k1 X + k2 Y + e_K, the
    coefficient of X given K is b - w (k1 + k2 b), w = k2 var(e_Y) / (k2^2 var(e_Y) + var(e_K))."""
    e = _effects(sc)
    b, k1, k2 = e["padding", "breakage"], e["padding", "complaints"], e["breakage", "complaints"]
    var_ey, var_ek = _sd(sc, "breakage") ** 2, _sd(sc, "complaints") ** 2
    w = k2 * var_ey / (k2**2 * var_ey + var_ek)
    expected = b - w * (k1 + k2 * b)
    assert _estimate(sc, "unadjusted")[0] == pytest.approx(b, rel=1e-10)
    adjusted, adjusted_se = _estimate(sc, "adjust_complaints")
    assert adjusted == pytest.approx(expected, rel=1e-10)
    assert abs(adjusted - b) >= MATERIAL * abs(b)
    assert adjusted_se < _estimate(sc, "unadjusted")[1]  # the biased estimate even looks more precise
    return "unadjusted"


def lesson_m_bias(sc):
    """M-shaped graph (Greenland, Pearl & Robins 1999; Cinelli, Forney & Pearl 2022, model 7, from memory):
    the pre-exposure collider alone opens a path and biases; adding one of its parents closes it again."""
    b = _effects(sc)["supplement", "milk_yield"]
    assert _estimate(sc, "unadjusted")[0] == pytest.approx(b, rel=1e-10)
    assert abs(_estimate(sc, "adjust_rating")[0] - b) >= MATERIAL * abs(b)
    assert _estimate(sc, "adjust_rating_experience")[0] == pytest.approx(b, rel=1e-10)
    return "unadjusted"


def lesson_instrument_latent_confounder(sc):
    """Bias amplification (Pearl 2010; Wooldridge 2016): with X = aZ + cU + e_X, Y = bX + dU + e_Y and Z, U
    independent, the unadjusted bias is c d var(U) / var(X) (omitted-variable bias, Wooldridge sec. 3.3) and
    adjusting for the instrument Z divides by var(X | Z) instead, multiplying the bias by var(X) / var(X | Z);
    the SE factor grows too."""
    e = _effects(sc)
    a, c = e["canal_distance", "irrigation"], e["diligence", "irrigation"]
    d, b = e["diligence", "harvest"], e["irrigation", "harvest"]
    var_z, var_u, var_ex = (
        _sd(sc, "canal_distance") ** 2,
        _sd(sc, "diligence") ** 2,
        _sd(sc, "irrigation") ** 2,
    )
    var_x = a**2 * var_z + c**2 * var_u + var_ex
    var_x_given_z = c**2 * var_u + var_ex
    unadjusted, se_unadjusted = _estimate(sc, "unadjusted")
    adjusted, se_adjusted = _estimate(sc, "adjust_canal_distance")
    assert unadjusted - b == pytest.approx(c * d * var_u / var_x, rel=1e-10)
    assert adjusted - b == pytest.approx(c * d * var_u / var_x_given_z, rel=1e-10)
    assert abs(unadjusted - b) >= MATERIAL * abs(b)
    assert abs(adjusted - b) > abs(unadjusted - b)
    assert se_adjusted > se_unadjusted
    return "unadjusted"


def lesson_outcome_cause(sc):
    """A cause W of the outcome only, independent of X: both slopes equal b; the SE factor is
    sqrt((w^2 var W + var e_Y) / var X) unadjusted and sqrt(var e_Y / var X) adjusted (Cinelli, Forney &
    Pearl 2022, model 8, from memory; formula common practice, no source)."""
    e = _effects(sc)
    b, w = e["proofing_time", "loaf_volume"], e["kitchen_temperature", "loaf_volume"]
    var_x, var_w = _sd(sc, "proofing_time") ** 2, _sd(sc, "kitchen_temperature") ** 2
    var_e = _sd(sc, "loaf_volume") ** 2
    unadjusted, se_unadjusted = _estimate(sc, "unadjusted")
    adjusted, se_adjusted = _estimate(sc, "adjust_temperature")
    assert unadjusted == pytest.approx(b) and adjusted == pytest.approx(b)
    assert se_unadjusted == pytest.approx(math.sqrt((w**2 * var_w + var_e) / var_x), rel=1e-10)
    assert se_adjusted == pytest.approx(math.sqrt(var_e / var_x), rel=1e-10)
    assert se_adjusted < 0.75 * se_unadjusted
    return "adjust_temperature"


def lesson_noisy_confounder(sc):
    """A proxy P = C + error of a latent confounder C: by the omitted-variable-bias formula with an auxiliary
    regression (Wooldridge sec. 3.3), the bias after adjusting for P is beta_C times the coefficient of X in
    the population regression of C on (X, P); it is smaller than the unadjusted bias, of the same sign, and
    not zero."""
    e = _effects(sc)
    a, c = e["severity", "physio"], e["severity", "recovery_days"]
    b, lam = e["physio", "recovery_days"], e["severity", "intake_grade"]
    var_c = _sd(sc, "severity") ** 2
    var_x = a**2 * var_c + _sd(sc, "physio") ** 2
    var_p = lam**2 * var_c + _sd(sc, "intake_grade") ** 2
    cov_xp, cov_cx, cov_cp = a * lam * var_c, a * var_c, lam * var_c
    delta_x = np.linalg.solve(np.array([[var_x, cov_xp], [cov_xp, var_p]]), np.array([cov_cx, cov_cp]))[0]
    unadjusted = _estimate(sc, "unadjusted")[0]
    adjusted = _estimate(sc, "adjust_intake_grade")[0]
    assert unadjusted - b == pytest.approx(c * cov_cx / var_x, rel=1e-10)
    assert adjusted - b == pytest.approx(c * delta_x, rel=1e-10)
    assert 0 < (adjusted - b) / (unadjusted - b) < 1
    assert abs(adjusted - b) >= MATERIAL * abs(b)
    return "adjust_intake_grade"


def lesson_latent_confounder(sc):
    """No valid set: every subset of the observed covariates leaves a material large-sample bias, equal to
    the omitted-variable bias c d var(U) / var(X) here because the observed covariate is independent of X
    (Wooldridge sec. 3.3)."""
    e = _effects(sc)
    c, d, b = e["culture", "review_hours"], e["culture", "incidents"], e["review_hours", "incidents"]
    var_u = _sd(sc, "culture") ** 2
    var_x = c**2 * var_u + _sd(sc, "review_hours") ** 2
    x, y = sc.question.exposure, sc.question.outcome
    covariates = [n for n in sc.observed_names if n not in (x, y)]
    for size in range(len(covariates) + 1):
        for subset in itertools.combinations(covariates, size):
            estimate = _fit(sc, list(subset)).coefficients[x]
            assert estimate - b == pytest.approx(c * d * var_u / var_x, rel=1e-10)
            assert abs(estimate - b) >= MATERIAL * abs(b)
    assert _estimate(sc, "adjust_service_age")[1] < _estimate(sc, "unadjusted")[1]
    return None


def lesson_two_exposures(sc):
    """Two correlated exposures: the slope of X1 alone is b1 + b2 cov(X1, X2) / var(X1) (omitted-variable
    bias, Wooldridge sec. 3.3); with both in the model each gets its own arrow, and the VIF of X1 is
    1 / (1 - rho^2) (the OLS variance formula, Wooldridge ch. 3, from memory)."""
    e = _effects(sc)
    g1, g2 = e["energy_budget", "lighting"], e["energy_budget", "heating"]
    b1, b2 = e["lighting", "tomato_yield"], e["heating", "tomato_yield"]
    var_u = _sd(sc, "energy_budget") ** 2
    var_1 = g1**2 * var_u + _sd(sc, "lighting") ** 2
    var_2 = g2**2 * var_u + _sd(sc, "heating") ** 2
    cov_12 = g1 * g2 * var_u
    rho2 = cov_12**2 / (var_1 * var_2)
    assert _estimate(sc, "unadjusted")[0] == pytest.approx(b1 + b2 * cov_12 / var_1, rel=1e-10)
    fit = _fit(sc, ["heating"])
    assert fit.coefficients["lighting"] == pytest.approx(b1, rel=1e-10)
    assert fit.coefficients["heating"] == pytest.approx(b2, rel=1e-10)
    assert fit.vif == pytest.approx(1 / (1 - rho2), rel=1e-10)
    assert rho2 >= 0.5**2  # strongly correlated: separating them costs precision
    assert sc.question.also == ("heating",)
    return "adjust_heating"


def lesson_larger_graph(sc):
    """Path tracing (Wright 1934) gives the truth; the valid sets have no large-sample bias, the invalid ones
    a material bias, and the optimal set O(X, Y) has the smallest SE factor among the valid strategies
    (Henckel, Perkovic & Maathuis 2022). Every role the brief asks for is present (common practice, no
    source)."""
    e = _effects(sc)
    truth = e["training", "throughput"] + e["training", "skill"] * e["skill", "throughput"]
    valid = ("adjust_confounders", "adjust_optimal", "add_distance")
    invalid = ("unadjusted", "add_audit_score", "add_skill", "adjust_all")
    for name in valid:
        assert _estimate(sc, name)[0] == pytest.approx(truth, rel=1e-10), name
    for name in invalid:
        assert abs(_estimate(sc, name)[0] - truth) >= MATERIAL * abs(truth), name
    se = {name: _estimate(sc, name)[1] for name in valid}
    assert min(se, key=se.get) == "adjust_optimal"
    assert len(sc.variables) >= 8 and sc.latent_names
    roles = {role for found in find_roles(sc).values() for role, _ in found}
    wanted = {
        "confounder",
        "mediator",
        "common_effect",
        "instrument",
        "outcome_cause",
        "pre_exposure_collider",
    }
    assert wanted <= roles
    return "adjust_confounders"


def lesson_selection_by_significance(sc):
    """Omitted-variable bias (Wooldridge sec. 3.3): dropping the confounder C gives b + c cov(X, C) / var(X),
    a material bias; the fixed set {C} and the full candidate set are unbiased in large samples. Both rules
    keep C as n grows (its population coefficient and its change in estimate are not zero; Mickey & Greenland
    1989, from memory), so the cost of selection shown by the simulation is a small-sample one: at the study's
    n the t statistic of C in the full model is modest (common practice, no source). A strategy with a
    selection rule is judged here by its full candidate set."""
    from workbench.analysis.check import large_sample_selection

    e = _effects(sc)
    a, c, b = e["complexity", "review_hours"], e["complexity", "defects"], e["review_hours", "defects"]
    var_c = _sd(sc, "complexity") ** 2
    var_x = a**2 * var_c + _sd(sc, "review_hours") ** 2
    assert _estimate(sc, "unadjusted")[0] == pytest.approx(b + c * a * var_c / var_x, rel=1e-10)
    assert abs(c * a * var_c / var_x) >= MATERIAL * abs(b)
    for name in ("adjust_complexity", "select_by_p_value", "select_by_change"):
        assert _estimate(sc, name)[0] == pytest.approx(b, rel=1e-10), name
    for name in ("select_by_p_value", "select_by_change"):
        assert sc.strategy(name).selection is not None
        assert "complexity" in large_sample_selection(sc, sc.strategy(name))
    # C's coefficient in the full model: c with SE factor sqrt(var(e_Y) / var(C | X, W)); its expected t
    # statistic at the study's n is below 2.5, so it is often not significant
    full = _fit(sc, ["complexity", "team_experience"])
    var_c_given_x = var_c * _sd(sc, "review_hours") ** 2 / var_x
    t_c = abs(c) * math.sqrt(sc.study.n) / (_sd(sc, "defects") / math.sqrt(var_c_given_x))
    assert full.coefficients["complexity"] == pytest.approx(c, rel=1e-10)
    assert 1.0 < t_c < 2.5
    return "adjust_complexity"


LESSONS = {
    "common_cause": lesson_common_cause,
    "mediator": lesson_mediator,
    "common_effect": lesson_common_effect,
    "m_bias": lesson_m_bias,
    "instrument_latent_confounder": lesson_instrument_latent_confounder,
    "outcome_cause": lesson_outcome_cause,
    "noisy_confounder": lesson_noisy_confounder,
    "latent_confounder": lesson_latent_confounder,
    "two_exposures": lesson_two_exposures,
    "larger_graph": lesson_larger_graph,
    "selection_by_significance": lesson_selection_by_significance,
}


@pytest.mark.parametrize("name", sorted(LESSONS))
def test_linear_preset_teaches_its_lesson(name):
    """See each lesson's docstring for its source; then the key strategy's power curve must be informative:
    below 0.6 at the smallest planned size and above 0.75 at the largest (normal approximation, common
    practice, no source)."""
    if name not in PRESETS:
        pytest.fail(f"preset {name} is missing")
    sc = load_preset(name)
    assert sc.is_linear_gaussian
    key = LESSONS[name](sc)
    if key is None:
        return
    estimate, se_factor = _estimate(sc, key)
    powers = [_approx_power(estimate, se_factor, n, sc.study.alpha) for n in sc.study.sample_sizes]
    assert powers[0] < 0.6 and powers[-1] > 0.75, powers
    assert 0.3 < _approx_power(estimate, se_factor, sc.study.n, sc.study.alpha) < 0.99


def test_binary_exposure_preset_is_confounded_by_the_shift():
    """Binary exposure X, binary confounder C, continuous outcome: by the omitted-variable-bias formula
    (Wooldridge sec. 3.3), with X binary the auxiliary slope is P(C=1 | X=1) - P(C=1 | X=0), so the unadjusted
    difference in means is b + g (P(C=1 | X=1) - P(C=1 | X=0)). The intercept of X is calibrated here by
    exact enumeration over C (independent of the engine's calibration)."""
    if "binary_exposure" not in PRESETS:
        pytest.fail("preset binary_exposure is missing")
    sc = load_preset("binary_exposure")
    e = _effects(sc)
    p_c, p_x = sc.variable("night_shift").proportion, sc.variable("scanner").proportion
    slope_cx = e["night_shift", "scanner"]
    g, b = e["night_shift", "picks_per_hour"], e["scanner", "picks_per_hour"]
    a = brentq(lambda a: p_c * expit(a + slope_cx) + (1 - p_c) * expit(a) - p_x, -30, 30)
    p_x_c1 = expit(a + slope_cx)
    delta = p_c * p_x_c1 / p_x - p_c * (1 - p_x_c1) / (1 - p_x)
    unadjusted = b + g * delta
    assert sc.exposure.is_binary and sc.variable("night_shift").is_binary and not sc.outcome.is_binary
    assert abs(unadjusted - b) >= MATERIAL * abs(b)
    # Adjusted for C the regression is saturated in C and linear in X, so its slope is b exactly; its power
    # curve must be informative (normal approximation with var(X | C), common practice, no source).
    var_x_given_c = p_c * p_x_c1 * (1 - p_x_c1) + (1 - p_c) * expit(a) * (1 - expit(a))
    se_factor = sc.outcome.noise_sd / math.sqrt(var_x_given_c)
    powers = [_approx_power(b, se_factor, n, sc.study.alpha) for n in sc.study.sample_sizes]
    assert powers[0] < 0.6 and powers[-1] > 0.75, powers
