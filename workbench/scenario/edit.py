"""Editing a scenario: the changes that must follow a name everywhere it is used.

A scenario names its variables in many places: the variables table, the arrows, the question (exposure,
outcome, ``also``), and each strategy's adjustment set, restriction and matching. Renaming, removing or hiding
a variable, changing its type or changing the question must keep every one of those consistent, or the file
no longer parses. The functions here do that on the TOML-ready tables of
:func:`workbench.scenario.write.scenario_to_dict` (the form the dashboard edits). They are pure: each returns
an :class:`Edited` with a new table and a one-line note of what it changed along the way (``''`` when
nothing), and never changes its argument. They do not validate the result: parse it to check it
(:func:`workbench.scenario_from_dict` gives the one-line error of a bad edit).

Examples
--------
>>> from workbench import load_preset, scenario_from_dict, scenario_to_dict
>>> data = scenario_to_dict(load_preset("common_cause"))
>>> edited = remove_variable(data, "soil_quality")
>>> edited.note
'removed soil_quality from strategies: adjust_soil'
>>> scenario_from_dict(edited.data).names
['fertiliser', 'wheat_yield']
>>> "soil_quality" in data["variables"]  # the argument is unchanged
True
"""

from __future__ import annotations

import copy
import tomllib
from collections.abc import Iterable
from typing import Any, NamedTuple

from workbench.errors import ScenarioError

__all__ = [
    "Edited",
    "inline_table",
    "QUESTION_FIELDS",
    "prune_variables",
    "rename_variable",
    "remove_variable",
    "set_observed",
    "set_variable_type",
    "set_question",
    "set_arrow_size",
    "add_adjustment_sets",
    "restriction_toml",
    "parse_restriction",
]

#: The question fields :func:`set_question` may change.
QUESTION_FIELDS = ("exposure", "outcome", "target", "scale")


class Edited(NamedTuple):
    """The result of an edit: the new TOML-ready tables and a note of what else changed ('' when nothing).

    Examples
    --------
    >>> data, note = Edited({"title": "x"}, "")
    >>> data
    {'title': 'x'}
    """

    data: dict
    note: str = ""


def _variable(data: dict, name: str) -> dict:
    """The variable's table, or a ScenarioError naming the variable."""
    if name not in data["variables"]:
        raise ScenarioError(f"no variable '{name}'", where="variables")
    return data["variables"][name]


def _prune_strategy(table: dict, names: set[str]) -> bool:
    """Remove ``names`` from one strategy's table in place; True when anything was removed."""
    adjust = [v for v in table.get("adjust", []) if v not in names]
    restrict = {k: v for k, v in (table.get("restrict") or {}).items() if k not in names}
    match = [v for v in table.get("match", []) if v not in names]
    interactions = [v for v in table.get("interactions", []) if v in adjust]  # each must stay adjusted for
    flexible = [v for v in table.get("flexible", []) if v in adjust]
    changed = (
        len(adjust) != len(table.get("adjust", []))
        or len(restrict) != len(table.get("restrict") or {})
        or len(match) != len(table.get("match", []))
        or len(interactions) != len(table.get("interactions", []))
        or len(flexible) != len(table.get("flexible", []))
    )
    table["adjust"] = adjust
    pruned = (
        ("match", match),
        ("restrict", restrict),
        ("interactions", interactions),
        ("flexible", flexible),
    )
    for key, value in pruned:
        if key in table:
            if value:
                table[key] = value
            else:
                del table[key]
    if not adjust:
        table.pop("selection", None)  # a selection rule needs candidates
    return changed


def _prune_in_place(data: dict, names: set[str]) -> str:
    """:func:`prune_variables` on ``data`` itself."""
    removed = [table["name"] for table in data.get("strategies", []) if _prune_strategy(table, names)]
    also = data["question"].get("also")
    if also:
        data["question"]["also"] = [v for v in also if v not in names]
        if not data["question"]["also"]:
            del data["question"]["also"]
    if removed:
        return f"removed {', '.join(sorted(names))} from strategies: {', '.join(removed)}"
    return ""


def prune_variables(data: dict, names: Iterable[str]) -> Edited:
    """Remove ``names`` from every strategy's adjustment set, restriction and matching, and from
    ``question.also``. A selection rule left with no candidate is dropped (the strategy adjusts for nothing).

    Parameters
    ----------
    data : dict
        TOML-ready tables of a scenario.
    names : iterable of str
        Variables no strategy may use any more (latent ones, the exposure and the outcome).

    Returns
    -------
    Edited
        The note names the strategies changed.

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> edited = prune_variables(data, {"soil_quality"})
    >>> [s["adjust"] for s in edited.data["strategies"]], edited.note
    ([[], []], 'removed soil_quality from strategies: adjust_soil')
    """
    data = copy.deepcopy(data)
    return Edited(data, _prune_in_place(data, set(names)))


def rename_variable(data: dict, old: str, new: str) -> Edited:
    """Rename a variable in the variables table, the arrows, the question and every strategy.

    Parameters
    ----------
    data : dict
        TOML-ready tables of a scenario.
    old, new : str
        The current and the new name (whether ``new`` is a valid name is left to the parser).

    Raises
    ------
    ScenarioError
        When ``old`` is no variable or ``new`` is taken.

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> edited = rename_variable(data, "soil_quality", "soil")
    >>> list(edited.data["variables"]), edited.data["arrows"][0]["from"]
    (['soil', 'fertiliser', 'wheat_yield'], 'soil')
    >>> rename_variable(data, "soil_quality", "fertiliser")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: variables.fertiliser: there is already a variable 'fertiliser'
    """
    _variable(data, old)
    new = new.strip()
    if new == old:
        return Edited(copy.deepcopy(data))
    if new in data["variables"]:
        raise ScenarioError(f"there is already a variable '{new}'", where=f"variables.{new}")
    data = copy.deepcopy(data)

    def swap(name: str) -> str:
        return new if name == old else name

    data["variables"] = {swap(k): v for k, v in data["variables"].items()}
    for table in data["variables"].values():
        if table.get("spread_with"):
            table["spread_with"] = {swap(k): v for k, v in table["spread_with"].items()}
    for arrow in data["arrows"]:
        arrow["from"], arrow["to"] = swap(arrow["from"]), swap(arrow["to"])
        if arrow.get("varies_with"):
            arrow["varies_with"] = {swap(k): v for k, v in arrow["varies_with"].items()}
    q = data["question"]
    q["exposure"], q["outcome"] = swap(q["exposure"]), swap(q["outcome"])
    if "also" in q:
        q["also"] = [swap(v) for v in q["also"]]
    for table in data.get("strategies", []):
        table["adjust"] = [swap(v) for v in table["adjust"]]
        for key in ("match", "interactions", "flexible"):
            if key in table:
                table[key] = [swap(v) for v in table[key]]
        if table.get("restrict"):
            table["restrict"] = {swap(k): v for k, v in table["restrict"].items()}
    return Edited(data)


def remove_variable(data: dict, name: str) -> Edited:
    """Remove a variable, its arrows, and its uses in the strategies (see :func:`prune_variables`).

    Raises
    ------
    ScenarioError
        When ``name`` is no variable, or is the exposure or the outcome.

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> len(remove_variable(data, "soil_quality").data["arrows"])
    1
    >>> remove_variable(data, "fertiliser")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: variables.fertiliser: 'fertiliser' is the exposure; choose another exposure first
    """
    _variable(data, name)
    q = data["question"]
    if name in (q["exposure"], q["outcome"]):
        role = "exposure" if name == q["exposure"] else "outcome"
        raise ScenarioError(f"'{name}' is the {role}; choose another {role} first", where=f"variables.{name}")
    data = copy.deepcopy(data)
    del data["variables"][name]
    data["arrows"] = [a for a in data["arrows"] if name not in (a["from"], a["to"])]
    modified = []
    for arrow in data["arrows"]:
        if name in arrow.get("varies_with", {}):
            del arrow["varies_with"][name]
            modified.append(f"{arrow['from']} -> {arrow['to']}")
            if not arrow["varies_with"]:
                del arrow["varies_with"]
    spread = [v for v, table in data["variables"].items() if name in table.get("spread_with", {})]
    for v in spread:
        del data["variables"][v]["spread_with"][name]
        if not data["variables"][v]["spread_with"]:
            del data["variables"][v]["spread_with"]
    note = _prune_in_place(data, {name})
    if modified:
        note = "; ".join(filter(None, (note, f"the arrows {', '.join(modified)} no longer vary with {name}")))
    if spread:
        note = "; ".join(
            filter(None, (note, f"the noise of {', '.join(spread)} no longer spreads with {name}"))
        )
    return Edited(data, note)


def set_observed(data: dict, name: str, observed: bool) -> Edited:
    """Make a variable observed or latent; a latent one leaves every strategy (see :func:`prune_variables`).

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> edited = set_observed(data, "soil_quality", False)
    >>> edited.data["variables"]["soil_quality"]["observed"], edited.note
    (False, 'removed soil_quality from strategies: adjust_soil')
    """
    _variable(data, name)
    data = copy.deepcopy(data)
    data["variables"][name]["observed"] = bool(observed)
    return Edited(data, "" if observed else _prune_in_place(data, {name}))


def _drop_type_dependent_keys(data: dict, name: str, new_type: str) -> None:
    """Remove, in place, what a type change of ``name`` makes meaningless in the strategies: a restriction's
    form depends on the type (a value or an interval); exact matching needs a binary variable; selection
    rules, flexible adjustment and interaction terms apply to continuous outcomes only."""
    binary_outcome = new_type != "continuous" and name == data["question"]["outcome"]
    for table in data.get("strategies", []):
        (table.get("restrict") or {}).pop(name, None)
        if "restrict" in table and not table["restrict"]:
            del table["restrict"]
        if new_type != "continuous" and name in table.get("flexible", []):  # a spline needs a continuous one
            table["flexible"] = [v for v in table["flexible"] if v != name]
            if not table["flexible"]:
                del table["flexible"]
        if name in table.get("match", []):
            table["match"] = [v for v in table["match"] if v != name]
            if not table["match"]:
                del table["match"]
        if binary_outcome:  # these apply to OLS on a continuous outcome only
            for key in ("selection", "flexible", "interactions"):
                table.pop(key, None)


def set_variable_type(data: dict, name: str, new_type: str) -> Edited:
    """Change a variable's type (``continuous``, ``binary`` or ``count``) and what depends on it.

    A new binary variable has proportion 0.5; a new count rate 1.0; a continuous one the default noise and
    baseline. Its observed flag, label and position stay. When the outcome becomes binary or a count, a
    ``direct`` target becomes ``total``; a count outcome's ratio scale is ``log_rate_ratio`` and its logistic
    strategies become Poisson ones; a binary outcome's ``log_rate_ratio`` becomes ``log_risk_ratio``; when it
    becomes continuous, the scale is the difference and every strategy is fitted by OLS. Restrictions,
    matching and splines (``flexible``) on the variable and (for a binary or count outcome) selection rules,
    splines and interaction terms are dropped.

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> set_variable_type(data, "soil_quality", "binary").data["variables"]["soil_quality"]["proportion"]
    0.5
    >>> set_variable_type(data, "wheat_yield", "binary").data["question"]["target"]
    'total'
    >>> set_variable_type(data, "soil_quality", "count").data["variables"]["soil_quality"]["rate"]
    1.0
    """
    table = _variable(data, name)
    if new_type == table.get("type"):
        return Edited(copy.deepcopy(data))
    data = copy.deepcopy(data)
    q = data["question"]
    keep = {k: table[k] for k in ("observed", "label", "position") if k in table}
    _drop_type_dependent_keys(data, name, new_type)
    if new_type in ("binary", "count"):
        fields = {"proportion": 0.5} if new_type == "binary" else {"rate": 1.0}
        data["variables"][name] = {"type": new_type, **fields, **keep}
        return Edited(data, _discrete_outcome(data, name, new_type) if name == q["outcome"] else "")
    data["variables"][name] = {"type": str(new_type), **keep}
    if name != q["outcome"]:
        return Edited(data)
    q["scale"] = "difference"
    for strategy in data.get("strategies", []):
        strategy["model"] = "ols"
        strategy.pop("standardize", None)
    return Edited(data, "a continuous outcome is fitted by OLS; strategies set to model = ols")


def _discrete_outcome(data: dict, name: str, new_type: str) -> str:
    """The question and strategies of a binary or count outcome ``name``, in place; the note of what changed."""
    q, notes = data["question"], []
    if q.get("target") == "direct":
        q["target"] = "total"
        notes.append(f"the target is now the total effect (a {new_type} outcome has no direct target)")
    scale = q.get("scale", "difference")
    if new_type == "count" and scale in ("log_odds_ratio", "log_risk_ratio"):
        q["scale"] = "log_rate_ratio"
        notes.append(f"the scale is now log_rate_ratio ({scale} needs a binary outcome)")
    elif new_type == "binary" and scale == "log_rate_ratio":
        q["scale"] = "log_risk_ratio"
        notes.append("the scale is now log_risk_ratio (log_rate_ratio needs a count outcome)")
    if new_type == "count":
        logit = [s for s in data.get("strategies", []) if s.get("model") == "logit"]
        for strategy in logit:
            strategy["model"] = "poisson"
            strategy.pop("standardize", None)
            strategy.pop("se", None)
        if logit:
            notes.append("a count outcome has no logistic model; strategies set to model = poisson: ")
            notes[-1] += ", ".join(s["name"] for s in logit)
    return "; ".join(notes)


def set_question(data: dict, **fields: Any) -> Edited:
    """Change the exposure, outcome, target or scale; the exposure and outcome leave every strategy.

    Raises
    ------
    ScenarioError
        For a field other than :data:`QUESTION_FIELDS`.

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> edited = set_question(data, exposure="soil_quality")
    >>> edited.data["question"]["exposure"], edited.note
    ('soil_quality', 'removed soil_quality, wheat_yield from strategies: adjust_soil')
    """
    for key in fields:
        if key not in QUESTION_FIELDS:
            raise ScenarioError(f"cannot edit '{key}'", where="question")
    data = copy.deepcopy(data)
    q = data["question"]
    q.update(fields)
    return Edited(data, _prune_in_place(data, {q["exposure"], q["outcome"]}))


def _fresh_name(label: str, taken: set[str]) -> str:
    """``label``, or ``label_2``, ``label_3``, ... when taken."""
    chosen, k = label, 2
    while chosen in taken:
        chosen, k = f"{label}_{k}", k + 1
    return chosen


def add_adjustment_sets(
    data: dict, sets: Iterable[tuple[str, Iterable[str]]], *, model: str = "ols", standardize: bool = False
) -> Edited:
    """Add a fixed-set strategy for each ``(name, adjustment set)`` not already listed with the same model.

    A name already taken gets a suffix (``optimal_2``). Strategies with a selection rule or a restriction
    do not count as listing their set. The note names the strategies added ('' when none).

    Examples
    --------
    >>> from workbench import load_preset, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> edited = add_adjustment_sets(data, [("minimal_1", ["soil_quality"]), ("empty", [])])
    >>> edited.note, len(edited.data["strategies"])
    ('', 2)
    >>> add_adjustment_sets(data, [("unadjusted", ["fertiliser"])]).note
    'added unadjusted_2'
    """
    data = copy.deepcopy(data)
    present = {
        frozenset(s["adjust"])
        for s in data["strategies"]
        if s.get("model", "ols") == model and not s.get("selection") and not s.get("restrict")
    }
    taken = {s["name"] for s in data["strategies"]}
    added = []
    for label, adjust in sets:
        members = frozenset(adjust)
        if members in present:
            continue
        chosen = _fresh_name(label, taken)
        table = {"name": chosen, "adjust": sorted(members), "model": model}
        if standardize:
            table["standardize"] = True
        data["strategies"].append(table)
        present.add(members)
        taken.add(chosen)
        added.append(chosen)
    return Edited(data, f"added {', '.join(added)}" if added else "")


def restriction_toml(restrict: Any) -> str:
    """A strategy's restriction as the text an editor shows, in the file's own form
    (``shift = 0, distance = [10, 50]``: the inside of a TOML inline table; see :func:`parse_restriction`).

    Parameters
    ----------
    restrict : dict or tuple of (name, value) pairs
        As in the TOML tables or in :attr:`workbench.scenario.model.Strategy.restrict`.

    Examples
    --------
    >>> restriction_toml((("shift", 0), ("distance", (10.0, 50.0))))
    'shift = 0, distance = [10, 50]'
    >>> restriction_toml(())
    ''
    """
    items = restrict.items() if isinstance(restrict, dict) else (restrict or ())
    parts = []
    for name, value in items:
        if isinstance(value, list | tuple):
            parts.append(f"{name} = [{value[0]:g}, {value[1]:g}]")
        else:
            parts.append(f"{name} = {value}")
    return ", ".join(parts)


def parse_restriction(value: Any, *, where: str) -> dict:
    """A restriction typed as text (``shift = 0, distance = [10, 50]``) or given as a table, as a table.

    The text is read as the inside of a TOML inline table: parsed, never evaluated. Whether the names and
    values make sense is left to the scenario parser.

    Raises
    ------
    ScenarioError
        When the text is not of that form.

    Examples
    --------
    >>> parse_restriction("shift = 0, distance = [10, 50]", where="strategies.a.restrict")
    {'shift': 0, 'distance': [10, 50]}
    >>> parse_restriction("", where="strategies.a.restrict")
    {}
    >>> parse_restriction("shift == 0", where="strategies.a.restrict")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: strategies.a.restrict: write the units to keep as 'name = 0' or 'name = [low, high]', got 'shift == 0'
    """
    return inline_table(
        value, where=where, hint="write the units to keep as 'name = 0' or 'name = [low, high]'"
    )


def inline_table(value: Any, *, where: str, hint: str) -> dict:
    """Text typed as the inside of a TOML inline table (``a = 0.5, b = [1, 2]``; parsed, never evaluated) or a
    table given as one, as a table; ``{}`` for blank text. Text of another form is refused with ``hint``.

    Examples
    --------
    >>> inline_table("{ a = 1 }", where="x", hint="write 'name = value'")
    {'a': 1}
    """
    if isinstance(value, dict):
        return dict(value)
    text = str(value or "").strip().strip("{}").strip()
    if not text:
        return {}
    try:
        return tomllib.loads(f"table = {{ {text} }}")["table"]
    except tomllib.TOMLDecodeError:
        raise ScenarioError(f"{hint}, got '{text}'", where=where) from None


def set_arrow_size(
    data: dict, index: int, *, effect: float | None = None, standardized: float | None = None
) -> Edited:
    """Set the size of the arrow at ``index`` (from 0) as a raw ``effect`` or a ``standardized_effect``.

    All arrows into one target use the same kind (:mod:`workbench.scenario.elicit`), so switching kind
    switches every arrow into that target: to raw, each keeps its converted effect and the target gets
    the converted ``noise_sd``; to standardized, each keeps its implied standardized value and the target's
    ``noise_sd`` and ``r_squared`` go (standardized arrows fix its variance to 1, which rescales what the
    raw effects out of it mean). The note says so.

    Examples
    --------
    >>> from workbench import load_preset, scenario_from_dict, scenario_to_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> edited = set_arrow_size(data, 1, standardized=0.5)
    >>> edited.note
    'the arrows into wheat_yield now use standardized effects; its noise_sd was dropped (they fix its variance to 1)'
    >>> [a.get("standardized_effect") for a in edited.data["arrows"]]
    [None, 0.5, 0.239247]
    """
    from workbench.scenario.elicit import standardized_effects
    from workbench.scenario.parse import parse_scenario

    scenario = parse_scenario(data)
    if not 0 <= index < len(scenario.arrows):
        raise ScenarioError(f"no arrow number {index + 1}", where="arrows")
    out = copy.deepcopy(data)
    arrow = scenario.arrows[index]
    into = [j for j, a in enumerate(scenario.arrows) if a.target == arrow.target]
    table = _variable(out, arrow.target)
    note = ""
    if standardized is None:
        if arrow.standardized is not None:
            for j in into:
                out["arrows"][j].pop("standardized_effect", None)
                out["arrows"][j]["effect"] = round(scenario.arrows[j].effect, 6)
            table["noise_sd"] = round(scenario.variable(arrow.target).noise_sd, 6)
            note = f"the arrows into {arrow.target} now use raw effects (converted, with its noise_sd)"
        out["arrows"][index]["effect"] = effect
        return Edited(out, note)
    if arrow.standardized is None:
        values = standardized_effects(scenario.variables, scenario.arrows)
        if any(values[j] is None for j in into):
            raise ScenarioError(
                f"the arrows into '{arrow.target}' cannot be standardized here (a binary target, or a "
                "binary cause with causes of its own); give raw effects",
                where=f"arrows[{index + 1}]",
            )
        for j in into:
            out["arrows"][j].pop("effect", None)
            out["arrows"][j]["standardized_effect"] = round(values[j], 6)
        dropped = [key for key in ("noise_sd", "r_squared") if table.pop(key, None) is not None]
        note = f"the arrows into {arrow.target} now use standardized effects" + (
            f"; its {' and '.join(dropped)} was dropped (they fix its variance to 1)" if dropped else ""
        )
    out["arrows"][index]["standardized_effect"] = standardized
    return Edited(out, note)
