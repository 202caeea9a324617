"""Study designs that keep a subset of each dataset's rows: restriction and exact 1:1 matching.

The same masks serve the simulation (many replicates at once) and :func:`workbench.estimate` (one dataset, a
batch of one). The data are laid out as the raw engine draws them, shape ``(R, k, n)``: replicates,
variables, rows.

Restriction
    A row is kept when it lies inside every restriction: a binary variable equal to the given value, a
    continuous one inside the closed interval ``(low, high)`` (:func:`restriction_mask`).
Exact matching
    Among the rows kept by the restriction, within each stratum of the matched binary variables the first
    ``min(exposed, unexposed)`` exposed and the first as many unexposed rows in row order are kept
    (:func:`matching_mask`). The rows being i.i.d., taking the first ones is a random choice; one pass per
    stratum with cumulative counts, for all replicates at once. The matched pairs are then analysed like any
    restricted sample: matching balances the matched variables between the groups by design (Rosenbaum P.R.,
    Rubin D.B. 1983, The central role of the propensity score in observational studies for causal effects,
    Biometrika 70(1):41-55, on balancing scores, of which the matched variables themselves are the finest).

Examples
--------
>>> import numpy as np
>>> x = [1, 1, 0, 1, 0, 0, 1, 0]
>>> shift = [0, 0, 0, 1, 1, 1, 0, 1]
>>> data = np.array([[x, shift]], dtype=float)  # one replicate, two variables, eight rows
>>> design_mask(data, 0, (), (1,)).astype(int).tolist()
[[1, 0, 1, 1, 1, 0, 0, 0]]
>>> design_mask(data, 0, ((1, 1.0),), ()).astype(int).tolist()
[[0, 0, 0, 1, 1, 1, 0, 1]]
"""

from __future__ import annotations

import numpy as np

__all__ = ["restriction_mask", "matching_mask", "design_mask"]


def restriction_mask(data: np.ndarray, restrict: tuple) -> np.ndarray:
    """The rows inside every restriction.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
    restrict : tuple of (int, value)
        Variable index and either a value (a binary variable: rows equal to it) or ``(low, high)`` (a
        continuous variable: rows inside the closed interval). Empty: every row.

    Returns
    -------
    ndarray of bool, shape (R, n)

    Examples
    --------
    >>> import numpy as np
    >>> data = np.array([[[0.5, 1.5, 2.5, 3.5]]])
    >>> restriction_mask(data, ((0, (1.0, 3.0)),)).tolist()
    [[False, True, True, False]]
    """
    mask = np.ones((data.shape[0], data.shape[2]), dtype=bool)
    for v, value in restrict:
        column = data[:, v, :]
        if isinstance(value, tuple):
            mask &= (column >= value[0]) & (column <= value[1])
        else:
            mask &= column == value
    return mask


def matching_mask(data: np.ndarray, exposure: int, match: tuple, base: np.ndarray) -> np.ndarray:
    """The rows kept by exact 1:1 matching on binary variables among the rows in ``base``.

    Within each stratum of the matched variables, the first ``min(exposed, unexposed)`` exposed and unexposed
    rows in row order. Batched over replicates: one pass per stratum (at most ``2**len(match)``) with
    cumulative counts.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
    exposure : int
        Index of the binary exposure.
    match : tuple of int
        Indices of the matched binary variables.
    base : ndarray of bool, shape (R, n)
        The rows to match among (for instance a restriction).

    Returns
    -------
    ndarray of bool, shape (R, n)

    Examples
    --------
    >>> import numpy as np
    >>> data = np.array([[[1, 0, 0, 1, 1], [0, 0, 1, 1, 1]]], dtype=float)
    >>> matching_mask(data, 0, (1,), np.ones((1, 5), dtype=bool)).astype(int).tolist()
    [[1, 1, 1, 1, 0]]
    """
    code = np.zeros(base.shape, dtype=np.int64)
    for j, v in enumerate(match):
        code += (data[:, v, :] == 1).astype(np.int64) << j
    exposed = data[:, exposure, :] == 1
    keep = np.zeros(base.shape, dtype=bool)
    for stratum in range(2 ** len(match)):
        inside = base & (code == stratum)
        treated = inside & exposed
        control = inside & ~exposed
        treated_rank = np.cumsum(treated, axis=1)
        control_rank = np.cumsum(control, axis=1)
        pairs = np.minimum(treated_rank[:, -1], control_rank[:, -1])[:, None]
        keep |= (treated & (treated_rank <= pairs)) | (control & (control_rank <= pairs))
    return keep


def design_mask(data: np.ndarray, exposure: int, restrict: tuple, match: tuple) -> np.ndarray:
    """The rows a restricted and/or matched analysis uses: matching applies within the restriction.

    Parameters
    ----------
    data : ndarray of shape (R, k, n)
    exposure : int
        Index of the exposure (used by matching only).
    restrict : tuple of (int, value)
        See :func:`restriction_mask`.
    match : tuple of int
        See :func:`matching_mask`; empty for no matching.

    Returns
    -------
    ndarray of bool, shape (R, n)

    Examples
    --------
    >>> import numpy as np
    >>> data = np.array([[[1, 0, 0, 1], [0, 0, 1, 1]]], dtype=float)
    >>> design_mask(data, 0, ((1, 0.0),), (1,)).astype(int).tolist()
    [[1, 1, 0, 0]]
    """
    mask = restriction_mask(data, restrict)
    if match:
        mask = matching_mask(data, exposure, match, mask)
    return mask
