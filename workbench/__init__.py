"""workbench: write down an assumed causal graph with effect sizes, simulate studies from it, and compare
adjustment strategies by bias, confidence-interval coverage, standard errors and power.

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

__version__ = "0.1.0"

from workbench.analysis.check import CheckReport, check
from workbench.analysis.estimate import estimate
from workbench.analysis.plan import PlanResult, plan
from workbench.analysis.simulate import SimulationResult, simulate
from workbench.engine.generate import draw
from workbench.engine.replicates import ReplicateArrays, run_replicates
from workbench.engine.truth import Truth, true_effect
from workbench.errors import Cancelled, ScenarioError, SimulationError, WorkbenchError
from workbench.graph.defaults import load_preset, load_scenario, loads_scenario, scenario_from_dict
from workbench.scenario.model import Arrow, Question, Scenario, Strategy, Study, Variable
from workbench.scenario.presets import list_presets
from workbench.scenario.write import dumps_scenario, save_scenario, scenario_to_dict

__all__ = [
    "__version__",
    "WorkbenchError",
    "ScenarioError",
    "SimulationError",
    "Cancelled",
    "Scenario",
    "Variable",
    "Arrow",
    "Strategy",
    "Question",
    "Study",
    "load_scenario",
    "loads_scenario",
    "save_scenario",
    "dumps_scenario",
    "scenario_from_dict",
    "scenario_to_dict",
    "list_presets",
    "load_preset",
    "check",
    "CheckReport",
    "draw",
    "true_effect",
    "Truth",
    "simulate",
    "run_replicates",
    "ReplicateArrays",
    "SimulationResult",
    "estimate",
    "plan",
    "PlanResult",
]
