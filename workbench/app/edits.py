"""The edits the dashboard's state makes to a copy of a scenario's TOML tables (plain Python, no Panel): study
values checked by the one rule, one field of a variable, the fields of a strategy.

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
from workbench.scenario import edit
from workbench.scenario.constraints import STUDY_SETTINGS, check_setting

__all__ = ["check_study_values", "variable_change", "strategy_table_change"]

#: The variable fields :meth:`workbench.app.state.ScenarioState.set_variable` sets as given (numbers checked by the parser).
_PLAIN_FIELDS = ("noise_sd", "baseline", "proportion")
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
        if field not in _PLAIN_FIELDS:
            raise ScenarioError(f"cannot edit '{field}'", where=f"variables.{name}")
        if field != "proportion" and table.get("type") == "binary":
            raise ScenarioError(
                "a binary variable is set by its proportion", where=f"variables.{name}.{field}"
            )
        if field == "proportion" and table.get("type") != "binary":
            raise ScenarioError("only a binary variable has a proportion", where=f"variables.{name}.{field}")
        table[field] = value
        return edit.Edited(data)

    return change


def strategy_table_change(table: dict, name: str, changes: dict[str, Any]) -> None:
    """Apply the changes of :meth:`workbench.app.state.ScenarioState.set_strategy` to one strategy's table, in place."""
    if changes.get("adjust") is not None:
        table["adjust"] = list(changes["adjust"])
    model = changes.get("model")
    if model is not None:
        table["model"] = model
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
    if changes.get("new_name") is not None:
        table["name"] = changes["new_name"]
