"""Phrases that several outputs share, written once: how a strategy's covariates, selection rule,
restriction and matching read in words, and which sets a selection rule chose.

The command line's tables, the dashboard, the explanations and the HTML report all call these, so one
strategy reads the same everywhere.

Examples
--------
>>> strategy_text(["soil_quality"], None, {"farm_size": [1, 5]}, ["region"])
'soil_quality; only units with farm_size in [1, 5]; matched on region'
"""

from __future__ import annotations

import math
from typing import Any

__all__ = [
    "strategy_text",
    "selected_sets_text",
    "restriction_text",
    "kept_units_text",
    "match_text",
    "names_in_words",
    "rule_sentence",
    "RULE_NAMES",
    "RULE_SENTENCES",
]

RULE_NAMES = {"p_value": "p-value", "change_in_estimate": "change in estimate > 10%"}
"""Short names of the data-driven selection rules."""

RULE_SENTENCES = {
    "p_value": "whose coefficient is significant (p < alpha)",
    "change_in_estimate": "whose removal changes the estimate by more than 10%",
}
"""What each selection rule keeps, as the end of the sentence "keeping among the candidates those ..."."""


def rule_sentence(selection: str) -> str:
    """Which candidates a selection rule keeps, in words (the rule's own name when it has no sentence).

    Examples
    --------
    >>> rule_sentence("p_value")
    'whose coefficient is significant (p < alpha)'
    """
    return RULE_SENTENCES.get(selection, selection)


def names_in_words(names: Any) -> str:
    """Variable names as a list in prose: ``nothing``, ``a``, ``a and b``, ``a, b and c``.

    Examples
    --------
    >>> names_in_words([]), names_in_words(["a"]), names_in_words(["a", "b", "c"])
    ('nothing', 'a', 'a, b and c')
    """
    names = [str(n) for n in names or ()]
    if not names:
        return "nothing"
    if len(names) == 1:
        return names[0]
    return ", ".join(names[:-1]) + " and " + names[-1]


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


def kept_units_text(restrict: Any) -> str:
    """The units a restriction keeps: ``only units with shift = 0`` ('' without a restriction).

    Examples
    --------
    >>> kept_units_text({"shift": 0}), kept_units_text({})
    ('only units with shift = 0', '')
    """
    return "only units with " + restriction_text(restrict) if restrict else ""


def match_text(match: Any) -> str:
    """The variables a strategy matches on: ``matched on night_shift`` ('' without matching).

    Examples
    --------
    >>> match_text(["night_shift", "site"]), match_text(())
    ('matched on night_shift, site', '')
    """
    if not isinstance(match, list | tuple) or not match:
        return ""
    return "matched on " + ", ".join(str(m) for m in match)


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
        text += "; " + kept_units_text(restrict)
    if match_text(match):
        text += "; " + match_text(match)
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
