"""Sensitivity to an unmeasured confounder, checked against the published formulas.

* Cinelli C., Hazlett C. (2020). Making sense of sensitivity: extending omitted variable bias. JRSS-B
  82(1):39-67: the omitted-variable bias in partial-R^2 terms (their Theorem 2), the robustness value, and the
  bounds of section 4.4 (a confounder "k times as strong as" an observed covariate).
* Wooldridge J.M., Introductory Econometrics, sec. 3.3: the short regression's coefficient minus the long
  regression's is the omitted-variable bias; here both regressions are computed with numpy from a covariance
  matrix built by path algebra (Wright 1934; Bollen 1989 ch. 4), independently of workbench.graph.linear.
* VanderWeele T.J., Ding P. (2017). Annals of Internal Medicine 167(4):268-274: the E-value.
"""

from __future__ import annotations

import numpy as np
import pytest

from workbench import loads_scenario
from workbench.analysis.sensitivity import (
    benchmark_bounds,
    e_value,
    robustness_value,
    sensitivity,
)

# c -> x, c -> y, x -> y, and a latent u -> x, u -> y; the strategy adjusts for c (observed) only.
TEMPLATE = """title = "Irrigation scheduling and orchard yield"
[question]
exposure = "x"
outcome = "y"
[variables.c]
noise_sd = 1.0
[variables.w]
noise_sd = 1.5
[variables.u]
noise_sd = 1.0
observed = false
[variables.x]
noise_sd = 1.2
[variables.y]
noise_sd = 0.8
[[arrows]]
from = "c"
to = "x"
effect = 0.5
[[arrows]]
from = "c"
to = "y"
effect = 0.4
[[arrows]]
from = "w"
to = "x"
effect = -0.3
[[arrows]]
from = "w"
to = "y"
effect = 0.6
[[arrows]]
from = "x"
to = "y"
effect = 0.3
[[arrows]]
from = "u"
to = "x"
effect = {a}
[[arrows]]
from = "u"
to = "y"
effect = {b}
[[strategies]]
name = "with_c_w"
adjust = ["c", "w"]
[[strategies]]
name = "with_c"
adjust = ["c"]
[study]
n = 400
"""

ORDER = ["c", "w", "u", "x", "y"]


def _covariance(a: float, b: float) -> np.ndarray:
    """Sigma = (I - B)^-T D (I - B)^-1 from the template's path coefficients (Bollen 1989, ch. 4)."""
    i = {v: k for k, v in enumerate(ORDER)}
    B = np.zeros((5, 5))
    for s, t, e in [
        ("c", "x", 0.5),
        ("c", "y", 0.4),
        ("w", "x", -0.3),
        ("w", "y", 0.6),
        ("x", "y", 0.3),
        ("u", "x", a),
        ("u", "y", b),
    ]:
        B[i[s], i[t]] = e
    A = np.linalg.inv(np.eye(5) - B)
    D = np.diag(np.array([1.0, 1.5, 1.0, 1.2, 0.8]) ** 2)
    return A.T @ D @ A


def _regression(sigma, outcome, regressors):
    """Population least squares from the covariance; returns (coefficients, residual variance)."""
    i = {v: k for k, v in enumerate(ORDER)}
    w = [i[r] for r in regressors]
    beta = np.linalg.solve(sigma[np.ix_(w, w)], sigma[w, i[outcome]])
    return beta, sigma[i[outcome], i[outcome]] - sigma[w, i[outcome]] @ beta


def _partial_r2(sigma, a, b, given):
    """Squared partial correlation from residual variances of the two regressions (Cinelli & Hazlett's
    definition of a partial R^2)."""
    i = {v: k for k, v in enumerate(ORDER)}
    idx = [i[a], i[b]]
    s = sigma[np.ix_(idx, idx)]
    if given:
        g = [i[v] for v in given]
        s = s - sigma[np.ix_(g, idx)].T @ np.linalg.solve(sigma[np.ix_(g, g)], sigma[np.ix_(g, idx)])
    return s[0, 1] ** 2 / (s[0, 0] * s[1, 1])


@pytest.mark.parametrize("strategy", ["with_c_w", "with_c"])
@pytest.mark.parametrize("a,b", [(0.4, 0.5), (1.0, 0.2), (0.15, 1.3), (0.7, 0.7)])
def test_bias_surface_equals_omitted_variable_bias(strategy, a, b):
    """Short minus long regression coefficient (Wooldridge sec. 3.3, from numpy) equals the partial-R^2 bias
    of Cinelli & Hazlett (2020, Theorem 2) at U's own partial R^2, to 1e-9; the adjusted estimate is the
    long regression's coefficient."""
    sc = loads_scenario(TEMPLATE.format(a=a, b=b))
    adjust = ["c", "w"] if strategy == "with_c_w" else ["c"]
    sigma = _covariance(a, b)
    short, _ = _regression(sigma, "y", ["x", *adjust])
    long, _ = _regression(sigma, "y", ["x", *adjust, "u"])
    r2_d = _partial_r2(sigma, "x", "u", adjust)
    r2_y = _partial_r2(sigma, "y", "u", ["x", *adjust])
    res = sensitivity(sc, strategy=strategy, grid=([r2_d], [r2_y]))
    row = res.table.iloc[0]
    assert abs(res.large_sample_estimate - short[0]) < 1e-9
    assert abs(row["bias"] - abs(short[0] - long[0])) < 1e-9
    assert abs(row["estimate"] - long[0]) < 1e-9


def test_bias_surface_over_a_grid_is_the_formula():
    """Every grid point: |bias| = sqrt(R2_yu R2_du / (1 - R2_du)) sd(Y resid) / sd(D resid) (Cinelli & Hazlett
    2020), the residual SDs from numpy's regressions of the covariance."""
    sc = loads_scenario(TEMPLATE.format(a=0.0, b=0.0))
    sigma = _covariance(0.0, 0.0)
    _, y_resid = _regression(sigma, "y", ["x", "c", "w"])
    _, x_resid = _regression(sigma, "x", ["c", "w"])
    res = sensitivity(sc, strategy="with_c_w", grid=7)
    t = res.table
    expected = np.sqrt(t.r2_outcome * t.r2_exposure / (1 - t.r2_exposure)) * np.sqrt(y_resid / x_resid)
    np.testing.assert_allclose(t.bias, expected, rtol=0, atol=1e-9)
    assert len(t) == 49


def test_robustness_value_from_expected_t():
    """RV_1 = (sqrt(f^4 + 4 f^2) - f^2) / 2, f = |t| / sqrt(df) (Cinelli & Hazlett 2020), with the expected t
    at n from the large-sample estimate and SE (numpy regression of the covariance) and df = n - 4 (intercept,
    exposure, two covariates)."""
    sc = loads_scenario(TEMPLATE.format(a=0.0, b=0.0))
    sigma = _covariance(0.0, 0.0)
    beta, y_resid = _regression(sigma, "y", ["x", "c", "w"])
    _, x_resid = _regression(sigma, "x", ["c", "w"])
    for n in (60, 400, 3000):
        t = beta[0] / (np.sqrt(y_resid / x_resid) / np.sqrt(n))
        f = abs(t) / np.sqrt(n - 4)
        expected = (np.sqrt(f**4 + 4 * f**2) - f**2) / 2
        res = sensitivity(sc, strategy="with_c_w", n=n, grid=2)
        assert abs(res.t - t) < 1e-9
        assert abs(res.robustness_value - expected) < 1e-12


def test_robustness_value_brings_the_estimate_to_zero():
    """At R2_du = R2_yu = RV_1 the sample-form bias se sqrt(df) sqrt(RV^2 / (1 - RV)) equals |estimate|
    (the definition of RV in Cinelli & Hazlett 2020, sec. 4.2)."""
    res = sensitivity(loads_scenario(TEMPLATE.format(a=0.0, b=0.0)), strategy="with_c", n=250, grid=2)
    rv = res.robustness_value
    bias = res.se * np.sqrt(res.df) * np.sqrt(rv * rv / (1 - rv))
    assert abs(bias - abs(res.large_sample_estimate)) < 1e-12


def test_robustness_value_worked_example():
    """Cinelli & Hazlett's (2020) worked example: t = 4.18 with 783 degrees of freedom gives RV_1 = 13.9%
    (from memory)."""
    assert round(robustness_value(4.18, 783), 3) == 0.139


def test_e_value_worked_numbers():
    """VanderWeele & Ding (2017): RR = 3.9 gives an E-value of 7.26; a protective RR of 0.80 gives 1.81 (from
    memory); RR = 1 gives 1."""
    assert round(e_value(3.9), 2) == 7.26
    assert round(e_value(0.80), 2) == 1.81
    assert e_value(1.0) == 1.0
    # the formula itself: RR + sqrt(RR (RR - 1))
    for rr in (1.2, 2.0, 5.5):
        assert abs(e_value(rr) - (rr + np.sqrt(rr * (rr - 1)))) < 1e-12
        assert abs(e_value(1 / rr) - e_value(rr)) < 1e-12


def _one_covariate(alpha: float, a: float, gamma: float, b: float):
    """D = alpha Z + a U + e, Y = 0.3 D + gamma Z + b U + e, Z and U independent standard normals."""
    names = ["z", "u", "d", "y"]
    B = np.zeros((4, 4))
    B[0, 2], B[1, 2], B[2, 3], B[0, 3], B[1, 3] = alpha, a, 0.3, gamma, b
    A = np.linalg.inv(np.eye(4) - B)
    sigma = A.T @ np.diag([1.0, 1.0, 1.0, 1.0]) @ A
    index = {v: i for i, v in enumerate(names)}

    def pr2(x, y, given):
        idx = [index[x], index[y]]
        s = sigma[np.ix_(idx, idx)]
        if given:
            g = [index[v] for v in given]
            s = s - sigma[np.ix_(g, idx)].T @ np.linalg.solve(sigma[np.ix_(g, g)], sigma[np.ix_(g, idx)])
        return s[0, 1] ** 2 / (s[0, 0] * s[1, 1])

    return pr2


@pytest.mark.parametrize("k", [0.5, 1.0, 2.0])
def test_benchmark_bound_on_the_exposure_side_is_exact(k):
    """Cinelli & Hazlett (2020, sec. 4.4): for U independent of the covariate Z_j with
    R2_{D~U} = k R2_{D~Z_j}, R2_{D~U|Z_j} = k f2_{D~Z_j} (equality; checked with numpy's covariance)."""
    alpha = 0.6
    a = np.sqrt(k) * alpha  # R2_{D~U} / R2_{D~Z} = a^2 / alpha^2 = k
    pr2 = _one_covariate(alpha, a, 0.5, 0.4)
    bound_d, _ = benchmark_bounds(pr2("d", "z", []), pr2("y", "z", ["d"]), k)
    assert abs(bound_d - pr2("d", "u", ["z"])) < 1e-12


@pytest.mark.parametrize("k", [0.5, 1.0, 2.0])
@pytest.mark.parametrize("gamma", [0.3, 0.8])
def test_benchmark_bound_on_the_outcome_side_holds(k, gamma):
    """Cinelli & Hazlett (2020, sec. 4.4): with U k times as strong as Z_j for the exposure and for the outcome
    (R2_{Y~U|D} = k R2_{Y~Z_j|D}), the realised R2_{Y~U|D,Z_j} does not exceed the bound."""
    alpha = 0.6
    a = np.sqrt(k) * alpha
    # b chosen by bisection so that R2_{Y~U|D} = k R2_{Y~Z|D}
    lo, hi = 0.0, 10.0
    for _ in range(100):
        mid = (lo + hi) / 2
        pr2 = _one_covariate(alpha, a, gamma, mid)
        lo, hi = (mid, hi) if pr2("y", "u", ["d"]) < k * pr2("y", "z", ["d"]) else (lo, mid)
    pr2 = _one_covariate(alpha, a, gamma, (lo + hi) / 2)
    _, bound_y = benchmark_bounds(pr2("d", "z", []), pr2("y", "z", ["d"]), k)
    assert pr2("y", "u", ["d", "z"]) <= bound_y + 1e-9


def _solve_path(r2_d: float, r2_y: float, adjust: list[str]) -> tuple[float, float]:
    """u's path coefficients giving it these partial R^2 (bisection on numpy's covariance)."""

    def bisect(f, target):
        lo, hi = 0.0, 20.0
        for _ in range(100):
            mid = (lo + hi) / 2
            lo, hi = (mid, hi) if f(mid) < target else (lo, mid)
        return (lo + hi) / 2

    a = bisect(lambda c: _partial_r2(_covariance(c, 0.0), "x", "u", adjust), r2_d)
    b = bisect(lambda c: _partial_r2(_covariance(a, c), "y", "u", ["x", *adjust]), r2_y)
    return a, b


def test_simulated_coverage_matches_normal_theory():
    """With U added at a grid point, the engine's coverage of the truth equals the normal-theory coverage of a
    biased estimate, Phi(z - B/SE) - Phi(-z - B/SE) (common practice, no source), with the bias B and the SE at
    n from numpy's regressions of the covariance (Wooldridge sec. 3.3); within 3 MCSE plus 0.01 for the
    normal approximation at n = 400. Where U touches one side only (a strength of 0) there is no confounding
    and coverage is 1 - alpha."""
    from scipy.stats import norm
    from scipy.stats import t as student

    sc = loads_scenario(TEMPLATE.format(a=0.0, b=0.0))
    n = 400
    res = sensitivity(
        sc, strategy="with_c_w", n=n, grid=([0.0, 0.05], [0.0, 0.03]), simulate=True, replicates=2000, seed=11
    )
    z = student.ppf(0.975, n - 4)
    for _, row in res.table.iterrows():
        a, b = _solve_path(row.r2_exposure, row.r2_outcome, ["c", "w"])
        sigma = _covariance(a, b)
        short, y_resid = _regression(sigma, "y", ["x", "c", "w"])
        _, x_resid = _regression(sigma, "x", ["c", "w"])
        se = np.sqrt(y_resid / x_resid / n)
        shift = (short[0] - 0.3) / se
        expected = norm.cdf(z - shift) - norm.cdf(-z - shift)
        assert abs(row.coverage - expected) < 3 * row.coverage_mcse + 0.01, (row.to_dict(), expected)
        if row.r2_exposure == 0 or row.r2_outcome == 0:
            assert abs(expected - 0.95) < 0.002
