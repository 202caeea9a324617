"""Analytic power and precision of a regression coefficient: the cross-check beside the simulated curves.

In a linear-Gaussian graph every variable is jointly Gaussian, so the least-squares regression of the outcome
``Y`` on the exposure ``X`` and an adjustment set ``Z`` is, in every sample, a correctly specified classical
linear model whose coefficients are the *population* projection coefficients (Bollen 1989, ch. 4). That holds
for any set ``Z``, valid or not: an invalid set simply has a population coefficient (the *estimand* here)
that differs from the causal effect. Hence, with ``p`` fitted coefficients (intercept, exposure, ``Z``):

* the large-sample standard error of the exposure's coefficient is
  ``se(n) = sqrt(Var(Y | X, Z) / (n Var(X | Z)))`` (the ``se_factor`` of :class:`~workbench.graph.linear.PopulationFit`
  divided by ``sqrt(n)``);
* given the regressors, the t statistic follows the noncentral t distribution with ``df = n - p`` and
  noncentrality ``beta sqrt(SSX) / sigma``, where ``SSX`` is the exposure's residual sum of squares after
  ``Z``; with Gaussian regressors ``SSX / Var(X | Z)`` is chi-square with ``n - p + 1`` degrees of freedom
  (Anderson 2003, sec. 3.3 and 4.3). :func:`noncentral_t_power` is the power at a fixed noncentrality;
  :func:`regression_power` averages it over that chi-square (16-point Gauss-Legendre rule in probability),
  which is exact for Gaussian regressors. Plugging ``n`` into ``se(n)`` instead overstates power by up to
  about 0.03 at n = 100 with several covariates, which is why the average is used on linear-Gaussian graphs.

The same formulas serve, as a large-sample approximation, graphs whose binary variables have no causes (a
randomised binary exposure, for instance): their covariance is still the linear one, with variance
``proportion (1 - proportion)``; the plain plug-in power is used there. With a binary exposure and no
covariates the regression t test *is* the pooled two-sample t test, so the figures can be checked against
Cohen (1988).

References
----------
1. Cohen J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed. Erlbaum, ch. 2.
2. Anderson T.W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed. Wiley, sec. 3.3 and 4.3
   (Wishart and chi-square distribution of residual sums of squares; from memory).
3. Bollen K.A. (1989). Structural Equations with Latent Variables. Wiley, ch. 4.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> fit = large_sample(sc, ("soil_quality",))
>>> round(fit.estimand, 3), round(fit.se(400), 4)
(0.25, 0.05)
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from workbench.graph.linear import implied_covariance, population_regression
from workbench.scenario.model import Scenario

__all__ = [
    "LargeSample",
    "analytic_available",
    "analytic_covariance",
    "large_sample",
    "noncentral_t_power",
    "regression_power",
    "ci_halfwidth",
    "find_smallest_n",
]

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(16)
_PROBABILITIES = (_NODES + 1.0) / 2.0
_WEIGHTS = _WEIGHTS / 2.0


def _scalar(values):
    """A plain float for a 0-d result, the array otherwise."""
    values = np.asarray(values)
    return float(values) if values.ndim == 0 else values


def noncentral_t_power(noncentrality, df, alpha: float = 0.05):
    """Power of a two-sided t test at level ``alpha`` when the statistic is noncentral t.

    Parameters
    ----------
    noncentrality : float or array_like
        ``effect / se``, the noncentrality parameter.
    df : float or array_like
        Degrees of freedom (``n - p`` for a regression coefficient).
    alpha : float, default 0.05

    Returns
    -------
    float or ndarray
        ``P(|T| > t_{1 - alpha/2, df})`` with ``T ~ nct(df, noncentrality)``, broadcast over the inputs.

    References
    ----------
    Cohen J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed., ch. 2.

    Examples
    --------
    Cohen's medium effect d = 0.5 with 64 units per group (two-sample t test, df = 126):

    >>> import math
    >>> round(float(noncentral_t_power(0.5 * math.sqrt(64 / 2), 126)), 3)
    0.801
    """
    noncentrality = np.asarray(noncentrality, dtype=float)
    df = np.asarray(df, dtype=float)
    critical = stats.t.ppf(1.0 - alpha / 2.0, df)
    size = np.abs(noncentrality)
    # the far tail P(T < -c) is written as P(-T > c) = sf(c; -size), which scipy keeps finite
    far = np.nan_to_num(stats.nct.sf(critical, df, -size), nan=0.0)
    power = np.clip(stats.nct.sf(critical, df, size) + far, 0.0, 1.0)
    power = np.where(noncentrality == 0, alpha, power)
    return _scalar(power)


def regression_power(
    estimand, se_factor, n, n_coefficients: int, alpha: float = 0.05, *, gaussian_regressors: bool = True
):
    """Power of the t test of one regression coefficient with jointly Gaussian regressors.

    Parameters
    ----------
    estimand : float
        The population coefficient (what the strategy's estimate converges to).
    se_factor : float
        ``sqrt(Var(Y | X, Z) / Var(X | Z))``: the standard error times ``sqrt(n)`` in large samples.
    n : int or array_like of int
        Sample sizes, each greater than ``n_coefficients``.
    n_coefficients : int
        ``p``, the fitted coefficients (intercept, the coefficient tested, the others).
    alpha : float, default 0.05
    gaussian_regressors : bool, default True
        True: average the noncentral t power (``df = n - p``) over the chi-square distribution, with
        ``n - p + 1`` degrees of freedom, of the tested regressor's residual sum of squares (exact when the
        regressors are jointly Gaussian). False: the plain large-sample plug-in, noncentrality
        ``estimand / (se_factor / sqrt(n))``, which is right when that sum of squares hardly varies, as for a
        randomised binary exposure (it then equals the two-sample t test's power).

    Returns
    -------
    float or ndarray
        The power; NaN where ``se_factor`` is not finite and positive.

    Notes
    -----
    Exact for linear-Gaussian graphs (Anderson 2003, sec. 4.3); a large-sample approximation otherwise.

    References
    ----------
    Anderson T.W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed., sec. 3.3, 4.3.

    Examples
    --------
    >>> round(float(regression_power(0.25, 1.0, 100, 3)), 3)
    0.683
    """
    n = np.asarray(n, dtype=float)
    if not (math.isfinite(se_factor) and se_factor > 0 and math.isfinite(estimand)):
        out = np.full(n.shape, np.nan)
        return _scalar(out)
    df = n - n_coefficients
    if not gaussian_regressors:
        return _scalar(noncentral_t_power(estimand * np.sqrt(n) / se_factor, df, alpha))
    k = (df + 1.0)[..., None]
    chi2 = stats.chi2.ppf(_PROBABILITIES, k)  # shape (..., 16)
    noncentrality = estimand * np.sqrt(chi2) / se_factor
    power = noncentral_t_power(noncentrality, df[..., None], alpha) @ _WEIGHTS
    power = np.clip(power, 0.0, 1.0)
    return _scalar(power)


def ci_halfwidth(se, df, alpha: float = 0.05):
    """Half-width of the two-sided t confidence interval: ``t_{1 - alpha/2, df} x se``.

    Examples
    --------
    >>> round(float(ci_halfwidth(0.1, 1e9)), 4)
    0.196
    """
    out = stats.t.ppf(1.0 - alpha / 2.0, np.asarray(df, dtype=float)) * np.asarray(se, dtype=float)
    return _scalar(out)


@dataclass(frozen=True)
class LargeSample:
    """The population regression behind one strategy (or one ``also`` variable of a strategy).

    Attributes
    ----------
    variable : str
        The regressor whose coefficient is tested (the exposure, or an ``also`` variable).
    adjust : tuple of str
        The other regressors.
    estimand : float
        Its population coefficient: the causal effect for a valid strategy, a biased quantity otherwise.
    se_factor : float
        ``sqrt(Var(Y | regressors) / Var(variable | others))``.
    n_coefficients : int
        Intercept + 1 + ``len(adjust)``.
    exact : bool
        True on linear-Gaussian graphs (the power is then exact), False where it is a large-sample
        approximation (binary causes without causes of their own; the plain plug-in power is used there).
    """

    variable: str
    adjust: tuple[str, ...]
    estimand: float
    se_factor: float
    n_coefficients: int
    exact: bool

    def se(self, n):
        """Large-sample standard error ``se_factor / sqrt(n)``."""
        out = self.se_factor / np.sqrt(np.asarray(n, dtype=float))
        return _scalar(out)

    def power(self, n, alpha: float = 0.05):
        """Power of the two-sided t test of coefficient = 0 at sample size(s) ``n``
        (see :func:`regression_power`)."""
        return regression_power(
            self.estimand, self.se_factor, n, self.n_coefficients, alpha, gaussian_regressors=self.exact
        )

    def halfwidth(self, n, alpha: float = 0.05):
        """Large-sample half-width of the (1 - alpha) confidence interval at ``n``."""
        n = np.asarray(n, dtype=float)
        return ci_halfwidth(self.se(n), n - self.n_coefficients, alpha)


def analytic_available(scenario: Scenario) -> bool:
    """True when the analytic cross-check applies: a continuous outcome fitted by OLS in every strategy, and
    every binary variable (if any) without causes of its own, so that the covariance is linear.

    Examples
    --------
    >>> from workbench import load_preset
    >>> analytic_available(load_preset("common_cause"))
    True
    """
    if scenario.outcome.is_binary or any(s.model != "ols" for s in scenario.strategies):
        return False
    return all(not v.is_binary or not scenario.parents(v.name) for v in scenario.variables)


def analytic_covariance(scenario: Scenario) -> np.ndarray | None:
    """The covariance of all variables, shape (k, k), in ``scenario.names`` order, or None when
    :func:`analytic_available` is False. Binary variables without causes enter with variance
    ``proportion (1 - proportion)``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> analytic_covariance(load_preset("common_cause")).shape
    (3, 3)
    """
    if not analytic_available(scenario):
        return None
    variables = []
    for v in scenario.variables:
        if v.is_binary:
            sd = math.sqrt(v.proportion * (1.0 - v.proportion))
            v = dataclasses.replace(v, type="continuous", noise_sd=sd, baseline=v.proportion, proportion=None)
        variables.append(v)
    return implied_covariance(dataclasses.replace(scenario, variables=tuple(variables)))


def large_sample(
    scenario: Scenario, adjust, variable: str | None = None, *, sigma: np.ndarray | None = None
) -> LargeSample | None:
    """The population regression of the outcome on ``variable`` (default: the exposure) and ``adjust``.

    Parameters
    ----------
    scenario : Scenario
    adjust : sequence of str
        The other regressors (the exposure may be among them when ``variable`` is an ``also`` variable;
        ``variable`` itself is dropped from it).
    variable : str, optional
        The regressor tested; the exposure by default.
    sigma : ndarray, optional
        A covariance from :func:`analytic_covariance`, to avoid recomputing it.

    Returns
    -------
    LargeSample or None
        None when the analytic approximation does not apply (see :func:`analytic_available`).

    References
    ----------
    Wooldridge J.M. Introductory Econometrics, sec. 3.3 (the population coefficient of a short regression).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> round(large_sample(sc, ()).estimand, 4)  # 0.25 + 0.5 x 0.6 / 1.36
    0.4706
    """
    if sigma is None:
        sigma = analytic_covariance(scenario)
    if sigma is None:
        return None
    variable = variable or scenario.question.exposure
    others = tuple(a for a in adjust if a != variable)
    fit = population_regression(sigma, scenario.names, scenario.question.outcome, [variable, *others])
    return LargeSample(
        variable=variable,
        adjust=others,
        estimand=float(fit.coefficients[variable]),
        se_factor=float(fit.se_factor),
        n_coefficients=2 + len(others),
        exact=scenario.is_linear_gaussian,
    )


def find_smallest_n(reached, low: int, high: int, *, relative: float = 0.0, absolute: int = 1) -> int | None:
    """The smallest integer ``n`` in ``(low, high]`` with ``reached(n)`` True, by bisection, assuming
    ``reached`` is monotone (False then True).

    Parameters
    ----------
    reached : callable int -> bool
    low : int
        A size known (or assumed) not to reach the target.
    high : int
        The largest size to consider.
    relative, absolute : float, int
        Stop when the bracket is within ``max(absolute, relative x n)`` units; the default finds the exact
        integer.

    Returns
    -------
    int or None
        The upper end of the final bracket; None when ``reached(high)`` is False.

    Examples
    --------
    >>> find_smallest_n(lambda n: n * n >= 1000, 0, 100)
    32
    >>> find_smallest_n(lambda n: False, 0, 100) is None
    True
    """
    if not reached(high):
        return None
    while high - low > max(absolute, relative * high):
        middle = (low + high) // 2
        if reached(middle):
            high = middle
        else:
            low = middle
    return high
