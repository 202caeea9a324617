"""Least squares with heteroskedasticity-robust (HC3) standard errors, for many replicates at once.

The linear probability model (OLS on a 0/1 outcome) estimates a risk difference, but its errors cannot have
constant variance: a row with fitted probability ``p`` has variance ``p (1 - p)``. The classical OLS standard
error is then wrong; the sandwich estimator with the HC3 weights of MacKinnon & White (1985) is the usual
remedy and behaves well in small samples (Long & Ervin 2000):

``cov = (X'X)^-1  X' diag(e_i^2 / (1 - h_i)^2) X  (X'X)^-1``

with ``e_i`` the residuals and ``h_i`` the leverages (diagonal of the hat matrix). It is what ``statsmodels``
reports with ``OLS(...).fit(cov_type="HC3")``.

A replicate whose design is singular, or with a row of leverage 1 (where HC3 is undefined), is marked failed
and gets NaN; nothing is raised for data problems.

References
----------
1. MacKinnon J.G., White H. (1985). Some heteroskedasticity-consistent covariance matrix estimators with
   improved finite sample properties. Journal of Econometrics 29(3):305-325.
2. Long J.S., Ervin L.H. (2000). Using heteroscedasticity consistent standard errors in the linear regression
   model. The American Statistician 54(3):217-224.
"""

from __future__ import annotations

import numpy as np

from workbench.errors import SimulationError

__all__ = ["ols_hc3_batch"]

_SINGULAR = 1e-12  # smallest eigenvalue of the unit-diagonal cross-product matrix below this: singular
_LEVERAGE_ONE = 1e-10  # a leverage within this of 1 makes HC3 undefined


def ols_hc3_batch(X, y) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """OLS with HC3 heteroskedasticity-robust standard errors for each of R replicates.

    Parameters
    ----------
    X : array_like of shape (R, n, p)
        Designs, intercept column first.
    y : array_like of shape (R, n)
        Outcomes (for the linear probability model, 0 or 1).

    Returns
    -------
    coef : ndarray of shape (R, p)
        Least-squares coefficients; NaN for a failed replicate.
    se_hc3 : ndarray of shape (R, p)
        HC3 standard errors; NaN for a failed replicate.
    failed : ndarray of shape (R,), bool
        Singular design, a leverage of 1, or non-finite data.

    Notes
    -----
    The cross-product matrices are scaled to unit diagonal before they are inverted. Cost O(R n p^2) in
    batched matrix products; working memory about ``2 p + 3`` arrays of shape (R, n).

    References
    ----------
    MacKinnon J.G., White H. (1985). Journal of Econometrics 29(3):305-325.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> X = np.ones((2, 200, 2))
    >>> X[..., 1] = rng.integers(0, 2, (2, 200))
    >>> y = (rng.random((2, 200)) < 0.2 + 0.3 * X[..., 1]).astype(float)
    >>> coef, se, failed = ols_hc3_batch(X, y)
    >>> coef.shape, se.shape, failed.tolist()
    ((2, 2), (2, 2), [False, False])
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    if X.ndim != 3 or y.shape != X.shape[:2]:
        raise SimulationError(
            f"ols_hc3_batch: X must have shape (R, n, p) and y shape (R, n); got {X.shape} and {y.shape}"
        )
    R, n, p = X.shape
    finite = np.all(np.isfinite(X), axis=(1, 2)) & np.all(np.isfinite(y), axis=1)
    if not finite.all():
        X = np.where(finite[:, None, None], X, 0.0)
        y = np.where(finite[:, None], y, 0.0)
    Xt = np.swapaxes(X, 1, 2)
    cross = np.matmul(Xt, X)
    diag = np.diagonal(cross, axis1=1, axis2=2)
    good = np.all(diag > 0, axis=1)
    scale = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
    scaled = cross * scale[:, :, None] * scale[:, None, :]
    scaled[~good] = np.eye(p)
    singular = ~good | (np.linalg.eigvalsh(scaled)[:, 0] < _SINGULAR)
    scaled[singular] = np.eye(p)
    inverse = np.linalg.inv(scaled) * scale[:, :, None] * scale[:, None, :]  # (X'X)^-1

    coef = np.matmul(inverse, np.matmul(Xt, y[..., None]))[..., 0]
    residual = y - np.matmul(X, coef[..., None])[..., 0]
    leverage = np.sum(np.matmul(X, inverse) * X, axis=2)
    with np.errstate(divide="ignore", invalid="ignore"):
        omega = (residual / (1.0 - leverage)) ** 2
    meat = np.matmul(Xt * omega[:, None, :], X)
    cov = np.matmul(np.matmul(inverse, meat), inverse)
    se = np.sqrt(np.clip(np.diagonal(cov, axis1=1, axis2=2), 0.0, None))

    failed = (
        ~finite | singular | np.any(leverage > 1.0 - _LEVERAGE_ONE, axis=1) | ~np.all(np.isfinite(se), axis=1)
    )
    coef[failed] = np.nan
    se[failed] = np.nan
    return coef, se, failed
