"""Numbers for people: fixed decimals for tables, and Monte Carlo estimates rounded to their Monte Carlo SE.

A simulated figure is shown with the digits its Monte Carlo standard error supports and no more (Morris,
White & Crowther 2019, Statistics in Medicine 38(11):2074-2102, sec. 5.2: report MCSEs and round to them).
Every output (text tables, HTML tables, the explanations, the report) rounds through these functions.
"""

from __future__ import annotations

import html
import math
import sys
from typing import Any

__all__ = ["is_pandas_missing", "fmt", "fmt_mcse", "effect_digits", "estimate_decimals", "with_mcse"]


def is_pandas_missing(value: Any) -> bool:
    """True for pandas' missing-value markers ``pd.NA`` and ``pd.NaT``. Such a value can only exist once
    pandas is imported, so this module does not import pandas (the command line starts faster without it).

    Examples
    --------
    >>> import pandas as pd
    >>> is_pandas_missing(pd.NA), is_pandas_missing(pd.NaT), is_pandas_missing(None), is_pandas_missing(0.0)
    (True, True, False, False)
    """
    pd = sys.modules.get("pandas")
    return pd is not None and (value is pd.NA or value is pd.NaT)


def fmt(value: Any, digits: int = 3) -> str:
    """A number for a table: fixed decimals, '-' for missing.

    Examples
    --------
    >>> fmt(0.123456), fmt(None), fmt(float("nan")), fmt(12)
    ('0.123', '-', '-', '12')
    """
    if value is None or is_pandas_missing(value):
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    try:
        number = float(value)
    except (TypeError, ValueError):
        return html.escape(str(value))
    if not math.isfinite(number):
        return "-"
    return f"{number:.{digits}f}"


def fmt_mcse(value: Any) -> str:
    """A Monte Carlo SE with two significant digits.

    Examples
    --------
    >>> fmt_mcse(0.00412), fmt_mcse(5.5e-05), fmt_mcse(None)
    ('0.0041', '5.5e-05', '-')
    """
    if value is None or is_pandas_missing(value):
        return "-"
    number = float(value)
    return f"{number:.2g}" if math.isfinite(number) else "-"


def effect_digits(emp_se: Any) -> int:
    """Decimals that show an estimate to about a hundredth of its spread (at least 3, at most 6).

    Examples
    --------
    >>> effect_digits(3.1), effect_digits(0.02), effect_digits(None)
    (3, 4, 3)
    """
    try:
        spread = float(emp_se)
    except (TypeError, ValueError):
        return 3
    if not math.isfinite(spread) or spread <= 0:
        return 3
    return max(3, min(6, 2 - math.floor(math.log10(spread))))


def estimate_decimals(mcse: Any, default: int = 3) -> int:
    """Decimals for a Monte Carlo estimate shown beside its MCSE: enough that the value carries as many
    decimals as the MCSE's two significant digits, but at most one more than ``default``.

    Examples
    --------
    >>> estimate_decimals(0.0041, 3), estimate_decimals(0.04, 3), estimate_decimals(None, 4)
    (4, 3, 4)
    """
    try:
        number = float(mcse)
    except (TypeError, ValueError):
        return default
    if not math.isfinite(number) or number <= 0:
        return default
    wanted = 1 - math.floor(math.log10(number))
    return max(default, min(wanted, default + 1))


def with_mcse(value: Any, mcse: Any) -> str:
    """A Monte Carlo estimate in words: rounded where its MCSE's first significant digit lies, the MCSE to
    one significant digit (so a stakeholder is not shown digits that are noise).

    Examples
    --------
    >>> with_mcse(-0.000495, 0.00051), with_mcse(0.2208, 0.0015), with_mcse(0.5, None)
    ('-0.0005 (Monte Carlo SE 0.0005)', '+0.221 (Monte Carlo SE 0.002)', '+0.5')
    """
    number = float(value)
    try:
        spread = float(mcse)
    except (TypeError, ValueError):
        spread = math.nan
    if not math.isfinite(spread) or spread <= 0:
        return f"{number:+.3g}"
    first = -math.floor(math.log10(spread))
    decimals = max(0, min(8, first))
    text = f"{number:+.{decimals}f}"
    if float(text) == 0:
        text = f"{number:.{decimals}f}".replace("-", "")
    return f"{text} (Monte Carlo SE {spread:.1g})"
