"""Cross-products held as their triangular factor, as the exact engine draws them.

The Bartlett decomposition (:mod:`workbench.engine.wishart`) draws each replicate's centred cross-product
matrix as ``W = U^T U`` with ``U = (L A)^T`` upper triangular. Keeping ``U`` instead of ``W`` saves work:

- a strategy needs only the block ``W_cc = U_c^T U_c`` of its own variables (``U_c`` the columns ``c``:
  ``|c|^2 k`` per replicate, not ``k^3`` for the whole of ``W``), formed on demand by
  :meth:`FactoredCrossproducts.block`;
- when the adjustment set is a leading run of the variables (the first ``a`` columns of ``U``, which the exact
  engine's order makes common: every observed covariate, or none), the regressors' columns span the first
  ``a`` unit vectors, so the exposure's and outcome's columns of ``U`` with their first ``a`` entries dropped
  are their residuals on the adjustment set: the slope, residual sum of squares, SE and VIF follow from three
  dot products, ``O(k)`` per replicate (:meth:`FactoredCrossproducts.leading_fit`).

The whole ``W`` is formed only for the fits that need every coefficient (selection rules, the sweep's
fallback on rank-deficient blocks).

References
----------
Golub G.H., Van Loan C.F. (2013). Matrix Computations, 4th ed. Johns Hopkins, sec. 4.2 (the Cholesky
factor and Schur complements) and 5.3 (least squares by the normal equations).
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from workbench.engine.ols import PIVOT_TOLERANCE, BatchFit, cholesky_fit

__all__ = ["FactoredCrossproducts"]


class FactoredCrossproducts:
    """Centred cross-products ``W = U^T U`` of a chunk of replicates, kept as ``U``.

    Parameters
    ----------
    factor : ndarray of shape (R, k, k)
        Upper-triangular ``U`` with a positive diagonal.

    Examples
    --------
    >>> U = np.array([[[2.0, 1.0], [0.0, 1.0]]])
    >>> FactoredCrossproducts(U).full()[0]
    array([[4., 2.],
           [2., 2.]])
    """

    def __init__(self, factor: np.ndarray):
        self.factor = factor
        self._full: np.ndarray | None = None

    @property
    def shape(self) -> tuple[int, int, int]:
        return self.factor.shape

    def full(self) -> np.ndarray:
        """The whole ``W`` (R, k, k), formed once."""
        if self._full is None:
            self._full = np.matmul(self.factor.transpose(0, 2, 1), self.factor)
        return self._full

    def block(self, cols) -> np.ndarray:
        """``W`` restricted to rows and columns ``cols`` (in that order), from those columns of ``U`` alone."""
        if self._full is not None:
            cols = np.asarray(cols)
            return self._full[:, cols[:, None], cols]
        cols = list(cols)
        part = self.factor[:, : max(cols) + 1, cols]
        return np.matmul(part.transpose(0, 2, 1), part)

    def leading_fit(self, n, outcome: int, regressors, tolerance: float = PIVOT_TOLERANCE) -> BatchFit | None:
        """The exposure's OLS fit when the adjustment set is the first columns of ``U``; None otherwise or when a
        pivot is below ``tolerance`` (the caller then takes the general path, which names the problem).

        Examples
        --------
        >>> rng = np.random.default_rng(1)
        >>> U = np.triu(rng.standard_normal((3, 4, 4))) + 5 * np.eye(4)
        >>> W = FactoredCrossproducts(U)
        >>> fast = W.leading_fit(50, 3, [2, 0, 1])
        >>> slow = cholesky_fit(W.full(), 50, 3, [2, 0, 1], [0])
        >>> bool(np.allclose(fast.coef[:, 0], slow.coef[:, 0])), bool(np.allclose(fast.vif, slow.vif))
        (True, True)
        """
        exposure, adjust = regressors[0], list(regressors[1:])
        a = len(adjust)
        if sorted(adjust) != list(range(a)) or exposure < a or outcome < a or exposure == outcome:
            return None
        U = self.factor
        R = U.shape[0]
        ux, uy = U[:, :, exposure], U[:, :, outcome]
        wxx = np.einsum("ri,ri->r", ux, ux)
        hx, hy = ux[:, a:], uy[:, a:]
        sxx = np.einsum("ri,ri->r", hx, hx)
        sxy = np.einsum("ri,ri->r", hx, hy)
        syy = np.einsum("ri,ri->r", hy, hy)
        lead = np.diagonal(U, axis1=1, axis2=2)[:, :a] ** 2
        own = np.einsum("rij,rij->rj", U[:, :a, :a], U[:, :a, :a])
        if not ((lead > tolerance * own).all() and (sxx > tolerance * wxx).all() and (syy > 0).all()):
            return None
        m = a + 1
        coef = np.full((R, m), np.nan)
        se = np.full((R, m), np.nan)
        coef[:, 0] = sxy / sxx
        rss = np.clip(syy - sxy * coef[:, 0], 0.0, None)
        reasons: Counter = Counter()
        if np.ndim(n):
            df = np.asarray(n) - (m + 1)
            failed = ~(df > 0)
            if failed.any():
                reasons[f"too few rows for {m + 1} coefficients"] = int(failed.sum())
            with np.errstate(divide="ignore", invalid="ignore"):
                sigma2 = rss / np.where(failed, np.nan, df)
        else:
            df = n - (m + 1)
            failed = np.zeros(R, dtype=bool)
            sigma2 = rss / df if df > 0 else np.full(R, np.nan)
        se[:, 0] = np.sqrt(sigma2 / sxx)
        vif = wxx / sxx
        coef[failed] = np.nan
        se[failed] = np.nan
        vif[failed] = np.nan
        return BatchFit(coef, se, df, failed, reasons, vif, np.where(failed, np.nan, sigma2))

    def fit(self, n, outcome: int, regressors, wanted, tolerance: float = PIVOT_TOLERANCE) -> BatchFit | None:
        """OLS of the ``wanted`` coefficients (see :func:`workbench.engine.ols.cholesky_fit`): the leading-set
        shortcut when it applies, else a Cholesky factorisation of the strategy's own block; None when the
        block is rank-deficient (the caller falls back to the sweep on :meth:`full`)."""
        regressors = list(regressors)
        if list(wanted) == [0]:
            fit = self.leading_fit(n, outcome, regressors, tolerance)
            if fit is not None:
                return fit
        cols = [*regressors, outcome]
        if len(set(cols)) != len(cols):
            return None
        m = len(regressors)
        return cholesky_fit(self.block(cols), n, m, list(range(m)), wanted, tolerance=tolerance)
