"""Standardised (marginal) contrasts from logistic fits of many replicates, with delta-method SEs.

:func:`standardized_contrast` predicts every row with the exposure set to 1 and to 0 (a continuous exposure:
as observed and shifted by +1), averages over the rows of the replicate, and contrasts the two means on the
risk-difference or log-odds-ratio scale (the "g-formula" or regression standardisation; Greenland, Robins &
Pearl 1999 explain why this marginal contrast differs from the conditional odds ratio even without
confounding). Its standard error is by the delta method with the covariates held fixed, the definition
``statsmodels`` uses for average discrete changes. Everything is batched over replicates, like the fits
(:func:`workbench.engine.logistic.fit_logit_batch`).

References
----------
1. Greenland S., Robins J.M., Pearl J. (1999). Confounding and collapsibility in causal inference.
   Statistical Science 14(1):29-46.
2. Oehlert G.W. (1992). A note on the delta method. The American Statistician 46(1):27-29.

Examples
--------
>>> import numpy as np
>>> from workbench.engine.logistic import design_matrix, fit_logit_batch
>>> rng = np.random.default_rng(3)
>>> data = np.stack([rng.integers(0, 2, (4, 300)), rng.normal(size=(4, 300))], axis=-1)
>>> X = design_matrix(data, 0, [1])
>>> y = (rng.random((4, 300)) < 0.3 + 0.2 * X[..., 1]).astype(float)
>>> risk_difference, se = standardized_contrast(fit_logit_batch(X, y), X, 1)
>>> risk_difference.shape, se.shape
((4,), (4,))
"""

from __future__ import annotations

import numpy as np
from scipy.special import expit

from workbench.engine.logistic import LogitFit
from workbench.errors import SimulationError

__all__ = ["standardized_contrast"]


def standardized_contrast(
    fit: LogitFit,
    X,
    exposure_column: int,
    *,
    exposure_kind: str = "binary",
    scale: str = "difference",
) -> tuple[np.ndarray, np.ndarray]:
    """Marginal contrast by standardisation over each replicate's rows, with its delta-method SE.

    Each row is predicted with the exposure set to 1 and to 0 (``exposure_kind="binary"``), or as observed
    and shifted by +1 (``"continuous"``); the predictions are averaged over the rows to ``m1`` and ``m0``
    and contrasted: ``m1 - m0`` (``scale="difference"``, a risk difference) or
    ``logit(m1) - logit(m0)`` (``"log_odds_ratio"``, the marginal log odds ratio).

    Parameters
    ----------
    fit : LogitFit
        From :func:`fit_logit_batch` on ``X``.
    X : array_like of shape (R, n, p)
        The designs the model was fitted on.
    exposure_column : int
        Column of ``X`` holding the exposure (1 with :func:`design_matrix`).
    exposure_kind : {"binary", "continuous"}, default "binary"
    scale : {"difference", "log_odds_ratio"}, default "difference"

    Returns
    -------
    estimate : ndarray of shape (R,)
    se : ndarray of shape (R,)
        ``sqrt(g' cov g)`` with ``g`` the gradient of the contrast with respect to the coefficients, the
        covariates held fixed. NaN for failed replicates.

    References
    ----------
    Greenland S., Robins J.M., Pearl J. (1999). Statistical Science 14(1):29-46.
    Oehlert G.W. (1992). A note on the delta method. The American Statistician 46(1):27-29.

    Examples
    --------
    >>> import numpy as np
    >>> from workbench.engine.logistic import design_matrix, fit_logit_batch
    >>> rng = np.random.default_rng(7)
    >>> data = np.stack([rng.integers(0, 2, (2, 500)), rng.normal(size=(2, 500))], axis=-1)
    >>> X = design_matrix(data, 0, [1])
    >>> y = (rng.random((2, 500)) < 1 / (1 + np.exp(-(X[..., 1] + 2 * X[..., 2])))).astype(float)
    >>> estimate, se = standardized_contrast(fit_logit_batch(X, y), X, 1)
    >>> estimate.shape, bool(np.all((se > 0) & (se < 0.1)))
    ((2,), True)
    """
    if exposure_kind not in ("binary", "continuous"):
        raise SimulationError(
            f"standardized_contrast: exposure_kind must be 'binary' or 'continuous', got {exposure_kind!r}"
        )
    if scale not in ("difference", "log_odds_ratio"):
        raise SimulationError(
            f"standardized_contrast: scale must be 'difference' or 'log_odds_ratio', got {scale!r}"
        )
    X = np.asarray(X, dtype=float)
    j = int(exposure_column)
    beta = fit.coef
    n = X.shape[1]
    eta = np.matmul(X, beta[..., None])[..., 0]
    x = X[..., j]
    bj = beta[:, j : j + 1]
    if exposure_kind == "binary":
        eta1 = eta + (1.0 - x) * bj
        eta0 = eta - x * bj
        x1, x0 = np.ones_like(x), np.zeros_like(x)
    else:
        eta1 = eta + bj
        eta0 = eta
        x1, x0 = x + 1.0, x
    p1, p0 = expit(eta1), expit(eta0)
    w1, w0 = p1 * (1.0 - p1), p0 * (1.0 - p0)
    m1, m0 = p1.mean(axis=1), p0.mean(axis=1)
    # d m / d beta = mean over rows of p (1 - p) x_row, with the exposure column at its set value.
    g1 = np.matmul(w1[:, None, :], X)[:, 0, :] / n
    g0 = np.matmul(w0[:, None, :], X)[:, 0, :] / n
    g1[:, j] = np.mean(w1 * x1, axis=1)
    g0[:, j] = np.mean(w0 * x0, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        if scale == "difference":
            estimate = m1 - m0
            grad = g1 - g0
        else:
            estimate = np.log(m1 / (1.0 - m1)) - np.log(m0 / (1.0 - m0))
            grad = g1 / (m1 * (1.0 - m1))[:, None] - g0 / (m0 * (1.0 - m0))[:, None]
        variance = np.einsum("ri,rij,rj->r", grad, fit.cov, grad)
        se = np.sqrt(variance)
    return estimate, se
