"""Batched Wishart draws by the Bartlett decomposition.

If the rows of an ``n x k`` data matrix are independent ``N(mu, Sigma)``, the centred cross-product matrix
``sum_i (v_i - mean)(v_i - mean)^T`` is Wishart with ``n - 1`` degrees of freedom and scale ``Sigma``. The
Bartlett decomposition writes a Wishart(``df``, ``Sigma``) matrix as ``L A A^T L^T`` with ``L L^T = Sigma``
and ``A`` lower triangular, ``A_ii^2 ~ chi-square(df - i)`` (``i = 0 .. k-1``) and ``A_ij ~ N(0, 1)`` below
the diagonal, all independent. The cost of a draw depends on ``k`` only, not on ``df``, which is what makes
the exact engine's cost independent of the sample size.

References
----------
1. Bartlett M.S. (1933). On the theory of statistical regression. Proceedings of the Royal Society of
   Edinburgh 53:260-283.
2. Anderson T.W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed. Wiley, sec. 7.2
   (from memory).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "BartlettFactor",
    "draw_wishart",
    "bartlett_draws",
    "bartlett_factors",
    "bartlett_matrices",
    "square_root",
]


def square_root(sigma: np.ndarray) -> np.ndarray:
    """A matrix ``L`` with ``L @ L.T == sigma``: the Cholesky factor, or a symmetric eigen-square-root when
    ``sigma`` is only positive semi-definite.

    Examples
    --------
    >>> L = square_root(np.array([[4.0, 2.0], [2.0, 2.0]]))
    >>> np.allclose(L @ L.T, [[4.0, 2.0], [2.0, 2.0]])
    True
    """
    sigma = np.asarray(sigma, dtype=float)
    try:
        return np.linalg.cholesky(sigma)
    except np.linalg.LinAlgError:
        w, V = np.linalg.eigh(sigma)
        return V * np.sqrt(np.clip(w, 0.0, None))


def draw_wishart(sigma: np.ndarray, df: float, size: int, rng: np.random.Generator) -> np.ndarray:
    """Draw ``size`` Wishart(``df``, ``sigma``) matrices at once by the Bartlett decomposition.

    Parameters
    ----------
    sigma : ndarray of shape (k, k)
        Positive semi-definite scale matrix.
    df : float
        Degrees of freedom, greater than ``k - 1``.
    size : int
        Number of matrices.
    rng : numpy.random.Generator
        The random numbers are taken in a fixed order: first the ``size x k`` chi-squares, then the
        ``size x k(k-1)/2`` normals.

    Returns
    -------
    ndarray of shape (size, k, k)
        Symmetric matrices with mean ``df * sigma``.

    References
    ----------
    Bartlett M.S. (1933). On the theory of statistical regression. Proc. Royal Society of Edinburgh 53:260-283.

    Examples
    --------
    >>> sigma = np.array([[1.0, 0.3], [0.3, 2.0]])
    >>> W = draw_wishart(sigma, 50, 20000, np.random.default_rng(0))
    >>> W.shape, bool(np.allclose(W.mean(axis=0) / 50, sigma, atol=0.05))
    ((20000, 2, 2), True)
    """
    sigma = np.asarray(sigma, dtype=float)
    chi, normals = bartlett_draws(sigma.shape[0], df, size, rng)
    return bartlett_matrices(square_root(sigma), chi, normals)


def bartlett_draws(
    k: int, df: float, size: int, rng: np.random.Generator, out: tuple[np.ndarray, np.ndarray] | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """The random numbers of ``size`` Bartlett draws, in stream order: chi-squares with ``df - i`` degrees of
    freedom, shape (size, k), then standard normals, shape (size, k(k-1)/2).

    ``out``, a pair of C-contiguous arrays of those shapes, receives them in place (the same numbers, with no
    copy of the normals), as when a chunk gathers several blocks' draws.

    Examples
    --------
    >>> chi, normals = bartlett_draws(3, 10, 5, np.random.default_rng(0))
    >>> chi.shape, normals.shape
    ((5, 3), (5, 3))
    >>> into = np.empty((5, 3)), np.empty((5, 3))
    >>> _ = bartlett_draws(3, 10, 5, np.random.default_rng(0), out=into)
    >>> bool(np.array_equal(into[1], normals))
    True
    """
    if not df > k - 1:
        raise ValueError(f"draw_wishart: df must exceed k - 1 = {k - 1}, got {df}")
    chi = rng.chisquare(df - np.arange(k), size=(size, k))
    if out is None:
        return chi, rng.standard_normal((size, k * (k - 1) // 2))
    out[0][...] = chi
    rng.standard_normal(out=out[1])
    return out


class BartlettFactor:
    """The factors ``U = (L A)^T`` of a chunk of Bartlett draws (``W = U^T U``), their columns formed on demand.

    ``A`` is laid out variable-major, shape (k, size, k) (row ``i`` of every replicate's ``A`` side by side), so
    that the columns ``c`` of every ``U`` are one matrix product ``A^T L[c]^T`` of the stacked rows: a strategy
    that uses a few of the variables pays for those columns only, not for all ``k^2`` entries of each ``U``.

    Parameters
    ----------
    L : ndarray of shape (k, k)
        ``L L^T = Sigma`` (see :func:`square_root`).
    chi, normals : ndarray
        The draws of :func:`bartlett_draws`.

    Attributes
    ----------
    triangular : bool
        ``L`` is lower triangular, so every ``U`` is upper triangular with diagonal ``L_jj sqrt(chi_j)``.

    Examples
    --------
    >>> f = BartlettFactor(np.eye(2), np.array([[4.0, 1.0]]), np.array([[0.5]]))
    >>> f.columns([1])[0]  # the second column of U
    array([[0.5],
           [1. ]])
    """

    def __init__(self, L: np.ndarray, chi: np.ndarray, normals: np.ndarray):
        size, k = chi.shape
        self.L, self.chi, self.normals = L, chi, normals
        self.shape = (size, k, k)
        self.triangular = not np.triu(L, 1).any()
        A = np.zeros((k, size, k))
        for i in range(k):  # row i of A: the normals i(i-1)/2 .. i(i+1)/2 - 1, then sqrt(chi_i)
            start = i * (i - 1) // 2
            A[i, :, :i] = normals[:, start : start + i]
            A[i, :, i] = np.sqrt(chi[:, i])
        self._rows = A.reshape(k, size * k)
        self._done: dict[int, np.ndarray] = {}
        self._formed: np.ndarray | None = None  # the columns of prefetch(), in its order
        self._formed_cols: list[int] = []
        self._formed_at: dict[int, int] = {}

    def columns(self, cols) -> np.ndarray:
        """Columns ``cols`` of every ``U``, shape (size, k, len(cols)), by one matrix product (formed again
        when asked again: a product of a few columns costs less than gathering them)."""
        cols = [int(c) for c in cols]
        size, k, _ = self.shape
        if self._formed is not None and all(c in self._formed_at for c in cols):
            if cols == self._formed_cols:
                return self._formed
            return self._formed[:, :, [self._formed_at[c] for c in cols]]
        if all(c in self._done for c in cols) and len(cols) <= 2:
            return np.stack([self._done[c] for c in cols], axis=-1)
        part = (self._rows.T @ self.L[cols].T).reshape(size, k, len(cols))
        for j, c in enumerate(cols):
            self._done.setdefault(c, part[:, :, j])
        return part

    def rows_columns(self, cols, start: int, stop: int) -> np.ndarray:
        """Columns ``cols`` of the ``U`` of replicates ``start .. stop - 1``, shape (stop - start, k, len(cols)),
        by one matrix product, not kept."""
        k = self.shape[1]
        part = self._rows[:, start * k : stop * k].T @ self.L[list(cols)].T
        return part.reshape(stop - start, k, len(cols))

    def prefetch(self, cols) -> None:
        """Form columns ``cols`` now, in one product; a later request for any of them takes them from it."""
        self._formed_cols = [int(c) for c in cols]
        self._formed = None
        self._formed = self.columns(self._formed_cols)
        self._formed_at = {c: i for i, c in enumerate(self._formed_cols)}

    def column(self, j: int) -> np.ndarray:
        """Column ``j`` of every ``U``, shape (size, k)."""
        if j not in self._done:
            self.columns([j])
        return self._done[j]

    def diagonal(self) -> np.ndarray:
        """The diagonals of the ``U``, shape (size, k) (``L_jj sqrt(chi_j)`` when :attr:`triangular`)."""
        if self.triangular:
            return np.sqrt(self.chi) * np.diagonal(self.L)
        return np.diagonal(self.upper(), axis1=1, axis2=2)

    def frobenius(self) -> np.ndarray:
        """``||A||_F^2`` of every replicate, shape (size,): ``||U e_j||^2 <= ||L_j||^2 ||A||_F^2`` by
        Cauchy-Schwarz (``L_j`` the row ``j`` of ``L``)."""
        return self.chi.sum(axis=1) + np.einsum("ri,ri->r", self.normals, self.normals)

    def upper(self) -> np.ndarray:
        """Every ``U`` in full, shape (size, k, k)."""
        return np.ascontiguousarray(self.columns(range(self.shape[1])))


def bartlett_factors(L: np.ndarray, chi: np.ndarray, normals: np.ndarray) -> BartlettFactor:
    """The upper-triangular factors ``U = (L A)^T`` of Bartlett draws (``W = U^T U``), as a
    :class:`BartlettFactor` whose columns are formed when first asked for (``.upper()`` gives them all).

    Examples
    --------
    >>> bartlett_factors(np.eye(2), np.array([[4.0, 1.0]]), np.array([[0.5]])).upper()[0]
    array([[2. , 0.5],
           [0. , 1. ]])
    """
    return BartlettFactor(L, chi, normals)


def bartlett_matrices(L: np.ndarray, chi: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """Wishart matrices ``L A A^T L^T`` from Bartlett draws (see :func:`bartlett_draws`), shape (size, k, k).

    Examples
    --------
    >>> W = bartlett_matrices(np.eye(2), np.array([[4.0, 1.0]]), np.array([[0.5]]))
    >>> W[0]  # A = [[2, 0], [0.5, 1]]
    array([[4.  , 1.  ],
           [1.  , 1.25]])
    """
    U = bartlett_factors(L, chi, normals).upper()
    return np.matmul(U.transpose(0, 2, 1), U)
