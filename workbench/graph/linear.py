"""Closed-form algebra of linear structural models (all variables continuous).

In a linear structural equation model every variable is ``V_j = baseline_j + sum_i B[i, j] V_i + e_j`` with
independent disturbances ``e_j ~ N(0, D_jj)``. Writing the model in matrix form ``V = B^T V + e`` gives

* total effects: ``T = (I - B)^-1 - I``; ``T[i, j]`` is the sum over directed paths from ``i`` to ``j`` of the
  products of the arrows' effects (Wright 1934);
* the implied covariance: ``Sigma = (I - B)^-T D (I - B)^-1`` (with ``B[i, j]`` the effect of ``i`` on ``j``;
  Bollen 1989, ch. 4, writes the same with the transposed convention);
* the population (large-sample) least-squares regression of the outcome on the exposure and a set ``Z``,
  which is what OLS converges to: its coefficient, residual variance and the exposure's residual variance.

References
----------
1. Wright S. (1934). The method of path coefficients. Annals of Mathematical Statistics 5:161-215.
2. Bollen K.A. (1989). Structural Equations with Latent Variables. Wiley, ch. 4.
3. Wooldridge J.M. Introductory Econometrics: A Modern Approach, sec. 3.3 (omitted-variable bias).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench.scenario.model import Scenario

__all__ = [
    "effect_matrix",
    "total_effects",
    "implied_covariance",
    "implied_means",
    "PopulationFit",
    "population_regression",
]


def effect_matrix(scenario: Scenario) -> np.ndarray:
    """The direct-effect matrix ``B`` of shape (k, k) in variable order: ``B[i, j]`` is the effect of
    variable ``i`` on variable ``j`` (0 where there is no arrow).

    Examples
    --------
    >>> from workbench import load_preset
    >>> effect_matrix(load_preset("common_cause"))  # soil_quality, fertiliser, wheat_yield
    array([[0.  , 0.6 , 0.5 ],
           [0.  , 0.  , 0.25],
           [0.  , 0.  , 0.  ]])
    """
    index = {name: i for i, name in enumerate(scenario.names)}
    B = np.zeros((len(index), len(index)))
    for a in scenario.arrows:
        B[index[a.source], index[a.target]] = a.effect
    return B


def total_effects(scenario: Scenario) -> np.ndarray:
    """Total effects, array of shape (k, k): ``T[i, j]`` is the sum over directed paths i -> ... -> j of the
    products of effects (Wright 1934), computed as ``(I - B)^-1 - I``.

    Examples
    --------
    >>> from workbench import load_scenario, loads_scenario
    >>> sc = loads_scenario('title = "t"\\n[question]\\nexposure = "a"\\noutcome = "c"\\n'
    ...     '[variables.a]\\n[variables.b]\\n[variables.c]\\n'
    ...     '[[arrows]]\\nfrom = "a"\\nto = "b"\\neffect = 2.0\\n'
    ...     '[[arrows]]\\nfrom = "b"\\nto = "c"\\neffect = 3.0\\n'
    ...     '[[arrows]]\\nfrom = "a"\\nto = "c"\\neffect = 0.5\\n')
    >>> float(total_effects(sc)[0, 2])
    6.5
    """
    B = effect_matrix(scenario)
    k = B.shape[0]
    return np.linalg.inv(np.eye(k) - B) - np.eye(k)


def implied_covariance(scenario: Scenario) -> np.ndarray:
    """The covariance of all variables implied by a linear-Gaussian scenario, shape (k, k):
    ``(I - B)^-T D (I - B)^-1`` with ``D`` the diagonal of squared noise SDs (Bollen 1989, ch. 4).

    Binary variables have no closed form here; call only when ``scenario.is_linear_gaussian``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> round(float(implied_covariance(load_preset("common_cause"))[1, 1]), 6)  # Var(fertiliser) = 0.6**2 + 1
    1.36
    """
    B = effect_matrix(scenario)
    k = B.shape[0]
    A = np.linalg.inv(np.eye(k) - B)  # V = A^T (baseline + e)
    D = np.diag([v.noise_sd**2 for v in scenario.variables])
    return A.T @ D @ A


def implied_means(scenario: Scenario) -> np.ndarray:
    """Population means of all variables in a linear scenario, shape (k,): ``(I - B)^-T baseline``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> implied_means(load_preset("common_cause"))  # wheat_yield: 5 + 0.25 * 2
    array([0. , 2. , 5.5])
    """
    B = effect_matrix(scenario)
    k = B.shape[0]
    A = np.linalg.inv(np.eye(k) - B)
    return A.T @ np.array([v.baseline for v in scenario.variables])


@dataclass(frozen=True)
class PopulationFit:
    """The population least-squares regression of the outcome on the exposure and ``adjust``.

    Attributes
    ----------
    coefficients : dict of str to float
        Population coefficient of every regressor (the exposure first).
    residual_variance : float
        Var(Y | X, Z) of the linear projection.
    exposure_residual_variance : float
        Var(X | Z): the exposure's variance left after projecting on ``adjust``.
    vif : float
        Var(X) / Var(X | Z): the exposure's variance inflation factor.
    """

    coefficients: dict[str, float]
    residual_variance: float
    exposure_residual_variance: float
    vif: float

    @property
    def se_factor(self) -> float:
        """sqrt(residual variance / Var(X | Z)): the exposure's SE times sqrt(n) in large samples."""
        if self.exposure_residual_variance <= 0:
            return float("inf")
        return float(np.sqrt(self.residual_variance / self.exposure_residual_variance))


def population_regression(
    sigma: np.ndarray, names: list[str], outcome: str, regressors: list[str]
) -> PopulationFit:
    """Population least squares of ``outcome`` on ``regressors`` from a covariance matrix.

    Parameters
    ----------
    sigma : ndarray of shape (k, k)
    names : list of str, length k
    outcome : str
    regressors : list of str
        The exposure first, then the adjustment set.

    Returns
    -------
    PopulationFit

    Notes
    -----
    With ``W`` the regressors, the coefficients are ``Sigma_WW^-1 Sigma_WY`` and the residual variance is
    ``Sigma_YY - Sigma_YW Sigma_WW^-1 Sigma_WY``. A singular ``Sigma_WW`` (a deterministic relation) gives
    NaN coefficients. For the unadjusted regression the exposure's coefficient is
    ``beta_X + beta_C cov(X, C) / var(X)``, the omitted-variable-bias formula (Wooldridge, sec. 3.3).

    Examples
    --------
    >>> import numpy as np
    >>> sigma = np.array([[1.0, 0.5], [0.5, 1.25]])
    >>> population_regression(sigma, ["x", "y"], "y", ["x"]).coefficients
    {'x': 0.5}
    """
    index = {name: i for i, name in enumerate(names)}
    w = [index[r] for r in regressors]
    y = index[outcome]
    s_ww = sigma[np.ix_(w, w)]
    s_wy = sigma[w, y]
    try:
        beta = np.linalg.solve(s_ww, s_wy)
        if np.linalg.cond(s_ww) > 1e12:
            raise np.linalg.LinAlgError("singular")
    except np.linalg.LinAlgError:
        nan = float("nan")
        return PopulationFit({r: nan for r in regressors}, nan, 0.0, float("inf"))
    residual = float(sigma[y, y] - s_wy @ beta)
    x = w[0]
    z = w[1:]
    if z:
        s_zz = sigma[np.ix_(z, z)]
        s_zx = sigma[z, x]
        x_resid = float(sigma[x, x] - s_zx @ np.linalg.solve(s_zz, s_zx))
    else:
        x_resid = float(sigma[x, x])
    vif = float(sigma[x, x] / x_resid) if x_resid > 0 else float("inf")
    return PopulationFit(
        {r: float(b) for r, b in zip(regressors, beta, strict=True)}, max(residual, 0.0), x_resid, vif
    )
