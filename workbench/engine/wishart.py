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

__all__ = ["draw_wishart", "bartlett_draws", "bartlett_factors", "bartlett_matrices", "square_root"]


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


def bartlett_draws(k: int, df: float, size: int, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """The random numbers of ``size`` Bartlett draws, in stream order: chi-squares with ``df - i`` degrees of
    freedom, shape (size, k), then standard normals, shape (size, k(k-1)/2).

    Examples
    --------
    >>> chi, normals = bartlett_draws(3, 10, 5, np.random.default_rng(0))
    >>> chi.shape, normals.shape
    ((5, 3), (5, 3))
    """
    if not df > k - 1:
        raise ValueError(f"draw_wishart: df must exceed k - 1 = {k - 1}, got {df}")
    chi = rng.chisquare(df - np.arange(k), size=(size, k))
    normals = rng.standard_normal((size, k * (k - 1) // 2))
    return chi, normals


def bartlett_factors(L: np.ndarray, chi: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """The upper-triangular factors ``U = (L A)^T`` of Bartlett draws (``W = U^T U``), shape (size, k, k).

    ``A^T`` is filled in place, and ``A^T L^T`` for every replicate is one matrix product of the stacked rows,
    so the factors come out contiguous with no transposed copy.

    Examples
    --------
    >>> bartlett_factors(np.eye(2), np.array([[4.0, 1.0]]), np.array([[0.5]]))[0]
    array([[2. , 0.5],
           [0. , 1. ]])
    """
    size, k = chi.shape
    At = np.zeros((size, k, k))
    diag = np.arange(k)
    At[:, diag, diag] = np.sqrt(chi)
    if k > 1:
        rows, cols = np.tril_indices(k, -1)
        At[:, cols, rows] = normals
    return (At.reshape(size * k, k) @ L.T).reshape(size, k, k)


def bartlett_matrices(L: np.ndarray, chi: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """Wishart matrices ``L A A^T L^T`` from Bartlett draws (see :func:`bartlett_draws`), shape (size, k, k).

    Examples
    --------
    >>> W = bartlett_matrices(np.eye(2), np.array([[4.0, 1.0]]), np.array([[0.5]]))
    >>> W[0]  # A = [[2, 0], [0.5, 1]]
    array([[4.  , 1.  ],
           [1.  , 1.25]])
    """
    U = bartlett_factors(L, chi, normals)
    return np.matmul(U.transpose(0, 2, 1), U)
