"""The edits the dashboard's state makes to a copy of a scenario's TOML tables (plain Python, no Panel): study
values checked by the one rule, one field of a variable, the fields of a strategy, the drawing positions.

:class:`workbench.app.state.ScenarioState` applies each to a copy and validates the result with the file's own
parser, so an edit the parser refuses never becomes the scenario in effect.

Examples
--------
>>> data = {"variables": {"a": {}}}
>>> variable_change("a", "noise_sd", 2.0)(data).data["variables"]["a"]
{'noise_sd': 2.0}
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from workbench.errors import ScenarioError
from workbench.report.graph_drawing import graph_layout
from workbench.scenario import edit
from workbench.scenario.constraints import STUDY_SETTINGS, check_setting
from workbench.scenario.model import Scenario

__all__ = [
    "arrow_change",
    "check_study_values",
    "keep_layout",
    "parse_coefficients",
    "pin_layout",
    "position_change",
    "strategy_table_change",
    "variable_change",
]

#: The variable fields :meth:`workbench.app.state.ScenarioState.set_variable` sets as given (numbers checked by the parser).
_PLAIN_FIELDS = ("noise_sd", "baseline", "proportion", "rate")
#: The noise fields of a continuous variable (``spread_with`` as a table or as text, see :func:`parse_coefficients`).
_NOISE_FIELDS = ("noise", "noise_df", "spread_with")
_SIZES = "sample_sizes"


def check_study_values(fields: dict[str, Any]) -> dict[str, Any]:
    """Check study settings typed in the dashboard with the one rule,
    :func:`~workbench.scenario.constraints.check_setting`; return them as the TOML table holds them.

    ``target_halfwidth=None`` means no target; ``sample_sizes`` is a sequence of sizes.

    Raises
    ------
    ScenarioError
        ``study.<name>: must be ..., got ...`` for the first bad value.

    Examples
    --------
    >>> check_study_values({"n": 300, "sample_sizes": (100, 200)})
    {'n': 300, 'sample_sizes': [100, 200]}
    >>> check_study_values({"replicates": 0})
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: study.replicates: must be an integer from 1 to 1,000,000, got 0
    """
    out: dict[str, Any] = {}
    for key, value in fields.items():
        if key == _SIZES:
            out[key] = [
                check_setting("sample_size", size, where=f"study.sample_sizes[{i}]")
                for i, size in enumerate(value, start=1)
            ]
        elif key == "target_halfwidth" and value is None:
            out[key] = None
        elif key in STUDY_SETTINGS and key != "sample_size":
            out[key] = check_setting(key, value, where=f"study.{key}")
        else:
            raise ScenarioError(f"cannot edit '{key}'", where="study")
    return out


def variable_change(name: str, field: str, value: Any) -> Callable[[dict], edit.Edited]:
    """The edit of one field of a variable (see :meth:`workbench.app.state.ScenarioState.set_variable`)."""

    def change(data: dict) -> edit.Edited:
        if name not in data["variables"]:
            raise ScenarioError(f"no variable '{name}'", where="variables")
        if field == "name":
            return edit.rename_variable(data, name, str(value))
        if field == "type":
            return edit.set_variable_type(data, name, str(value))
        if field == "observed":
            return edit.set_observed(data, name, bool(value))
        table = data["variables"][name]
        if field == "label":
            text = str(value or "").strip()
            if text:
                table["label"] = text
            else:
                table.pop("label", None)
            return edit.Edited(data)
        if field == "r_squared":  # the share its causes explain sets noise_sd (scenario/elicit.py)
            if table.get("type", "continuous") != "continuous":
                raise ScenarioError(
                    "applies to continuous variables only", where=f"variables.{name}.r_squared"
                )
            table.pop("noise_sd", None)
            table["r_squared"] = value
            return edit.Edited(data, f"noise_sd of {name} now follows from R^2 = {value:g}")
        if field in _NOISE_FIELDS:
            return _noise_change(data, name, field, value)
        if field not in _PLAIN_FIELDS:
            raise ScenarioError(f"cannot edit '{field}'", where=f"variables.{name}")
        if field == "noise_sd":
            table.pop("r_squared", None)
        table[field] = value  # on a variable of another type, the parser's message names the rule
        return edit.Edited(data)

    return change


def parse_coefficients(value: Any, *, where: str) -> dict:
    """Coefficients typed as text (``distance = 0.5, load = 0.2``: the inside of a TOML inline table,
    parsed, never evaluated) or given as a table, as a table; ``{}`` for blank text. The names and values are
    left to the scenario parser.

    Raises
    ------
    ScenarioError
        When the text is not of that form.

    Examples
    --------
    >>> parse_coefficients("distance = 0.5, load = -0.2", where="variables.delay.spread_with")
    {'distance': 0.5, 'load': -0.2}
    >>> parse_coefficients("distance: 0.5", where="variables.delay.spread_with")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: variables.delay.spread_with: write each as 'name = 0.5', separated by commas, got 'distance: 0.5'
    """
    return edit.inline_table(value, where=where, hint="write each as 'name = 0.5', separated by commas")


def _set_or_drop(table: dict, key: str, value: Any) -> None:
    """``table[key] = value``, or no ``key`` when ``value`` is None, '' or an empty table."""
    if value is None or value == "" or value == {}:
        table.pop(key, None)
    else:
        table[key] = value


def _noise_change(data: dict, name: str, field: str, value: Any) -> edit.Edited:
    """``noise`` (a law; leaving ``heavy_tailed`` drops ``noise_df``), ``noise_df`` (None: the default) or
    ``spread_with`` (text or a table) of variable ``name``, in place."""
    table = data["variables"][name]
    note = ""
    if field == "spread_with":
        value = parse_coefficients(value, where=f"variables.{name}.spread_with")
    if field == "noise":
        value = None if value == "normal" else value
        if value != "heavy_tailed" and "noise_df" in table:
            del table["noise_df"]
            note = f"noise_df of {name} dropped (it goes with heavy-tailed noise only)"
    _set_or_drop(table, field, value)
    return edit.Edited(data, note)


def arrow_change(index: int, field: str, value: Any) -> Callable[[dict], edit.Edited]:
    """The edit of an arrow's ``form`` (``linear`` drops it and ``at``; leaving ``step`` drops ``at``; a new
    step is at the cause's ``baseline``, 0 without one), ``at``
    (None drops it) or ``varies_with`` (text such as ``skill = 0.3``, or a table; blank for none), for
    :meth:`workbench.app.graph_edits.GraphEdits.set_arrow_shape`.

    Examples
    --------
    >>> data = {"arrows": [{"from": "a", "to": "b", "effect": 1.0, "form": "step", "at": 0.5}]}
    >>> arrow_change(0, "form", "square")(data).data["arrows"][0]
    {'from': 'a', 'to': 'b', 'effect': 1.0, 'form': 'square'}
    """

    def change(data: dict) -> edit.Edited:
        if not 0 <= index < len(data["arrows"]):
            raise ScenarioError(f"no arrow number {index + 1}", where="arrows")
        table = data["arrows"][index]
        if field == "varies_with":
            coefficients = parse_coefficients(value, where=f"arrows[{index + 1}].varies_with")
            _set_or_drop(table, "varies_with", coefficients)
        elif field == "form":
            if value != "step":
                table.pop("at", None)
            _set_or_drop(table, "form", None if value == "linear" else value)
            if value == "step" and "at" not in table:  # a step needs its threshold: the cause's baseline
                cause = data["variables"].get(table["from"], {})
                table["at"] = float(cause.get("baseline", 0.0))
                return edit.Edited(
                    data, f"the step of {table['from']} is at {table['at']:g}; change 'at' to move it"
                )
        elif field == "at":
            _set_or_drop(table, "at", value)
        else:
            raise ScenarioError(f"cannot edit '{field}'", where=f"arrows[{index + 1}]")
        return edit.Edited(data)

    return change


def strategy_table_change(table: dict, name: str, changes: dict[str, Any]) -> None:
    """Apply the changes of :meth:`workbench.app.state.ScenarioState.set_strategy` to one strategy's table, in place."""
    if changes.get("adjust") is not None:
        table["adjust"] = list(changes["adjust"])
        if table.get("interactions"):  # an interaction needs its covariate adjusted for
            table["interactions"] = [v for v in table["interactions"] if v in table["adjust"]] or None
            if table["interactions"] is None:
                del table["interactions"]
    model = changes.get("model")
    if model is not None:
        if model != table.get("model", "ols"):
            table.pop("se", None)  # each model has its own standard errors: back to its default
        table["model"] = model
        if model != "ols":  # splines are fitted by least squares only
            table.pop("flexible", None)
        if model != "logit":
            table.pop("standardize", None)
        else:
            table.pop("selection", None)  # selection rules apply to OLS only
    if changes.get("standardize") is not None:
        table["standardize"] = bool(changes["standardize"])
    selection = changes.get("selection")
    if selection in ("", "fixed"):
        table.pop("selection", None)
    elif selection is not None:
        table["selection"] = selection
    if changes.get("restrict") is not None:
        parsed = edit.parse_restriction(changes["restrict"], where=f"strategies.{name}.restrict")
        table["restrict"] = parsed
        if not parsed:
            del table["restrict"]
    se = changes.get("se")
    if se in ("", "default"):
        table.pop("se", None)
    elif se is not None:
        table["se"] = se
    flexible = changes.get("flexible")
    if flexible is not None:
        _set_or_drop(table, "flexible", list(flexible) or None)
    interactions = changes.get("interactions")
    if interactions is not None:
        if interactions:
            table["interactions"] = list(interactions)
        else:
            table.pop("interactions", None)
    if changes.get("new_name") is not None:
        table["name"] = changes["new_name"]


def _rounded(x: float, y: float) -> list[float]:
    """A drawing position as the file holds it: two numbers rounded to 0.01 (a pixel or so)."""
    return [round(float(x), 2) + 0.0, round(float(y), 2) + 0.0]


def pin_layout(data: dict, scenario: Scenario) -> None:
    """Write the drawn position of every variable of ``scenario`` that has none into ``data``, in place, so
    that later edits keep the layout the user sees (:func:`~workbench.report.graph_drawing.graph_layout`
    lays out a graph anew unless every variable has a position).

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.scenario.write import scenario_to_dict
    >>> sc = load_preset("common_cause")
    >>> data = scenario_to_dict(sc)
    >>> pin_layout(data, sc)
    >>> data["variables"]["soil_quality"]["position"]
    [0.0, 1.0]
    """
    for name, (x, y) in graph_layout(scenario).items():
        table = data["variables"].get(name)
        if table is not None and "position" not in table:
            table["position"] = _rounded(x, y)


def keep_layout(data: dict, before: Scenario) -> None:
    """Give each new variable of ``data`` a free place when every variable of ``before`` has a position, in
    place: a variable added in a table then joins the drawing without moving the others. The place is on a
    new row below the drawing, in the first column with no node within half a unit.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.scenario.write import scenario_to_dict
    >>> sc = load_preset("common_cause")
    >>> from workbench.graph.defaults import scenario_from_dict
    >>> data = scenario_to_dict(load_preset("common_cause"))
    >>> pin_layout(data, load_preset("common_cause"))
    >>> pinned = scenario_from_dict(data)
    >>> data["variables"]["rain"] = {}
    >>> keep_layout(data, pinned)
    >>> data["variables"]["rain"]["position"]
    [0.0, -1.0]
    """
    if any(v.position is None for v in before.variables):
        return
    taken = [tuple(t["position"]) for t in data["variables"].values() if "position" in t]
    if not taken:
        return
    xs, ys = [p[0] for p in taken], [p[1] for p in taken]
    for name, table in data["variables"].items():
        if "position" in table or name in before.names:
            continue
        y = min(ys) - 1.0
        x = next(
            (
                c
                for c in _columns(min(xs), max(xs))
                if all(abs(c - p[0]) + abs(y - p[1]) > 0.5 for p in taken)
            ),
            max(xs) + 1.0,
        )
        table["position"] = _rounded(x, y)
        taken.append((x, y))


def _columns(low: float, high: float) -> list[float]:
    """Whole-unit columns from ``low`` to ``high``."""
    return [low + i for i in range(int(high - low) + 1)]


def position_change(name: str, x: Any, y: Any) -> Callable[[dict], None]:
    """The edit that moves variable ``name`` to ``(x, y)`` (numbers checked by the parser)."""

    def change(data: dict) -> None:
        if name not in data["variables"]:
            raise ScenarioError(f"no variable '{name}'", where="variables")
        if not all(isinstance(v, int | float) and not isinstance(v, bool) for v in (x, y)):
            where = f"variables.{name}.position"
            raise ScenarioError(f"must be two numbers [x, y], got {x!r}, {y!r}", where=where)
        data["variables"][name]["position"] = _rounded(x, y)

    return change
