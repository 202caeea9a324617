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

from workbench.engine.logistic import LogitFit
from workbench.errors import SimulationError

__all__ = ["standardized_contrast", "CACHE_BYTES"]

CACHE_BYTES = 2**20
"""Working set aimed at per block of replicates, in bytes (a share of the processor's L2 cache)."""


def _sigmoid(eta: np.ndarray) -> np.ndarray:
    """``1 / (1 + exp(-eta))`` in place (an overflow of exp gives exactly 0, as it should)."""
    with np.errstate(over="ignore"):
        np.negative(eta, out=eta)
        np.exp(eta, out=eta)
    eta += 1.0
    return np.reciprocal(eta, out=eta)


def _means_and_gradients(Xt: np.ndarray, beta: np.ndarray, j: int, binary: bool):
    """Mean predictions ``m1``, ``m0`` (B,) with the exposure (column ``j``) set to 1 and 0 (or shifted by
    +1 and as observed) and their gradients ``g1``, ``g0`` (B, p), for one block of designs (B, p, n)."""
    B, p, n = Xt.shape
    x = Xt[:, j, :]
    bj = beta[:, j : j + 1]
    predictions = np.empty((B, 2, n))  # rows: exposure set to 1 (or shifted), to 0 (or as observed)
    eta0 = predictions[:, 1, :]
    np.matmul(beta[:, None, :], Xt, out=eta0[:, None, :])
    if binary:
        eta0 -= x * bj
    np.add(eta0, bj, out=predictions[:, 0, :])
    _sigmoid(predictions)
    means = predictions.mean(axis=2)
    weights = np.subtract(1.0, predictions)
    weights *= predictions  # p (1 - p)
    # d m / d beta = mean over rows of p (1 - p) x_row, with the exposure column at its set value.
    gradients = np.matmul(Xt, np.swapaxes(weights, 1, 2)) / n  # (B, p, 2)
    g1, g0 = gradients[:, :, 0], gradients[:, :, 1]
    if binary:
        g1[:, j] = weights[:, 0, :].mean(axis=1)
        g0[:, j] = 0.0
    else:  # x + 1 in the shifted predictions
        g1[:, j] += weights[:, 0, :].mean(axis=1)
    return means[:, 0], means[:, 1], g1, g0


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
    Xt = np.swapaxes(X, 1, 2)  # (R, p, n): each column's rows contiguous for a design from design_matrix
    R, p, n = Xt.shape
    m1, m0 = np.empty(R), np.empty(R)
    g1, g0 = np.empty((R, p)), np.empty((R, p))
    size = int(np.clip(CACHE_BYTES // max(8 * n * (p + 6), 1), 1, max(R, 1)))
    for start in range(0, R, size):
        block = slice(start, min(start + size, R))
        m1[block], m0[block], g1[block], g0[block] = _means_and_gradients(
            Xt[block], fit.coef[block], j, exposure_kind == "binary"
        )
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
