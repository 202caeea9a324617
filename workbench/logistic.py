"""Logistic regression fitted to many replicates at once, and standardised (marginal) contrasts from it.

Every function here works on stacked arrays: a design of shape (R, n, p) holds ``R`` replicate datasets of
``n`` rows and ``p`` columns (intercept first), an outcome of shape (R, n) holds their 0/1 outcomes. All
replicates are iterated together with batched matrix products and batched solves; a replicate that has
converged (or failed) is frozen and drops out of the work of later iterations.

Fitting
    Newton-Raphson on the log-likelihood, which for the logit link is the same as iteratively reweighted
    least squares (McCullagh & Nelder 1989, sec. 4.4). Starting values are zero. Each iteration solves the
    Newton system after scaling the information matrix to unit diagonal (equilibration), and halves the step
    while the log-likelihood would fall. Iteration stops when half the Newton decrement
    ``score' info^-1 score`` is at most ``tol`` (Boyd & Vandenberghe 2004, sec. 9.5.1); the step computed
    there is still applied, so the returned coefficients are one quadratic step beyond the stopping point.
    The covariance is the inverse of the observed information ``X' W X`` at the returned coefficients (for
    the logit link observed and expected information coincide), as in ``statsmodels`` ``Logit``.

Separation
    The maximum-likelihood estimate does not exist when a linear combination of the columns separates the
    outcomes: some ``d != 0`` with ``(2 y_i - 1) x_i' d >= 0`` for every row (Albert & Anderson 1984). It is
    complete separation when every inequality can be strict, quasi-complete when some rows stay on the
    boundary. Newton's method then never settles: it moves the coefficients along ``d`` by a roughly
    constant amount each iteration while the log-likelihood creeps towards its supremum, and the Newton
    decrement shrinks so that the stopping rule may even be met. The rule used here, applied to every
    replicate after the iterations end, is a certificate check on the last Newton step ``d``:

    1. *moving*: the last step still shifts the linear predictor, ``max_i |x_i' d| > 1e-3`` (a regular fit's
       last step is a quadratic polish, many orders of magnitude smaller);
    2. *certificate*: ``d`` separates, ``min_i (2 y_i - 1) x_i' d >= -1e-6 max_i |x_i' d|``;
    3. *perfect prediction*: at least one row has its fitted probability within ``1e-8`` of its outcome.

    A replicate meeting all three is separated: "complete separation" when every row is fitted within
    ``1e-8`` of its outcome (the check ``statsmodels`` uses for perfect prediction), "quasi-complete
    separation" otherwise. No linear program is solved; the tests check the verdicts against one.

Failures
    A failed replicate has NaN coefficients and covariance, ``converged`` False, and one of the reasons
    ``"complete separation"``, ``"quasi-complete separation"``, ``"singular information matrix"`` (columns
    collinear, or constant within the replicate), ``"did not converge in 50 iterations"`` (with the actual
    ``max_iter``), ``"non-finite values in the data"`` or ``"outcome values other than 0 and 1"``. Data
    problems never raise; only wrongly shaped arguments do.

Standardisation
    :func:`standardized_contrast` predicts every row with the exposure set to 1 and to 0 (a continuous
    exposure: as observed and shifted by +1), averages over the rows of the replicate, and contrasts the two
    means on the risk-difference or log-odds-ratio scale (the "g-formula" or regression standardisation;
    Greenland, Robins & Pearl 1999 explain why this marginal contrast differs from the conditional odds
    ratio even without confounding). Its standard error is by the delta method with the covariates held
    fixed, the definition ``statsmodels`` uses for average discrete changes.

References
----------
1. McCullagh P., Nelder J.A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall, sec. 4.4.
2. Boyd S., Vandenberghe L. (2004). Convex Optimization. Cambridge University Press, sec. 9.5.
3. Albert A., Anderson J.A. (1984). On the existence of maximum likelihood estimates in logistic regression
   models. Biometrika 71(1):1-10.
4. Greenland S., Robins J.M., Pearl J. (1999). Confounding and collapsibility in causal inference.
   Statistical Science 14(1):29-46.
5. Oehlert G.W. (1992). A note on the delta method. The American Statistician 46(1):27-29.

Examples
--------
>>> import numpy as np
>>> rng = np.random.default_rng(1)
>>> data = rng.normal(size=(3, 400, 2))
>>> X = design_matrix(data, 0, [1])
>>> y = (rng.random((3, 400)) < 1 / (1 + np.exp(-(0.5 * X[..., 1] - X[..., 2])))).astype(float)
>>> fit = fit_logit_batch(X, y)
>>> fit.coef.shape, fit.cov.shape, bool(fit.converged.all())
((3, 3), (3, 3, 3), True)
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
from scipy.special import expit

from .errors import SimulationError

__all__ = [
    "LogitFit",
    "fit_logit_batch",
    "standardized_contrast",
    "design_matrix",
    "PERFECT_FIT_TOLERANCE",
]

PERFECT_FIT_TOLERANCE = 1e-8
"""A row whose fitted probability lies within this distance of its 0/1 outcome counts as perfectly predicted."""

_MOVING = 1e-3  # last step still shifts the linear predictor by more than this: not a quadratic polish
_CERTIFICATE_SLACK = 1e-6  # relative slack in the separation inequalities
_SINGULAR = 1e-12  # smallest eigenvalue of the unit-diagonal information matrix below this: singular
_HALVINGS = 30
_EXTREME_ETA = 18.0  # |eta| beyond this puts a fitted probability within about 1.5e-8 of 0 or 1


@dataclass(frozen=True)
class LogitFit:
    """Logistic regressions of R replicates.

    Attributes
    ----------
    coef : ndarray of shape (R, p)
        Maximum-likelihood coefficients, intercept first; NaN for a failed replicate.
    cov : ndarray of shape (R, p, p)
        Inverse observed information at ``coef``; NaN for a failed replicate.
    converged : ndarray of shape (R,), bool
        True when a finite maximum-likelihood estimate was reached (never for a failed replicate).
    failure : ndarray of shape (R,), str
        ``""`` for a good fit, else the reason (see the module notes).
    iterations : ndarray of shape (R,), int
        Newton iterations run for each replicate.
    """

    coef: np.ndarray
    cov: np.ndarray
    converged: np.ndarray
    failure: np.ndarray
    iterations: np.ndarray

    @property
    def failed(self) -> np.ndarray:
        """Boolean array of shape (R,): the replicate has a failure reason."""
        return self.failure != ""

    @property
    def se(self) -> np.ndarray:
        """Standard errors, shape (R, p): square roots of the covariance diagonal."""
        return np.sqrt(np.diagonal(self.cov, axis1=1, axis2=2))


def design_matrix(
    data: np.ndarray, exposure: int, adjust: Sequence[int] = (), *, intercept: bool = True
) -> np.ndarray:
    """Stack the design of a regression from drawn data.

    Parameters
    ----------
    data : array_like of shape (R, n, k)
        Replicate datasets, one column per variable.
    exposure : int
        Column of ``data`` holding the exposure.
    adjust : sequence of int, default ()
        Columns of ``data`` to adjust for, in order.
    intercept : bool, default True
        Put a column of ones first.

    Returns
    -------
    ndarray of shape (R, n, p)
        Columns ``[1, exposure, *adjust]`` (``p = 2 + len(adjust)``), or without the 1 when
        ``intercept=False``. The exposure is then column 1 (0 without intercept).

    Examples
    --------
    >>> import numpy as np
    >>> data = np.arange(12.0).reshape(1, 4, 3)
    >>> design_matrix(data, 2, [0])[0]
    array([[ 1.,  2.,  0.],
           [ 1.,  5.,  3.],
           [ 1.,  8.,  6.],
           [ 1., 11.,  9.]])
    """
    data = np.asarray(data, dtype=float)
    if data.ndim != 3:
        raise SimulationError(f"design_matrix: data must have shape (R, n, k), got shape {data.shape}")
    columns = [int(exposure), *(int(c) for c in adjust)]
    out = np.empty(data.shape[:2] + (len(columns) + bool(intercept),))
    start = 0
    if intercept:
        out[..., 0] = 1.0
        start = 1
    out[..., start:] = data[..., columns]
    return out


def _softplus_sum(eta: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Bernoulli log-likelihood summed over rows, shape (R,): ``sum(y eta - log(1 + exp(eta)))``, stably."""
    return np.sum(y * eta - np.maximum(eta, 0.0) - np.log1p(np.exp(-np.abs(eta))), axis=-1)


def _sigmoid(eta: np.ndarray, out: np.ndarray) -> np.ndarray:
    """``1 / (1 + exp(-eta))`` into ``out`` (overflow of exp gives exactly 0, as it should)."""
    with np.errstate(over="ignore"):
        np.negative(eta, out=out)
        np.exp(out, out=out)
    out += 1.0
    return np.reciprocal(out, out=out)


def _score_and_information(Xt, y, mu, residual, buffer):
    """Score ``X'(y - mu)`` (R, p) and information ``X' diag(mu (1 - mu)) X`` (R, p, p) from the transposed
    design (R, p, n); ``mu`` is overwritten with the weights, ``residual`` (R, n) and ``buffer`` (R, p, n)
    are work space."""
    np.subtract(y, mu, out=residual)
    score = np.matmul(Xt, residual[..., None])[..., 0]
    np.subtract(1.0, mu, out=residual)
    weights = mu
    weights *= residual
    np.multiply(Xt, weights[:, None, :], out=buffer)
    return score, np.matmul(buffer, np.swapaxes(Xt, 1, 2))


def _equilibrate(info: np.ndarray, check: bool = True):
    """Scale each information matrix to unit diagonal; return (scaled, scale, singular flags).

    With ``check`` the smallest eigenvalue of the scaled matrix is compared with a threshold; otherwise only
    non-positive diagonals and non-finite entries count as singular.
    """
    diag = np.diagonal(info, axis1=1, axis2=2)
    good = np.all(diag > 0, axis=1) & np.all(np.isfinite(info), axis=(1, 2))
    scale = np.where(good[:, None], 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0)), 1.0)
    scaled = info * scale[:, :, None] * scale[:, None, :]
    p = info.shape[1]
    singular = ~good
    scaled[singular] = np.eye(p)
    if check:
        singular = singular | (np.linalg.eigvalsh(scaled)[:, 0] < _SINGULAR)
        scaled[singular] = np.eye(p)
    return scaled, scale, singular


def _newton_step(info: np.ndarray, score: np.ndarray, check: bool):
    """Newton steps ``info^-1 score`` (R, p) via the equilibrated systems, and singular flags (R,).

    Without ``check`` the eigenvalue test is skipped unless a system turns out exactly singular.
    """
    scaled, scale, singular = _equilibrate(info, check=check)
    try:
        solved = np.linalg.solve(scaled, (scale * score)[..., None])[..., 0]
    except np.linalg.LinAlgError:
        scaled, scale, singular = _equilibrate(info, check=True)
        solved = np.linalg.solve(scaled, (scale * score)[..., None])[..., 0]
    step = scale * solved
    step[singular] = 0.0
    return step, singular


def _fit_block(X: np.ndarray, y: np.ndarray, max_iter: int, tol: float) -> LogitFit:
    """:func:`fit_logit_batch` on one block of replicates, single-threaded."""
    R, n, p = X.shape
    Xt = np.ascontiguousarray(np.swapaxes(X, 1, 2))  # (R, p, n): the rows of each column contiguous
    with np.errstate(over="ignore", invalid="ignore"):
        finite = np.isfinite(np.sum(Xt, axis=(1, 2))) & np.isfinite(np.sum(y, axis=1))  # one pass
    if not finite.all():  # a sum can overflow with finite entries: look again element by element
        finite = np.all(np.isfinite(Xt), axis=(1, 2)) & np.all(np.isfinite(y), axis=1)
    binary = np.all((y == 0) | (y == 1), axis=1)
    usable = finite & binary
    if not usable.all():
        Xt[~usable] = 0.0
        y = np.where(usable[:, None], y, 0.0)

    beta = np.zeros((R, p))
    last_step = np.zeros((R, p))
    eta = np.zeros((R, n))
    mu = np.empty((R, n))
    shift = np.empty((R, n))
    residual = np.empty((R, n))
    buffer = np.empty((R, p, n))
    column_size = np.max(np.abs(Xt), axis=2)  # (R, p): bounds |x' step| <= |step| . column_size
    loglik = np.full(R, -n * np.log(2.0))  # at the current iterate (known exactly at the start)
    iterations = np.zeros(R, dtype=int)
    stopped = np.zeros(R, dtype=bool)  # stopping rule met
    singular = np.zeros(R, dtype=bool)
    active = usable.copy()

    for it in range(max_iter):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        # Work on every replicate in place until the stopped ones are the majority, then on copies.
        whole = 2 * idx.size >= R
        if whole:
            rows, work = np.arange(R), active.copy()
            Xt_a, y_a, eta_a, mu_a, shift_a, res_a, buf_a = Xt, y, eta, mu, shift, residual, buffer
        else:
            rows, work = idx, np.ones(idx.size, dtype=bool)
            Xt_a, y_a, eta_a = Xt[idx], y[idx], eta[idx]
            mu_a, shift_a, res_a = np.empty_like(eta_a), np.empty_like(eta_a), np.empty_like(eta_a)
            buf_a = np.empty_like(Xt_a)

        score, info = _score_and_information(Xt_a, y_a, _sigmoid(eta_a, mu_a), res_a, buf_a)
        step, bad = _newton_step(info, score, check=it == 0)
        bad &= work
        step[~work] = 0.0
        decrement = np.sum(score * step, axis=1)
        np.matmul(step[:, None, :], Xt_a, out=shift_a[:, None, :])

        # A large move of the linear predictor may overshoot: halve the step while the log-likelihood falls.
        bound = np.sum(np.abs(step) * column_size[rows], axis=1)
        big = np.flatnonzero(work & ~bad & (bound > 1.0))
        new_loglik = np.full(rows.size, np.nan)
        if big.size:
            old = loglik[rows[big]]
            unknown = np.isnan(old)
            if unknown.any():
                old[unknown] = _softplus_sum(eta_a[big[unknown]], y_a[big[unknown]])
            factor = np.ones(big.size)
            if 2 * big.size >= rows.size:  # most rows: no copies, evaluate all at the full step
                new = _softplus_sum(eta_a + shift_a, y_a)[big]
            else:
                new = _softplus_sum(eta_a[big] + shift_a[big], y_a[big])
            for _h in range(_HALVINGS):
                worse = ~(new >= old - 1e-12 * (1.0 + np.abs(old)))
                if not worse.any():
                    break
                factor[worse] *= 0.5
                trial = big[worse]
                new[worse] = _softplus_sum(eta_a[trial] + factor[worse, None] * shift_a[trial], y_a[trial])
            new_loglik[big] = new
            step[big] *= factor[:, None]
            shift_a[big] *= factor[:, None]

        keep = work & ~bad
        target = rows[keep]
        beta[target] += step[keep]
        last_step[target] = step[keep]
        if whole:
            shift_a[~keep] = 0.0
            eta += shift_a
        else:
            eta[target] = eta_a[keep] + shift_a[keep]
        loglik[target] = new_loglik[keep]  # NaN (not yet known) unless the halving check computed it
        iterations[target] += 1
        singular[rows[bad]] = True
        done = rows[keep & (decrement / 2.0 <= tol)]
        stopped[done] = True
        active[done] = False
        active[rows[bad]] = False

    # Information at the returned coefficients, for the covariance.
    _sigmoid(eta, mu)
    # A fitted probability within 1e-8 of 0 or 1 needs |eta| > 18.4: only such replicates can be separated.
    suspect = np.flatnonzero(usable & (np.maximum(eta.max(axis=1), -eta.min(axis=1)) > _EXTREME_ETA))
    perfect = np.abs(y[suspect] - mu[suspect]) < PERFECT_FIT_TOLERANCE
    _, info = _score_and_information(Xt, y, mu, residual, buffer)
    scaled, scale, bad_final = _equilibrate(info, check=True)
    cov = np.linalg.inv(scaled) * scale[:, :, None] * scale[:, None, :]

    # Separation: certificate check on the last Newton step (module notes).
    moves = np.matmul(last_step[suspect, None, :], Xt[suspect])[:, 0, :]
    largest = np.maximum(moves.max(axis=1, initial=0.0), -moves.min(axis=1, initial=0.0))
    margin = np.min((2.0 * y[suspect] - 1.0) * moves, axis=1, initial=np.inf)
    certified = (largest > _MOVING) & (margin >= -_CERTIFICATE_SLACK * largest) & np.any(perfect, axis=1)
    separated = np.zeros(R, dtype=bool)
    complete = np.zeros(R, dtype=bool)
    separated[suspect] = certified
    complete[suspect] = certified & np.all(perfect, axis=1)

    failure = np.full(R, "", dtype=object)
    failure[usable & ~stopped] = f"did not converge in {max_iter} iterations"
    failure[usable & (singular | bad_final)] = "singular information matrix"
    failure[separated] = "quasi-complete separation"
    failure[complete] = "complete separation"
    failure[finite & ~binary] = "outcome values other than 0 and 1"
    failure[~finite] = "non-finite values in the data"
    failed = failure != ""

    beta[failed] = np.nan
    cov[failed] = np.nan
    return LogitFit(
        coef=beta,
        cov=cov,
        converged=stopped & ~failed,
        failure=failure,
        iterations=iterations,
    )


def fit_logit_batch(X, y, *, max_iter: int = 50, tol: float = 1e-10, workers: int | None = None) -> LogitFit:
    """Fit a logistic regression to each of R replicates at once (Newton-Raphson, batched).

    Parameters
    ----------
    X : array_like of shape (R, n, p)
        Designs, intercept column first (see :func:`design_matrix`).
    y : array_like of shape (R, n)
        Outcomes, 0 or 1.
    max_iter : int, default 50
        Newton iterations at most.
    tol : float, default 1e-10
        Stop when half the Newton decrement (the predicted rise of the log-likelihood) is at most this.
    workers : int or None, default None
        Threads, each fitting a contiguous block of replicates (NumPy releases the interpreter lock in its
        array work). None uses up to 4, as many as there are processors, when there are at least 256
        replicates per thread; pass 1 when the caller runs its own parallel workers. The results do not
        depend on it.

    Returns
    -------
    LogitFit
        Coefficients (R, p), covariance (R, p, p), convergence flags, failure reasons, iterations.

    Notes
    -----
    Cost per iteration is O(R n p^2) in batched matrix products; replicates that have stopped are left out of
    later iterations once they are the majority. Working memory is about ``2 p + 8`` arrays of shape (R, n),
    so callers should chunk the replicates to bound memory. The separation rule and the failure reasons are
    described in the module notes. Nothing is raised for data problems; failed replicates get NaN and a
    reason.

    References
    ----------
    McCullagh P., Nelder J.A. (1989). Generalized Linear Models, 2nd ed., sec. 4.4.
    Boyd S., Vandenberghe L. (2004). Convex Optimization, sec. 9.5.
    Albert A., Anderson J.A. (1984). Biometrika 71(1):1-10.

    Examples
    --------
    >>> import numpy as np
    >>> X = np.ones((3, 6, 2))
    >>> X[:, :, 1] = [0, 0, 1, 1, 2, 2]
    >>> y = np.array([[0, 1, 0, 1, 1, 1], [0, 0, 1, 1, 1, 1], [0, 0, 0, 1, 1, 1]], dtype=float)
    >>> fit = fit_logit_batch(X, y)
    >>> fit.failure.tolist()
    ['', 'complete separation', 'quasi-complete separation']
    >>> np.round(fit.coef[0], 4)
    array([-0.4173,  1.2917])
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    if X.ndim != 3 or y.shape != X.shape[:2]:
        raise SimulationError(
            f"fit_logit_batch: X must have shape (R, n, p) and y shape (R, n); got {X.shape} and {y.shape}"
        )
    if int(max_iter) < 1:
        raise SimulationError(f"fit_logit_batch: max_iter must be at least 1, got {max_iter}")
    R = X.shape[0]
    if workers is None:
        workers = min(4, os.cpu_count() or 1, max(1, R // 256))
    workers = max(1, min(int(workers), R))
    if workers == 1:
        return _fit_block(X, y, int(max_iter), float(tol))
    bounds = np.linspace(0, R, workers + 1).astype(int)
    blocks = [slice(a, b) for a, b in zip(bounds[:-1], bounds[1:], strict=True)]
    with ThreadPoolExecutor(max_workers=workers) as pool:
        parts = list(pool.map(lambda s: _fit_block(X[s], y[s], int(max_iter), float(tol)), blocks))
    return LogitFit(
        coef=np.concatenate([f.coef for f in parts]),
        cov=np.concatenate([f.cov for f in parts]),
        converged=np.concatenate([f.converged for f in parts]),
        failure=np.concatenate([f.failure for f in parts]),
        iterations=np.concatenate([f.iterations for f in parts]),
    )


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
