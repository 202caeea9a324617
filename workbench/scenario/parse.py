"""Scenario files: the assumed data-generating graph, the question, the strategies and the study settings.

A scenario is one TOML file (the format is documented in ``docs/scenario-format.md``). This module reads it
into the frozen dataclasses of :mod:`workbench.scenario.model` and checks every field; writing it back is
:mod:`workbench.scenario.write`. Every problem raises :class:`~workbench.errors.ScenarioError` with a
one-line message naming the place, for example ``arrows[3].to: unknown variable 'rainfal' (did you mean
'rainfall'?)``. Arrays are counted from 1 in places, as people count them.

:func:`parse_scenario` reads the document in named steps, each stopping at the first problem: the title,
the variables, the arrows (and that they form no cycle, found with :class:`graphlib.TopologicalSorter`), the
question, the study settings (checked by :func:`~workbench.scenario.constraints.check_setting`, the rule the
library, the command line and the dashboard share), the strategies, and last :func:`check_sizes`. The
readers of text (:func:`parse_scenario_text`) and of files (:func:`read_scenario`) put the source in front
of every place. None of them fills in default strategies: :mod:`workbench.graph.defaults` does.

The graph is an assumption written down by the user; nothing here checks it against data.

Examples
--------
>>> sc = parse_scenario_text('''
... title = "Shade cloth and seedling growth"
... [question]
... exposure = "shade"
... outcome = "growth"
... [variables.sun]
... [variables.shade]
... [variables.growth]
... [[arrows]]
... from = "sun"
... to = "shade"
... effect = 0.6
... [[arrows]]
... from = "sun"
... to = "growth"
... effect = 0.4
... [[arrows]]
... from = "shade"
... to = "growth"
... effect = 0.2
... ''')
>>> sc.question.exposure, [v.name for v in sc.variables]
('shade', ['sun', 'shade', 'growth'])
>>> sc.strategies, sc.strategies_given  # none listed: workbench.graph.defaults fills in the defaults
((), False)
"""

from __future__ import annotations

import graphlib
import os
import re
import tomllib
import warnings
from pathlib import Path
from typing import Any

from workbench.errors import ScenarioError, shown
from workbench.scenario.constraints import (
    MAX_ARROWS,
    MAX_VARIABLES,
    check_setting,
)
from workbench.scenario.elicit import read_arrow_effect, read_r_squared, resolve_elicited
from workbench.scenario.fields import check_keys as _check_keys
from workbench.scenario.fields import choice as _choice
from workbench.scenario.fields import get_field as _get
from workbench.scenario.fields import known_name as _known
from workbench.scenario.fields import place_of
from workbench.scenario.fields import type_name as _type_name
from workbench.scenario.limits import (
    MAX_DEPTH,
    MAX_MAGNITUDE,
    MAX_NAME,
    MAX_RATE,
    MAX_SAMPLE_SIZES,
    MAX_SUMMARY,
    MAX_TITLE,
    MIN_NOISE_SD,
    MIN_PROPORTION,
    MIN_RATE,
    check_magnitude,
    check_nesting,
    check_scales,
    check_text_size,
    read_scenario_text,
)
from workbench.scenario.model import (
    NAME_PATTERN,
    SCALES,
    TARGETS,
    VARIABLE_TYPES,
    Arrow,
    Question,
    Scenario,
    Study,
    Variable,
    minimum_study_size,
)
from workbench.scenario.parse_forms import check_forms, read_form
from workbench.scenario.parse_modifiers import check_modifiers, read_varies_with
from workbench.scenario.parse_noise import NOISE_KEYS, check_noise, read_noise, refuse_on_binary
from workbench.scenario.parse_strategies import parse_strategies

__all__ = ["parse_scenario", "parse_scenario_text", "read_scenario", "check_sizes"]


# --------------------------------------------------------------------------------------------------------
# Reading
# --------------------------------------------------------------------------------------------------------
_TOP_KEYS = ("title", "summary", "question", "variables", "arrows", "strategies", "study")
_QUESTION_KEYS = ("exposure", "outcome", "target", "scale", "also")
_VARIABLE_KEYS = (
    "type",
    "noise_sd",
    "baseline",
    "proportion",
    "rate",
    "observed",
    "label",
    "position",
    "r_squared",
    *NOISE_KEYS,
)
_ARROW_KEYS = ("from", "to", "effect", "standardized_effect", "varies_with", "form", "at")
_STUDY_KEYS = ("n", "replicates", "seed", "alpha", "sample_sizes", "target_power", "target_halfwidth")


def _parse_position(table: dict, where: str) -> tuple[float, float] | None:
    position = _get(table, "position", "list", where)
    if position is None:
        return None
    if len(position) != 2 or not all(
        isinstance(p, int | float) and not isinstance(p, bool) for p in position
    ):
        raise ScenarioError(f"must be two numbers [x, y], got {shown(position)}", where=f"{where}.position")
    for i in range(2):
        _get({"position": position[i]}, "position", "number", where)
        check_magnitude(float(position[i]), f"{where}.position")
    return float(position[0]), float(position[1])


def _parse_proportion(table: dict, where: str) -> float:
    proportion = _get(table, "proportion", "number", where, required=True)
    place = f"{where}.proportion"
    if not 0.0 < proportion < 1.0:
        raise ScenarioError(f"must lie strictly between 0 and 1, got {shown(proportion)}", where=place)
    if not MIN_PROPORTION <= proportion <= 1.0 - MIN_PROPORTION:
        raise ScenarioError(
            f"must lie in [{MIN_PROPORTION:g}, {1.0 - MIN_PROPORTION:g}] (rarer events cannot be simulated "
            f"reliably), got {shown(proportion)}",
            where=place,
        )
    return proportion


def _parse_rate(table: dict, where: str) -> float:
    rate = _get(table, "rate", "number", where, 1.0)
    if not MIN_RATE <= rate <= MAX_RATE:
        raise ScenarioError(
            f"must lie in [{MIN_RATE:g}, {MAX_RATE:g}] (the count's population mean), got {shown(rate)}",
            where=f"{where}.rate",
        )
    return float(rate)


def _parse_count(name: str, table: dict, where: str, observed, label, position) -> Variable:
    for key in ("noise_sd", "baseline", "r_squared", "proportion"):
        if key in table:
            raise ScenarioError(
                "applies to continuous or binary variables only; a count is set by 'rate' (its population "
                "mean) and its causes (Poisson, arrows on the log scale)",
                where=f"{where}.{key}",
            )
    refuse_on_binary(table, where, kind="count")
    rate = _parse_rate(table, where)
    return Variable(name, "count", 0.0, 0.0, None, observed, label, position, rate=rate)


def _parse_noise_sd(table: dict, where: str, name: str) -> float:
    noise_sd = _get(table, "noise_sd", "number", where, 1.0)
    place = f"{where}.noise_sd"
    if noise_sd < 0:
        raise ScenarioError(f"must be >= 0, got {shown(noise_sd)}", where=place)
    if noise_sd == 0:
        warnings.warn(f"{place}: 0 makes '{name}' a deterministic function of its causes", stacklevel=5)
    elif not MIN_NOISE_SD <= noise_sd <= MAX_MAGNITUDE:
        raise ScenarioError(
            f"must be 0 or lie in [{MIN_NOISE_SD:g}, {MAX_MAGNITUDE:g}], got {shown(noise_sd)}", where=place
        )
    return noise_sd


def _parse_variable(name: str, table: Any, names=()) -> Variable:
    if not NAME_PATTERN.fullmatch(name):
        place = place_of("variables", name)  # a name that is not a bare key is quoted, not put in the place
        rule = f"a variable name must be a letter, then letters, digits or '_', at most {MAX_NAME} characters"
        raise ScenarioError(
            rule if place != "variables" else f"{shown(name)} is not valid: {rule}", where=place
        )
    where = f"variables.{name}"
    if not isinstance(table, dict):
        raise ScenarioError(f"must be a table, got {_type_name(table)} {shown(table)}", where=where)
    _check_keys(table, _VARIABLE_KEYS, where)
    vtype = _choice(_get(table, "type", "str", where, "continuous"), VARIABLE_TYPES, f"{where}.type")
    observed = _get(table, "observed", "bool", where, True)
    label = _get(table, "label", "str", where)
    position = _parse_position(table, where)
    if vtype == "binary":
        for key in ("noise_sd", "baseline", "r_squared"):
            if key in table:
                raise ScenarioError(
                    "applies to continuous variables only; a binary variable is set by 'proportion'",
                    where=f"{where}.{key}",
                )
        if "rate" in table:
            raise ScenarioError('applies to count variables only (set type = "count")', where=f"{where}.rate")
        refuse_on_binary(table, where)
        proportion = _parse_proportion(table, where)
        return Variable(name, "binary", 0.0, 0.0, proportion, observed, label, position)
    if vtype == "count":
        return _parse_count(name, table, where, observed, label, position)
    if "proportion" in table:
        raise ScenarioError(
            'applies to binary variables only (set type = "binary")', where=f"{where}.proportion"
        )
    if "rate" in table:
        raise ScenarioError('applies to count variables only (set type = "count")', where=f"{where}.rate")
    r_squared = read_r_squared(table, where)
    noise_sd = _parse_noise_sd(table, where, name)
    baseline = check_magnitude(_get(table, "baseline", "number", where, 0.0), f"{where}.baseline")
    law, df, spread = read_noise(table, where, names, name)
    return Variable(
        name, "continuous", noise_sd, baseline, None, observed, label, position, r_squared, law, df, spread
    )


def _check_acyclic(names: list[str], arrows: list[Arrow]) -> None:
    """Refuse a cycle, naming it in arrow order (``graphlib`` reports each node before the one it causes)."""
    sorter = graphlib.TopologicalSorter({name: () for name in names})
    for a in arrows:
        sorter.add(a.target, a.source)
    try:
        sorter.prepare()
    except graphlib.CycleError as exc:
        cycle = exc.args[1]
        raise ScenarioError(
            "cycle: " + " -> ".join(cycle) + " (a causal graph must have no cycle)", where="arrows"
        ) from None


def _parse_title(data: dict) -> tuple[str, str | None]:
    """The title (not blank) and the optional summary."""
    title = _get(data, "title", "str", "", required=True, limit=MAX_TITLE).strip()
    if not title:
        raise ScenarioError("must not be empty", where="title")
    return title, _get(data, "summary", "str", "", limit=MAX_SUMMARY, newlines=True)


def _parse_variables(data: dict) -> tuple[Variable, ...]:
    """The ``[variables]`` tables, in file order: at least 2, at most :data:`MAX_VARIABLES`."""
    var_tables = _get(data, "variables", "table", "", required=True)
    if len(var_tables) < 2:
        raise ScenarioError("needs at least the exposure and the outcome", where="variables")
    if len(var_tables) > MAX_VARIABLES:
        raise ScenarioError(f"at most {MAX_VARIABLES} variables, got {len(var_tables)}", where="variables")
    return tuple(_parse_variable(name, table, list(var_tables)) for name, table in var_tables.items())


def _parse_arrow(i: int, table: Any, names: list[str], seen: dict[tuple[str, str], int]) -> Arrow:
    """Arrow ``i`` (counted from 1): known ends, not a self-arrow, not listed before."""
    where = f"arrows[{i}]"
    if not isinstance(table, dict):
        raise ScenarioError(f"must be a table with from, to, effect, got {_type_name(table)}", where=where)
    _check_keys(table, _ARROW_KEYS, where)
    source = _known(_get(table, "from", "str", where, required=True), names, f"{where}.from")
    target = _known(_get(table, "to", "str", where, required=True), names, f"{where}.to")
    effect, standardized = read_arrow_effect(table, where)
    if source == target:
        raise ScenarioError(f"an arrow from '{source}' to itself is not allowed", where=where)
    if (source, target) in seen:
        raise ScenarioError(
            f"duplicate arrow {source} -> {target} (also arrows[{seen[(source, target)]}])", where=where
        )
    seen[(source, target)] = i
    varies_with = read_varies_with(table, where, names, source, target)
    form, at = read_form(table, where)
    return Arrow(source, target, effect, standardized, varies_with, form, at)


def _parse_arrows(data: dict, names: list[str]) -> tuple[Arrow, ...]:
    """The ``[[arrows]]``: at most :data:`MAX_ARROWS`, each valid, and no cycle."""
    arrow_list = _get(data, "arrows", "list", "", default=[])
    if len(arrow_list) > MAX_ARROWS:
        raise ScenarioError(f"at most {MAX_ARROWS} arrows, got {len(arrow_list)}", where="arrows")
    seen: dict[tuple[str, str], int] = {}
    arrows = [_parse_arrow(i, table, names, seen) for i, table in enumerate(arrow_list, start=1)]
    _check_acyclic(names, arrows)
    return tuple(arrows)


def _parse_also(q: dict, by_name: dict[str, Variable], exposure: str, outcome: str) -> tuple[str, ...]:
    """``question.also``: further observed variables, not the exposure or the outcome, each once."""
    also: list[str] = []
    for i, name in enumerate(_get(q, "also", "list", "question", []), start=1):
        place = f"question.also[{i}]"
        _known(name, list(by_name), place)
        if name in (exposure, outcome):
            raise ScenarioError(
                f"'{name}' is the {'exposure' if name == exposure else 'outcome'}; "
                "'also' names further variables",
                where=place,
            )
        if not by_name[name].observed:
            raise ScenarioError(f"'{name}' is latent and cannot be estimated", where=place)
        if name in also:
            raise ScenarioError(f"'{name}' is listed twice", where=place)
        also.append(name)
    return tuple(also)


def _parse_question(data: dict, by_name: dict[str, Variable]) -> Question:
    """The ``[question]``: observed, distinct exposure and outcome; a target and scale the outcome allows."""
    names = list(by_name)
    q = _get(data, "question", "table", "", required=True)
    _check_keys(q, _QUESTION_KEYS, "question")
    exposure = _known(_get(q, "exposure", "str", "question", required=True), names, "question.exposure")
    outcome = _known(_get(q, "outcome", "str", "question", required=True), names, "question.outcome")
    if exposure == outcome:
        raise ScenarioError(
            f"the outcome must differ from the exposure (both '{exposure}')", where="question.outcome"
        )
    for role, name in (("exposure", exposure), ("outcome", outcome)):
        if not by_name[name].observed:
            raise ScenarioError(
                f"the {role} '{name}' is latent (observed = false); it must be observed",
                where=f"question.{role}",
            )
    target = _choice(_get(q, "target", "str", "question", "total"), TARGETS, "question.target")
    scale = _choice(_get(q, "scale", "str", "question", "difference"), SCALES, "question.scale")
    outcome_binary = by_name[outcome].is_binary
    kind = by_name[outcome].type
    if scale in ("log_odds_ratio", "log_risk_ratio") and not outcome_binary:
        raise ScenarioError(
            f"'{scale}' needs a binary outcome; '{outcome}' is {kind}", where="question.scale"
        )
    if scale == "log_rate_ratio" and kind != "count":
        raise ScenarioError(
            f"'log_rate_ratio' needs a count outcome (type = \"count\"); '{outcome}' is {kind}",
            where="question.scale",
        )
    if target == "direct" and kind == "count":
        raise ScenarioError(
            f"the 'direct' target needs a continuous outcome; '{outcome}' is a count, and its arrow from the "
            "exposure is a conditional log rate ratio, not a difference in means",
            where="question.target",
        )
    if target == "direct" and outcome_binary:
        raise ScenarioError(
            f"the 'direct' target needs a continuous outcome; '{outcome}' is binary, and its arrow from "
            "the exposure is a conditional log odds ratio that no marginal contrast equals",
            where="question.target",
        )
    return Question(exposure, outcome, target, scale, _parse_also(q, by_name, exposure, outcome))


def _study_setting(table: dict, key: str, kind: str, default: Any) -> Any:
    """One ``[study]`` setting: its TOML type, then the shared rule of :func:`check_setting`."""
    value = _get(table, key, kind, "study", default)
    if value is None:
        return None
    return check_setting(key, value, where=f"study.{key}")


def _parse_study(data: dict) -> Study:
    """The ``[study]`` table; every setting is checked against
    :data:`~workbench.scenario.constraints.STUDY_SETTINGS`."""
    table = _get(data, "study", "table", "", {})
    _check_keys(table, _STUDY_KEYS, "study")
    defaults = Study()
    n = _study_setting(table, "n", "int", defaults.n)
    replicates = _study_setting(table, "replicates", "int", defaults.replicates)
    seed = _study_setting(table, "seed", "int", defaults.seed)
    alpha = _study_setting(table, "alpha", "number", defaults.alpha)
    sizes = _get(table, "sample_sizes", "list", "study", list(defaults.sample_sizes))
    if not sizes:
        raise ScenarioError("must list at least one sample size", where="study.sample_sizes")
    if len(sizes) > MAX_SAMPLE_SIZES:
        raise ScenarioError(
            f"at most {MAX_SAMPLE_SIZES} sample sizes, got {len(sizes)}", where="study.sample_sizes"
        )
    for i, size in enumerate(sizes, start=1):
        check_setting("sample_size", size, where=f"study.sample_sizes[{i}]")
    target_power = _study_setting(table, "target_power", "number", defaults.target_power)
    target_halfwidth = _study_setting(table, "target_halfwidth", "number", None)
    return Study(n, replicates, seed, alpha, tuple(sorted(set(sizes))), target_power, target_halfwidth)


def parse_scenario(data: dict) -> Scenario:
    """Build and validate a scenario from the parsed TOML tables.

    The steps, in the order a problem is found: the top-level keys, the title, the variables, the arrows
    (and that they form no cycle), the question, the study settings, the strategies, and last whether ``n``
    and every planned size fit the widest strategy (:func:`check_sizes`).

    Parameters
    ----------
    data : dict
        The TOML document as nested dicts and lists (keys as in the file: ``from``/``to`` for arrows).

    Returns
    -------
    Scenario

    Raises
    ------
    ScenarioError
        On the first problem found, naming its place.

    Examples
    --------
    >>> data = {"title": "t", "question": {"exposure": "a", "outcome": "b"},
    ...         "variables": {"a": {}, "b": {}}, "arrows": [{"from": "a", "to": "b", "effect": 0.5}]}
    >>> parse_scenario(data).strategies  # none given: the graph layer fills the defaults
    ()
    >>> data["arrows"][0]["to"] = "c"
    >>> parse_scenario(data)
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: arrows[1].to: unknown variable 'c'
    """
    if not isinstance(data, dict):
        raise ScenarioError("a scenario must be a TOML document (a table)", where="scenario")
    check_nesting(data)
    _check_keys(data, _TOP_KEYS, "")
    title, summary = _parse_title(data)
    variables = _parse_variables(data)
    by_name = {v.name: v for v in variables}
    arrows = _parse_arrows(data, list(by_name))
    check_modifiers(data, variables, arrows)
    check_forms(data, variables, arrows)
    check_noise(variables, arrows)
    variables, arrows = resolve_elicited(data, variables, arrows)
    by_name = {v.name: v for v in variables}
    check_scales(variables, arrows)
    question = _parse_question(data, by_name)
    study = _parse_study(data)
    strategies, given = parse_strategies(data, by_name, question)
    scenario = Scenario(
        title, question, variables, arrows, strategies, study, summary, strategies_given=given
    )
    check_sizes(scenario)
    return scenario


def check_sizes(scenario: Scenario) -> None:
    """n (and every planned size) must exceed the largest strategy's fitted coefficients + 1."""
    if not scenario.strategies:
        return
    widest, p, needed = minimum_study_size(scenario)
    if scenario.study.n < needed:
        raise ScenarioError(
            f"n = {scenario.study.n} is too small for strategy '{widest}' ({p} coefficients); "
            f"n must be at least {needed}",
            where="study.n",
        )
    for i, size in enumerate(scenario.study.sample_sizes, start=1):
        if size < needed:
            raise ScenarioError(
                f"{size} is too small for strategy '{widest}' ({p} coefficients); sizes must be at "
                f"least {needed}",
                where=f"study.sample_sizes[{i}]",
            )


_TOML_POSITION = re.compile(r"\(at line (\d+), column (\d+)\)")


def _parse_text(text: str, source: str | None) -> dict:
    check_text_size(text, source)
    try:
        data = tomllib.loads(text)
    except RecursionError:  # tomllib reads nested arrays and inline tables recursively
        raise ScenarioError(
            f"TOML nesting too deep: arrays or tables nested deeper than {MAX_DEPTH} levels",
            where=source or "scenario",
        ) from None
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        match = _TOML_POSITION.search(message)
        problem = _TOML_POSITION.sub("", message).strip().rstrip(".")
        where = f"line {match.group(1)}, column {match.group(2)}" if match else None
        if source:
            where = f"{source}: {where}" if where else source
        raise ScenarioError(f"TOML syntax error: {problem}", where=where or "scenario") from None
    except ValueError:  # an integer of more than 4,300 digits (Python's limit on int conversion)
        raise ScenarioError(
            "TOML value error: a number has too many digits", where=source or "scenario"
        ) from None
    check_nesting(data, source)
    return data


def parse_scenario_text(text: str, source: str | None = None) -> Scenario:
    """Read and validate a scenario from TOML text (no default strategies filled in).

    Parameters
    ----------
    text : str
        The TOML document.
    source : str, optional
        Where the text came from (a file name), put in front of every error's place.

    Raises
    ------
    ScenarioError
        One line naming the source, the place and the problem.

    Examples
    --------
    >>> parse_scenario_text('title = "x"')
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: variables: missing (required)
    """
    data = _parse_text(text, source)
    if source is None:
        return parse_scenario(data)
    try:
        return parse_scenario(data)
    except ScenarioError as exc:
        raise ScenarioError(exc.problem, where=f"{source}: {exc.where}" if exc.where else source) from None


def read_scenario(path: str | os.PathLike) -> Scenario:
    """Read and validate a scenario file (no default strategies filled in).

    Raises
    ------
    ScenarioError
        One line naming the file, the place and the problem.

    Examples
    --------
    >>> read_scenario("no/such/file.toml")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: no/such/file.toml: no such file
    """
    path = Path(path)
    return parse_scenario_text(read_scenario_text(path), str(path))
