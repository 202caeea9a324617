"""The identification criteria: which adjustment sets Z let a regression on X and Z estimate the target.

For one exposure X and one outcome Y in a DAG G:

1. *Causal nodes* ``cn(X, Y)``: the variables other than X on a directed path from X to Y (Y included).
2. *Forbidden set* ``forb(X, Y)``: the causal nodes and all their descendants. No valid set for the total
   effect may contain one: it would block part of the effect or open a path through a consequence of it [3].
3. *Total effect* (the adjustment criterion [2, 3]): Z is valid iff it avoids ``forb(X, Y)`` and
   d-separates X and Y in the *proper back-door graph*, G without the first arrow of every proper causal
   path. The criterion is complete: every valid set passes it. A child of X off the causal paths is allowed.
4. *Direct effect* (the single-door criterion [1], Thm 5.3.1): Z is valid for the coefficient of the arrow
   X -> Y iff it has no descendant of Y and d-separates X and Y in G without that arrow.

:func:`criterion` bundles the graph to test in, the forbidden variables and the target into a
:class:`Criterion` whose :meth:`Criterion.admits` is the yes/no answer; :func:`judge_any` asks it for one set,
ignoring whether its members are observed. The plain-word verdicts built on these tests are in
:mod:`workbench.graph.verdicts`, the searches for minimal and optimal sets in :mod:`workbench.graph.search`.
The graph is the user's assumption: every answer is a consequence of it.

References
----------
1. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press. Def. 1.2.3, Thm 5.3.1.
2. Shpitser I., VanderWeele T., Robins J. (2010). On the validity of covariate adjustment for estimating
   causal effects. UAI.
3. Perkovic E., Textor J., Kalisch M., Maathuis M.H. (2018). Complete graphical characterization and
   construction of adjustment sets in Markov equivalence classes of ancestral graphs. JMLR 18(220).

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("mediator")
>>> sorted(forbidden_set(build_graph(sc), "training", "output"))
['output', 'skill']
>>> judge_any(sc, []), judge_any(sc, ["skill"])
(True, False)
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from workbench.graph.build import build_graph
from workbench.scenario.model import Scenario

__all__ = [
    "causal_nodes",
    "forbidden_set",
    "backdoor_graph",
    "single_door_graph",
    "is_separated",
    "Criterion",
    "criterion",
    "judge_any",
]


def causal_nodes(G: nx.DiGraph, x: str, y: str) -> set[str]:
    """cn(X, Y): variables other than X on a directed path from X to Y (Y included when reachable).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sorted(causal_nodes(build_graph(load_preset("mediator")), "training", "output"))
    ['output', 'skill']
    """
    if y not in nx.descendants(G, x):
        return set()
    return (nx.descendants(G, x) & nx.ancestors(G, y)) | {y}


def forbidden_set(G: nx.DiGraph, x: str, y: str) -> set[str]:
    """forb(X, Y): descendants of the variables on proper causal paths (X excluded), which no valid set for
    the total effect may contain (Perkovic et al. 2018).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sorted(forbidden_set(build_graph(load_preset("mediator")), "training", "output"))
    ['output', 'skill']
    """
    cn = causal_nodes(G, x, y)
    out = set(cn)
    for node in cn:
        out |= nx.descendants(G, node)
    return out


def backdoor_graph(G: nx.DiGraph, x: str, y: str) -> nx.DiGraph:
    """The proper back-door graph: a copy of G without the first arrow of every proper causal path.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sorted(backdoor_graph(build_graph(load_preset("common_cause")), "fertiliser", "wheat_yield").edges)
    [('soil_quality', 'fertiliser'), ('soil_quality', 'wheat_yield')]
    """
    cn = causal_nodes(G, x, y)
    H = nx.DiGraph(G)
    H.remove_edges_from([(x, c) for c in list(G.successors(x)) if c in cn])
    return H


def single_door_graph(G: nx.DiGraph, x: str, y: str) -> nx.DiGraph:
    """A copy of G without the arrow x -> y (when there is one), where the single-door criterion tests.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sorted(single_door_graph(build_graph(load_preset("common_cause")), "fertiliser", "wheat_yield").edges)
    [('soil_quality', 'fertiliser'), ('soil_quality', 'wheat_yield')]
    """
    H = nx.DiGraph(G)
    if H.has_edge(x, y):
        H.remove_edge(x, y)
    return H


def is_separated(G: nx.DiGraph, x: str, y: str, adjust) -> bool:
    """Whether ``adjust`` d-separates ``x`` and ``y`` in ``G`` (networkx's ``is_d_separator``).

    Examples
    --------
    >>> from workbench import load_preset
    >>> G = build_graph(load_preset("common_cause"))
    >>> is_separated(G, "soil_quality", "wheat_yield", {"fertiliser"})
    False
    """
    return nx.is_d_separator(G, {x}, {y}, set(adjust))


@dataclass(frozen=True, eq=False)
class Criterion:
    """The criterion for one target, ready to test sets.

    Attributes
    ----------
    graph : networkx.DiGraph
        The scenario's DAG.
    test_graph : networkx.DiGraph
        Where d-separation is tested: the proper back-door graph (total effect) or the graph without the
        arrow X -> Y (direct effect).
    exposure, outcome : str
    target : {"total", "direct"}
    forbidden : set of str
        The variables no valid set may contain: forb(X, Y) for the total effect, the descendants of Y for
        the direct effect.
    """

    graph: nx.DiGraph
    test_graph: nx.DiGraph
    exposure: str
    outcome: str
    target: str
    forbidden: frozenset[str]

    def admits(self, adjust) -> bool:
        """Whether the set ``adjust`` satisfies the criterion (observed or not).

        Examples
        --------
        >>> from workbench import load_preset
        >>> criterion(load_preset("common_cause")).admits({"soil_quality"})
        True
        """
        zset = set(adjust)
        if zset & self.forbidden:
            return False
        return is_separated(self.test_graph, self.exposure, self.outcome, zset)


def criterion(scenario: Scenario, target: str | None = None) -> Criterion:
    """The :class:`Criterion` of the scenario's question, for ``target`` (default: the question's).

    Examples
    --------
    >>> from workbench import load_preset
    >>> c = criterion(load_preset("mediator"))
    >>> c.target, sorted(c.forbidden)
    ('total', ['output', 'skill'])
    """
    target = target or scenario.question.target
    G = build_graph(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    if target == "direct":
        return Criterion(G, single_door_graph(G, x, y), x, y, target, frozenset(nx.descendants(G, y)))
    return Criterion(G, backdoor_graph(G, x, y), x, y, target, frozenset(forbidden_set(G, x, y)))


def judge_any(scenario: Scenario, adjust) -> bool:
    """Validity of ``adjust`` for the question's target, ignoring whether its members are observed.

    Examples
    --------
    >>> from workbench import load_preset
    >>> judge_any(load_preset("common_cause"), ["soil_quality"])
    True
    """
    return criterion(scenario).admits(adjust)
