"""The built-in presets: invented scenarios of our own, one lesson each.

Presets ship as package data (the top-level ``presets/`` folder is their source and is installed as the
``workbench.preset_data`` package), so they are found after a plain ``pip install .`` from any directory. Loading
is by name only, never by a path taken from a user interface.

Examples
--------
>>> "common_cause" in list_presets()
True
"""

from __future__ import annotations

import re
from importlib import resources
from pathlib import Path

from workbench.errors import ScenarioError, shown
from workbench.scenario.model import Scenario
from workbench.scenario.parse import parse_scenario_text

__all__ = ["DEFAULT_PRESET", "list_presets", "preset_text", "read_preset"]

DEFAULT_PRESET = "common_cause"
_NAME = re.compile(r"[a-z][a-z0-9_]{0,63}")


_SOURCE_FOLDER = Path(__file__).resolve().parents[2] / "presets"


def _folder():
    """The preset files: the top-level ``presets/`` folder when the code runs from a source checkout (as the
    tests do, with the checkout on ``sys.path``), else the installed ``workbench.preset_data`` package."""
    if _SOURCE_FOLDER.is_dir():
        return _SOURCE_FOLDER
    return resources.files("workbench.preset_data")


def list_presets() -> dict[str, str]:
    """Names of the built-in presets mapped to their titles, in name order.

    Examples
    --------
    >>> list_presets()["common_cause"]
    'Fertiliser and wheat yield on hillside farms'
    """
    out = {}
    for entry in sorted(_folder().iterdir(), key=lambda p: p.name):
        if entry.name.endswith(".toml"):
            name = entry.name[: -len(".toml")]
            match = re.search(r'^title\s*=\s*"(.*)"\s*$', entry.read_text(encoding="utf-8"), re.MULTILINE)
            out[name] = match.group(1) if match else name
    return out


def preset_text(name: str) -> str:
    """The TOML text of a built-in preset.

    Raises
    ------
    ScenarioError
        For a name that is not a preset (the message lists the presets).

    Examples
    --------
    >>> preset_text("common_cause").splitlines()[0]
    'title = "Fertiliser and wheat yield on hillside farms"'
    """
    if not isinstance(name, str) or not _NAME.fullmatch(name):
        raise ScenarioError(f"not a preset name: {shown(name)}", where="preset")
    entry = _folder() / f"{name}.toml"
    if not entry.is_file():
        choices = ", ".join(list_presets())
        raise ScenarioError(f"no preset named '{name}'; the presets are: {choices}", where="preset")
    return entry.read_text(encoding="utf-8")


def read_preset(name: str) -> Scenario:
    """Read a built-in preset by name (every preset lists its strategies).

    Raises
    ------
    ScenarioError
        When there is no such preset (the message lists the names).

    Examples
    --------
    >>> read_preset("mediator").question.outcome
    'output'
    """
    text = preset_text(name)
    try:
        return parse_scenario_text(text)
    except ScenarioError as exc:
        raise ScenarioError(
            exc.problem, where=f"preset {name}: {exc.where}" if exc.where else f"preset {name}"
        ) from None
