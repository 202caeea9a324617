"""Batched logistic regression, standardised contrasts and HC3 least squares against outside references.

Each test names its source in its docstring. The reference fits are ``statsmodels`` 0.14+ (``Logit``,
``GLM(Binomial)``, ``OLS(cov_type="HC3")``, ``get_margeff``), a general-purpose library from the package
registry; the separation verdicts are checked against linear programs solved by ``scipy.optimize.linprog``.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.optimize import linprog
from scipy.special import expit, logit
from statsmodels.tools.numdiff import approx_fprime

from workbench.engine.logistic import design_matrix, fit_logit_batch
from workbench.engine.robust import ols_hc3_batch
from workbench.engine.standardize import standardized_contrast


def _draw(seed, R, n, *, exposure_kind="binary", strength=1.5, intercept=-1.0):
    """A randomised exposure, a strong outcome cause and a weak one; returns X (R, n, 4) and y (R, n)."""
    rng = np.random.default_rng(seed)
    if exposure_kind == "binary":
        x = rng.integers(0, 2, (R, n)).astype(float)
    else:
        x = rng.normal(size=(R, n))
    z1 = rng.normal(size=(R, n))
    z2 = rng.integers(0, 2, (R, n)).astype(float)
    X = design_matrix(np.stack([x, z1, z2], axis=-1), 0, [1, 2])
    y = (rng.random((R, n)) < expit(intercept + 0.6 * x + strength * z1 - 0.4 * z2)).astype(float)
    return X, y


@pytest.fixture(scope="module")
def datasets():
    X, y = _draw(20261202, 6, 300)
    return X, y, fit_logit_batch(X, y)


def test_coefficients_and_se_match_statsmodels_logit(datasets):
    """Source: statsmodels ``Logit(y, X).fit()`` (Newton-Raphson maximum likelihood; ``bse`` from the
    inverse Hessian). Per dataset, coefficients and SEs agree to 1e-6."""
    X, y, fit = datasets
    assert not fit.failed.any()
    for r in range(X.shape[0]):
        ref = sm.Logit(y[r], X[r]).fit(disp=0)
        np.testing.assert_allclose(fit.coef[r], ref.params, rtol=0, atol=1e-6)
        np.testing.assert_allclose(fit.se[r], ref.bse, rtol=0, atol=1e-6)
        np.testing.assert_allclose(fit.cov[r], ref.cov_params(), rtol=0, atol=1e-8)


def test_coefficients_and_se_match_statsmodels_glm_binomial(datasets):
    """Source: statsmodels ``GLM(y, X, family=Binomial()).fit()`` (IRLS; McCullagh & Nelder 1989, sec. 4.4).
    Per dataset, coefficients and SEs agree to 1e-6. GLM's default IRLS stops on a relative deviance change
    of 1e-8, which leaves its SEs about 1e-6 from the optimum, so the reference is run with ``tol=1e-12``."""
    X, y, fit = datasets
    for r in range(X.shape[0]):
        ref = sm.GLM(y[r], X[r], family=sm.families.Binomial()).fit(tol=1e-12)
        np.testing.assert_allclose(fit.coef[r], ref.params, rtol=0, atol=1e-6)
        np.testing.assert_allclose(fit.se[r], ref.bse, rtol=0, atol=1e-6)


def test_hc3_standard_errors_match_statsmodels():
    """Source: statsmodels ``OLS(y, X).fit(cov_type="HC3")``, the estimator of MacKinnon & White (1985),
    Journal of Econometrics 29:305-325. Per dataset, coefficients and HC3 SEs agree to 1e-10 (linear
    probability model on a binary outcome, and a continuous outcome with heteroskedastic errors)."""
    X, y = _draw(7, 5, 250)
    rng = np.random.default_rng(8)
    y_continuous = X[..., 1] + rng.normal(size=y.shape) * (0.5 + np.abs(X[..., 2]))
    for outcome in (y, y_continuous):
        coef, se, failed = ols_hc3_batch(X, outcome)
        assert not failed.any()
        for r in range(X.shape[0]):
            ref = sm.OLS(outcome[r], X[r]).fit(cov_type="HC3")
            np.testing.assert_allclose(coef[r], ref.params, rtol=0, atol=1e-10)
            np.testing.assert_allclose(se[r], ref.bse, rtol=0, atol=1e-10)


def test_standardized_risk_difference_matches_statsmodels_average_discrete_change(datasets):
    """Source: statsmodels ``Logit(...).fit().get_margeff(at="overall", dummy=True)``.

    What statsmodels computes for a 0/1 regressor (``discrete_margins._get_dummy_effects`` and
    ``_margeff_cov_params_dummy``, read in the installed source): the effect is
    ``mean_i [F(x_i' b | d = 1) - F(x_i' b | d = 0)]``, the average discrete change, which is exactly the
    standardised risk difference; its SE is the delta method with Jacobian
    ``mean_i [f(x_i1' b) x_i1 - f(x_i0' b) x_i0]`` and the model's ``cov_params()``, the covariates held fixed,
    which is exactly our definition. So both the estimate and the SE can be compared directly (1e-8)."""
    X, y, fit = datasets
    estimate, se = standardized_contrast(fit, X, 1, exposure_kind="binary", scale="difference")
    for r in range(X.shape[0]):
        margins = sm.Logit(y[r], X[r]).fit(disp=0).get_margeff(at="overall", dummy=True)
        # margeff columns are the non-constant regressors; the exposure is the first of them.
        assert margins.margeff.shape == (3,)
        np.testing.assert_allclose(estimate[r], margins.margeff[0], rtol=0, atol=1e-8)
        np.testing.assert_allclose(se[r], margins.margeff_se[0], rtol=0, atol=1e-8)


@pytest.mark.parametrize("scale", ["difference", "log_odds_ratio"])
@pytest.mark.parametrize("exposure_kind", ["binary", "continuous"])
def test_standardized_contrast_matches_numerical_delta_method(exposure_kind, scale):
    """Source: the delta method (Oehlert G.W. 1992, The American Statistician 46:27-29) with the Jacobian
    taken by statsmodels' numerical differentiation (``statsmodels.tools.numdiff.approx_fprime``) of the
    contrast computed from ``Logit.predict`` on the rows with the exposure set (binary: 1 vs 0; continuous:
    shifted by +1 vs as observed), and ``cov_params()`` of the statsmodels fit. This covers the cases
    ``get_margeff`` does not (its continuous effects are derivatives, not unit shifts)."""
    X, y = _draw(31, 3, 400, exposure_kind=exposure_kind)
    fit = fit_logit_batch(X, y)
    estimate, se = standardized_contrast(fit, X, 1, exposure_kind=exposure_kind, scale=scale)
    for r in range(X.shape[0]):
        ref = sm.Logit(y[r], X[r]).fit(disp=0)
        X1, X0 = X[r].copy(), X[r].copy()
        if exposure_kind == "binary":
            X1[:, 1], X0[:, 1] = 1.0, 0.0
        else:
            X1[:, 1] += 1.0

        def contrast(b, X1=X1, X0=X0, model=ref.model):
            m1, m0 = model.predict(b, X1).mean(), model.predict(b, X0).mean()
            return m1 - m0 if scale == "difference" else logit(m1) - logit(m0)

        jacobian = approx_fprime(ref.params, contrast, centered=True)
        ref_se = np.sqrt(jacobian @ ref.cov_params() @ jacobian)
        np.testing.assert_allclose(estimate[r], contrast(ref.params), rtol=0, atol=1e-8)
        np.testing.assert_allclose(se[r], ref_se, rtol=1e-6, atol=0)


def test_unadjusted_standardized_contrasts_are_the_two_by_two_table_formulas():
    """Source: with the exposure as the only regressor the logistic model is saturated, so standardisation
    gives the crude risk difference with the Wald SE ``sqrt(p1 (1 - p1) / n1 + p0 (1 - p0) / n0)`` and the
    crude log odds ratio with Woolf's SE ``sqrt(1/a + 1/b + 1/c + 1/d)`` (Agresti A. 2013, Categorical Data
    Analysis, 3rd ed., sec. 3.1; from memory)."""
    X, y = _draw(5, 4, 500)
    X = X[..., :2]
    fit = fit_logit_batch(X, y)
    rd, rd_se = standardized_contrast(fit, X, 1, scale="difference")
    lor, lor_se = standardized_contrast(fit, X, 1, scale="log_odds_ratio")
    x = X[..., 1]
    n1, n0 = x.sum(1), (1 - x).sum(1)
    a, c = (y * x).sum(1), (y * (1 - x)).sum(1)  # events among exposed / unexposed
    b, d = n1 - a, n0 - c
    p1, p0 = a / n1, c / n0
    np.testing.assert_allclose(rd, p1 - p0, atol=1e-9)
    np.testing.assert_allclose(rd_se, np.sqrt(p1 * (1 - p1) / n1 + p0 * (1 - p0) / n0), rtol=1e-7)
    np.testing.assert_allclose(lor, np.log(a * d / (b * c)), atol=1e-9)
    np.testing.assert_allclose(lor_se, np.sqrt(1 / a + 1 / b + 1 / c + 1 / d), rtol=1e-7)
    np.testing.assert_allclose(fit.coef[:, 1], np.log(a * d / (b * c)), atol=1e-9)


def _separation_by_linear_programming(Xr, yr):
    """Albert & Anderson (1984) classes by linear programs (the formulation of Konis K. 2007, Linear
    programming algorithms for detecting separated data in binary logistic regression models, DPhil thesis,
    University of Oxford; from memory): with ``s_i = (2 y_i - 1) x_i``, complete separation when some
    ``d`` has ``s_i' d > 0`` for all rows, quasi-complete when some ``d`` has ``s_i' d >= 0`` for all rows and
    ``> 0`` for one."""
    s = (2 * yr - 1)[:, None] * Xr
    m, p = Xr.shape
    objective = np.zeros(p + 1)
    objective[-1] = -1.0  # maximise t subject to s d >= t, |d| <= 1, t <= 1
    result = linprog(
        objective,
        A_ub=np.hstack([-s, np.ones((m, 1))]),
        b_ub=np.zeros(m),
        bounds=[(-1, 1)] * p + [(None, 1)],
    )
    if -result.fun > 1e-7:
        return "complete separation"
    result = linprog(-s.sum(0), A_ub=-s, b_ub=np.zeros(m), bounds=[(-1, 1)] * p)
    if -result.fun > 1e-7:
        return "quasi-complete separation"
    return ""


def test_separation_is_reported_with_reasons_and_the_rest_match_statsmodels():
    """Sources: Albert A., Anderson J.A. (1984), Biometrika 71:1-10 (the MLE exists iff the data overlap),
    checked by linear programs solved with scipy; and statsmodels ``Logit`` for every replicate that did
    not fail. A rare trait that nearly always comes with the outcome separates many replicates
    (quasi-complete); the first 15 replicates have outcomes fixed by a threshold on the covariates (complete).
    The batch reports each failure with its reason, gives NaN there, and still fits the others."""
    rng = np.random.default_rng(11)
    R, n = 200, 150
    x = rng.integers(0, 2, (R, n)).astype(float)
    trait = (rng.random((R, n)) < 0.04).astype(float)
    w = rng.normal(size=(R, n))
    y = (rng.random((R, n)) < expit(-1.0 + 0.5 * x + 3.0 * trait + 0.3 * w)).astype(float)
    y[:15] = (w[:15] + 0.5 * x[:15] > 0.2).astype(float)
    X = design_matrix(np.stack([x, trait, w], axis=-1), 0, [1, 2])

    fit = fit_logit_batch(X, y)
    reasons = set(fit.failure.tolist())
    assert {"", "complete separation", "quasi-complete separation"} <= reasons
    assert (fit.failure[:15] == "complete separation").all()
    assert 30 <= np.sum(fit.failure == "quasi-complete separation") <= 170
    assert np.isnan(fit.coef[fit.failed]).all() and np.isnan(fit.cov[fit.failed]).all()
    assert not fit.converged[fit.failed].any() and fit.converged[~fit.failed].all()

    separation = np.char.endswith(fit.failure.astype(str), "separation")
    design_ok = fit.failure != "singular information matrix"  # e.g. the trait absent from a replicate
    verdicts = np.array([_separation_by_linear_programming(X[r], y[r]) for r in range(R)])
    np.testing.assert_array_equal(fit.failure[design_ok], verdicts[design_ok])
    assert separation.sum() == np.sum(verdicts[design_ok] != "")

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in np.flatnonzero(~fit.failed):
            ref = sm.Logit(y[r], X[r]).fit(disp=0)
            np.testing.assert_allclose(fit.coef[r], ref.params, rtol=0, atol=1e-6)
            np.testing.assert_allclose(fit.se[r], ref.bse, rtol=0, atol=1e-6)


def test_batched_fit_equals_a_loop_of_statsmodels_fits():
    """Source: statsmodels ``Logit`` fitted replicate by replicate in a Python loop; the batched fit of the
    same 40 replicates (n = 200, continuous exposure) agrees to 1e-6 in every coefficient and SE."""
    X, y = _draw(99, 40, 200, exposure_kind="continuous")
    fit = fit_logit_batch(X, y)
    assert not fit.failed.any()
    coef = np.array([sm.Logit(y[r], X[r]).fit(disp=0).params for r in range(40)])
    se = np.array([sm.Logit(y[r], X[r]).fit(disp=0).bse for r in range(40)])
    np.testing.assert_allclose(fit.coef, coef, rtol=0, atol=1e-6)
    np.testing.assert_allclose(fit.se, se, rtol=0, atol=1e-6)


def _marginal_risks(intercept, exposure_effect, strength, nodes=200):
    """E[expit(a + b x + c Z)] for x = 1 and 0 with Z ~ N(0, 1), by Gauss-Hermite quadrature."""
    t, weights = np.polynomial.hermite_e.hermegauss(nodes)
    weights = weights / weights.sum()
    return (
        float(np.sum(weights * expit(intercept + exposure_effect + strength * t))),
        float(np.sum(weights * expit(intercept + strength * t))),
    )


def test_non_collapsibility_adjusted_odds_ratio_is_further_from_one():
    """Source: Greenland S., Robins J.M., Pearl J. (1999). Confounding and collapsibility in causal
    inference. Statistical Science 14(1):29-46. With a randomised binary exposure (no confounding) and a
    strong outcome cause Z, the conditional log odds ratio (adjusting for Z) is further from 0 than the
    marginal one (unadjusted), while standardising the adjusted model recovers the marginal log odds ratio.
    Both targets are computed independently: the conditional one is the structural coefficient, the
    marginal one by quadrature over Z."""
    rng = np.random.default_rng(42)
    R, n = 1000, 500
    a, b, c = -1.0, -0.8, 2.0
    x = rng.integers(0, 2, (R, n)).astype(float)
    z = rng.normal(size=(R, n))
    y = (rng.random((R, n)) < expit(a + b * x + c * z)).astype(float)
    X_adjusted = design_matrix(np.stack([x, z], axis=-1), 0, [1])
    adjusted = fit_logit_batch(X_adjusted, y)
    unadjusted = fit_logit_batch(X_adjusted[..., :2], y)
    standardized, _ = standardized_contrast(adjusted, X_adjusted, 1, scale="log_odds_ratio")

    m1, m0 = _marginal_risks(a, b, c)
    marginal = logit(m1) - logit(m0)
    assert abs(marginal) < abs(b) - 0.2  # the fact itself, in the population
    conditional_mean = adjusted.coef[:, 1].mean()
    marginal_mean = unadjusted.coef[:, 1].mean()
    mcse = adjusted.coef[:, 1].std() / np.sqrt(R)
    assert abs(conditional_mean) > abs(marginal_mean) + 10 * mcse
    assert abs(conditional_mean - b) < 4 * mcse + 0.02  # small-sample bias of the MLE is about 1%
    assert abs(marginal_mean - marginal) < 4 * unadjusted.coef[:, 1].std() / np.sqrt(R) + 0.01
    assert abs(standardized.mean() - marginal) < 4 * standardized.std() / np.sqrt(R) + 0.01


def test_coverage_of_standardized_risk_difference():
    """Source: Morris T.P., White I.R., Crowther M.J. (2019), Statistics in Medicine 38:2074-2102, Table 6
    (coverage and its Monte Carlo SE). The Wald interval of the standardised risk difference from a correctly
    specified logistic model covers the true marginal risk difference (by quadrature) at 0.95 within
    3 MCSE. The delta-method SE holds the covariates fixed, as statsmodels does; the ignored part of the
    variance (of the sample mean of individual risk differences) is under 2% of the total here."""
    rng = np.random.default_rng(2026)
    R, n = 2000, 400
    a, b, c = -0.5, 0.7, 1.5
    x = rng.integers(0, 2, (R, n)).astype(float)
    z = rng.normal(size=(R, n))
    y = (rng.random((R, n)) < expit(a + b * x + c * z)).astype(float)
    X = design_matrix(np.stack([x, z], axis=-1), 0, [1])
    fit = fit_logit_batch(X, y)
    estimate, se = standardized_contrast(fit, X, 1)
    m1, m0 = _marginal_risks(a, b, c)
    covered = np.abs(estimate - (m1 - m0)) <= 1.959964 * se
    coverage = covered.mean()
    mcse = np.sqrt(0.95 * 0.05 / R)
    assert abs(coverage - 0.95) <= 3 * mcse, coverage


def test_step_halving_case_matches_statsmodels():
    """Source: statsmodels ``Logit`` and ``GLM(Binomial)``. A covariate with two far outliers (a Cauchy
    draw): here the undamped Newton step from the intercept-only start overshoots into a region where the
    information matrix underflows; with step halving the batched fit converges to the statsmodels optimum."""
    x = [-0.876, 19.114, -0.57, -1.286, -1.002, -1.658, -0.978, -0.276, -0.487, -105.741, -0.051, -0.758]
    x += [-0.817, -0.514, -0.44, -3.654]
    y = np.zeros((1, len(x)))
    y[0, [1, 9]] = 1.0
    X = np.stack([np.ones(len(x)), x], axis=-1)[None]
    fit = fit_logit_batch(X, y)
    assert fit.failure.tolist() == [""]
    ref = sm.Logit(y[0], X[0]).fit(disp=0)
    glm = sm.GLM(y[0], X[0], family=sm.families.Binomial()).fit(tol=1e-12)
    np.testing.assert_allclose(fit.coef[0], ref.params, rtol=0, atol=1e-6)
    np.testing.assert_allclose(fit.coef[0], glm.params, rtol=0, atol=1e-6)
    np.testing.assert_allclose(fit.se[0], ref.bse, rtol=0, atol=1e-6)
