"""workbench: write down an assumed causal graph with effect sizes, simulate studies from it, and compare
adjustment strategies by bias, confidence-interval coverage, standard errors and power.

The public API is flat (``import workbench as wb; wb.simulate(...)``) and lazy: a name is imported from its
layer the first time it is used (PEP 562 module ``__getattr__``), so ``import workbench`` and the command
line start quickly and load only what a task needs. Where each name lives is in :data:`_PUBLIC` below and in
DEVELOPERS.md.

Examples
--------
>>> import workbench as wb
>>> sc = wb.load_preset("common_cause")
>>> sc.question.exposure
'fertiliser'
>>> round(wb.check(sc).truth, 3)
0.25
"""

from __future__ import annotations

import importlib

_PUBLIC = {
    # errors
    "WorkbenchError": "workbench.errors",
    "ScenarioError": "workbench.errors",
    "UsageError": "workbench.errors",
    "DataError": "workbench.errors",
    "SimulationError": "workbench.errors",
    "UnknownNameError": "workbench.errors",
    "Cancelled": "workbench.errors",
    # the scenario: data model, writing, presets
    "Scenario": "workbench.scenario.model",
    "Variable": "workbench.scenario.model",
    "Arrow": "workbench.scenario.model",
    "Strategy": "workbench.scenario.model",
    "Question": "workbench.scenario.model",
    "Study": "workbench.scenario.model",
    "save_scenario": "workbench.scenario.write",
    "dumps_scenario": "workbench.scenario.write",
    "scenario_to_dict": "workbench.scenario.write",
    "list_presets": "workbench.scenario.presets",
    # loaders (default strategies filled in by the graph layer)
    "load_scenario": "workbench.graph.defaults",
    "loads_scenario": "workbench.graph.defaults",
    "scenario_from_dict": "workbench.graph.defaults",
    "load_preset": "workbench.graph.defaults",
    # the engine
    "draw": "workbench.engine.generate",
    "true_effect": "workbench.engine.truth",
    "Truth": "workbench.engine.truth",
    "run_replicates": "workbench.engine.replicates",
    "ReplicateArrays": "workbench.engine.replicates",
    # the verbs
    "check": "workbench.analysis.check",
    "CheckReport": "workbench.analysis.check",
    "simulate": "workbench.analysis.simulate",
    "SimulationResult": "workbench.analysis.simulate",
    "estimate": "workbench.analysis.estimate",
    "plan": "workbench.analysis.plan",
    "PlanResult": "workbench.analysis.plan",
    "sensitivity": "workbench.analysis.sensitivity",
    "sweep": "workbench.analysis.sweep",
    "SweepResult": "workbench.analysis.sweep_result",
    "show": "workbench.app.notebook",
    "SensitivityResult": "workbench.analysis.sensitivity",
}

__all__ = ["__version__", *_PUBLIC]


def __getattr__(name: str):
    """Import a public name from its layer on first use (PEP 562)."""
    if name == "__version__":
        from importlib.metadata import version

        value = version("workbench")
    elif name in _PUBLIC:
        value = getattr(importlib.import_module(_PUBLIC[name]), name)
    else:
        raise AttributeError(f"module 'workbench' has no attribute '{name}'")
    globals()[name] = value  # later lookups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
