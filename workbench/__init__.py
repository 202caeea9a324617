"""workbench: write down an assumed causal graph with effect sizes, simulate studies from it, and compare
adjustment strategies by bias, confidence-interval coverage, standard errors and power.

The public functions are re-exported here and imported on first use, so that the command line starts fast.

Examples
--------
>>> import workbench as wb
>>> sc = wb.load_preset("common_cause")
>>> sc.question.exposure
'fertiliser'
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

_EXPORTS = {
    "WorkbenchError": "errors",
    "ScenarioError": "errors",
    "SimulationError": "errors",
    "Cancelled": "errors",
    "Scenario": "scenario",
    "Variable": "scenario",
    "Arrow": "scenario",
    "Strategy": "scenario",
    "Question": "scenario",
    "Study": "scenario",
    "load_scenario": "scenario",
    "save_scenario": "scenario",
    "dumps_scenario": "scenario",
    "scenario_from_dict": "scenario",
    "scenario_to_dict": "scenario",
    "load_preset": "presets",
    "list_presets": "presets",
    "check": "check",
    "CheckReport": "check",
    "draw": "generate",
    "estimate": "estimate",
    "simulate": "simulate",
    "SimulationResult": "simulate",
    "plan": "plan",
    "PlanResult": "plan",
}

__all__ = sorted(_EXPORTS) + ["__version__"]


def __getattr__(name: str):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'workbench' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__():
    return __all__
