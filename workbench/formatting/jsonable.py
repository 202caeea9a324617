"""One JSON cleaner for every result: numpy scalars become Python ones, NaN and infinities ``null``.

JSON has no NaN; a missing figure (a strategy that could not be fitted, a power that is not defined) is
written as ``null`` everywhere (RFC 8259, sec. 6: "Numeric values that cannot be represented ... such as
Infinity and NaN are not permitted").
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from workbench.formatting.numbers import is_pandas_missing

__all__ = ["to_jsonable"]


def to_jsonable(value: Any) -> Any:
    """A JSON-ready copy of ``value``: dicts (string keys), lists, ``int``, ``float``, ``bool``, ``str``,
    ``None``; NaN, infinities and pandas' missing values become ``None``.

    Examples
    --------
    >>> to_jsonable({"a": np.float64("nan"), "b": [np.int64(2), (1.5, float("inf"))], 3: np.bool_(True)})
    {'a': None, 'b': [2, [1.5, None]], '3': True}
    """
    if isinstance(value, dict):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [to_jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [to_jsonable(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if value is None or isinstance(value, int | str):
        return value
    if is_pandas_missing(value):
        return None
    return value
