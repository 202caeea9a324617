"""Performance measures of a simulation study and their Monte Carlo standard errors.

For each strategy, with ``R`` successful replicates (failed ones, NaN, are excluded and counted), estimates
``theta_i``, model SEs ``s_i``, true value ``theta`` and mean estimate ``theta_bar``, Morris, White & Crowther
(2019, Table 6) define:

* bias ``theta_bar - theta``; MCSE ``emp_se / sqrt(R)``;
* empirical SE ``sqrt(sum (theta_i - theta_bar)^2 / (R - 1))``; MCSE ``emp_se / sqrt(2 (R - 1))``;
* mean squared error ``mse = sum (theta_i - theta)^2 / R``;
  MCSE ``sqrt(sum ((theta_i - theta)^2 - mse)^2 / (R (R - 1)))``;
* model SE ``sqrt(mean s_i^2)``; MCSE ``sqrt(Var(s_i^2) / (4 R model_se^2))``;
* relative error in the model SE ``100 (model_se / emp_se - 1)``;
  MCSE ``100 (model_se / emp_se) sqrt(Var(s_i^2) / (4 R model_se^4) + 1 / (2 (R - 1)))``;
* coverage ``mean 1(low_i <= theta <= high_i)``; MCSE ``sqrt(coverage (1 - coverage) / R)``;
* bias-eliminated coverage ``mean 1(low_i <= theta_bar <= high_i)``; MCSE of the same form;
* power (rejection) ``mean 1(p_i <= alpha)``; MCSE ``sqrt(power (1 - power) / R)``.

Sign and magnitude errors (Gelman & Carlin 2014), over the ``K`` significant replicates (``p_i <= alpha``):

* type S error rate ``type_s = mean over significant of 1(sign(theta_i) != sign(theta))``; MCSE the binomial
  ``sqrt(type_s (1 - type_s) / K)`` (conditional on ``K``: common practice, no source);
* exaggeration ratio (type M) ``mean over significant of |theta_i| / |theta|``; MCSE the SE of that mean,
  ``sd(|theta_i|) / (sqrt(K) |theta|)`` over the significant ones (the truth taken as known: common practice,
  no source).

Both are NaN when no replicate is significant or the true value is 0 (a sign or a ratio to 0 has no meaning);
their MCSEs are NaN with fewer than two significant replicates.

``Var(s_i^2)`` is the sample variance (divisor ``R - 1``) of the squared SEs. Beyond Table 6:

* relative bias (%) is ``100 bias / theta`` with MCSE ``100 bias_mcse / |theta|`` (NaN when ``|theta| < 1e-12``);
* RMSE is ``sqrt(mse)`` with MCSE ``mse_mcse / (2 rmse)`` by the delta method;
* when the true value is itself estimated by simulation with Monte Carlo error ``truth_mcse`` (independent of
  the replicates), the bias MCSE is ``sqrt(emp_se^2 / R + truth_mcse^2)``: the two errors are added in
  quadrature. The relative-bias MCSE follows from it; coverage and the other measures ignore ``truth_mcse``,
  which is tiny beside their own error when the truth uses at least 10^6 draws.

References
----------
1. Morris T.P., White I.R., Crowther M.J. (2019). Using simulation studies to evaluate statistical methods.
   Statistics in Medicine 38(11):2074-2102, Table 6.
2. Gelman A., Carlin J. (2014). Beyond power calculations: assessing type S (sign) and type M (magnitude)
   errors. Perspectives on Psychological Science 9(6):641-651.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "MEASURES",
    "performance",
    "sign_and_magnitude",
    "joint_power",
    "variance_inflation",
    "is_biased",
    "coverage_is_off",
    "BIAS_MCSE_MULTIPLE",
    "BIAS_RELATIVE_FLOOR",
]

BIAS_MCSE_MULTIPLE = 3.0
"""A measure is judged off its target when it lies more than this many Monte Carlo SEs away (about a 0.3%
chance for an unbiased estimate: common practice, no source)."""
BIAS_RELATIVE_FLOOR = 0.05
"""...and, for the bias, when it is at least this share of the true value's size, so that a bias too small
to matter is not called one when the replicates are many."""


def is_biased(bias, bias_mcse, truth) -> bool:
    """The one rule for calling a simulated strategy *biased*: ``|bias| > 3 MCSE(bias)`` and
    ``|bias| >= 5% of |truth|`` (the second part only when the truth is not 0).

    Every output (the run's table and notes, the planner, the explanations, the dashboard) calls this
    function; ``docs/roles-and-verdicts.md`` states the rule. Missing values give False.

    Examples
    --------
    >>> is_biased(0.06, 0.01, 0.25), is_biased(0.02, 0.005, 1.0), is_biased(0.02, 0.005, 0.0)
    (True, False, True)
    >>> is_biased(float("nan"), 0.01, 1.0)
    False
    """
    try:
        bias, mcse, truth = float(bias), float(bias_mcse), float(truth)
    except (TypeError, ValueError):
        return False
    if not (np.isfinite(bias) and np.isfinite(mcse)):
        return False
    big_enough = not np.isfinite(truth) or truth == 0 or abs(bias) >= BIAS_RELATIVE_FLOOR * abs(truth)
    return bool(abs(bias) > BIAS_MCSE_MULTIPLE * mcse and big_enough)


def coverage_is_off(coverage, coverage_mcse, nominal) -> bool:
    """True when coverage lies more than 3 Monte Carlo SEs from the nominal level (either side).

    Examples
    --------
    >>> coverage_is_off(0.90, 0.005, 0.95), coverage_is_off(0.947, 0.005, 0.95)
    (True, False)
    """
    try:
        coverage, mcse = float(coverage), float(coverage_mcse)
    except (TypeError, ValueError):
        return False
    if not (np.isfinite(coverage) and np.isfinite(mcse)):
        return False
    return bool(abs(coverage - nominal) > BIAS_MCSE_MULTIPLE * mcse)


MEASURES = (
    "mean",
    "bias",
    "bias_mcse",
    "relative_bias",
    "relative_bias_mcse",
    "emp_se",
    "emp_se_mcse",
    "model_se",
    "model_se_mcse",
    "relative_error_model_se",
    "relative_error_model_se_mcse",
    "mse",
    "mse_mcse",
    "rmse",
    "rmse_mcse",
    "coverage",
    "coverage_mcse",
    "be_coverage",
    "be_coverage_mcse",
    "power",
    "power_mcse",
    "type_s",
    "type_s_mcse",
    "exaggeration",
    "exaggeration_mcse",
    "failures",
    "n_ok",
)


def _proportion(hit: np.ndarray, ok: np.ndarray, count: np.ndarray):
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(ok, hit, False).sum(axis=0) / count
        return share, np.sqrt(share * (1.0 - share) / count)


def sign_and_magnitude(estimate, p_value, truth, alpha: float) -> dict[str, np.ndarray]:
    """Type S error rate and exaggeration ratio (type M) of the significant estimates, with MCSEs.

    Parameters
    ----------
    estimate, p_value : array_like of shape (R, S)
        NaN estimates (failed fits) are left out.
    truth : float or array_like of shape (S,)
    alpha : float
        A replicate is significant when ``p_value <= alpha``.

    Returns
    -------
    dict with ``type_s, type_s_mcse, exaggeration, exaggeration_mcse`` (arrays of shape (S,)); NaN where no
    replicate is significant or the truth is 0.

    References
    ----------
    Gelman A., Carlin J. (2014). Perspectives on Psychological Science 9(6):641-651.

    Examples
    --------
    >>> est = np.array([[0.5], [-0.4], [0.1], [0.7]])
    >>> p = np.array([[0.01], [0.02], [0.6], [0.001]])
    >>> m = sign_and_magnitude(est, p, 0.2, 0.05)
    >>> round(float(m["type_s"][0]), 4), round(float(m["exaggeration"][0]), 4)
    (0.3333, 2.6667)
    """
    estimate = np.asarray(estimate, dtype=float)
    if estimate.ndim == 1:
        estimate = estimate[:, None]
    p_value = np.asarray(p_value, dtype=float).reshape(estimate.shape)
    S = estimate.shape[1]
    theta = np.broadcast_to(np.asarray(truth, dtype=float), (S,)).copy()
    significant = ~np.isnan(estimate) & (p_value <= alpha)
    k = significant.sum(axis=0).astype(float)
    defined = (k > 0) & (np.abs(theta) >= 1e-12)
    scale = np.where(defined, np.abs(theta), 1.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        wrong = significant & (np.sign(estimate) != np.sign(theta))
        type_s = np.where(defined, wrong.sum(axis=0) / k, np.nan)
        type_s_mcse = np.where(k > 1, np.sqrt(type_s * (1.0 - type_s) / k), np.nan)
        size = np.where(significant, np.abs(estimate), 0.0)
        mean_size = size.sum(axis=0) / k
        spread = np.where(significant, np.abs(estimate) - mean_size, 0.0)
        sd = np.sqrt((spread**2).sum(axis=0) / (k - 1))
        exaggeration = np.where(defined, mean_size / scale, np.nan)
        exaggeration_mcse = np.where(defined & (k > 1), sd / np.sqrt(k) / scale, np.nan)
    return {
        "type_s": type_s,
        "type_s_mcse": type_s_mcse,
        "exaggeration": exaggeration,
        "exaggeration_mcse": exaggeration_mcse,
    }


def joint_power(p_value, also_p_value, alpha: float) -> dict[str, np.ndarray]:
    """Power for the joint event that the exposure and every ``also`` effect are significant, with its MCSE.

    Parameters
    ----------
    p_value : array_like of shape (R, S)
    also_p_value : array_like of shape (R, S, A)
        NaN where a strategy does not estimate the variable; a strategy missing any variable gets NaN.
    alpha : float

    Returns
    -------
    dict with ``power_all, power_all_mcse`` (shape (S,)); with ``A = 0`` they equal the exposure's power.
    The MCSE is the binomial ``sqrt(p (1 - p) / R)`` over the replicates where every p-value exists (Morris
    et al. 2019, Table 6, for a rejection rate).

    Examples
    --------
    >>> p = np.array([[0.01], [0.01], [0.3], [0.01]])
    >>> also = np.array([[[0.02]], [[0.5]], [[0.01]], [[0.04]]])
    >>> float(joint_power(p, also, 0.05)["power_all"][0])
    0.5
    """
    p_value = np.asarray(p_value, dtype=float)
    also = np.asarray(also_p_value, dtype=float)
    if also.ndim == 2:
        also = also[:, :, None]
    ok = ~np.isnan(p_value) & ~np.isnan(also).any(axis=2)
    hit = (p_value <= alpha) & (also <= alpha).all(axis=2)
    count = ok.sum(axis=0).astype(float)
    share, mcse = _proportion(hit, ok, count)
    return {"power_all": share, "power_all_mcse": mcse}


def variance_inflation(scenario, regressors, variable: str) -> float:
    """The closed-form variance inflation factor of ``variable`` among ``regressors`` in a linear-Gaussian
    scenario: ``VIF_j = Sigma_jj [Sigma_RR^-1]_jj`` from the implied covariance (``1 / (1 - R_j^2)``, R_j^2 of
    the variable on the other regressors; Wooldridge, Introductory Econometrics, sec. 3.4). NaN for other
    scenarios or when ``variable`` is not among ``regressors``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> round(variance_inflation(load_preset("two_exposures"), ["lighting", "heating"], "heating"), 4)
    2.7778
    """
    from workbench.graph.linear import implied_covariance

    regressors = list(dict.fromkeys(regressors))
    if variable not in regressors or not scenario.is_linear_gaussian:
        return float("nan")
    names = [v.name for v in scenario.variables]
    index = [names.index(r) for r in regressors]
    sigma = implied_covariance(scenario)[np.ix_(index, index)]
    j = regressors.index(variable)
    return float(sigma[j, j] * np.linalg.inv(sigma)[j, j])


def performance(
    estimate,
    se,
    ci_low,
    ci_high,
    p_value,
    truth,
    alpha: float,
    truth_mcse=0.0,
) -> dict[str, np.ndarray]:
    """Morris et al. (2019) Table 6 performance measures with MCSEs, for every strategy at once.

    Parameters
    ----------
    estimate, se, ci_low, ci_high, p_value : array_like of shape (R, S)
        One column per strategy; a replicate with a NaN estimate counts as a failure and is left out of
        every measure of that strategy.
    truth : float or array_like of shape (S,)
        The true value each strategy is scored against.
    alpha : float
        Level of the test behind ``power``: a replicate rejects when ``p_value <= alpha``.
    truth_mcse : float or array_like of shape (S,)
        Monte Carlo SE of ``truth`` (0 for a closed form); added in quadrature to ``bias_mcse``.

    Returns
    -------
    dict of str to ndarray of shape (S,)
        Keys in :data:`MEASURES`. ``relative_bias`` and ``relative_error_model_se`` are in percent;
        ``type_s`` and ``exaggeration`` are those of :func:`sign_and_magnitude`.
        ``failures`` counts NaN replicates, ``n_ok`` the rest. Measures that need two successes are NaN
        with fewer.

    References
    ----------
    Morris T.P., White I.R., Crowther M.J. (2019). Using simulation studies to evaluate statistical methods.
    Statistics in Medicine 38(11):2074-2102, Table 6.

    Examples
    --------
    >>> est = np.array([[0.9], [1.1], [1.3], [0.7]])
    >>> se = np.full((4, 1), 0.2)
    >>> m = performance(est, se, est - 0.4, est + 0.4, np.full((4, 1), 0.01), 1.0, 0.05)
    >>> float(m["bias"][0]), round(float(m["emp_se"][0]), 4), float(m["coverage"][0])
    (0.0, 0.2582, 1.0)
    """
    estimate = np.asarray(estimate, dtype=float)
    if estimate.ndim == 1:
        estimate = estimate[:, None]
    shape = estimate.shape
    se = np.broadcast_to(np.asarray(se, dtype=float).reshape(shape), shape)
    ci_low = np.asarray(ci_low, dtype=float).reshape(shape)
    ci_high = np.asarray(ci_high, dtype=float).reshape(shape)
    p_value = np.asarray(p_value, dtype=float).reshape(shape)
    S = shape[1]
    theta = np.broadcast_to(np.asarray(truth, dtype=float), (S,)).copy()
    theta_mcse = np.broadcast_to(np.asarray(truth_mcse, dtype=float), (S,)).copy()

    ok = ~np.isnan(estimate)
    count = ok.sum(axis=0).astype(float)
    failures = (~ok).sum(axis=0)
    est0 = np.where(ok, estimate, 0.0)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        mean = est0.sum(axis=0) / count
        dev = np.where(ok, estimate - mean, 0.0)
        emp_var = np.where(count > 1, (dev**2).sum(axis=0) / (count - 1), np.nan)
        emp_se = np.sqrt(emp_var)
        bias = mean - theta
        bias_mcse = np.sqrt(emp_var / count + theta_mcse**2)
        emp_se_mcse = emp_se / np.sqrt(2.0 * (count - 1))

        err2 = np.where(ok, (estimate - theta) ** 2, 0.0)
        mse = err2.sum(axis=0) / count
        mse_mcse = np.where(count > 1, 1.0, np.nan) * np.sqrt(
            (np.where(ok, err2 - mse, 0.0) ** 2).sum(axis=0) / (count * (count - 1))
        )
        rmse = np.sqrt(mse)
        rmse_mcse = mse_mcse / (2.0 * rmse)

        var_i = np.where(ok, se**2, np.nan)
        mean_var = np.nansum(var_i, axis=0) / count
        model_se = np.sqrt(mean_var)
        var_of_var = np.where(count > 1, np.nansum((var_i - mean_var) ** 2, axis=0) / (count - 1), np.nan)
        model_se_mcse = np.sqrt(var_of_var / (4.0 * count * mean_var))
        ratio = model_se / emp_se
        relative_error = 100.0 * (ratio - 1.0)
        relative_error_mcse = (
            100.0 * ratio * np.sqrt(var_of_var / (4.0 * count * mean_var**2) + 1.0 / (2.0 * (count - 1)))
        )

        zero = np.abs(theta) < 1e-12
        relative_bias = np.where(zero, np.nan, 100.0 * bias / np.abs(np.where(zero, 1.0, theta)))
        relative_bias_mcse = np.where(zero, np.nan, 100.0 * bias_mcse / np.abs(np.where(zero, 1.0, theta)))

    coverage, coverage_mcse = _proportion((ci_low <= theta) & (theta <= ci_high), ok, count)
    be_coverage, be_coverage_mcse = _proportion((ci_low <= mean) & (mean <= ci_high), ok, count)
    power, power_mcse = _proportion(p_value <= alpha, ok, count)
    errors = sign_and_magnitude(estimate, p_value, theta, alpha)
    return {
        "mean": mean,
        "bias": bias,
        "bias_mcse": bias_mcse,
        "relative_bias": relative_bias,
        "relative_bias_mcse": relative_bias_mcse,
        "emp_se": emp_se,
        "emp_se_mcse": emp_se_mcse,
        "model_se": model_se,
        "model_se_mcse": model_se_mcse,
        "relative_error_model_se": relative_error,
        "relative_error_model_se_mcse": relative_error_mcse,
        "mse": mse,
        "mse_mcse": mse_mcse,
        "rmse": rmse,
        "rmse_mcse": rmse_mcse,
        "coverage": coverage,
        "coverage_mcse": coverage_mcse,
        "be_coverage": be_coverage,
        "be_coverage_mcse": be_coverage_mcse,
        "power": power,
        "power_mcse": power_mcse,
        **errors,
        "failures": failures,
        "n_ok": count.astype(int),
    }
