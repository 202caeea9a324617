"""The parameters of a sweep: named by their place in the scenario file, parsed, and every cell checked before any work.

A sweep varies values of a scenario's TOML tables (:func:`workbench.scenario.write.scenario_to_dict`), each
named by its place, as the file's error messages name it:

- ``study.n``, ``study.replicates``, ``study.alpha``;
- ``variables.<name>.<key>`` for a number of a variable's table: ``noise_sd``, ``baseline`` and
  ``proportion`` (for a binary variable), and any other number the table holds;
- ``arrows.<from>-><to>.<key>`` for a number of an arrow's table: ``effect``, and any other number it holds.

Values are a list (``[50, 80]``) or a text: ``"50,80,120"`` or a range ``"start:stop:count"`` (``count`` values
evenly spaced from ``start`` to ``stop``, both included, as :func:`numpy.linspace`). The grid is the product of
the lists, in the order given, the last parameter varying fastest. Each cell is a scenario built from the
edited tables by the same loader as a file (:func:`workbench.graph.defaults.scenario_from_dict`) and its run
settings are checked as :func:`workbench.simulate` checks them, so a value out of range fails before any work,
in one line naming the cell and the key.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> vary = check_vary(sc, {"study.n": "100:300:3", "arrows.soil_quality->fertiliser.effect": [0.2, 0.6]})
>>> vary["study.n"]
(100, 200, 300)
>>> len(grid(vary))
6
>>> check_vary(sc, {"study.nn": [50]})
Traceback (most recent call last):
...
workbench.errors.UsageError: vary: unknown parameter 'study.nn' (did you mean 'study.n'?)
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from workbench.engine.replicates import check_arguments
from workbench.errors import ScenarioError, SimulationError, UsageError, WorkbenchError, shown, suggestion
from workbench.graph.defaults import scenario_from_dict
from workbench.scenario.model import Scenario
from workbench.scenario.write import scenario_to_dict

__all__ = [
    "Cell",
    "MAX_CELLS",
    "sweep_parameters",
    "parse_values",
    "check_vary",
    "grid",
    "cell_label",
    "build_cells",
]

MAX_CELLS = 100_000
"""The most cells one sweep may have (the product of the lists)."""

_STUDY_KEYS = ("n", "replicates", "alpha")
_INTEGER = {"study.n", "study.replicates"}


@dataclass(frozen=True)
class Cell:
    """One cell of a sweep: its index in the grid, its parameter values and its checked scenario."""

    index: int
    values: dict
    scenario: Scenario


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def sweep_parameters(scenario: Scenario) -> dict[str, float]:
    """Every parameter a sweep of ``scenario`` may vary, with its value in the scenario.

    Examples
    --------
    >>> from workbench import load_preset
    >>> names = sweep_parameters(load_preset("common_cause"))
    >>> names["study.n"], names["arrows.fertiliser->wheat_yield.effect"]
    (200, 0.25)
    """
    tables = scenario_to_dict(scenario, include_default_strategies=False)
    found = {f"study.{k}": tables["study"][k] for k in _STUDY_KEYS if _is_number(tables["study"].get(k))}
    for name, table in tables.get("variables", {}).items():
        for key, value in table.items():
            if _is_number(value):
                found[f"variables.{name}.{key}"] = value
    for arrow in tables.get("arrows", []):
        for key, value in arrow.items():
            if _is_number(value):
                found[f"arrows.{arrow['from']}->{arrow['to']}.{key}"] = value
    return found


def _number(part: str, name: str):
    try:
        value = float(part)
    except ValueError:
        raise UsageError(f"{shown(part)} is not a number", where=f"vary {name}") from None
    if not math.isfinite(value):
        raise UsageError(f"{shown(part)} is not a finite number", where=f"vary {name}")
    return value


def parse_values(name: str, values) -> tuple:
    """The values of one parameter: a list, a text ``"v1,v2,..."`` or a range ``"start:stop:count"``.

    Whole-number parameters (``study.n``, ``study.replicates``) must get whole numbers.

    Examples
    --------
    >>> parse_values("arrows.a->b.effect", "0:1:5")
    (0.0, 0.25, 0.5, 0.75, 1.0)
    >>> parse_values("study.n", "50,80")
    (50, 80)
    >>> parse_values("study.n", "50:60:4")
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: vary study.n: must be whole numbers, got 53.33...
    """
    if isinstance(values, str):
        text = values.strip()
        if text.count(":") == 2:
            start, stop, count = (part.strip() for part in text.split(":"))
            if not count.isdigit() or not 1 <= int(count) <= MAX_CELLS:
                raise UsageError(
                    f"a range is start:stop:count with a whole count from 1 to {MAX_CELLS:,}, got {shown(text)}",
                    where=f"vary {name}",
                )
            raw = [float(v) for v in np.linspace(_number(start, name), _number(stop, name), int(count))]
        elif ":" in text:
            raise UsageError(f"a range is start:stop:count, got {shown(text)}", where=f"vary {name}")
        else:
            raw = [_number(part.strip(), name) for part in text.split(",")]
    else:
        if isinstance(values, (int, float)) or not hasattr(values, "__iter__"):
            values = [values]
        raw = []
        for v in values:
            if not _is_number(v) and not isinstance(v, np.number):
                raise UsageError(f"{shown(v)} is not a number", where=f"vary {name}")
            raw.append(float(v) if isinstance(v, (float, np.floating)) else int(v))
    if not raw:
        raise UsageError("give at least one value", where=f"vary {name}")
    if name in _INTEGER:
        for v in raw:
            if float(v) != round(float(v)):
                raise UsageError(f"must be whole numbers, got {v}", where=f"vary {name}")
        raw = [int(round(float(v))) for v in raw]
    else:
        raw = [float(v) for v in raw]
    if len(set(raw)) != len(raw):
        raise UsageError(f"a value is given twice in {shown(values)}", where=f"vary {name}")
    return tuple(raw)


def check_vary(scenario: Scenario, vary: Mapping) -> dict[str, tuple]:
    """``vary`` checked: every name a parameter of the scenario, every list parsed (:func:`parse_values`)."""
    if not isinstance(vary, Mapping) or not vary:
        raise UsageError("give at least one parameter to vary, e.g. {'study.n': [100, 200]}", where="vary")
    known = sweep_parameters(scenario)
    checked = {}
    for name, values in vary.items():
        if name not in known:
            raise UsageError(f"unknown parameter {shown(name)}{suggestion(name, known)}", where="vary")
        checked[name] = parse_values(name, values)
    cells = math.prod(len(v) for v in checked.values())
    if cells > MAX_CELLS:
        raise UsageError(f"{cells:,} cells is more than the {MAX_CELLS:,} a sweep may have", where="vary")
    return checked


def grid(vary: Mapping[str, tuple]) -> list[dict]:
    """The cells of the grid: the product of the lists, the last parameter varying fastest."""
    names = list(vary)
    return [dict(zip(names, combo, strict=True)) for combo in itertools.product(*vary.values())]


def cell_label(index: int, values: Mapping) -> str:
    """``cell 3 (study.n=200, arrows.c->x.effect=0.5)``: a cell as messages name it.

    Examples
    --------
    >>> cell_label(3, {"study.n": 200})
    'cell 3 (study.n=200)'
    """
    return f"cell {index} (" + ", ".join(f"{k}={v:g}" for k, v in values.items()) + ")"


def _set(tables: dict, name: str, value) -> None:
    section, rest = name.split(".", 1)
    if section == "study":
        tables["study"][rest] = value
        return
    owner, key = rest.rsplit(".", 1)
    if section == "variables":
        tables["variables"][owner][key] = value
        return
    source, target = owner.split("->", 1)
    for arrow in tables["arrows"]:
        if arrow["from"] == source and arrow["to"] == target:
            arrow[key] = value


def _copy(tables: dict) -> dict:
    copied = dict(tables)
    copied["study"] = dict(tables["study"])
    copied["variables"] = {k: dict(v) for k, v in tables.get("variables", {}).items()}
    copied["arrows"] = [dict(a) for a in tables.get("arrows", [])]
    return copied


def build_cells(scenario: Scenario, vary: Mapping, replicates=None, engine: str = "auto") -> list[Cell]:
    """Every cell of the sweep as a checked scenario, before any work.

    ``replicates`` (when given) replaces each cell's ``study.replicates``; a cell's scenario is then the one
    :func:`workbench.simulate` runs for that cell. A value a file could not hold (``noise_sd = -1``) or a run
    could not use (``n`` below the widest strategy's minimum) fails in one line naming the cell and the key.

    Examples
    --------
    >>> from workbench import load_preset
    >>> build_cells(load_preset("common_cause"), {"variables.fertiliser.noise_sd": [1.0, -1.0]})
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: cell 1 (variables.fertiliser.noise_sd=-1): variables.fertiliser.noise_sd: ...
    """
    checked = check_vary(scenario, vary)
    if replicates is not None and "study.replicates" in checked:
        raise UsageError("give replicates or vary study.replicates, not both", where="vary")
    base = scenario_to_dict(scenario, include_default_strategies=False)
    if replicates is not None:
        base["study"]["replicates"] = replicates
    cells = []
    for index, values in enumerate(grid(checked)):
        tables = _copy(base)
        for name, value in values.items():
            _set(tables, name, value)
        label = cell_label(index, values)
        try:
            cell = scenario_from_dict(tables)
            study = cell.study
            check_arguments(cell, study.n, study.replicates, study.alpha, engine)
        except WorkbenchError as exc:
            kind = (
                type(exc) if isinstance(exc, (ScenarioError, SimulationError, UsageError)) else ScenarioError
            )
            raise kind(str(exc), where=label) from None
        cells.append(Cell(index=index, values=values, scenario=cell))
    return cells
