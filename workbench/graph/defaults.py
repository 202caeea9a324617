"""The default strategies, and the loaders that fill them in.

A scenario file may leave out ``[[strategies]]``. The scenario layer then reads it with no strategies
(``strategies_given`` False); the defaults come from the graph: the unadjusted model, each minimal valid
adjustment set, the optimal set O(X, Y) of Henckel, Perkovic & Maathuis (2022) when it is observable and
different, and all observed covariates. The loaders here (``load_scenario``, ``loads_scenario``,
``scenario_from_dict``, ``load_preset``, exported by :mod:`workbench`) return scenarios with them filled in, and
every verb (``check``, ``simulate``, ``estimate``, ``plan``) fills them in again through
:func:`with_default_strategies`, so a scenario edited with :meth:`Scenario.replace` gets the defaults of its
new graph.

References
----------
1. Henckel L., Perkovic E., Maathuis M.H. (2022). Graphical criteria for efficient total effect estimation
   via adjustment in causal linear models. JRSSB 84(2):579-599.

Examples
--------
>>> sc = loads_scenario('''
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
>>> [s.name for s in sc.strategies], sc.strategies_given
(['unadjusted', 'adjust_sun'], False)
"""

from __future__ import annotations

import dataclasses
import functools
import os

from workbench.graph.search import minimal_sets, optimal_set
from workbench.scenario.model import Scenario, Strategy
from workbench.scenario.parse import check_sizes, parse_scenario, parse_scenario_text, read_scenario
from workbench.scenario.presets import read_preset

__all__ = [
    "default_strategies",
    "with_default_strategies",
    "load_scenario",
    "loads_scenario",
    "scenario_from_dict",
    "load_preset",
]


def default_strategies(scenario: Scenario) -> list[Strategy]:
    """The strategies used when a scenario lists none: unadjusted, each minimal valid set, the optimal set
    (when observable and different), and all observed covariates.

    Examples
    --------
    >>> [s.name for s in default_strategies(load_preset("common_cause"))]
    ['unadjusted', 'adjust_soil_quality']
    """
    x, y = scenario.question.exposure, scenario.question.outcome
    sets: list[tuple[str, tuple[str, ...]]] = [("unadjusted", ())]
    for m in minimal_sets(scenario):
        sets.append(("adjust_" + "_".join(m) if m else "unadjusted", m))
    opt = optimal_set(scenario)[0]
    if opt is not None:
        sets.append(("optimal", opt))
    everything = tuple(n for n in scenario.observed_names if n not in (x, y))
    sets.append(("all_observed", everything))
    # a count outcome asked on the log rate ratio scale is fitted by Poisson regression (least squares would
    # estimate a difference in means)
    model = "poisson" if scenario.question.scale == "log_rate_ratio" else "ols"
    out: list[Strategy] = []
    seen: set[frozenset] = set()
    names: set[str] = set()
    for name, adjust in sets:
        key = frozenset(adjust)
        if key in seen:
            continue
        seen.add(key)
        if len(name) > 60 or name in names:
            name = f"set_{len(out) + 1}"
        names.add(name)
        out.append(Strategy(name, adjust, model))
    return out


@functools.lru_cache(maxsize=64)
def with_default_strategies(scenario: Scenario) -> Scenario:
    """The scenario itself when it has strategies, else a copy with :func:`default_strategies` filled in
    (``strategies_given`` stays False, so writing the scenario leaves them out again).

    Raises
    ------
    ScenarioError
        When ``n`` or a planned sample size is too small for the widest default strategy.

    Examples
    --------
    >>> sc = load_preset("common_cause")  # a preset lists its strategies
    >>> with_default_strategies(sc) is sc
    True
    """
    if scenario.strategies:
        return scenario
    filled = dataclasses.replace(scenario, strategies=tuple(default_strategies(scenario)))
    check_sizes(filled)
    return filled


def scenario_from_dict(data: dict) -> Scenario:
    """Build and validate a scenario from the parsed TOML tables, with the default strategies filled in
    when it lists none (see :func:`workbench.scenario.parse.parse_scenario`).

    Examples
    --------
    >>> data = {"title": "t", "question": {"exposure": "a", "outcome": "b"},
    ...         "variables": {"a": {}, "b": {}}, "arrows": [{"from": "a", "to": "b", "effect": 0.5}]}
    >>> [s.name for s in scenario_from_dict(data).strategies]
    ['unadjusted']
    """
    return with_default_strategies(parse_scenario(data))


def loads_scenario(text: str) -> Scenario:
    """Read and validate a scenario from TOML text, default strategies filled in.

    Examples
    --------
    >>> loads_scenario('title = "x"')
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: variables: missing (required)
    """
    return with_default_strategies(parse_scenario_text(text))


def load_scenario(path: str | os.PathLike) -> Scenario:
    """Read and validate a scenario file, default strategies filled in.

    Parameters
    ----------
    path : str or path-like
        A ``.toml`` file. (TOML text goes to :func:`loads_scenario`.)

    Raises
    ------
    ScenarioError
        One line naming the file, the place and the problem.

    Examples
    --------
    >>> load_scenario("no/such/file.toml")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: no/such/file.toml: no such file
    """
    return with_default_strategies(read_scenario(path))


def load_preset(name: str) -> Scenario:
    """Load a built-in preset by name.

    Raises
    ------
    ScenarioError
        When there is no such preset (the message lists the names).

    Examples
    --------
    >>> load_preset("mediator").question.outcome
    'output'
    """
    return with_default_strategies(read_preset(name))
