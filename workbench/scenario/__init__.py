"""The scenario layer: the data model of an assumed graph, reading and writing its TOML file, presets."""

from workbench.scenario.model import Arrow, Question, Scenario, Strategy, Study, Variable
from workbench.scenario.parse import load_scenario, scenario_from_dict
from workbench.scenario.write import dumps_scenario, save_scenario, scenario_to_dict

__all__ = [
    "Arrow",
    "Question",
    "Scenario",
    "Strategy",
    "Study",
    "Variable",
    "dumps_scenario",
    "load_scenario",
    "save_scenario",
    "scenario_from_dict",
    "scenario_to_dict",
]
