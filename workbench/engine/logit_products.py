"""The score and information of batched logistic fits from the products of column pairs laid out once.

Used by :mod:`workbench.engine.logistic`: for a block of B replicates with p columns (p <= 8) the columns and
the products of their pairs are stored once as the rows of one (B, m, n) array, so that each Newton
iteration gets score ``X'(y - mu)`` and information ``X' diag(mu (1 - mu)) X`` from one batched matrix
product with two rows (McCullagh & Nelder 1989, sec. 4.4, for the quantities themselves).
"""

from __future__ import annotations

import numpy as np

__all__ = ["ColumnProducts"]


def _is_binary(column: np.ndarray) -> bool:
    """Every entry of ``column`` (B, n) is 0 or 1 (a look at a few rows first, which settles most columns)."""
    head = column[:, :16]
    if not np.all((head == 0.0) | (head == 1.0)):
        return False
    return bool(np.all((column == 0.0) | (column == 1.0)))


class ColumnProducts:
    """Score ``X'(y - mu)`` and information ``X' diag(mu (1 - mu)) X`` of one block of replicates.

    With few columns (p <= 8) the block's columns and the products of its column pairs are laid out once, as
    the rows of one (B, m, n) array: the p columns first, then the products ``x_i x_j`` (i <= j) that are
    not already among them (with a first column of ones, ``x_0 x_j = x_j``, so only the pairs of the other
    columns; a 0/1 column's square is the column itself). Score and information then cost one batched product of that array with the two rows
    ``[y - mu, mu (1 - mu)]`` per iteration: one pass over the rows. Otherwise a batched matrix product.
    """

    def __init__(self, Xt: np.ndarray, ones_first: bool):
        B, p, n = Xt.shape
        self.p = p
        self.upper = np.triu_indices(p)
        self.rows = None
        if p <= 8:
            first = 1 if ones_first else 0
            # a 0/1 column squared is itself: its square is not stored again
            where = {(i, i): i for i in range(first, p) if _is_binary(Xt[:, i, :])}
            pairs = [(i, j) for i, j in zip(*self.upper, strict=True) if i >= first and (i, j) not in where]
            self.rows = np.empty((B, p + len(pairs), n))
            self.rows[:, :p, :] = Xt
            for k, (i, j) in enumerate(pairs):
                np.multiply(Xt[:, i, :], Xt[:, j, :], out=self.rows[:, p + k, :])
                where[i, j] = p + k
            if ones_first:  # x_0 x_0 = 1 is row 0 (its sum is n), x_0 x_j = x_j is row j
                where.update({(0, j): j for j in range(p)})
            self.index = np.array([where[i, j] for i, j in zip(*self.upper, strict=True)])

    def __call__(self, Xt, work, rows=None):
        """Score (B, p) and information (B, p, p) for the replicates ``rows`` (all when None); ``work``
        (B, 2, n) holds the residuals ``y - mu`` and the weights ``mu (1 - mu)``."""
        if self.rows is None:
            score = np.matmul(Xt, work[:, 0, :, None])[..., 0]
            return score, self.information(Xt, work[:, 1, :], rows)
        both = np.matmul(self.rows if rows is None else self.rows[rows], np.swapaxes(work, 1, 2))
        return both[:, : self.p, 0], self._square(both[:, :, 1])

    def information(self, Xt, weights, rows=None):
        """``X' diag(weights) X``, shape (B, p, p), for the replicates ``rows`` (all when None)."""
        if self.rows is None:
            return np.matmul(Xt * weights[:, None, :], np.swapaxes(Xt, 1, 2))
        products = self.rows if rows is None else self.rows[rows]
        return self._square(np.matmul(products, weights[..., None])[..., 0])

    def _square(self, values):
        """The symmetric (B, p, p) matrices from the sums of the product rows (B, m)."""
        info = np.empty((len(values), self.p, self.p))
        upper = values[:, self.index]
        info[:, self.upper[0], self.upper[1]] = upper
        info[:, self.upper[1], self.upper[0]] = upper
        return info
