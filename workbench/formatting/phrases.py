"""Phrases that several outputs share, written once: how a strategy's covariates, selection rule,
restriction and matching read in words, and which sets a selection rule chose.

The command line's tables, the dashboard, the explanations and the HTML report all call these, so one
strategy reads the same everywhere.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["strategy_text", "selected_sets_text", "restriction_text", "RULE_NAMES"]

RULE_NAMES = {"p_value": "p-value", "change_in_estimate": "change in estimate > 10%"}
"""Short names of the data-driven selection rules."""


def restriction_text(restrict: Any) -> str:
    """A restriction in words: ``shift = 0, age in [1, 5]`` (from a dict or ``Strategy.restrict`` pairs).

    Examples
    --------
    >>> restriction_text({"shift": 0, "age": [1, 5]})
    'shift = 0, age in [1, 5]'
    >>> restriction_text((("shift", 0), ("distance", (10.0, 50.0))))
    'shift = 0, distance in [10, 50]'
    >>> restriction_text(())
    ''
    """
    items = restrict.items() if isinstance(restrict, dict) else (restrict or ())
    return ", ".join(
        f"{k} in [{v[0]:g}, {v[1]:g}]" if isinstance(v, list | tuple) else f"{k} = {v}" for k, v in items
    )


def strategy_text(adjust: Any, selection: Any = None, restrict: Any = None, match: Any = None) -> str:
    """What a strategy adjusts for, in words, with how the set is chosen and the units it keeps.

    Examples
    --------
    >>> strategy_text(["a", "b"]), strategy_text([]), strategy_text(["a", "b"], "p_value")
    ('a, b', 'nothing', 'chosen by p-value from a, b')
    >>> strategy_text(["a"], None, {"shift": 0, "age": [1, 5]})
    'a; only units with shift = 0, age in [1, 5]'
    >>> strategy_text(["a"], match=["night_shift"])
    'a; matched on night_shift'
    """
    names = list(adjust) if isinstance(adjust, list | tuple) else ([adjust] if adjust else [])
    text = ", ".join(str(n) for n in names) or "nothing"
    if isinstance(selection, str) and selection:
        rule = RULE_NAMES.get(selection, selection)
        text = f"chosen by {rule} from {text}"
    if restrict:
        text += "; only units with " + restriction_text(restrict)
    if isinstance(match, list | tuple) and match:
        text += "; matched on " + ", ".join(str(m) for m in match)
    return text


def selected_sets_text(sets: Any, limit: int | None = 3) -> str:
    """The sets a selection rule chose most often, with their shares (``SimulationResult.table``'s
    ``selected_sets``); ``limit=None`` lists them all.

    Examples
    --------
    >>> selected_sets_text([{"adjust": ["a"], "share": 0.57}, {"adjust": [], "share": 0.43}])
    'a (57%); nothing (43%)'
    >>> selected_sets_text([{"adjust": ["a", "b"], "share": 0.996}, {"adjust": ["b"], "share": 0.004}])
    'a, b (100%); b (<1%)'
    """
    if not isinstance(sets, list | tuple) or not sets:
        return ""
    parts = []
    for item in list(sets)[:limit]:
        chosen = ", ".join(item.get("adjust") or []) or "nothing"
        share = float(item.get("share", math.nan))
        parts.append(f"{chosen} (<1%)" if share < 0.005 else f"{chosen} ({100 * share:.0f}%)")
    return "; ".join(parts)
