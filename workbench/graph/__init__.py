"""The graph layer: what the assumed DAG implies for one exposure and one outcome.

Modules, bottom up: :mod:`~workbench.graph.build` (the scenario as a cached networkx DiGraph),
:mod:`~workbench.graph.paths` (paths and whether a set leaves them open), :mod:`~workbench.graph.criteria`
(the adjustment and single-door criteria as set tests), :mod:`~workbench.graph.roles` (the role of each
variable, precision notes), :mod:`~workbench.graph.verdicts` (plain-word verdicts on sets and strategies),
:mod:`~workbench.graph.search` (minimal and optimal sets), :mod:`~workbench.graph.linear` (closed-form
algebra of linear-Gaussian graphs) and :mod:`~workbench.graph.defaults` (the default strategies and the
loaders that fill them in). The names most used elsewhere are re-exported here.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> judge(sc, ["soil_quality"]).valid, minimal_sets(sc)
(True, [('soil_quality',)])
"""

from workbench.graph.build import build_graph
from workbench.graph.criteria import forbidden_set, judge_any
from workbench.graph.defaults import default_strategies, with_default_strategies
from workbench.graph.paths import MAX_PATHS, PathInfo, is_path_open, list_paths
from workbench.graph.roles import ROLES, find_roles
from workbench.graph.search import MAX_ENUMERATED_CANDIDATES, minimal_sets, minimal_sets_note, optimal_set
from workbench.graph.verdicts import SELECTION_REASON, Verdict, judge, judge_strategy

__all__ = [
    "build_graph",
    "list_paths",
    "is_path_open",
    "PathInfo",
    "MAX_PATHS",
    "forbidden_set",
    "judge_any",
    "ROLES",
    "find_roles",
    "Verdict",
    "judge",
    "judge_strategy",
    "SELECTION_REASON",
    "minimal_sets",
    "minimal_sets_note",
    "optimal_set",
    "MAX_ENUMERATED_CANDIDATES",
    "default_strategies",
    "with_default_strategies",
]
