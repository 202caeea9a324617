"""Ordinary least squares, batched over replicates from cross-product matrices, and on one dataset.

Every strategy regresses the outcome on an intercept, the exposure and its adjustment set. With an intercept,
the slopes, the residual sum of squares and the classical standard errors depend on the data only through
the *centred* cross-product matrix ``S = sum_i (v_i - mean)(v_i - mean)^T`` of the variables involved. So a
simulation forms ``S`` once per replicate (or draws it directly, see :mod:`workbench.engine.wishart`) and fits every
strategy from sub-blocks of it.

The batched fit uses the sweep operator on the correlation-scaled block ``[[S_WW, S_Wy], [S_yW, S_yy]]``: after
sweeping the ``m`` regressor pivots the block holds the slopes, the residual sum of squares and minus the
inverse of the regressors' correlation matrix, whose diagonal is the variance inflation factors. Each pivot is a
handful of array operations over all replicates at once, with no per-replicate Python loop. A pivot (the part of
a regressor not explained by the earlier ones, on the correlation scale) below ``1e-10`` marks the replicate as
rank-deficient: its results are NaN and the reason is counted, the run goes on.

References
----------
1. Goodnight J.H. (1979). A tutorial on the SWEEP operator. The American Statistician 33(3):149-158.
2. Seber G.A.F., Lee A.J. (2003). Linear Regression Analysis, 2nd ed. Wiley, ch. 3 (classical OLS standard
   errors, t intervals with n - p degrees of freedom).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from workbench.scenario.model import CHANGE_THRESHOLD, SELECTIONS

__all__ = [
    "PIVOT_TOLERANCE",
    "BatchFit",
    "crossproducts",
    "masked_crossproducts",
    "fit_crossproducts",
    "cholesky_fit",
    "select_covariates",
    "fit_selected",
    "selected_names",
    "OlsFit",
    "ols_fit",
    "t_inference",
]

PIVOT_TOLERANCE = 1e-10


@dataclass
class BatchFit:
    """OLS of one strategy in every replicate.

    Attributes
    ----------
    coef, se : ndarray of shape (R, m)
        Coefficients and classical SEs of the regressors (the exposure first); NaN where the fit failed.
    df : int or ndarray of shape (R,)
        Residual degrees of freedom ``n - p`` (``p = m + 1`` with the intercept); per replicate when ``n``
        varies (restricted analyses).
    failed : ndarray of bool, shape (R,)
    reasons : collections.Counter
        Count of each failure reason.
    vif : ndarray of shape (R,)
        The exposure's variance inflation factor ``1 / (1 - R^2)`` of the exposure on the other regressors.
    residual_variance : ndarray of shape (R,)
        ``RSS / df``.
    selected : ndarray of int, shape (R,), or None
        For a fit whose covariates were selected from the data (:func:`fit_selected`): the bit pattern of
        the kept candidates (bit ``j`` set when candidate ``j`` was kept), -1 where the full model failed.
    """

    coef: np.ndarray
    se: np.ndarray
    df: int | np.ndarray
    failed: np.ndarray
    reasons: Counter = field(default_factory=Counter)
    vif: np.ndarray | None = None
    residual_variance: np.ndarray | None = None
    selected: np.ndarray | None = None


def crossproducts(data: np.ndarray) -> np.ndarray:
    """Centred cross-product matrices of stacked datasets, by one batched matrix product.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
        Replicate, variable, row.

    Returns
    -------
    ndarray of shape (R, k, k)
        ``sum_i (v_i - mean)(v_i - mean)^T`` per replicate, computed as ``X X^T - s s^T / n`` with ``s`` the
        column sums.

    Examples
    --------
    >>> x = np.array([[[1.0, 2.0, 3.0], [1.0, 0.0, 2.0]]])
    >>> crossproducts(x)[0]
    array([[2., 1.],
           [1., 2.]])
    """
    n = data.shape[-1]
    sums = data.sum(axis=-1)
    M = np.matmul(data, data.transpose(0, 2, 1))
    M -= sums[:, :, None] * (sums[:, None, :] / n)
    return M


def fit_crossproducts(
    S: np.ndarray,
    n: int,
    outcome: int,
    regressors,
    names=None,
    *,
    tolerance: float = PIVOT_TOLERANCE,
    wanted=None,
) -> BatchFit:
    """Fit ``outcome ~ 1 + regressors`` by OLS in every replicate from centred cross-products.

    Parameters
    ----------
    S : ndarray of shape (R, k, k)
        Centred cross-product matrices (see :func:`crossproducts`).
    n : int or ndarray of shape (R,)
        Rows per replicate (an array when it varies, as after restriction).
    outcome : int
        Index of the outcome in ``S``.
    regressors : sequence of int
        Indices of the regressors, the exposure first.
    names : sequence of str, optional
        Variable names by index, for the failure reasons.
    tolerance : float
        Smallest accepted pivot on the correlation scale.
    wanted : sequence of int, optional
        Positions in ``regressors`` whose coefficients and SEs are needed (the exposure, position 0, is
        always included). Given, the fit takes the batched Cholesky path (:func:`cholesky_fit`), and the
        other columns of ``coef`` and ``se`` are NaN; by default every coefficient, by the sweep.

    Returns
    -------
    BatchFit

    Notes
    -----
    Never raises on bad data: a constant regressor or outcome, or a regressor (numerically) collinear with
    earlier ones, gives NaN for that replicate and a counted reason such as
    ``"rank-deficient: 'z' is constant"``.

    References
    ----------
    Goodnight J.H. (1979). A tutorial on the SWEEP operator. The American Statistician 33(3):149-158.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x = rng.standard_normal((1, 1, 200))
    >>> y = 2.0 * x + rng.standard_normal((1, 1, 200))
    >>> fit = fit_crossproducts(crossproducts(np.concatenate([x, y], axis=1)), 200, 1, [0])
    >>> round(float(fit.coef[0, 0]), 2), fit.df
    (1.93, 198)
    """
    regressors = list(regressors)
    if wanted is not None:
        fit = cholesky_fit(S, n, outcome, regressors, wanted, names, tolerance=tolerance)
        if fit is not None:
            return fit
    m = len(regressors)
    R = S.shape[0]
    cols = regressors + [outcome]
    q = m + 1
    if names is None:
        names = [f"column {i}" for i in range(S.shape[-1])]
    A = S[:, cols][:, :, cols].astype(float, copy=True)
    diag = np.diagonal(A, axis1=1, axis2=2).copy()
    failed = np.zeros(R, dtype=bool)
    reasons: Counter = Counter()

    def mark(bad: np.ndarray, text: str) -> None:
        new = bad & ~failed
        count = int(new.sum())
        if count:
            reasons[text] += count
            failed[new] = True

    constant = ~(diag > 0.0)
    for j in range(q):
        what = "the outcome" if j == m else "regressor"
        mark(constant[:, j], f"rank-deficient: {what} '{names[cols[j]]}' is constant")
    d = np.sqrt(np.where(constant, 1.0, diag))
    with np.errstate(all="ignore"):
        A /= d[:, :, None]
        A /= d[:, None, :]
        for j in range(m):
            pivot = A[:, j, j]
            mark(
                ~(pivot > tolerance),
                f"rank-deficient: '{names[cols[j]]}' is collinear with the other regressors",
            )
            pivot = np.where(failed, 1.0, pivot)
            row = A[:, j, :] / pivot[:, None]
            A -= A[:, :, j][:, :, None] * row[:, None, :]
            A[:, j, :] = row
            A[:, :, j] = row
            A[:, j, j] = -1.0 / pivot
        if np.ndim(n):
            df = np.asarray(n) - q
            mark(~(df > 0), f"too few rows for {q} coefficients")
            sigma2 = np.clip(A[:, m, m], 0.0, None) * diag[:, m] / np.where(df > 0, df, np.nan)
        else:
            df = n - q
            rss = np.clip(A[:, m, m], 0.0, None) * diag[:, m]
            sigma2 = rss / df if df > 0 else np.full(R, np.nan)
        coef = A[:, :m, m] * d[:, m : m + 1] / d[:, :m]
        inverse_diag = -np.diagonal(A, axis1=1, axis2=2)[:, :m]
        se = np.sqrt(sigma2[:, None] * inverse_diag / (d[:, :m] ** 2))
        vif = inverse_diag[:, 0].copy()
    coef[failed] = np.nan
    se[failed] = np.nan
    vif[failed] = np.nan
    sigma2 = np.where(failed, np.nan, sigma2)
    return BatchFit(coef, se, df, failed, reasons, vif, sigma2)


def cholesky_fit(S, n, outcome: int, regressors, wanted, names=None, *, tolerance: float = PIVOT_TOLERANCE):
    """OLS of the ``wanted`` coefficients only, in every replicate, by one batched Cholesky factorisation.

    The block of ``S`` is ordered [other regressors, wanted regressors, exposure, outcome]; its Cholesky
    factor ``L`` gives everything reported: the squared last diagonal entry is the residual sum of squares,
    the squared diagonal entry of a regressor over its diagonal entry of ``S`` is its pivot (the share of its
    variance not explained by the regressors before it, as in the sweep; the factor of the unit-diagonal
    scaled block is ``D^-1 L``, so no scaling is needed), and the trailing
    triangle ``T`` of the wanted regressors gives their coefficients ``T^-T l`` (``l`` the outcome's row of
    ``L`` under ``T``) and the diagonal of the inverse cross-product matrix (the squared column norms of
    ``T^-1``), so nothing of size (regressors x regressors) is inverted. The exposure's VIF is
    ``S_xx / L_xx^2``.

    Returns
    -------
    BatchFit or None
        None when some replicate's block is not numerically positive definite (rank deficiency): the
        caller then fits by the sweep, which names the offending regressor.

    References
    ----------
    Golub G.H., Van Loan C.F. (2013). Matrix Computations, 4th ed. Johns Hopkins, sec. 4.2 (Cholesky) and
    5.3 (least squares by the normal equations).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> d = rng.standard_normal((2, 3, 100))
    >>> d[:, 2] += 0.5 * d[:, 0] - d[:, 1]
    >>> S = crossproducts(d)
    >>> a, b = cholesky_fit(S, 100, 2, [0, 1], [0]), fit_crossproducts(S, 100, 2, [0, 1])
    >>> bool(np.allclose(a.coef[:, 0], b.coef[:, 0])), bool(np.allclose(a.se[:, 0], b.se[:, 0]))
    (True, True)
    >>> bool(np.isnan(a.coef[:, 1]).all())
    True
    """
    regressors = list(regressors)
    m = len(regressors)
    R = S.shape[0]
    tail = [j for j in dict.fromkeys(wanted) if j != 0 and 0 <= j < m] + [0]
    order = [j for j in range(m) if j not in tail] + tail
    cols = np.array([regressors[j] for j in order] + [outcome])
    A = S if np.array_equal(cols, np.arange(S.shape[-1])) else S[:, cols[:, None], cols]
    diag = np.diagonal(A, axis1=1, axis2=2)
    if not (diag > 0.0).all():
        return None  # a constant column: the sweep names it
    try:
        L = np.linalg.cholesky(A)  # chol(D^-1 A D^-1) = D^-1 chol(A): no need to scale first
    except np.linalg.LinAlgError:
        return None
    squares = np.diagonal(L, axis1=1, axis2=2) ** 2
    if not (squares[:, :m] > tolerance * diag[:, :m]).all():
        return None
    t = len(tail)
    T = L[:, m - t : m, m - t : m]
    l = L[:, m, m - t : m]
    Tinv = 1.0 / T if t == 1 else np.linalg.inv(T)
    beta = np.einsum("rji,rj->ri", Tinv, l)
    inverse_diag = np.einsum("rij,rij->rj", Tinv, Tinv)
    rss = squares[:, m]
    if np.ndim(n):
        df = np.asarray(n) - (m + 1)
        failed = ~(df > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            sigma2 = rss / np.where(failed, np.nan, df)
    else:
        df = n - (m + 1)
        failed = np.zeros(R, dtype=bool)
        sigma2 = rss / df if df > 0 else np.full(R, np.nan)
    reasons: Counter = Counter()
    if failed.any():
        reasons[f"too few rows for {m + 1} coefficients"] = int(failed.sum())
    coef = np.full((R, m), np.nan)
    se = np.full((R, m), np.nan)
    coef[:, tail] = beta
    se[:, tail] = np.sqrt(sigma2[:, None] * inverse_diag)
    vif = inverse_diag[:, -1] * diag[:, m - 1]
    coef[failed] = np.nan
    se[failed] = np.nan
    vif[failed] = np.nan
    sigma2 = np.where(failed, np.nan, sigma2)
    return BatchFit(coef, se, df, failed, reasons, vif, sigma2)


def masked_crossproducts(data: np.ndarray, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Centred cross-products of the rows kept by ``mask``, per replicate, by one batched matrix product.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
    mask : ndarray of bool, shape (R, n)
        The rows each replicate keeps.

    Returns
    -------
    S : ndarray of shape (R, k, k)
        ``X^T diag(mask) X - s s^T / n_kept`` with ``s`` the sums over kept rows (zeros where no row is kept).
    kept : ndarray of int, shape (R,)
        Rows kept per replicate.

    Examples
    --------
    >>> x = np.array([[[1.0, 2.0, 3.0, 9.0], [1.0, 0.0, 2.0, 9.0]]])
    >>> S, kept = masked_crossproducts(x, np.array([[True, True, True, False]]))
    >>> S[0], kept
    (array([[2., 1.],
           [1., 2.]]), array([3]))
    """
    weights = mask.astype(data.dtype)
    kept = mask.sum(axis=-1)
    masked = data * weights[:, None, :]
    sums = masked.sum(axis=-1)
    M = np.matmul(masked, data.transpose(0, 2, 1))
    M -= sums[:, :, None] * (sums[:, None, :] / np.maximum(kept, 1)[:, None, None])
    return M, kept


def select_covariates(
    S: np.ndarray,
    n,
    outcome: int,
    exposure: int,
    candidates,
    rule: str,
    alpha: float,
    names=None,
) -> tuple[np.ndarray, BatchFit]:
    """Apply a data-driven covariate-selection rule in every replicate, from centred cross-products.

    Parameters
    ----------
    S : ndarray of shape (R, k, k)
    n : int or ndarray of shape (R,)
    outcome, exposure : int
        Indices in ``S``.
    candidates : sequence of int
        Indices of the candidate covariates (at most 30).
    rule : {"p_value", "change_in_estimate"}
        ``"p_value"``: fit the full model (exposure and every candidate) and keep the candidates whose own
        coefficient has a two-sided t-test p-value below ``alpha`` (one-step backward elimination).
        ``"change_in_estimate"``: keep each candidate whose removal from the full model changes the
        exposure's coefficient by more than :data:`CHANGE_THRESHOLD` of it,
        ``|b_full - b_without| / |b_full| > 0.10``.
    alpha : float
    names : sequence of str, optional

    Returns
    -------
    pattern : ndarray of int, shape (R,)
        Bit ``j`` set when candidate ``j`` is kept; -1 where the full model failed.
    full : BatchFit
        The full model's fit.

    References
    ----------
    Mickey R.M., Greenland S. (1989). The impact of confounder selection criteria on effect estimation.
    American Journal of Epidemiology 129(1):125-137.

    Examples
    --------
    >>> rng = np.random.default_rng(3)
    >>> c, w = rng.standard_normal((2, 1, 1, 500))
    >>> x = c + rng.standard_normal((1, 1, 500))
    >>> y = 0.5 * x + c + 0.0 * w + rng.standard_normal((1, 1, 500))
    >>> S = crossproducts(np.concatenate([x, y, c, w], axis=1))
    >>> pattern, _ = select_covariates(S, 500, 1, 0, [2, 3], "change_in_estimate", 0.05)
    >>> int(pattern[0])  # keeps c (bit 0), drops w
    1
    """
    candidates = list(candidates)
    if rule not in SELECTIONS:
        raise ValueError(f"rule: must be one of {SELECTIONS}, got {rule!r}")
    k = len(candidates)
    full = fit_crossproducts(S, n, outcome, [exposure, *candidates], names)
    if rule == "p_value":
        df = np.asarray(full.df, dtype=float)
        _, _, p = t_inference(full.coef[:, 1:], full.se[:, 1:], df[:, None] if df.ndim else df, alpha)
        keep = p < alpha
    else:
        b_full = full.coef[:, 0]
        keep = np.zeros((S.shape[0], k), dtype=bool)
        for j in range(k):
            others = [c for i, c in enumerate(candidates) if i != j]
            without = fit_crossproducts(S, n, outcome, [exposure, *others], names)
            with np.errstate(divide="ignore", invalid="ignore"):
                change = np.abs(b_full - without.coef[:, 0]) / np.abs(b_full)
            keep[:, j] = change > CHANGE_THRESHOLD
    pattern = (keep.astype(np.int64) << np.arange(k, dtype=np.int64)).sum(axis=1)
    pattern[full.failed] = -1
    return pattern, full


def selected_names(pattern: int, candidates) -> tuple:
    """The candidates kept by a selection bit pattern (see :func:`select_covariates`), in candidate order.

    Examples
    --------
    >>> selected_names(5, ["a", "b", "c"])
    ('a', 'c')
    """
    return tuple(c for j, c in enumerate(candidates) if pattern >= 0 and (pattern >> j) & 1)


def fit_selected(
    S: np.ndarray,
    n,
    outcome: int,
    exposure: int,
    candidates,
    rule: str,
    alpha: float,
    names=None,
) -> BatchFit:
    """Select covariates in every replicate (:func:`select_covariates`), then refit with the kept ones.

    Replicates are grouped by their selected subset (at most ``2**k`` patterns) and each group is fitted in
    one batched call: the loop runs over patterns, never over replicates. The SEs, intervals and degrees of
    freedom are the naive ones of the final model, as an analyst who selected the covariates would report
    them.

    Returns
    -------
    BatchFit
        ``coef`` and ``se`` of shape (R, 1 + k): the exposure, then every candidate in candidate order (NaN
        where it was dropped); ``df`` per replicate; ``selected`` the bit patterns. A failed full model fails
        the replicate (reason prefixed ``"full model: "``).

    References
    ----------
    Mickey R.M., Greenland S. (1989). American Journal of Epidemiology 129(1):125-137.

    Examples
    --------
    >>> rng = np.random.default_rng(3)
    >>> c, w = rng.standard_normal((2, 1, 1, 500))
    >>> x = c + rng.standard_normal((1, 1, 500))
    >>> y = 0.5 * x + c + rng.standard_normal((1, 1, 500))
    >>> S = crossproducts(np.concatenate([x, y, c, w], axis=1))
    >>> fit = fit_selected(S, 500, 1, 0, [2, 3], "p_value", 0.05)
    >>> int(fit.selected[0]), bool(np.isnan(fit.coef[0, 2])), float(fit.df[0])
    (1, True, 497.0)
    """
    candidates = list(candidates)
    k = len(candidates)
    R = S.shape[0]
    pattern, full = select_covariates(S, n, outcome, exposure, candidates, rule, alpha, names)
    coef = np.full((R, 1 + k), np.nan)
    se = np.full((R, 1 + k), np.nan)
    vif = np.full(R, np.nan)
    sigma2 = np.full(R, np.nan)
    df = np.full(R, np.nan)
    failed = full.failed.copy()
    reasons: Counter = Counter({f"full model: {why}": count for why, count in full.reasons.items()})
    varying = np.ndim(n) > 0
    for code in np.unique(pattern[pattern >= 0]):
        rows = np.flatnonzero(pattern == code)
        kept = [j for j in range(k) if (code >> j) & 1]
        fit = fit_crossproducts(
            S[rows],
            np.asarray(n)[rows] if varying else n,
            outcome,
            [exposure] + [candidates[j] for j in kept],
            names,
        )
        columns = [0] + [1 + j for j in kept]
        coef[np.ix_(rows, columns)] = fit.coef
        se[np.ix_(rows, columns)] = fit.se
        vif[rows] = fit.vif
        sigma2[rows] = fit.residual_variance
        df[rows] = fit.df
        failed[rows] |= fit.failed
        reasons.update(fit.reasons)
    coef[failed] = np.nan
    se[failed] = np.nan
    vif[failed] = np.nan
    return BatchFit(coef, se, df, failed, reasons, vif, sigma2, pattern)


def t_inference(estimate, se, df, alpha: float):
    """Two-sided ``(1 - alpha)`` t interval and p-value for ``estimate = 0``.

    Parameters
    ----------
    estimate, se : array_like
    df : float or array_like
        Degrees of freedom; ``inf`` gives the normal interval (used by large-sample SEs).
    alpha : float

    Returns
    -------
    ci_low, ci_high, p_value : ndarray

    Examples
    --------
    >>> low, high, p = t_inference(np.array([1.0]), np.array([0.5]), 10, 0.05)
    >>> round(float(low[0]), 4), round(float(high[0]), 4), round(float(p[0]), 4)
    (-0.1141, 2.1141, 0.0734)
    """
    estimate = np.asarray(estimate, dtype=float)
    se = np.asarray(se, dtype=float)
    df = np.asarray(df, dtype=float)
    shape = np.broadcast_shapes(estimate.shape, se.shape, df.shape)
    estimate = np.broadcast_to(estimate, shape)
    se = np.broadcast_to(se, shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = -np.abs(estimate / se)
    p = np.full(shape, np.nan)
    quantile = np.full(shape, np.nan)
    for d in np.unique(df):  # one special-function call per distinct df (usually one per strategy)
        mask = np.broadcast_to(df == d, shape)
        if np.isinf(d):
            p[mask] = 2.0 * special.ndtr(t[mask])
            quantile[mask] = special.ndtri(1.0 - alpha / 2.0)
        elif d > 0:
            p[mask] = 2.0 * special.stdtr(d, t[mask])
            quantile[mask] = special.stdtrit(d, 1.0 - alpha / 2.0)
    half = quantile * se
    return estimate - half, estimate + half, p


@dataclass(frozen=True)
class OlsFit:
    """OLS on one dataset.

    Attributes
    ----------
    coef, se : ndarray of shape (m,)
        Regressors' coefficients and classical SEs (no intercept); NaN when the fit failed.
    intercept : float
    df : int
        ``n - p``.
    failure : str or None
        Why the fit failed.
    """

    coef: np.ndarray
    se: np.ndarray
    intercept: float
    df: int
    failure: str | None = None


def ols_fit(X: np.ndarray, y: np.ndarray, names=None) -> OlsFit:
    """OLS of ``y`` on an intercept and the columns of ``X`` by a QR decomposition.

    Parameters
    ----------
    X : ndarray of shape (n, m)
    y : ndarray of shape (n,)
    names : sequence of str, optional
        Column names, for the failure reason.

    Returns
    -------
    OlsFit

    References
    ----------
    Seber G.A.F., Lee A.J. (2003). Linear Regression Analysis, 2nd ed. Wiley, ch. 3 and 11 (QR method).

    Examples
    --------
    >>> X = np.array([[0.0], [1.0], [2.0], [3.0]])
    >>> fit = ols_fit(X, np.array([1.0, 3.0, 4.0, 7.0]))
    >>> round(float(fit.coef[0]), 10), round(float(fit.se[0]), 4), fit.df  # se = sqrt(0.7 / 2 / 5)
    (1.9, 0.2646, 2)
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, m = X.shape
    names = list(names) if names is not None else [f"column {i}" for i in range(m)]
    df = n - m - 1
    nan = np.full(m, np.nan)
    if df < 1:
        return OlsFit(nan, nan.copy(), float("nan"), df, f"too few rows: n = {n} for {m + 1} coefficients")
    design = np.column_stack([np.ones(n), X])
    Q, Rm = np.linalg.qr(design)
    scale = np.linalg.norm(design, axis=0)
    scale[scale == 0] = 1.0
    small = np.abs(np.diag(Rm)) <= 1e-10 * scale
    if small.any():
        j = int(np.argmax(small))
        what = "the intercept" if j == 0 else f"'{names[j - 1]}'"
        return OlsFit(nan, nan.copy(), float("nan"), df, f"rank-deficient: {what} is constant or collinear")
    beta = np.linalg.solve(Rm, Q.T @ y)
    resid = y - design @ beta
    sigma2 = float(resid @ resid) / df
    Rinv = np.linalg.inv(Rm)
    var = sigma2 * np.einsum("ij,ij->i", Rinv, Rinv)
    return OlsFit(beta[1:], np.sqrt(var[1:]), float(beta[0]), df, None)
