"""Poisson regression (log link) fitted to many replicates at once, with model-based and sandwich covariances.

A design of shape (R, n, p) holds ``R`` replicate datasets of ``n`` rows and ``p`` columns (intercept first),
an outcome of shape (R, n) their outcomes (0/1 for a binary outcome, the only use so far). All replicates are
iterated together with batched matrix products and solves; a replicate that has converged (or failed) drops
out of the later iterations.

Fitting
    Newton-Raphson on the Poisson log-likelihood ``sum(y eta - exp(eta))``, the same as iteratively
    reweighted least squares for the canonical log link (McCullagh & Nelder 1989, sec. 4.4). The start is the
    intercept-only fit (intercept ``log(mean y)``, slopes 0) when the first column is all ones, zero
    otherwise. The information matrix ``X' diag(mu) X`` is scaled to unit diagonal before it is inverted; a
    step that would lower the log-likelihood is halved (at most 30 times). Iteration stops when half the
    Newton decrement ``score' info^-1 score`` is at most ``tol``; that last step is applied.

Covariances
    ``cov_classical`` is the inverse information at the estimate, what ``statsmodels``
    ``GLM(family=Poisson()).fit()`` reports. For a 0/1 outcome it overstates the variance (a Bernoulli
    variance ``mu (1 - mu)`` is below the Poisson one ``mu``), so its intervals are conservative.
    ``cov_robust`` is the HC0 sandwich ``info^-1 X' diag((y - mu)^2) X info^-1`` without a small-sample
    factor, the robust error variance of Zou (2004) and ``statsmodels`` ``cov_type="HC0"``.

Failures
    A failed replicate has NaN coefficients and covariances and one reason: ``"non-finite values in the
    data"``, ``"singular information matrix"`` (collinear or constant columns), ``"estimate diverges (no
    events in part of the design)"`` (some fitted mean below ``1e-10`` at the end: the maximum-likelihood
    estimate does not exist, as when one exposure group has no events) or ``"did not converge in 50
    iterations"`` (with the actual ``max_iter``). Data problems never raise.

References
----------
1. McCullagh P., Nelder J.A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall, sec. 4.4 and 6.2.
2. Zou G. (2004). A modified Poisson regression approach to prospective studies with binary data. American
   Journal of Epidemiology 159(7):702-706.
3. White H. (1980). A heteroskedasticity-consistent covariance matrix estimator and a direct test for
   heteroskedasticity. Econometrica 48(4):817-838 (HC0).

Examples
--------
>>> import numpy as np
>>> from workbench.engine.logistic import design_matrix
>>> rng = np.random.default_rng(1)
>>> data = rng.integers(0, 2, size=(3, 400, 2)).astype(float)
>>> X = design_matrix(data, 0, [1])
>>> y = (rng.random((3, 400)) < 0.2 * np.exp(0.4 * X[..., 1])).astype(float)
>>> fit = fit_poisson_batch(X, y)
>>> fit.coef.shape, fit.cov_robust.shape, fit.failed.tolist()
((3, 3), (3, 3, 3), [False, False, False])
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workbench.errors import SimulationError

__all__ = ["PoissonFit", "fit_poisson_batch", "CACHE_BYTES"]

CACHE_BYTES = 4 * 2**20
"""Working set aimed at per block of replicates fitted together, in bytes."""

_SINGULAR = 1e-12  # inverse of the unit-diagonal information of row-sum norm 1 / this or more: singular
_HALVINGS = 30
_DIVERGED_MU = 1e-10  # a fitted mean below this at the end: the estimate runs off to minus infinity
_MAX_ETA = 700.0  # exp overflows beyond about 709


@dataclass(frozen=True)
class PoissonFit:
    """Poisson regressions of R replicates.

    Attributes
    ----------
    coef : ndarray of shape (R, p)
        Maximum-likelihood coefficients, intercept first; NaN for a failed replicate.
    cov_classical, cov_robust : ndarray of shape (R, p, p)
        Inverse information, and the HC0 sandwich; NaN for a failed replicate.
    failure : ndarray of shape (R,), str
        ``""`` for a good fit, else the reason (module notes).
    iterations : ndarray of shape (R,), int
    """

    coef: np.ndarray
    cov_classical: np.ndarray
    cov_robust: np.ndarray
    failure: np.ndarray
    iterations: np.ndarray

    @property
    def failed(self) -> np.ndarray:
        """Boolean array of shape (R,): the replicate has a failure reason."""
        return self.failure != ""

    def se(self, kind: str = "robust") -> np.ndarray:
        """Standard errors, shape (R, p): ``"robust"`` (HC0 sandwich) or ``"classical"``."""
        cov = self.cov_robust if kind == "robust" else self.cov_classical
        return np.sqrt(np.clip(np.diagonal(cov, axis1=1, axis2=2), 0.0, None))


def _invert(info: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inverses (B, p, p) of information matrices after scaling to unit diagonal, and singular flags."""
    p = info.shape[1]
    diag = np.diagonal(info, axis1=1, axis2=2)
    good = np.all(diag > 0, axis=1) & np.isfinite(info).all(axis=(1, 2))
    scale = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
    outer = scale[:, :, None] * scale[:, None, :]
    scaled = info * outer
    scaled[~good] = np.eye(p)
    try:
        inverse = np.linalg.inv(scaled)
    except np.linalg.LinAlgError:  # an exactly singular matrix stops the whole batch: set it aside
        good &= np.linalg.det(scaled) != 0.0
        scaled[~good] = np.eye(p)
        inverse = np.linalg.inv(scaled)
    singular = ~good | ~(np.abs(inverse).sum(axis=2).max(axis=1) < 1.0 / _SINGULAR)
    return inverse * outer, singular


def _loglik(eta: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Poisson log-likelihood without the ``log(y!)`` term, summed over rows: shape (B,)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.sum(y * eta - np.exp(np.minimum(eta, _MAX_ETA)), axis=1)


def _fit_block(Xt: np.ndarray, y: np.ndarray, max_iter: int, tol: float):
    """Newton iterations on one block of transposed designs ``Xt`` (B, p, n) and outcomes (B, n)."""
    B, p, n = Xt.shape
    failure = np.full(B, "", dtype=object)
    finite = np.all(np.isfinite(Xt), axis=(1, 2)) & np.all(np.isfinite(y), axis=1)
    failure[~finite] = "non-finite values in the data"
    Xt = np.where(finite[:, None, None], Xt, 0.0)
    y = np.where(finite[:, None], y, 0.0)
    beta = np.zeros((B, p))
    if np.all(Xt[:, 0, :] == 1.0):
        beta[:, 0] = np.log(np.maximum(y.mean(axis=1), 1e-300))
    eta = np.matmul(beta[:, None, :], Xt)[:, 0, :]
    loglik = _loglik(eta, y)
    active = np.flatnonzero(finite)
    iterations = np.zeros(B, dtype=np.int64)
    done = ~finite
    for _ in range(max_iter):
        if active.size == 0:
            break
        Xa, ya, ea = Xt[active], y[active], eta[active]
        mu = np.exp(np.minimum(ea, _MAX_ETA))
        score = np.matmul(Xa, (ya - mu)[..., None])[..., 0]
        info = np.matmul(Xa * mu[:, None, :], np.swapaxes(Xa, 1, 2))
        inverse, singular = _invert(info)
        step = np.matmul(inverse, score[..., None])[..., 0]
        decrement = 0.5 * np.sum(score * step, axis=1)
        shift = np.matmul(step[:, None, :], Xa)[:, 0, :]
        factor = np.ones(active.size)
        new_ll = _loglik(ea + shift, ya)
        worse = ~(new_ll >= loglik[active] - 1e-12 * np.abs(loglik[active]))
        for _ in range(_HALVINGS):
            if not worse.any():
                break
            factor[worse] *= 0.5
            new_ll[worse] = _loglik(ea[worse] + factor[worse, None] * shift[worse], ya[worse])
            worse &= ~(new_ll >= loglik[active] - 1e-12 * np.abs(loglik[active]))
        ok = ~singular
        beta[active[ok]] += factor[ok, None] * step[ok]
        eta[active[ok]] = ea[ok] + factor[ok, None] * shift[ok]
        loglik[active[ok]] = new_ll[ok]
        iterations[active] += 1
        failure[active[singular]] = "singular information matrix"
        finished = singular | (decrement <= tol)
        done[active[finished]] = True
        active = active[~finished]
    failure[active] = f"did not converge in {max_iter} iterations"
    return beta, eta, y, Xt, failure, iterations


def _covariances(Xt, y, eta, failure):
    """Inverse information and HC0 sandwich at the estimates; singular information marks a failure."""
    mu = np.exp(np.minimum(eta, _MAX_ETA))
    info = np.matmul(Xt * mu[:, None, :], np.swapaxes(Xt, 1, 2))
    inverse, singular = _invert(info)
    good = failure == ""
    diverged = good & (np.min(mu, axis=1) < _DIVERGED_MU)
    failure[diverged] = "estimate diverges (no events in part of the design)"
    failure[good & ~diverged & singular] = "singular information matrix"
    residual2 = (y - mu) ** 2
    meat = np.matmul(Xt * residual2[:, None, :], np.swapaxes(Xt, 1, 2))
    robust = np.matmul(np.matmul(inverse, meat), inverse)
    return inverse, robust


def fit_poisson_batch(X, y, *, max_iter: int = 50, tol: float = 1e-12) -> PoissonFit:
    """Poisson regression with a log link for each of R replicates, batched.

    Parameters
    ----------
    X : array_like of shape (R, n, p)
        Designs, intercept column first (:func:`workbench.engine.logistic.design_matrix`; its layout is used
        without a copy).
    y : array_like of shape (R, n)
        Outcomes (non-negative).
    max_iter : int, default 50
    tol : float, default 1e-12
        Stop when half the Newton decrement is at most this.

    Returns
    -------
    PoissonFit

    Notes
    -----
    Cost O(R n p^2) per iteration in batched products, over blocks of replicates whose working arrays fit in
    :data:`CACHE_BYTES`; usually 4 to 6 iterations. See the module notes for the covariances and failures.

    References
    ----------
    Zou G. (2004). American Journal of Epidemiology 159(7):702-706.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    if X.ndim != 3 or y.shape != X.shape[:2]:
        raise SimulationError(
            f"fit_poisson_batch: X must have shape (R, n, p) and y shape (R, n); got {X.shape} and {y.shape}"
        )
    R, n, p = X.shape
    Xt = np.swapaxes(X, 1, 2)
    coef = np.empty((R, p))
    cov_c = np.empty((R, p, p))
    cov_r = np.empty((R, p, p))
    failure = np.empty(R, dtype=object)
    iterations = np.empty(R, dtype=np.int64)
    size = int(np.clip(CACHE_BYTES // max(8 * n * (2 * p + 4), 1), 1, max(R, 1)))
    for start in range(0, R, size):
        block = slice(start, min(start + size, R))
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            beta, eta, yb, Xb, fail, its = _fit_block(Xt[block], y[block], max_iter, tol)
            classical, robust = _covariances(Xb, yb, eta, fail)
        bad = fail != ""
        beta[bad] = np.nan
        classical[bad] = np.nan
        robust[bad] = np.nan
        coef[block], cov_c[block], cov_r[block] = beta, classical, robust
        failure[block], iterations[block] = fail, its
    return PoissonFit(coef, cov_c, cov_r, failure.astype(str), iterations)
