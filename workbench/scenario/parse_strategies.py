"""Reading the ``[[strategies]]`` of a scenario: each strategy's set, model, options and design.

Called by :func:`workbench.scenario.parse.parse_scenario` after the variables and the question are known.
Every problem raises :class:`~workbench.errors.ScenarioError` naming its place (``strategies[2].model``).
"""

from __future__ import annotations

import math
from typing import Any

from workbench.errors import ScenarioError, shown
from workbench.scenario.constraints import MAX_SELECTION_CANDIDATES
from workbench.scenario.fields import check_keys as _check_keys
from workbench.scenario.fields import choice as _choice
from workbench.scenario.fields import get_field as _get
from workbench.scenario.fields import known_name as _known
from workbench.scenario.fields import place_of
from workbench.scenario.fields import type_name as _type_name
from workbench.scenario.limits import MAX_STRATEGIES, MAX_STRATEGY_NAME
from workbench.scenario.model import (
    MODELS,
    SE_KINDS,
    SELECTIONS,
    STRATEGY_NAME_PATTERN,
    Question,
    Strategy,
    Variable,
)
from workbench.scenario.parse_forms import read_flexible

__all__ = ["parse_strategies", "STRATEGY_KEYS", "SE_CHOICES"]

STRATEGY_KEYS = (
    "name",
    "adjust",
    "model",
    "standardize",
    "selection",
    "restrict",
    "match",
    "se",
    "interactions",
    "flexible",
)

_SE_ALLOWED = {
    ("ols", "continuous"): ("classical", "hc3"),
    ("ols", "binary"): ("hc3",),
    ("ols", "count"): ("classical", "hc3"),
    ("logit", "binary"): ("classical",),
    ("poisson", "binary"): ("robust", "classical"),
    ("poisson", "count"): ("robust", "classical"),
}
"""For (model, the outcome's type), the ``se`` values allowed, the default first."""
_MODELS_FOR = {"continuous": ("ols",), "binary": ("ols", "logit", "poisson"), "count": ("ols", "poisson")}
"""The models each type of outcome allows."""
SE_CHOICES = _SE_ALLOWED
"""The same, public (the dashboard's strategies editor offers these)."""


def _parse_adjust(table: dict, where: str, by_name: dict[str, Variable], question: Question) -> list[str]:
    """A strategy's ``adjust``: observed variables other than the exposure and the outcome, each once."""
    exposure, outcome = question.exposure, question.outcome
    adjust: list[str] = []
    for j, var in enumerate(_get(table, "adjust", "list", where, []), start=1):
        place = f"{where}.adjust[{j}]"
        _known(var, list(by_name), place)
        if var == exposure:
            raise ScenarioError(f"'{var}' is the exposure; it is always in the model", where=place)
        if var == outcome:
            raise ScenarioError(f"'{var}' is the outcome and cannot be adjusted for", where=place)
        if not by_name[var].observed:
            raise ScenarioError(
                f"'{var}' is latent (observed = false) and cannot be adjusted for", where=place
            )
        if var in adjust:
            raise ScenarioError(f"'{var}' is listed twice", where=place)
        adjust.append(var)
    return adjust


def _parse_selection(table: dict, where: str, model: str, outcome_binary: bool, adjust: list[str]):
    """A strategy's ``selection`` rule: OLS on a continuous outcome, 1 to 10 candidates in ``adjust``."""
    selection = _get(table, "selection", "str", where, None)
    if selection is None:
        return None
    _choice(selection, SELECTIONS, f"{where}.selection")
    if model != "ols" or outcome_binary:
        raise ScenarioError(
            'selection applies to model = "ols" with a continuous outcome only', where=f"{where}.selection"
        )
    if not adjust:
        raise ScenarioError(
            "a selection rule needs candidate covariates in 'adjust'", where=f"{where}.selection"
        )
    if len(adjust) > MAX_SELECTION_CANDIDATES:
        raise ScenarioError(
            f"at most {MAX_SELECTION_CANDIDATES} candidate covariates with a selection rule, got {len(adjust)}",
            where=f"{where}.adjust",
        )
    return selection


def _parse_strategy(
    i: int, table: Any, by_name: dict[str, Variable], question: Question, taken: set[str]
) -> Strategy:
    """Strategy ``i`` (counted from 1): a unique name, its set, model, options and design."""
    where = f"strategies[{i}]"
    if not isinstance(table, dict):
        raise ScenarioError(f"must be a table, got {_type_name(table)}", where=where)
    _check_keys(table, STRATEGY_KEYS, where)
    name = _get(table, "name", "str", where, required=True).strip()
    if not name:
        raise ScenarioError("must not be empty", where=f"{where}.name")
    if not STRATEGY_NAME_PATTERN.fullmatch(name):
        raise ScenarioError(
            f"a strategy name must be a letter, then letters, digits or '_', at most {MAX_STRATEGY_NAME} "
            f"characters, got {shown(name)}",
            where=f"{where}.name",
        )
    if name in taken:
        raise ScenarioError(f"duplicate strategy name '{name}'", where=f"{where}.name")
    exposure, outcome = question.exposure, question.outcome
    kind = by_name[outcome].type
    outcome_binary = kind != "continuous"  # the designs and options of OLS on a continuous outcome only
    adjust = _parse_adjust(table, where, by_name, question)
    model = _choice(_get(table, "model", "str", where, "ols"), MODELS, f"{where}.model")
    if model not in _MODELS_FOR[kind]:
        needs = "a binary outcome" if model == "logit" else "a binary or count outcome"
        raise ScenarioError(f"'{model}' needs {needs}; '{outcome}' is {kind}", where=f"{where}.model")
    standardize = _get(table, "standardize", "bool", where, False)
    if standardize and model != "logit":
        raise ScenarioError(
            'standardize = true applies to model = "logit" only', where=f"{where}.standardize"
        )
    selection = _parse_selection(table, where, model, outcome_binary, adjust)
    restrict = _parse_restrict(table, where, by_name, exposure, outcome, adjust)
    if restrict and (model != "ols" or outcome_binary):
        raise ScenarioError(
            'restrict applies to model = "ols" with a continuous outcome only', where=f"{where}.restrict"
        )
    match = _parse_match(table, where, by_name, exposure, outcome, adjust, model)
    se = _parse_se(table, where, model, kind, bool(selection or restrict or match))
    if standardize and question.scale == "log_risk_ratio":
        raise ScenarioError(
            "standardize = true reports a difference or a log odds ratio; for question.scale = "
            '"log_risk_ratio" use model = "poisson"',
            where=f"{where}.standardize",
        )
    interactions = _parse_interactions(
        table, where, adjust, model, outcome_binary, (selection, restrict, match), se
    )
    others = {"selection": bool(selection), "restrict": bool(restrict), "match": bool(match)}
    others |= {"interactions": bool(interactions), 'se = "hc3"': se == "hc3"}
    flexible = read_flexible(table, where, by_name, adjust, model, outcome_binary, others)
    return Strategy(
        name, tuple(adjust), model, standardize, selection, restrict, match, se, interactions, flexible
    )


def _parse_interactions(table: dict, where: str, adjust, model: str, outcome_binary: bool, design, se):
    """``interactions = ["skill"]``: covariates of ``adjust`` that also enter as exposure x (covariate - its
    sample mean) terms; OLS on a continuous outcome, classical SE, no selection, restriction or matching."""
    spec = _get(table, "interactions", "list", where, [])
    if not spec:
        return ()
    place = f"{where}.interactions"
    if model != "ols" or outcome_binary:
        raise ScenarioError(
            'interactions apply to model = "ols" with a continuous outcome only (not yet to logit or poisson)',
            where=place,
        )
    if any(design):
        raise ScenarioError(
            "interactions cannot be combined with selection, restrict or match yet", where=place
        )
    if se not in (None, "classical"):
        raise ScenarioError(
            f'interactions use the classical SE only (se = "classical"), got "{se}"', where=place
        )
    out: list[str] = []
    for j, name in enumerate(spec, start=1):
        here = f"{place}[{j}]"
        if not isinstance(name, str):
            raise ScenarioError(
                f"must be a covariate name (a string), got {_type_name(name)} {shown(name)}", where=here
            )
        if name not in adjust:
            listed = ", ".join(f"'{a}'" for a in adjust) or "nothing"
            raise ScenarioError(f"{shown(name)} must also be in 'adjust' (which lists {listed})", where=here)
        if name in out:
            raise ScenarioError(f"'{name}' is listed twice", where=here)
        out.append(name)
    return tuple(out)


def _parse_se(table: dict, where: str, model: str, kind: str, designed: bool) -> str | None:
    """A strategy's ``se``: one the model allows for an outcome of type ``kind`` (:data:`_SE_ALLOWED`); None
    when not given."""
    se = _get(table, "se", "str", where, None)
    if se is None:
        return None
    place = f"{where}.se"
    _choice(se, SE_KINDS, place)
    allowed = _SE_ALLOWED[(model, kind)]
    if se not in allowed:
        outcome = f"a {kind}"
        hint = {
            ("ols", "binary"): "; the linear probability model always uses HC3",
            ("poisson", "binary"): '; "robust" is the HC0 sandwich of the modified Poisson fit (Zou 2004)',
        }.get((model, kind), "")
        choices = " or ".join(f'"{a}"' for a in allowed)
        raise ScenarioError(
            f'model = "{model}" with {outcome} outcome allows se = {choices}, got "{se}"{hint}', where=place
        )
    if se == "hc3" and kind != "binary" and designed:
        raise ScenarioError(
            'se = "hc3" cannot be combined with selection, restrict or match yet', where=place
        )
    return se


def parse_strategies(
    data: dict, by_name: dict[str, Variable], question: Question
) -> tuple[tuple[Strategy, ...], bool]:
    """The ``[[strategies]]`` and whether the file gives the key (an empty list is an error)."""
    strategy_list = _get(data, "strategies", "list", "", None)
    if strategy_list is not None and len(strategy_list) > MAX_STRATEGIES:
        raise ScenarioError(
            f"at most {MAX_STRATEGIES} strategies, got {len(strategy_list)}", where="strategies"
        )
    strategies: list[Strategy] = []
    for i, table in enumerate(strategy_list or [], start=1):
        strategies.append(_parse_strategy(i, table, by_name, question, {s.name for s in strategies}))
    if strategy_list is not None and not strategies:
        raise ScenarioError("lists no strategy; remove the key to get the default set", where="strategies")
    return tuple(strategies), strategy_list is not None


def _parse_restrict(table: dict, where: str, by_name: dict, exposure: str, outcome: str, adjust) -> tuple:
    """``restrict = { var = 0 }`` (binary: keep units with that value) or ``{ var = [low, high] }``
    (continuous: keep units inside the closed interval)."""
    spec = _get(table, "restrict", "table", where, {})
    out = []
    for name, value in spec.items():
        place = place_of(f"{where}.restrict", name)
        _known(name, list(by_name), place)
        if name in (exposure, outcome):
            role = "exposure" if name == exposure else "outcome"
            raise ScenarioError(f"'{name}' is the {role} and cannot be restricted on", where=place)
        if not by_name[name].observed:
            raise ScenarioError(
                f"'{name}' is latent (observed = false) and cannot be restricted on", where=place
            )
        if by_name[name].is_binary:
            if name in adjust:
                raise ScenarioError(
                    f"'{name}' is also in 'adjust': after restriction it is constant; drop it from 'adjust'",
                    where=place,
                )
            if isinstance(value, bool) or not isinstance(value, int) or value not in (0, 1):
                raise ScenarioError(
                    f"'{name}' is binary: give the value to keep, 0 or 1, got {shown(value)}", where=place
                )
            out.append((name, int(value)))
            continue
        if (
            not isinstance(value, list)
            or len(value) != 2
            or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in value)
        ):
            raise ScenarioError(
                f"'{name}' is continuous: give the interval to keep as [low, high], got {shown(value)}",
                where=place,
            )
        try:
            low, high = float(value[0]), float(value[1])
        except OverflowError:  # an integer beyond the largest double
            low = high = math.inf
        if not (math.isfinite(low) and math.isfinite(high)) or not low < high:
            raise ScenarioError(f"the interval must have finite low < high, got {shown(value)}", where=place)
        out.append((name, (low, high)))
    return tuple(out)


def _parse_match(table: dict, where: str, by_name: dict, exposure: str, outcome: str, adjust, model) -> tuple:
    """``match = ["shift", ...]``: observed binary variables to match exactly on (binary exposure, continuous
    outcome, ``model = "ols"`` only)."""
    spec = _get(table, "match", "list", where, [])
    if not spec:
        return ()
    place = f"{where}.match"
    if not by_name[exposure].is_binary:
        raise ScenarioError(f"matching needs a binary exposure; '{exposure}' is continuous", where=place)
    if by_name[outcome].is_binary:
        raise ScenarioError(f"matching needs a continuous outcome; '{outcome}' is binary", where=place)
    if model != "ols":
        raise ScenarioError(f'matching applies to model = "ols" only, got {model!r}', where=place)
    out: list[str] = []
    for j, name in enumerate(spec, start=1):
        here = f"{place}[{j}]"
        _known(name, list(by_name), here)
        if name in (exposure, outcome):
            role = "exposure" if name == exposure else "outcome"
            raise ScenarioError(f"'{name}' is the {role} and cannot be matched on", where=here)
        if not by_name[name].observed:
            raise ScenarioError(f"'{name}' is latent (observed = false) and cannot be matched on", where=here)
        if not by_name[name].is_binary:
            raise ScenarioError(f"'{name}' is continuous; exact matching needs a binary variable", where=here)
        if name in out:
            raise ScenarioError(f"'{name}' is listed twice", where=here)
        out.append(name)
    return tuple(out)
