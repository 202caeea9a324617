"""The scenario's graph as a networkx DiGraph: the object every graph analysis starts from.

A scenario's variables become the nodes (with ``observed``, ``type`` and ``label``) and its arrows the edges
(with ``effect``). The graph is a DAG by construction: the scenario reader refuses a cycle. It is built once
per set of variables and arrows (an LRU cache keyed on those tuples) and frozen, so the analyses may cache on
it too and no caller can change it behind their back.

References
----------
1. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press, ch. 1 (a causal model as a DAG).
2. Hagberg A.A., Schult D.A., Swart P.J. (2008). Exploring network structure, dynamics, and function using
   NetworkX. Proceedings of SciPy 2008.

Examples
--------
>>> from workbench import load_preset
>>> G = build_graph(load_preset("common_cause"))
>>> G.nodes["soil_quality"]["observed"], G.edges["soil_quality", "fertiliser"]["effect"]
(True, 0.6)
"""

from __future__ import annotations

from functools import lru_cache

import networkx as nx

from workbench.scenario.model import Arrow, Scenario, Variable

__all__ = ["build_graph"]


@lru_cache(maxsize=256)
def _frozen_graph(variables: tuple[Variable, ...], arrows: tuple[Arrow, ...]) -> nx.DiGraph:
    G = nx.DiGraph()
    for v in variables:
        G.add_node(v.name, observed=v.observed, type=v.type, label=v.display)
    for a in arrows:
        G.add_edge(a.source, a.target, effect=a.effect)
    return nx.freeze(G)


def build_graph(scenario: Scenario) -> nx.DiGraph:
    """The scenario's DAG as a frozen networkx DiGraph (nodes carry ``observed``, ``type``, ``label``;
    edges carry ``effect``), cached on the scenario's variables and arrows.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sorted(build_graph(load_preset("common_cause")).edges)
    [('fertiliser', 'wheat_yield'), ('soil_quality', 'fertiliser'), ('soil_quality', 'wheat_yield')]
    """
    return _frozen_graph(scenario.variables, scenario.arrows)
