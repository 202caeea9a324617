"""OLS with exposure x covariate interaction terms, batched over replicates: the population-averaged effect.

A strategy with ``interactions = ["skill"]`` fits, in every simulated study,

    y = a + b_x x + b_w' w + sum_j b_j x (z_j - zbar_j) + e

where ``w`` is its adjustment set, each interaction covariate ``z_j`` is in ``w`` and ``zbar_j`` is its mean
in that study's sample. Unit ``i``'s marginal effect of the exposure is ``b_x + sum_j b_j (z_ij - zbar_j)``;
centred at the sample mean, these average to ``b_x`` over the sample, so ``b_x`` is the sample-averaged
(standardised over the sample) effect, the average marginal effect (Wooldridge, Introductory
Econometrics, ch. 6, from memory). Centring moves only ``b_x``: the other coefficients, the residuals and
the classical SEs of the product terms are those of the uncentred model.

The reported SE of the averaged effect accounts for the sample means as estimates of the population means
(delta method): the estimator is ``b_x^u + b' zbar`` with ``b_x^u`` the exposure's coefficient of the
uncentred model, so

    Var = se(b_x)^2 + b' Cov(zbar) b,    Cov(zbar) = S_zz / (n (n - 1)),

``se(b_x)`` the classical SE of the centred fit (the variance given the sample's covariates) and ``S_zz``
the centred cross-products of the ``z_j``. The covariance of ``zbar`` with the coefficients is zero when
the model's mean is right (the coefficients are conditionally unbiased given the covariates), and the term
of order ``1/n^2`` from the product of the two errors is dropped. Intervals are normal (``df = inf``), as
for the other fits that add an estimated term. Without interaction effects (``b = 0``) the SE is the
classical one.

Every fit is one batched cross-product and one batched Cholesky solve (:func:`workbench.engine.ols.
fit_crossproducts`) over all replicates: no per-replicate Python loop.

References
----------
1. Wooldridge J.M. Introductory Econometrics: A Modern Approach, ch. 6 (models with interaction terms;
   average partial effects), from memory.
2. Oehlert G.W. (1992). A note on the delta method. The American Statistician 46(1):27-29.

Examples
--------
>>> rng = np.random.default_rng(1)
>>> z = rng.standard_normal((1, 2000))
>>> x = (rng.random((1, 2000)) < 0.5).astype(float)
>>> y = (2.0 + 1.0 * z) * x + z + rng.standard_normal((1, 2000))
>>> data = np.stack([z, x, y], axis=1)  # (replicates, variables, rows)
>>> fit = fit_interactions(data, 1, [0], [0], 2)
>>> fit.coef.shape, bool(abs(fit.averaged[0] - 2.0) < 0.3), bool(fit.averaged_se[0] > fit.coef_se[0, 0])
((1, 2), True, True)
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import numpy as np

from workbench.engine.ols import crossproducts, fit_crossproducts

__all__ = ["InteractionFit", "fit_interactions"]


@dataclass
class InteractionFit:
    """The interaction model in every replicate.

    Attributes
    ----------
    averaged, averaged_se : ndarray of shape (R,)
        The sample-averaged effect ``b_x`` and its delta-method SE (module notes); NaN where the fit failed.
    coef, coef_se : ndarray of shape (R, 1 + q)
        The exposure's coefficient and the ``q`` product terms' coefficients, with classical SEs.
    adjusted : ndarray of shape (R, p)
        The coefficients of the adjustment set (the question's ``also`` figures).
    adjusted_se : ndarray of shape (R, p)
    vif : ndarray of shape (R,)
        The exposure's variance inflation factor in the interaction model.
    failed : ndarray of bool, shape (R,)
    reasons : Counter
    df : int
        Residual degrees of freedom of the interaction model, ``n - 2 - p - q``.
    """

    averaged: np.ndarray
    averaged_se: np.ndarray
    coef: np.ndarray
    coef_se: np.ndarray
    adjusted: np.ndarray
    adjusted_se: np.ndarray
    vif: np.ndarray
    failed: np.ndarray
    reasons: Counter
    df: int


def fit_interactions(data: np.ndarray, exposure: int, adjust, interactions, outcome: int, names=None):
    """Fit the interaction model (module notes) in every replicate.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
        Replicate, variable, row (the raw engine's layout).
    exposure, outcome : int
        Variable indices.
    adjust : sequence of int
        The adjustment set's variable indices.
    interactions : sequence of int
        Positions in ``adjust`` of the covariates that also enter as exposure x (covariate - sample mean).
    names : sequence of str, optional
        Variable names by index, for the failure reasons.

    Returns
    -------
    InteractionFit
    """
    adjust = list(adjust)
    interactions = list(interactions)
    R, k, n = data.shape
    p, q = len(adjust), len(interactions)
    names = list(names) if names is not None else [f"column {i}" for i in range(k)]
    z = data[:, [adjust[j] for j in interactions], :]
    centred = z - z.mean(axis=2)[:, :, None]
    x = data[:, exposure, :]
    columns = np.empty((R, 2 + p + q, n))
    columns[:, 0] = x
    columns[:, 1 : 1 + p] = data[:, adjust, :]
    np.multiply(x[:, None, :], centred, out=columns[:, 1 + p : 1 + p + q])
    columns[:, -1] = data[:, outcome, :]
    S = crossproducts(columns)
    labels = [names[exposure]] + [names[a] for a in adjust]
    labels += [f"{names[exposure]} x {names[adjust[j]]}" for j in interactions] + [names[outcome]]
    regressors = list(range(1 + p + q))
    fit = fit_crossproducts(S, n, 1 + p + q, regressors, labels)
    products = slice(1 + p, 1 + p + q)
    b = fit.coef[:, products]
    Czz = np.matmul(centred, centred.transpose(0, 2, 1)) / (n * (n - 1.0))  # Cov(zbar): S_zz / (n (n - 1))
    extra = np.einsum("rj,rjk,rk->r", b, Czz, b)
    with np.errstate(invalid="ignore"):
        averaged_se = np.sqrt(fit.se[:, 0] ** 2 + extra)
    coef = np.concatenate([fit.coef[:, :1], b], axis=1)
    coef_se = np.concatenate([fit.se[:, :1], fit.se[:, products]], axis=1)
    return InteractionFit(
        averaged=fit.coef[:, 0].copy(),
        averaged_se=np.where(fit.failed, np.nan, averaged_se),
        coef=coef,
        coef_se=coef_se,
        adjusted=fit.coef[:, 1 : 1 + p],
        adjusted_se=fit.se[:, 1 : 1 + p],
        vif=fit.vif,
        failed=fit.failed,
        reasons=fit.reasons,
        df=int(np.asarray(fit.df)),
    )
