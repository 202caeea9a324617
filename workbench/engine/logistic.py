"""Logistic regression fitted to many replicates at once.

Every function here works on stacked arrays: a design of shape (R, n, p) holds ``R`` replicate datasets of
``n`` rows and ``p`` columns (intercept first), an outcome of shape (R, n) holds their 0/1 outcomes. All
replicates are iterated together with batched matrix products and batched solves; a replicate that has
converged (or failed) is frozen and drops out of the work of later iterations.

Fitting
    Newton-Raphson on the log-likelihood, which for the logit link is the same as iteratively reweighted
    least squares (McCullagh & Nelder 1989, sec. 4.4). When the first column is all ones and both outcomes
    occur it starts from one reweighted least-squares step from the linear probability fit (its fitted
    values clipped to [0.02, 0.98]), provided that point has a higher log-likelihood than the intercept-only
    fit (intercept ``logit(mean y)``, slopes 0), and from the intercept-only fit otherwise; elsewhere from
    zero. From 8,000 rows on, the fit of every k-th row (about 2,000 rows) is the start where it succeeds.
    The start only saves iterations (about two of six); the estimates are the same optimum either way.
    Each iteration solves the Newton system after scaling the information matrix to unit diagonal
    (equilibration); when a step would move some linear predictor by more than 1 (a bound from the column
    maxima), the step is halved while the log-likelihood would fall. Iteration stops when half the Newton
    decrement
    ``score' info^-1 score`` is at most ``tol`` (Boyd & Vandenberghe 2004, sec. 9.5.1; by default 1e-10, or
    ``1e-11 n`` for a small step far from separation, see :func:`fit_logit_batch`); the step computed
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
    3. *perfect prediction*: at least one row has its fitted probability within ``1e-8`` of its outcome
       (``|x_i' b| > 18.4``).

    A replicate meeting all three is separated: "complete separation" when every row is fitted within
    ``1e-8`` of its outcome (the check ``statsmodels`` uses for perfect prediction), "quasi-complete
    separation" otherwise. The rule errs towards "regular fit" only when the iterations stop before the
    fitted probabilities reach ``1e-8`` (a small ``max_iter``); the failure is then "did not converge". No
    linear program is solved here; the reference tests check the verdicts against linear programs on
    hundreds of small, often separated data sets, where they agree every time. A design that is singular
    from the start (a column constant in the replicate) is reported as "singular information matrix" even
    if the outcomes are also separated.

Failures
    A failed replicate has NaN coefficients and covariance, ``converged`` False, and one of the reasons
    ``"complete separation"``, ``"quasi-complete separation"``, ``"singular information matrix"`` (columns
    collinear, or constant within the replicate), ``"did not converge in 50 iterations"`` (with the actual
    ``max_iter``), ``"non-finite values in the data"`` or ``"outcome values other than 0 and 1"``. Data
    problems never raise; only wrongly shaped arguments do.

Standardisation
    The marginal contrast from a fitted model is :func:`workbench.engine.standardize.standardized_contrast`.

References
----------
1. McCullagh P., Nelder J.A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall, sec. 4.4.
2. Boyd S., Vandenberghe L. (2004). Convex Optimization. Cambridge University Press, sec. 9.5.
3. Albert A., Anderson J.A. (1984). On the existence of maximum likelihood estimates in logistic regression
   models. Biometrika 71(1):1-10.

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

from collections.abc import Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from workbench.engine.logit_products import ColumnProducts
from workbench.errors import SimulationError

__all__ = [
    "LogitFit",
    "fit_logit_batch",
    "design_matrix",
    "PERFECT_FIT_TOLERANCE",
    "CACHE_BYTES",
]

PERFECT_FIT_TOLERANCE = 1e-8
"""A row whose fitted probability lies within this distance of its 0/1 outcome counts as perfectly predicted."""
CACHE_BYTES = 6 * 2**20
"""Working set aimed at per block of replicates fitted together, in bytes (tuned on a 2-CPU EPYC)."""

_MOVING = 1e-3  # last step still shifts the linear predictor by more than this: not a quadratic polish
_CERTIFICATE_SLACK = 1e-6  # relative slack in the separation inequalities
_SINGULAR = 1e-12  # smallest eigenvalue of the unit-diagonal information matrix below this: singular
_HALVINGS = 30
_MIN_BLOCK = 8  # replicates per block at least
_START_CLIP = 0.02  # linear-probability fitted values clipped to [0.02, 0.98] for the start (tuned)
_SUBSAMPLE_FROM = 8000  # from this many rows on, the start is the fit of a subsample of rows
_SUBSAMPLE_ROWS = 2000  # about this many rows in it (every k-th row)
_SUBSAMPLE_TOL = 1e-6  # its stopping rule: only a start
_TOL = 1e-10  # the default stopping rule: half the Newton decrement at most this, or
_TOL_PER_ROW = 1e-11  # at most this times n where the step moves no linear predictor by more than _MOVING
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
        ``intercept=False``. The exposure is then column 1 (0 without intercept). It is a transposed view of
        a C-contiguous (R, p, n) array (each column's rows contiguous), the layout the fits use.

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
    R, n, _ = data.shape
    # Laid out once as (R, p, n), each column's rows contiguous, which is what the fits work on; the
    # (R, n, p) array returned is a view of it, so the fits transpose it back without copying.
    columns_first = np.empty((R, len(columns) + bool(intercept), n))
    start = 0
    if intercept:
        columns_first[:, 0, :] = 1.0
        start = 1
    for k, column in enumerate(columns):
        columns_first[:, start + k, :] = data[:, :, column]
    return np.swapaxes(columns_first, 1, 2)


def _softplus_sum(eta: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Bernoulli log-likelihood summed over rows, shape (R,): ``sum(y eta - log(1 + exp(eta)))``, stably.

    ``log(1 + exp(eta)) = max(eta, 0) + log(1 + exp(-|eta|))`` and ``sum max(eta, 0) = (sum eta + sum
    |eta|) / 2``: one work array, one ``exp`` and one ``log`` pass.
    """
    # log(1 + exp(-|eta|)) with log rather than log1p (about twice as fast): where exp(-|eta|) < 1e-16 the
    # term is lost, an absolute error below 1e-16 per row in a sum only compared between steps.
    work = np.abs(eta)
    positive = 0.5 * (np.sum(eta, axis=-1) + np.sum(work, axis=-1))
    np.negative(work, out=work)
    np.exp(work, out=work)
    work += 1.0
    np.log(work, out=work)
    dot = np.matmul(y[..., None, :], eta[..., :, None])[..., 0, 0]
    return dot - positive - np.sum(work, axis=-1)


def _sigmoid(eta: np.ndarray, out: np.ndarray) -> np.ndarray:
    """``1 / (1 + exp(-eta))`` into ``out`` (overflow of exp gives exactly 0, as it should)."""
    with np.errstate(over="ignore"):
        np.negative(eta, out=out)
        np.exp(out, out=out)
    out += 1.0
    return np.reciprocal(out, out=out)


def _residuals_and_weights(y: np.ndarray, mu: np.ndarray, out: np.ndarray) -> np.ndarray:
    """``y - mu`` and ``mu (1 - mu)`` into the rows of ``out`` (B, 2, n)."""
    np.subtract(y, mu, out=out[:, 0, :])
    weights = np.subtract(1.0, mu, out=out[:, 1, :])
    weights *= mu
    return out


def _linear_probability_start(Xt, y, products, start, work):
    """A starting point one reweighted least-squares step from the linear probability fit.

    The least-squares fit of ``y`` on the columns gives fitted probabilities ``p``, clipped to
    ``[_START_CLIP, 1 - _START_CLIP]``; one iteratively-reweighted-least-squares step from them (weights
    ``p (1 - p)``, working response ``logit(p) + (y - p) / (p (1 - p))``; McCullagh & Nelder 1989, sec. 4.4)
    gives the coefficients. Newton-Raphson from there needs about two iterations fewer than from the
    intercept-only fit, at the cost of about one iteration's work.

    Parameters
    ----------
    Xt : ndarray of shape (B, p, n)
        Transposed designs of the block.
    y : ndarray of shape (B, n)
        0/1 outcomes.
    products : ColumnProducts
        Products of the block's column pairs.
    start : ndarray of shape (B,), bool
        Replicates to compute the start for (others get zeros).
    work : ndarray of shape (B, 2, n)
        Work space.

    Returns
    -------
    beta : ndarray of shape (B, p)
        Starting coefficients.
    eta : ndarray of shape (B, n)
        Their linear predictors.
    loglik : ndarray of shape (B,)
        Their log-likelihoods.
    ok : ndarray of shape (B,), bool
        ``start`` and both least-squares systems regular and all values finite.
    """
    with np.errstate(all="ignore"):
        work[:, 0, :] = y
        work[:, 1, :] = 1.0
        xty, gram = products(Xt, work)  # X'y and X'X in one pass
        inverse, bad = _invert(gram)
        fitted = np.matmul(np.matmul(inverse, xty[..., None])[:, None, :, 0], Xt)[:, 0, :]
        np.clip(fitted, _START_CLIP, 1.0 - _START_CLIP, out=fitted)
        # weights p (1 - p) and working response times weight p (1 - p) logit(p) + (y - p)
        weights = np.subtract(1.0, fitted, out=work[:, 1, :])
        response = np.divide(fitted, weights, out=work[:, 0, :])
        np.log(response, out=response)
        weights *= fitted
        response *= weights
        response += y
        response -= fitted
        xtr, info = products(Xt, work)
        inverse, bad_wls = _invert(info)
        beta = np.matmul(inverse, xtr[..., None])[..., 0]
        eta = np.matmul(beta[:, None, :], Xt)[:, 0, :]
        loglik = _softplus_sum(eta, y)
    ok = start & ~bad & ~bad_wls & np.isfinite(loglik)
    return beta, eta, loglik, ok


def _invert(info: np.ndarray):
    """Inverses of information matrices (R, p, p) and singular flags (R,).

    Each matrix is scaled to unit diagonal before it is inverted; it counts as singular when a diagonal entry
    is not positive, an entry is not finite, or the inverse of the scaled matrix has a row-sum norm of
    ``1 / _SINGULAR`` or more (its smallest eigenvalue is then below about ``_SINGULAR``). Singular ones get
    a zero inverse.

    A non-positive or infinite diagonal entry, or a non-finite entry anywhere, leaves a non-finite entry in
    the scaled matrix (``1 / sqrt`` of a diagonal entry is then infinite, NaN or 0 against an infinity), so
    one finiteness check of the scaled matrices finds all of them. The work is a handful of whole-array
    operations on the (R, p, p) stack, because with p of a few columns their fixed cost per call, not the
    arithmetic, is what counts.
    """
    p = info.shape[1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        scale = 1.0 / np.sqrt(np.diagonal(info, axis1=1, axis2=2))
        outer = scale[:, :, None] * scale[:, None, :]
        scaled = info * outer
    good = np.isfinite(scaled).all(axis=(1, 2))
    all_good = good.all()
    if not all_good:
        scaled[~good] = np.eye(p)
        outer[~good] = 1.0
    try:
        inverse = np.linalg.inv(scaled)
    except np.linalg.LinAlgError:  # an exactly singular matrix stops the whole batch: find it first
        good &= np.linalg.eigvalsh(scaled)[:, 0] >= _SINGULAR
        scaled[~good] = np.eye(p)
        outer[~good] = 1.0
        inverse = np.linalg.inv(scaled)
    norm = np.abs(inverse).sum(axis=2).max(axis=1)
    singular = ~(norm < 1.0 / _SINGULAR)
    singular |= ~good
    inverse *= outer
    if singular.any():
        inverse[singular] = 0.0
    return inverse, singular


def _usable_data(X: np.ndarray, y: np.ndarray):
    """The block's designs transposed to (R, p, n) (each column's rows contiguous), and which replicates
    have finite data and 0/1 outcomes: ``(Xt, y, finite, binary)``. Unusable replicates are zeroed."""
    Xt = np.swapaxes(X, 1, 2)
    shared = Xt.flags.c_contiguous  # a design from design_matrix: no copy, so never written to
    Xt = np.ascontiguousarray(Xt)
    with np.errstate(over="ignore", invalid="ignore"):
        finite = np.isfinite(np.sum(Xt, axis=(1, 2))) & np.isfinite(np.sum(y, axis=1))  # one pass
    if not finite.all():  # a sum can overflow with finite entries: look again element by element
        finite = np.all(np.isfinite(Xt), axis=(1, 2)) & np.all(np.isfinite(y), axis=1)
    binary = np.all((y == 0) | (y == 1), axis=1)
    usable = finite & binary
    if not usable.all():
        if shared:
            Xt = Xt.copy()
        Xt[~usable] = 0.0
        y = np.where(usable[:, None], y, 0.0)
    return Xt, y, finite, binary


def _starting_point(Xt, y, products: ColumnProducts, usable, ones, work):
    """Starting coefficients (R, p), linear predictors (R, n) and log-likelihoods (R,) (module notes).

    Where the first column is a column of ones (``ones``, per replicate) and both outcomes occur: the
    intercept-only fit (intercept ``logit(mean y)``, slopes 0), or one reweighted least-squares step from the
    linear probability fit where that has the higher log-likelihood; elsewhere zero. ``work`` (R, 2, n) is
    work space.
    """
    R, p, n = Xt.shape
    mean_y = y.mean(axis=1)
    start = usable & (mean_y > 0) & (mean_y < 1) & ones
    with np.errstate(divide="ignore", invalid="ignore"):
        intercept = np.where(start, np.log(mean_y / (1.0 - mean_y)), 0.0)
    # log-likelihood at the intercept-only iterate, known exactly
    loglik = n * (mean_y * intercept - np.logaddexp(0.0, intercept))
    better = np.zeros(R, dtype=bool)
    if start.any():
        better_beta, better_eta, better_loglik, better = _linear_probability_start(
            Xt, y, products, start, work
        )
        better &= better_loglik > loglik
        if better.all():
            return better_beta, better_eta, better_loglik
    beta = np.zeros((R, p))
    beta[:, 0] = intercept
    eta = np.repeat(intercept[:, None], n, axis=1)
    if better.any():
        beta[better] = better_beta[better]
        eta[better] = better_eta[better]
        loglik[better] = better_loglik[better]
    return beta, eta, loglik


def _start(X, Xt, y, products: ColumnProducts, usable, ones, work, max_iter: int):
    """Starting coefficients, linear predictors and log-likelihoods (NaN: not yet known) of a block.

    With many rows (``n >= _SUBSAMPLE_FROM``) the fit of every ``k``-th row (about ``_SUBSAMPLE_ROWS`` rows)
    is the start where it succeeded: it is within sampling error of the full fit, so two or three Newton
    iterations on all rows finish the work. Elsewhere, and where the subsample fit failed, the start of
    :func:`_starting_point`. The optimum reached is the same either way.
    """
    R, p, n = Xt.shape
    good = np.zeros(R, dtype=bool)
    if n >= _SUBSAMPLE_FROM:
        every = n // _SUBSAMPLE_ROWS
        sub = _fit_block(X[:, ::every], y[:, ::every], max_iter, (_SUBSAMPLE_TOL, _SUBSAMPLE_TOL))
        good = usable & ~sub.failed
        if good.all():
            beta = sub.coef
            return beta, np.matmul(beta[:, None, :], Xt)[:, 0, :], np.full(R, np.nan)
    beta, eta, loglik = _starting_point(Xt, y, products, usable, ones, work)
    if good.any():
        beta[good] = sub.coef[good]
        eta[good] = np.matmul(sub.coef[good, None, :], Xt[good])[:, 0, :]
        loglik[good] = np.nan
    return beta, eta, loglik


class _Newton:
    """The Newton-Raphson iterations of one block of replicates, all together (module notes).

    A replicate leaves the work when its stopping rule is met or its information matrix is singular. While
    at least half of the replicates are active the work is done in place on whole arrays (the others get a
    zero step), afterwards on copies of the active rows.
    """

    def __init__(self, Xt, y, products: ColumnProducts, beta, eta, loglik, usable, tol, vectors):
        R, p, n = Xt.shape
        self.Xt, self.y, self.products = Xt, y, products
        self.tol, self.polish_tol = tol  # (strict, for a step that moves no linear predictor by 1e-3)
        self.beta, self.eta, self.loglik = beta, eta, loglik
        self.last_step = np.zeros((R, p))
        self.mu = np.empty((R, n))
        self.shift = np.empty((R, n))
        self.vectors = vectors  # (R, 2, n): residuals and weights
        # (R, p): bounds |x' step| <= |step| . column_size
        self.column_size = np.maximum(Xt.max(axis=2), -Xt.min(axis=2))
        self.iterations = np.zeros(R, dtype=int)
        self.stopped = np.zeros(R, dtype=bool)  # stopping rule met
        self.singular = np.zeros(R, dtype=bool)
        self.active = usable.copy()

    def iterate(self) -> bool:
        """One Newton iteration of the active replicates; False when none was left."""
        idx = np.flatnonzero(self.active)
        if idx.size == 0:
            return False
        R = self.active.size
        whole = 2 * idx.size >= R
        if whole:
            rows, work = np.arange(R), self.active.copy()
            Xt, y, eta, mu, shift, vectors = self.Xt, self.y, self.eta, self.mu, self.shift, self.vectors
        else:
            rows, work = idx, np.ones(idx.size, dtype=bool)
            Xt, y, eta = self.Xt[idx], self.y[idx], self.eta[idx]
            mu, shift, vectors = np.empty_like(eta), np.empty_like(eta), np.empty((idx.size, 2, eta.shape[1]))

        _residuals_and_weights(y, _sigmoid(eta, mu), vectors)
        score, info = self.products(Xt, vectors, None if whole else idx)
        inverse, bad = _invert(info)
        step = np.matmul(inverse, score[..., None])[..., 0]
        every = bool(work.all())  # usually so: then no masking is needed below
        if not every:
            bad &= work
            step[~work] = 0.0
        decrement = np.sum(score * step, axis=1)
        np.matmul(step[:, None, :], Xt, out=shift[:, None, :])
        keep = work & ~bad
        column_size = self.column_size if whole else self.column_size[rows]
        new_loglik = self._halve_steps(step, shift, eta, y, rows, keep, column_size)
        if whole and every and not bad.any():  # every replicate takes its step: no index arrays
            self._take_every_step(step, shift, new_loglik)
        else:
            self._take_steps(step, shift, eta, rows, keep, new_loglik, whole)
        self.singular[rows[bad]] = True
        half = decrement / 2.0
        polish = keep & (half <= self.polish_tol) & (np.sum(np.abs(step) * column_size, axis=1) <= _MOVING)
        if (
            polish.any()
        ):  # only where no fitted probability is near 0 or 1 (so no separation can be certified)
            at = rows[polish]
            polish[polish] = np.maximum(self.eta[at].max(axis=1), -self.eta[at].min(axis=1)) <= _EXTREME_ETA
        done = rows[keep & ((half <= self.tol) | polish)]
        self.stopped[done] = True
        self.active[done] = False
        self.active[rows[bad]] = False
        return True

    def _halve_steps(self, step, shift, eta, y, rows, keep, column_size) -> np.ndarray:
        """Halve, in place, each step that may move a linear predictor by more than 1 (a bound from the
        column maxima) while the log-likelihood would fall, at most ``_HALVINGS`` times. Returns the
        log-likelihoods after the steps where they were computed, NaN elsewhere."""
        bound = np.sum(np.abs(step) * column_size, axis=1)
        big = np.flatnonzero(keep & (bound > 1.0))
        new_loglik = np.full(rows.size, np.nan)
        if not big.size:
            return new_loglik
        old = self.loglik[rows[big]]
        unknown = np.isnan(old)
        if unknown.any():
            old[unknown] = _softplus_sum(eta[big[unknown]], y[big[unknown]])
        factor = np.ones(big.size)
        if 2 * big.size >= rows.size:  # most rows: no copies, evaluate all at the full step
            new = _softplus_sum(eta + shift, y)[big]
        else:
            new = _softplus_sum(eta[big] + shift[big], y[big])
        for _h in range(_HALVINGS):
            worse = ~(new >= old - 1e-12 * (1.0 + np.abs(old)))
            if not worse.any():
                break
            factor[worse] *= 0.5
            trial = big[worse]
            new[worse] = _softplus_sum(eta[trial] + factor[worse, None] * shift[trial], y[trial])
        new_loglik[big] = new
        step[big] *= factor[:, None]
        shift[big] *= factor[:, None]
        return new_loglik

    def _take_every_step(self, step, shift, new_loglik) -> None:
        """Every replicate of the block takes its step (in place on the whole arrays)."""
        self.beta += step
        self.last_step[...] = step
        self.eta += shift
        self.loglik[...] = new_loglik  # NaN (not yet known) unless the halving check computed it
        self.iterations += 1

    def _take_steps(self, step, shift, eta, rows, keep, new_loglik, whole: bool) -> None:
        """The replicates ``rows[keep]`` take their steps (``eta``, ``shift``: the arrays worked on)."""
        target = rows[keep]
        self.beta[target] += step[keep]
        self.last_step[target] = step[keep]
        if whole:
            shift[~keep] = 0.0
            self.eta += shift
        else:
            self.eta[target] = eta[keep] + shift[keep]
        self.loglik[target] = new_loglik[keep]
        self.iterations[target] += 1


def _separation(Xt, y, eta, mu, last_step, usable) -> tuple[np.ndarray, np.ndarray]:
    """Replicates whose last Newton step certifies separation, and those completely separated (module
    notes): boolean arrays of shape (R,)."""
    R = usable.size
    # A fitted probability within 1e-8 of 0 or 1 needs |eta| > 18.4: only such replicates can be separated.
    suspect = np.flatnonzero(usable & (np.maximum(eta.max(axis=1), -eta.min(axis=1)) > _EXTREME_ETA))
    perfect = np.abs(y[suspect] - mu[suspect]) < PERFECT_FIT_TOLERANCE
    moves = np.matmul(last_step[suspect, None, :], Xt[suspect])[:, 0, :]
    largest = np.maximum(moves.max(axis=1, initial=0.0), -moves.min(axis=1, initial=0.0))
    margin = np.min((2.0 * y[suspect] - 1.0) * moves, axis=1, initial=np.inf)
    certified = (largest > _MOVING) & (margin >= -_CERTIFICATE_SLACK * largest) & np.any(perfect, axis=1)
    separated = np.zeros(R, dtype=bool)
    complete = np.zeros(R, dtype=bool)
    separated[suspect] = certified
    complete[suspect] = certified & np.all(perfect, axis=1)
    return separated, complete


def _failure_reasons(newton: _Newton, singular_at_end, separated, complete, finite, binary, max_iter):
    """Each replicate's failure reason, ``""`` for a good fit; a later rule overrides an earlier one."""
    usable = finite & binary
    failure = np.full(usable.size, "", dtype=object)
    failure[usable & ~newton.stopped] = f"did not converge in {max_iter} iterations"
    failure[usable & (newton.singular | singular_at_end)] = "singular information matrix"
    failure[separated] = "quasi-complete separation"
    failure[complete] = "complete separation"
    failure[finite & ~binary] = "outcome values other than 0 and 1"
    failure[~finite] = "non-finite values in the data"
    return failure


def _fit_block(X: np.ndarray, y: np.ndarray, max_iter: int, tol: tuple[float, float]) -> LogitFit:
    """:func:`fit_logit_batch` on one block of replicates, single-threaded."""
    Xt, y, finite, binary = _usable_data(X, y)
    usable = finite & binary
    ones = np.all(Xt[:, 0, :] == 1.0, axis=1)
    products = ColumnProducts(Xt, ones_first=bool(np.all(ones | ~usable)))
    vectors = np.empty((Xt.shape[0], 2, Xt.shape[2]))
    beta, eta, loglik = _start(X, Xt, y, products, usable, ones, vectors, max_iter)
    newton = _Newton(Xt, y, products, beta, eta, loglik, usable, tol, vectors)
    for _ in range(max_iter):
        if not newton.iterate():
            break
    # Information at the returned coefficients, for the covariance.
    mu = _sigmoid(newton.eta, newton.mu)
    separated, complete = _separation(Xt, y, newton.eta, mu, newton.last_step, usable)
    weights = np.subtract(1.0, mu, out=vectors[:, 1, :])
    weights *= mu  # the weights mu (1 - mu)
    cov, singular_at_end = _invert(products.information(Xt, weights))
    failure = _failure_reasons(newton, singular_at_end, separated, complete, finite, binary, max_iter)
    failed = failure != ""
    newton.beta[failed] = np.nan
    cov[failed] = np.nan
    return LogitFit(
        coef=newton.beta,
        cov=cov,
        converged=newton.stopped & ~failed,
        failure=failure,
        iterations=newton.iterations,
    )


def fit_logit_batch(X, y, *, max_iter: int = 50, tol: float | None = None, workers: int = 1) -> LogitFit:
    """Fit a logistic regression to each of R replicates at once (Newton-Raphson, batched).

    Parameters
    ----------
    X : array_like of shape (R, n, p)
        Designs, intercept column first (see :func:`design_matrix`).
    y : array_like of shape (R, n)
        Outcomes, 0 or 1.
    max_iter : int, default 50
        Newton iterations at most.
    tol : float, optional
        Stop when half the Newton decrement (the predicted rise of the log-likelihood) is at most this.
        By default at most ``1e-10``, or at most ``1e-11 n`` where the step moves no linear predictor by
        more than 1e-3 and every fitted probability is further than about 1e-8 from 0 and 1 (the
        decrement grows with the rows; after the step taken there the coefficients are within about
        1e-10 of the optimum at any n, while a fit heading for separation iterates to the strict rule).
    workers : int, default 1
        Threads sharing the blocks of replicates (NumPy releases the interpreter lock in its array work).
        Worth raising only on an otherwise idle machine with spare processors; the results do not depend
        on it.

    Returns
    -------
    LogitFit
        Coefficients (R, p), covariance (R, p, p), convergence flags, failure reasons, iterations.

    Notes
    -----
    The replicates are fitted in blocks of a few dozen (sized so that a block's working arrays, about
    ``8 n (p (p + 1) / 2 + p + 6)`` bytes per replicate, fit in 6 MiB of cache); within a block all
    replicates iterate together, and those that have stopped are left out once they are the majority. The
    start, one reweighted least-squares step from the linear probability fit (module notes), costs about
    one iteration and saves about two. Cost per iteration is O(n p^2) per replicate in batched matrix
    products. Extra memory beyond the inputs and outputs is only
    that of the blocks in flight (about 6 MiB each). The separation rule and the failure reasons are
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
    R, n, p = X.shape
    # Blocks of replicates small enough for the working arrays to stay in the processor cache (about
    # 6 MiB each) are much faster than one pass over everything, whose arrays stream from memory.
    per_replicate = 8 * n * (p * (p + 1) // 2 + p + 6)
    size = int(np.clip(CACHE_BYTES // max(per_replicate, 1), _MIN_BLOCK, max(R, 1)))
    blocks = [slice(start, min(start + size, R)) for start in range(0, R, size)] or [slice(0, 0)]
    workers = max(1, min(int(workers), len(blocks)))

    tol = (_TOL, _TOL_PER_ROW * n) if tol is None else (float(tol), float(tol))

    def fit(block: slice) -> LogitFit:
        return _fit_block(X[block], y[block], int(max_iter), tol)

    if workers == 1:
        parts = [fit(block) for block in blocks]
    else:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            parts = list(pool.map(fit, blocks))
    if len(parts) == 1:
        return parts[0]
    return LogitFit(
        coef=np.concatenate([f.coef for f in parts]),
        cov=np.concatenate([f.cov for f in parts]),
        converged=np.concatenate([f.converged for f in parts]),
        failure=np.concatenate([f.failure for f in parts]),
        iterations=np.concatenate([f.iterations for f in parts]),
    )
