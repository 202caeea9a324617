"""The dashboard inside a notebook: :func:`show` returns the page as a Panel object that renders inline.

Examples
--------
>>> from workbench import load_preset
>>> page = show(load_preset("common_cause"))
>>> type(page).__name__
'Row'
"""

from __future__ import annotations

import panel as pn

from workbench.app.app import GLOBAL_CSS, App
from workbench.app.state import Workbench
from workbench.errors import ScenarioError
from workbench.scenario.model import Scenario
from workbench.scenario.write import dumps_scenario

__all__ = ["show"]


def show(scenario: Scenario | None = None, *, preset: str | None = None) -> pn.viewable.Viewable:
    """The whole dashboard (sidebar and tabs) for ``scenario`` (or a preset), as a Panel object.

    In Jupyter the returned object renders inline as the last expression of a cell; ``.servable()`` or
    ``pn.serve`` work as for any Panel object. Computations run in worker threads and apply their results
    as they finish (there is no page-wide poll in a notebook).

    Raises
    ------
    ScenarioError
        When ``scenario`` cannot be written and read back (it is shown as the dashboard's TOML text).
    """
    pn.extension("tabulator", raw_css=[GLOBAL_CSS], notifications=False)
    workbench = Workbench(preset=preset, deferred=False)
    if scenario is not None:
        state = workbench.scenario_state
        if not state.apply_text(dumps_scenario(scenario)):
            raise ScenarioError("the scenario could not be opened in the dashboard", where="show")
    return App(workbench=workbench).__panel__()
