"""Flexible adjustment: covariates as restricted cubic splines in OLS, batched over replicates.

A strategy with ``flexible = ["age"]`` fits, in every simulated study,

    y = a + b_x x + b_w' w + sum_f (c_f1 S_1(z_f) + c_f2 S_2(z_f)) + e

where ``w`` is its adjustment set (each flexible covariate ``z_f`` is in ``w``, so it keeps its linear
term) and ``S_1, S_2`` are the two non-linear columns of a restricted (natural) cubic spline with ``k = 4``
knots: cubic between the knots, linear beyond the outer ones (Harrell, Regression Modeling Strategies, 2nd
ed. 2015, sec. 2.4.5). The knots are the 5th, 35th, 65th and 95th percentiles of the covariate in that
study's sample (Harrell's placement for ``k = 4``, his table 2.3), found with ``numpy.quantile``'s default
linear interpolation (Hyndman & Fan 1996, type 7), within each replicate. For knots ``t_1 < ... < t_k`` the
``j``-th non-linear column (``j = 1 .. k - 2``) is (Harrell 2015, eq. 2.25)

    S_j(z) = [(z - t_j)_+^3 - (z - t_{k-1})_+^3 (t_k - t_j) / (t_k - t_{k-1})
              + (z - t_k)_+^3 (t_{k-1} - t_j) / (t_k - t_{k-1})] / (t_k - t_1)^2,

the division by ``(t_k - t_1)^2`` being Harrell's scaling (``rcspline.eval``'s ``norm = 2``), which only
rescales the coefficients and keeps the columns on the covariate's scale. The exposure's coefficient and its
classical SE are those of this linear model (the spline changes the covariate's shape, not the exposure's
effect, so ``b_x`` is the effect given a smooth function of the covariate).

Every fit is one batched cross-product and one batched Cholesky solve (:func:`workbench.engine.ols.
fit_crossproducts`) over all replicates: the percentiles come from one ``numpy.quantile`` along the rows and
the basis is built as arrays of shape (R, 2, n), with no per-replicate Python loop. A replicate whose knots
tie (a covariate with few distinct values) or whose design is singular is counted as a failure.

References
----------
1. Harrell F.E. (2015). Regression Modeling Strategies, 2nd ed. Springer, sec. 2.4.5 (restricted cubic
   splines, knot placement), from memory.
2. Hyndman R.J., Fan Y. (1996). Sample quantiles in statistical packages. The American Statistician
   50(4):361-365.

Examples
--------
>>> rng = np.random.default_rng(1)
>>> age = rng.standard_normal((2, 3000))
>>> x = age**2 + rng.standard_normal((2, 3000))
>>> y = 1.0 * x + 2.0 * age**2 + rng.standard_normal((2, 3000))
>>> data = np.stack([age, x, y], axis=1)  # (replicates, variables, rows)
>>> fit = fit_flexible(data, 1, [0], [0], 2)
>>> fit.coef.shape, bool(np.all(np.abs(fit.coef[:, 0] - 1.0) < 0.25))  # linear adjustment: about 1.9
((2, 2), True)
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from workbench.engine.ols import BatchFit, crossproducts, fit_crossproducts

__all__ = [
    "KNOT_PERCENTILES",
    "knots",
    "spline_basis",
    "spline_columns",
    "with_spline_columns",
    "fit_flexible",
]

KNOT_PERCENTILES = (0.05, 0.35, 0.65, 0.95)
"""Harrell's knot placement for ``k = 4`` (sample quantiles of the covariate, within each replicate)."""


def knots(z: np.ndarray) -> np.ndarray:
    """The knots of every replicate: ``z`` of shape (R, n) gives (R, 4), the :data:`KNOT_PERCENTILES`.

    Examples
    --------
    >>> knots(np.arange(101.0)[None, :]).tolist()
    [[5.0, 35.0, 65.0, 95.0]]
    """
    return np.quantile(z, KNOT_PERCENTILES, axis=-1).T


def spline_basis(z: np.ndarray, t: np.ndarray) -> np.ndarray:
    """The ``k - 2`` non-linear columns of the restricted cubic spline (module notes, Harrell's eq. 2.25).

    Parameters
    ----------
    z : ndarray of shape (R, n)
    t : ndarray of shape (R, k)
        Increasing knots per replicate.

    Returns
    -------
    ndarray of shape (R, k - 2, n)
        NaN in a replicate whose outer knots tie.

    Examples
    --------
    >>> t = np.array([[0.0, 1.0, 2.0, 3.0]])
    >>> spline_basis(np.array([[0.5, 5.0]]), t).round(6).tolist()  # (0.5)^3 / 9; (125 - 81 + 16) / 9
    [[[0.013889, 6.666667], [0.0, 2.0]]]
    """
    R, k = t.shape
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = 1.0 / (t[:, -1] - t[:, 0]) ** 2
        last = t[:, -1] - t[:, -2]

        def cube(j: int) -> np.ndarray:
            return np.maximum(z - t[:, j, None], 0.0) ** 3

        tail_1, tail_2 = cube(k - 2), cube(k - 1)
        out = np.empty((R, k - 2, z.shape[-1]))
        for j in range(k - 2):  # k - 2 = 2 columns, not replicates
            a = ((t[:, -1] - t[:, j]) / last)[:, None]
            b = ((t[:, -2] - t[:, j]) / last)[:, None]
            out[:, j] = (cube(j) - tail_1 * a + tail_2 * b) * scale[:, None]
    return out


def spline_columns(data: np.ndarray, adjust, flexible) -> tuple[np.ndarray, np.ndarray]:
    """The two non-linear spline columns of each flexible covariate, in every replicate.

    ``data`` is (R, k, n); ``adjust`` the adjustment set's variable indices; ``flexible`` positions in
    ``adjust``. Returns the columns, shape (R, 2 x len(flexible), n), and which replicates have tied knots
    (their columns are 0 there: the caller fails those replicates).

    Examples
    --------
    >>> z = np.arange(101.0)[None, None, :]
    >>> columns, tied = spline_columns(z, [0], [0])
    >>> columns.shape, tied.tolist()
    ((1, 2, 101), [False])
    """
    R, _, n = data.shape
    out = np.empty((R, 2 * len(flexible), n))
    tied = np.zeros(R, dtype=bool)
    for f, pos in enumerate(flexible):
        z = data[:, adjust[pos]]
        t = knots(z)
        tied |= np.any(np.diff(t, axis=1) <= 0.0, axis=1)
        out[:, 2 * f : 2 * f + 2] = spline_basis(z, t)
    if tied.any():
        out[tied] = 0.0
    return out, tied


def with_spline_columns(X: np.ndarray, data: np.ndarray, adjust, flexible) -> tuple[np.ndarray, np.ndarray]:
    """A design matrix of :func:`workbench.engine.logistic.design_matrix` (R, n, p) with the flexible
    covariates' spline columns appended, in the same layout (a transposed view of a contiguous (R, p', n)
    array), and the replicates with tied knots (:func:`spline_columns`). The logistic and Poisson fits use it
    for ``flexible``; their first ``p`` coefficients keep their meaning."""
    columns, tied = spline_columns(data, list(adjust), list(flexible))
    joined = np.concatenate([X.transpose(0, 2, 1), columns], axis=1)
    return joined.transpose(0, 2, 1), tied


def fit_flexible(data: np.ndarray, exposure: int, adjust, flexible, outcome: int, names=None) -> BatchFit:
    """Fit the flexible model (module notes) in every replicate.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
        Replicate, variable, row (the raw engine's layout).
    exposure, outcome : int
        Variable indices.
    adjust : sequence of int
        The adjustment set's variable indices.
    flexible : sequence of int
        Positions in ``adjust`` of the covariates that also enter through their spline columns.
    names : sequence of str, optional
        Variable names by index, for the failure reasons.

    Returns
    -------
    BatchFit
        Coefficients and classical SEs of the exposure and the adjustment set (the spline columns' are left
        out); a replicate with tied knots is failed with the reason ``"tied spline knots"``.
    """
    adjust, flexible = list(adjust), list(flexible)
    R, k, n = data.shape
    p, q = len(adjust), 2 * len(flexible)
    names = list(names) if names is not None else [f"column {i}" for i in range(k)]
    columns = np.empty((R, 2 + p + q, n))
    columns[:, 0] = data[:, exposure]
    columns[:, 1 : 1 + p] = data[:, adjust]
    labels = [names[exposure]] + [names[a] for a in adjust]
    columns[:, 1 + p : 1 + p + q], tied = spline_columns(data, adjust, flexible)
    labels += [f"{names[adjust[pos]]} spline {j}" for pos in flexible for j in (1, 2)]
    columns[:, -1] = data[:, outcome]
    S = crossproducts(columns)
    fit = fit_crossproducts(S, n, 1 + p + q, list(range(1 + p + q)), labels + [names[outcome]])
    reasons = Counter(fit.reasons)
    failed = fit.failed | tied
    extra = int((tied & ~fit.failed).sum())
    if extra:
        reasons["tied spline knots"] += extra
    coef = np.where(failed[:, None], np.nan, fit.coef[:, : 1 + p])
    se = np.where(failed[:, None], np.nan, fit.se[:, : 1 + p])
    return BatchFit(coef, se, fit.df, failed, reasons, np.where(failed, np.nan, fit.vif))
