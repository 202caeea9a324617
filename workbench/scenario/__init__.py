"""The scenario layer: the data model of an assumed graph, reading and validating its TOML file, writing it,
the study-setting constraints and the built-in presets. Nothing here knows the graph algorithms; the default
strategies of a file that lists none are filled in above, by :mod:`workbench.graph.defaults`."""

from workbench.scenario.model import Arrow, Question, Scenario, Strategy, Study, Variable
from workbench.scenario.write import dumps_scenario, save_scenario, scenario_to_dict

__all__ = [
    "Arrow",
    "Question",
    "Scenario",
    "Strategy",
    "Study",
    "Variable",
    "dumps_scenario",
    "save_scenario",
    "scenario_to_dict",
]
