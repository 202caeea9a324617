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

From the exact engine's draws (:class:`~workbench.engine.wishart.BartlettFactor`) even ``U`` is formed only
column by column, as the fits ask: a leading-set fit needs the exposure's and the outcome's columns alone, any
other strategy its own columns, a cache-sized group of replicates at a time. The whole ``W`` is formed only for
the fits that need every coefficient (selection rules, the sweep's fallback on rank-deficient blocks).

References
----------
Golub G.H., Van Loan C.F. (2013). Matrix Computations, 4th ed. Johns Hopkins, sec. 4.2 (the Cholesky
factor and Schur complements) and 5.3 (least squares by the normal equations).
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from workbench.engine.ols import PIVOT_TOLERANCE, BatchFit, cholesky_fit
from workbench.engine.wishart import BartlettFactor

__all__ = ["GROUP_BYTES", "FactoredCrossproducts"]

GROUP_BYTES = 2 * 2**20
"""Size aimed at for one group's columns of ``U`` in :meth:`FactoredCrossproducts.fit` (a processor cache)."""


class FactoredCrossproducts:
    """Centred cross-products ``W = U^T U`` of a chunk of replicates, kept as ``U``.

    Parameters
    ----------
    factor : ndarray of shape (R, k, k), or BartlettFactor
        Upper-triangular ``U`` with a positive diagonal, in full or as the exact engine's Bartlett draws
        (:class:`workbench.engine.wishart.BartlettFactor`), whose columns are then formed only as the fits
        ask for them.

    Examples
    --------
    >>> U = np.array([[[2.0, 1.0], [0.0, 1.0]]])
    >>> FactoredCrossproducts(U).full()[0]
    array([[4., 2.],
           [2., 2.]])
    """

    def __init__(self, factor):
        self._lazy: BartlettFactor | None = None
        self._U: np.ndarray | None = None
        if isinstance(factor, BartlettFactor) and factor.triangular:
            self._lazy = factor
        elif isinstance(factor, BartlettFactor):
            self._U = factor.upper()
        else:
            self._U = np.asarray(factor)
        self._full: np.ndarray | None = None

    @property
    def shape(self) -> tuple[int, int, int]:
        return self._lazy.shape if self._lazy is not None else self._U.shape

    @property
    def factor(self) -> np.ndarray:
        """Every ``U`` in full, shape (R, k, k) (formed once)."""
        if self._U is None:
            self._U = self._lazy.upper()
        return self._U

    def _columns(self, cols) -> np.ndarray:
        """Columns ``cols`` of every ``U``, shape (R, k, len(cols))."""
        if self._lazy is not None:
            return self._lazy.columns(cols)
        return self._U[:, :, list(cols)]

    def _column(self, j: int) -> np.ndarray:
        """Column ``j`` of every ``U``, shape (R, k)."""
        return self._lazy.column(j) if self._lazy is not None else self._U[:, :, j]

    def _leading_pivots_ok(self, a: int, tolerance: float) -> bool:
        """Every pivot of the first ``a`` variables, ``U_jj^2``, exceeds ``tolerance`` times ``W_jj``.

        For Bartlett draws ``W_jj = ||L_j A||^2 <= ||L_j||^2 ||A||_F^2``, so the bound (with a margin of two
        for round-off) settles the check in ``O(k^2)`` per replicate without forming the columns; only when
        the bound is not enough are the ``a`` columns formed and the check made exactly."""
        if a == 0:
            return True
        if self._lazy is not None:
            lead = self._lazy.diagonal()[:, :a] ** 2
            rows = np.einsum("ij,ij->i", self._lazy.L[:a], self._lazy.L[:a])
            if (lead > (2.0 * tolerance) * (self._lazy.frobenius()[:, None] * rows)).all():
                return True
            part = self._lazy.columns(range(a))[:, :a]
        else:
            lead = np.diagonal(self._U, axis1=1, axis2=2)[:, :a] ** 2
            part = self._U[:, :a, :a]
        own = np.einsum("rij,rij->rj", part, part)
        return bool((lead > tolerance * own).all())

    def full(self) -> np.ndarray:
        """The whole ``W`` (R, k, k), formed once."""
        if self._full is None:
            U = self.factor
            self._full = np.matmul(U.transpose(0, 2, 1), U)
        return self._full

    def block(self, cols) -> np.ndarray:
        """``W`` restricted to rows and columns ``cols`` (in that order), from those columns of ``U`` alone."""
        if self._full is not None:
            cols = np.asarray(cols)
            return self._full[:, cols[:, None], cols]
        cols = list(cols)
        part = self._columns(cols)[:, : max(cols) + 1]
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
        if not _is_leading(outcome, regressors):
            return None
        exposure, a = regressors[0], len(regressors) - 1
        R = self.shape[0]
        if self._lazy is not None:
            both = self._lazy.columns([exposure, outcome])
            ux, uy = both[:, :, 0], both[:, :, 1]
        else:
            ux, uy = self._U[:, :, exposure], self._U[:, :, outcome]
        wxx = np.einsum("ri,ri->r", ux, ux)
        hx, hy = ux[:, a:], uy[:, a:]
        sxx = np.einsum("ri,ri->r", hx, hx)
        sxy = np.einsum("ri,ri->r", hx, hy)
        syy = np.einsum("ri,ri->r", hy, hy)
        if not ((sxx > tolerance * wxx).all() and (syy > 0).all() and self._leading_pivots_ok(a, tolerance)):
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

    def prepare(self, fits) -> None:
        """Form in one matrix product the columns of ``U`` that the coming leading-set fits, ``(outcome,
        regressors, wanted)`` each, will use (the exposure's and the outcome's). Only saves work: the fits
        give the same numbers without it."""
        if self._lazy is None:
            return
        need = []
        for outcome, regressors, wanted in fits:
            regressors = list(regressors)
            if list(wanted) == [0] and _is_leading(outcome, regressors):
                need += [regressors[0], outcome]
        if need:
            self._lazy.prefetch(list(dict.fromkeys(need)))

    def fit(self, n, outcome: int, regressors, wanted, tolerance: float = PIVOT_TOLERANCE) -> BatchFit | None:
        """OLS of the ``wanted`` coefficients (see :func:`workbench.engine.ols.cholesky_fit`): the leading-set
        shortcut when it applies, else a Cholesky factorisation of the strategy's own block; None when the
        block is rank-deficient (the caller falls back to the sweep on :meth:`full`).

        With the Bartlett draws the block is formed and factorised a group of replicates at a time, so that
        the strategy's columns of ``U``, its block and the factor stay in the processor's cache (about
        :data:`GROUP_BYTES` each); the numbers do not depend on the grouping."""
        regressors = list(regressors)
        if list(wanted) == [0]:
            fit = self.leading_fit(n, outcome, regressors, tolerance)
            if fit is not None:
                return fit
        cols = [*regressors, outcome]
        if len(set(cols)) != len(cols):
            return None
        m = len(regressors)
        order = _cholesky_order(m, wanted)  # cholesky_fit's own order: the block needs no copy
        place = {j: i for i, j in enumerate(order)}
        cols = [regressors[j] for j in order] + [outcome]
        positions = [place[j] for j in range(m)]
        if self._lazy is None or self._full is not None:
            return cholesky_fit(self.block(cols), n, m, positions, wanted, tolerance=tolerance)
        R, k, _ = self.shape
        group = max(16, GROUP_BYTES // (8 * k * len(cols)))
        top = max(cols) + 1
        pieces = []
        for start in range(0, R, group):
            stop = min(start + group, R)
            part = self._lazy.rows_columns(cols, start, stop)[:, :top]
            block = np.matmul(part.transpose(0, 2, 1), part)
            piece_n = n[start:stop] if np.ndim(n) else n
            fit = cholesky_fit(block, piece_n, m, positions, wanted, tolerance=tolerance)
            if fit is None:
                return None
            pieces.append(fit)
        return _joined(pieces)


def _is_leading(outcome: int, regressors) -> bool:
    """The adjustment set (``regressors[1:]``) is the first variables, with the exposure and outcome after."""
    exposure, adjust = regressors[0], list(regressors[1:])
    a = len(adjust)
    return sorted(adjust) == list(range(a)) and exposure >= a and outcome >= a and exposure != outcome


def _cholesky_order(m: int, wanted) -> list[int]:
    """The regressors' positions in :func:`workbench.engine.ols.cholesky_fit`'s order: the unwanted ones,
    the wanted ones, the exposure last."""
    tail = [j for j in dict.fromkeys(wanted) if j != 0 and 0 <= j < m] + [0]
    return [j for j in range(m) if j not in tail] + tail


def _joined(pieces: list[BatchFit]) -> BatchFit:
    """One fit from the fits of consecutive groups of replicates."""
    if len(pieces) == 1:
        return pieces[0]
    reasons: Counter = Counter()
    for piece in pieces:
        reasons.update(piece.reasons)
    dfs = [piece.df for piece in pieces]
    scalar = all(np.ndim(d) == 0 for d in dfs) and len(set(dfs)) == 1
    return BatchFit(
        np.concatenate([p.coef for p in pieces]),
        np.concatenate([p.se for p in pieces]),
        dfs[0]
        if scalar
        else np.concatenate([np.broadcast_to(d, p.failed.shape) for d, p in zip(dfs, pieces, strict=True)]),
        np.concatenate([p.failed for p in pieces]),
        reasons,
        np.concatenate([p.vif for p in pieces]),
        np.concatenate([p.residual_variance for p in pieces]),
    )
