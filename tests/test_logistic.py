"""Properties of the batched logistic fit, the standardised contrasts and the HC3 least squares."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.special import expit

from workbench.engine import logistic
from workbench.engine.logistic import LogitFit, design_matrix, fit_logit_batch
from workbench.engine.robust import ols_hc3_batch
from workbench.engine.standardize import standardized_contrast
from workbench.errors import SimulationError


def _draw(seed, R=8, n=300, effects=(-0.5, 0.8, 1.2)):
    rng = np.random.default_rng(seed)
    data = np.stack([rng.integers(0, 2, (R, n)), rng.normal(size=(R, n))], axis=-1).astype(float)
    X = design_matrix(data, 0, [1])
    y = (rng.random((R, n)) < expit(X @ np.asarray(effects))).astype(float)
    return X, y


def test_design_matrix_columns_and_order():
    data = np.random.default_rng(0).normal(size=(3, 5, 4))
    X = design_matrix(data, 2, [3, 0])
    assert X.shape == (3, 5, 4)
    np.testing.assert_array_equal(X[..., 0], 1.0)
    np.testing.assert_array_equal(X[..., 1], data[..., 2])
    np.testing.assert_array_equal(X[..., 2:], data[..., [3, 0]])
    assert design_matrix(data, 1, intercept=False).shape == (3, 5, 1)


def test_score_is_zero_at_the_fit():
    X, y = _draw(1)
    fit = fit_logit_batch(X, y)
    assert fit.converged.all() and (fit.failure == "").all()
    score = np.einsum("rnp,rn->rp", X, y - expit(np.einsum("rnp,rp->rn", X, fit.coef)))
    assert np.abs(score).max() < 1e-8
    assert fit.iterations.max() < 15


def test_each_replicate_is_fitted_independently_of_the_others(monkeypatch):
    X, y = _draw(2, R=30)
    y[3] = 0.0  # a failing replicate in the first block
    together = fit_logit_batch(X, y)
    monkeypatch.setattr(logistic, "CACHE_BYTES", 1)  # blocks of 8 replicates: 4 blocks
    blocked = fit_logit_batch(X, y)
    threaded = fit_logit_batch(X, y, workers=3)
    alone = [fit_logit_batch(X[r : r + 1], y[r : r + 1]) for r in (0, 3, 17, 29)]
    for fit in (blocked, threaded):
        np.testing.assert_array_equal(fit.coef, together.coef)
        np.testing.assert_array_equal(fit.cov, together.cov)
        np.testing.assert_array_equal(fit.failure, together.failure)
        np.testing.assert_array_equal(fit.iterations, together.iterations)
    assert together.failure[3] == "complete separation"
    for r, fit in zip((0, 3, 17, 29), alone, strict=True):
        np.testing.assert_allclose(fit.coef[0], together.coef[r], rtol=0, atol=1e-12)
        assert fit.failure[0] == together.failure[r]


def test_row_order_does_not_matter():
    X, y = _draw(3, R=4)
    order = np.random.default_rng(0).permutation(X.shape[1])
    a, b = fit_logit_batch(X, y), fit_logit_batch(X[:, order], y[:, order])
    np.testing.assert_allclose(a.coef, b.coef, atol=1e-10)
    np.testing.assert_allclose(a.cov, b.cov, atol=1e-10)


def test_covariance_is_symmetric_positive_definite():
    X, y = _draw(4)
    fit = fit_logit_batch(X, y)
    np.testing.assert_allclose(fit.cov, np.swapaxes(fit.cov, 1, 2), atol=1e-14)
    assert (np.linalg.eigvalsh(fit.cov) > 0).all()


def test_data_problems_fail_per_replicate_and_never_raise():
    X, y = _draw(5, R=7, n=80)
    X[1, 3, 2] = np.nan  # missing value
    y[2, 0] = 0.5  # not a 0/1 outcome
    X[3, :, 2] = 0.0  # a column constant within the replicate
    y[4] = 0.0  # no events at all: the intercept runs to -infinity
    X[5, :, 2] = 2 * X[5, :, 1]  # collinear columns
    y[6] = (X[6, :, 2] > 0).astype(float)  # outcome fixed by a threshold on a covariate
    fit = fit_logit_batch(X, y)
    assert fit.failure.tolist() == [
        "",
        "non-finite values in the data",
        "outcome values other than 0 and 1",
        "singular information matrix",
        "complete separation",
        "singular information matrix",
        "complete separation",
    ]
    assert np.isfinite(fit.coef[0]).all()
    assert np.isnan(fit.coef[1:]).all() and np.isnan(fit.cov[1:]).all()
    assert fit.converged.tolist() == [True] + [False] * 6
    estimate, se = standardized_contrast(fit, X, 1)
    assert np.isfinite(estimate[0]) and np.isnan(estimate[1:]).all() and np.isnan(se[1:]).all()


def test_too_few_iterations_is_reported():
    X, y = _draw(6, R=3)
    fit = fit_logit_batch(X, y, max_iter=2)
    assert (fit.failure == "did not converge in 2 iterations").all()
    assert np.isnan(fit.coef).all()


def test_quasi_complete_separation_by_a_rare_trait():
    X, y = _draw(7, R=1, n=200)
    X[0, :, 2] = 0.0
    X[0, :5, 2] = 1.0  # five rows carry the trait ...
    y[0, :5] = 1.0  # ... and all five have the outcome; the other rows overlap
    fit = fit_logit_batch(X, y)
    assert fit.failure.tolist() == ["quasi-complete separation"]


def test_wrong_shapes_raise_a_workbench_error():
    with pytest.raises(SimulationError, match="shape"):
        fit_logit_batch(np.ones((2, 3)), np.ones(2))
    with pytest.raises(SimulationError, match="max_iter"):
        fit_logit_batch(np.ones((1, 3, 1)), np.ones((1, 3)), max_iter=0)
    fit = LogitFit(
        np.zeros((1, 2)), np.zeros((1, 2, 2)), np.ones(1, bool), np.array([""], object), np.ones(1)
    )
    with pytest.raises(SimulationError, match="exposure_kind"):
        standardized_contrast(fit, np.ones((1, 3, 2)), 1, exposure_kind="ordinal")
    with pytest.raises(SimulationError, match="scale"):
        standardized_contrast(fit, np.ones((1, 3, 2)), 1, scale="ratio")
    with pytest.raises(SimulationError, match="shape"):
        ols_hc3_batch(np.ones((2, 3)), np.ones(2))


def test_standardized_contrast_without_effect_is_zero_and_sign_follows_the_effect():
    X, y = _draw(8, R=3)
    fit = fit_logit_batch(X, y)
    zero = LogitFit(fit.coef * np.array([1, 0, 1]), fit.cov, fit.converged, fit.failure, fit.iterations)
    for scale in ("difference", "log_odds_ratio"):
        estimate, _ = standardized_contrast(zero, X, 1, scale=scale)
        np.testing.assert_allclose(estimate, 0.0, atol=1e-15)
        estimate, se = standardized_contrast(fit, X, 1, scale=scale)
        assert (np.sign(estimate) == np.sign(fit.coef[:, 1])).all() and (se > 0).all()


def test_continuous_shift_equals_binary_contrast_when_the_exposure_is_zero():
    """Shifting a continuous exposure by +1 from 0 is the same contrast as setting it to 1 versus 0."""
    X, y = _draw(9, R=2)
    fit = fit_logit_batch(X, y)
    X0 = X.copy()
    X0[..., 1] = 0.0
    for scale in ("difference", "log_odds_ratio"):
        a = standardized_contrast(fit, X0, 1, exposure_kind="continuous", scale=scale)
        b = standardized_contrast(fit, X, 1, exposure_kind="binary", scale=scale)
        np.testing.assert_allclose(a, b, atol=1e-14)


def test_hc3_failures_and_coefficients():
    X, y = _draw(10, R=4, n=50)
    X[1, :, 2] = X[1, :, 1]  # collinear
    X[2, 0, 2] = 1e6  # a single row far out: leverage of practically 1
    y[3, 7] = np.inf
    coef, se, failed = ols_hc3_batch(X, y)
    assert failed.tolist() == [False, True, True, True]
    np.testing.assert_allclose(coef[0], np.linalg.lstsq(X[0], y[0], rcond=None)[0], atol=1e-12)
    assert np.isnan(coef[1:]).all() and np.isnan(se[1:]).all()


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(8, 60),
    p=st.integers(1, 4),
    slope=st.floats(-4, 4),
)
def test_every_replicate_either_fails_with_a_reason_or_solves_the_score_equations(seed, n, p, slope):
    rng = np.random.default_rng(seed)
    R = 6
    X = np.concatenate([np.ones((R, n, 1)), rng.normal(size=(R, n, p - 1))], axis=2)
    eta = slope * X[..., -1] - 0.3
    y = (rng.random((R, n)) < expit(eta)).astype(float)
    fit = fit_logit_batch(X, y)
    ok = ~fit.failed
    assert set(fit.failure[fit.failed]) <= {
        "complete separation",
        "quasi-complete separation",
        "singular information matrix",
        "did not converge in 50 iterations",
    }
    assert np.isnan(fit.coef[fit.failed]).all()
    assert np.isfinite(fit.coef[ok]).all() and np.isfinite(fit.cov[ok]).all()
    if ok.any():
        mu = expit(np.einsum("rnp,rp->rn", X[ok], fit.coef[ok]))
        score = np.einsum("rnp,rn->rp", X[ok], y[ok] - mu)
        assert np.abs(score).max() < 1e-6
        coef, se, failed = ols_hc3_batch(X, y)
        assert (np.isfinite(se[~failed])).all()


def test_design_matrix_is_laid_out_columns_first_and_never_written_by_the_fits():
    """Common practice, no source: the design is built once as (R, p, n) and the fits use it without a copy,
    so a fit that zeroes its unusable replicates must not touch the caller's array."""
    X, y = _draw(11, R=4, n=40)
    assert np.swapaxes(X, 1, 2).flags.c_contiguous
    X[2, 5, 2] = np.nan
    before = X.copy()
    fit = fit_logit_batch(X, y)
    ols_hc3_batch(X, y)
    np.testing.assert_array_equal(X, before)
    assert fit.failure[2] == "non-finite values in the data" and not fit.failed[[0, 1, 3]].any()
    again = fit_logit_batch(np.ascontiguousarray(X), y)  # a C-ordered copy of the same design
    np.testing.assert_allclose(again.coef, fit.coef, rtol=1e-12, equal_nan=True)


def _sandwich_hc3(X, y):
    """HC3 by the formula of MacKinnon & White (1985), J. Econometrics 29:305-325, eq. for HC3:
    (X'X)^-1 X' diag(e_i^2 / (1 - h_ii)^2) X (X'X)^-1, with the hat matrix formed explicitly."""
    inverse = np.linalg.inv(X.T @ X)
    coef = inverse @ X.T @ y
    residual = y - X @ coef
    hat = np.diag(X @ inverse @ X.T)
    meat = X.T @ (X * ((residual / (1 - hat)) ** 2)[:, None])
    return coef, np.sqrt(np.diag(inverse @ meat @ inverse))


def test_hc3_matches_the_sandwich_formula_at_any_block_size(monkeypatch):
    """Source: the HC3 estimator of MacKinnon & White (1985) written out per replicate (``_sandwich_hc3``);
    the blocks of replicates are an implementation detail, so one-replicate blocks give the same numbers."""
    from workbench.engine import robust

    X, y = _draw(12, R=7, n=60)
    coef, se, failed = ols_hc3_batch(X, y)
    assert not failed.any()
    for r in range(7):
        ref_coef, ref_se = _sandwich_hc3(X[r], y[r])
        np.testing.assert_allclose(coef[r], ref_coef, rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(se[r], ref_se, rtol=1e-10)
    monkeypatch.setattr(robust, "CACHE_BYTES", 1)
    coef_small, se_small, _ = ols_hc3_batch(X, y)
    np.testing.assert_allclose(coef_small, coef, rtol=1e-13, atol=1e-15)
    np.testing.assert_allclose(se_small, se, rtol=1e-13)


def test_exactly_singular_and_non_finite_designs_fail_quietly(capfd):
    """Common practice, no source: an exactly singular cross-product matrix (a zero pivot, which makes
    LAPACK's inverse raise for the whole batch) or non-finite data fail their replicate only, with nothing
    printed by the linear algebra."""
    X, y = _draw(13, R=5, n=30)
    X = np.ascontiguousarray(X)
    X[1, :, 2] = 2.0 * X[1, :, 0]  # a column exactly twice the intercept: X'X exactly singular
    X[2, :, 1] = 0.0  # a column of zeros
    X[3, 0, 1] = np.inf
    y[4, 3] = np.nan
    coef, se, failed = ols_hc3_batch(X, y)
    fit = fit_logit_batch(X, y)
    assert failed.tolist() == [False, True, True, True, True]
    assert fit.failed.tolist() == [False, True, True, True, True]
    assert np.isfinite(coef[0]).all() and np.isnan(se[1:]).all()
    out, err = capfd.readouterr()
    assert out == "" and err == ""


def test_large_n_subsample_start_reaches_the_statsmodels_optimum():
    """Source: statsmodels ``Logit`` (Newton, its own start) as the reference optimum. From n = 8,000 rows on
    the fit starts from a fit of every k-th row and binary columns share their square's row; neither may
    move the estimates: they must agree with statsmodels to 1e-8 (issue 12's bar), the SEs too."""
    sm = pytest.importorskip("statsmodels.api")
    X, y = _draw(31, R=3, n=9000)
    fit = fit_logit_batch(X, y)
    assert not fit.failed.any()
    assert fit.iterations.max() <= 4  # common practice, no source: a start within sampling error
    for r in range(3):
        ref = sm.Logit(y[r], np.ascontiguousarray(X[r])).fit(disp=0, tol=1e-12)
        np.testing.assert_allclose(fit.coef[r], ref.params, rtol=0, atol=1e-8)
        np.testing.assert_allclose(fit.se[r], ref.bse, rtol=0, atol=1e-8)


@pytest.mark.parametrize("n", [60, 1000, 9000])
def test_default_stopping_rule_is_within_1e_9_of_a_tight_fit(n):
    """Source: the same Newton iterations run to ``tol=1e-14`` (half the decrement, Boyd & Vandenberghe 2004,
    sec. 9.5.1). The default rule, ``1e-11 n``, stops one quadratic step from the optimum at any n."""
    X, y = _draw(32, R=6, n=n)
    tight = fit_logit_batch(X, y, tol=1e-14)
    default = fit_logit_batch(X, y)
    np.testing.assert_array_equal(default.failed, tight.failed)
    np.testing.assert_allclose(default.coef, tight.coef, rtol=0, atol=1e-9, equal_nan=True)
    np.testing.assert_allclose(default.cov, tight.cov, rtol=0, atol=1e-9, equal_nan=True)


@pytest.mark.parametrize("n", [500, 9000])
def test_complete_separation_is_found_at_small_and_large_n(n):
    """Source: Albert & Anderson (1984): y = 1 exactly when x > 0 is completely separated by x, so no
    maximum-likelihood estimate exists. Neither the large-n subsample start nor the default stopping rule
    (which scales with n only away from fitted probabilities near 0 or 1) may turn it into a good fit."""
    x = np.random.default_rng(33).normal(size=(1, n))
    X = np.ones((1, n, 2))
    X[..., 1] = x
    fit = fit_logit_batch(X, (x > 0).astype(float))
    assert fit.failure.tolist() == ["complete separation"]
    assert np.isnan(fit.coef).all()
