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

__all__ = ["ols_hc3_batch", "CACHE_BYTES"]

_SINGULAR = (
    1e-12  # inverse of the unit-diagonal cross-product matrix of row-sum norm 1 / this or more: singular
)
_LEVERAGE_ONE = 1e-10  # a leverage within this of 1 makes HC3 undefined
CACHE_BYTES = 2**20
"""Working set aimed at per block of replicates, in bytes (the L2 caches of the 2-CPU EPYC it was tuned on)."""


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
    The cross-product matrices are scaled to unit diagonal before they are inverted; one counts as singular
    when a diagonal entry is not positive or the inverse of the scaled matrix has a row-sum norm of
    ``1e12`` or more (its smallest eigenvalue is then below about ``1e-12``), and an exactly singular one
    never stops the others. Cost O(R n p^2) in batched matrix products, over blocks of replicates whose
    working arrays (about ``2 p + 3`` rows of ``n`` each) fit in :data:`CACHE_BYTES`; no array of the size
    of the whole design is made, and a design from :func:`workbench.engine.logistic.design_matrix` (columns
    contiguous) is used without a copy.

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
    Xt = np.swapaxes(X, 1, 2)  # (R, p, n): contiguous rows per column for a design from design_matrix
    coef = np.empty((R, p))
    se = np.empty((R, p))
    failed = np.empty(R, dtype=bool)
    size = int(np.clip(CACHE_BYTES // max(8 * n * (2 * p + 3), 1), 1, max(R, 1)))
    for start in range(0, R, size):
        block = slice(start, min(start + size, R))
        coef[block], se[block], failed[block] = _hc3_block(Xt[block], y[block])
    return coef, se, failed


def _invert_cross(cross: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inverses (B, p, p) of cross-product matrices and singular flags (B,) (see :func:`ols_hc3_batch`
    notes); a singular one gets the identity's inverse, to be discarded."""
    p = cross.shape[1]
    diag = np.diagonal(cross, axis1=1, axis2=2)
    good = np.all(diag > 0, axis=1) & np.isfinite(cross).all(axis=(1, 2))
    scale = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
    outer = scale[:, :, None] * scale[:, None, :]
    scaled = cross * outer
    scaled[~good] = np.eye(p)
    try:
        inverse = np.linalg.inv(scaled)
    except np.linalg.LinAlgError:  # an exactly singular matrix (a zero pivot) stops the whole batch
        good &= np.linalg.det(scaled) != 0.0  # the same LU factorisation, without raising
        scaled[~good] = np.eye(p)
        inverse = np.linalg.inv(scaled)
    singular = ~good | ~(np.abs(inverse).sum(axis=2).max(axis=1) < 1.0 / _SINGULAR)
    inverse *= outer
    return inverse, singular


def _hc3_block(Xt: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`ols_hc3_batch` on one block of transposed designs ``Xt`` (B, p, n)."""
    with np.errstate(over="ignore", invalid="ignore"):
        finite = np.isfinite(np.sum(Xt, axis=(1, 2))) & np.isfinite(np.sum(y, axis=1))  # one pass
    if not finite.all():  # a sum can overflow with finite entries: look again element by element
        finite = np.all(np.isfinite(Xt), axis=(1, 2)) & np.all(np.isfinite(y), axis=1)
        Xt = np.where(finite[:, None, None], Xt, 0.0)
        y = np.where(finite[:, None], y, 0.0)
    inverse, singular = _invert_cross(np.matmul(Xt, np.swapaxes(Xt, 1, 2)))  # (X'X)^-1
    coef = np.matmul(inverse, np.matmul(Xt, y[..., None]))[..., 0]
    residual = y - np.matmul(coef[:, None, :], Xt)[:, 0, :]
    work = np.matmul(inverse, Xt)  # (B, p, n): rows of X (X'X)^-1, transposed
    work *= Xt
    leverage = np.sum(work, axis=1)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        omega = (residual / (1.0 - leverage)) ** 2
        np.multiply(Xt, omega[:, None, :], out=work)
        meat = np.matmul(work, np.swapaxes(Xt, 1, 2))
        cov = np.matmul(np.matmul(inverse, meat), inverse)
    se = np.sqrt(np.clip(np.diagonal(cov, axis1=1, axis2=2), 0.0, None))
    failed = (
        ~finite | singular | np.any(leverage > 1.0 - _LEVERAGE_ONE, axis=1) | ~np.all(np.isfinite(se), axis=1)
    )
    coef[failed] = np.nan
    se[failed] = np.nan
    return coef, se, failed
