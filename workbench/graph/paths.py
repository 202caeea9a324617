"""Paths between the exposure and the outcome, and whether an adjustment set leaves them open.

A *path* between X and Y is a sequence of distinct variables joined by arrows of either direction; it is
*causal* when every arrow points away from X. A variable on a path is a *collider* when both neighbouring
arrows point into it. A path is *blocked* by a set Z when a non-collider on it is in Z, or a collider on it
has neither itself nor a descendant in Z; otherwise it is *open* (d-separation [1]). Open non-causal paths
carry association that is not effect.

Here: :class:`PathInfo` (one path, with its arrows), :func:`list_paths` (every path, causal first, at most
:data:`MAX_PATHS`), :func:`is_path_open` (Def. 1.2.3 of [1] on one path), and the directed-path texts the
plain-word reasons quote (:func:`arrow_path`, :func:`path_through`).

References
----------
1. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press. Def. 1.2.3 (d-separation).

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> [(p.text, p.causal) for p in list_paths(sc)]
[('fertiliser -> wheat_yield', True), ('fertiliser <- soil_quality -> wheat_yield', False)]
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import lru_cache

import networkx as nx

from workbench.graph.build import build_graph
from workbench.scenario.model import Scenario

__all__ = ["MAX_PATHS", "PathInfo", "all_paths", "list_paths", "is_path_open", "arrow_path", "path_through"]

MAX_PATHS = 500
"""Paths listed between the exposure and the outcome, at most (a dense graph has very many)."""


@dataclass(frozen=True)
class PathInfo:
    """One path between the exposure and the outcome.

    Attributes
    ----------
    nodes : tuple of str
        From the exposure to the outcome.
    arrows : tuple of str
        ``"->"`` or ``"<-"`` between consecutive nodes.
    causal : bool
        Every arrow points away from the exposure.

    Examples
    --------
    >>> p = PathInfo(("x", "c", "y"), ("->", "<-"), False)
    >>> p.text, p.colliders()
    ('x -> c <- y', ['c'])
    """

    nodes: tuple[str, ...]
    arrows: tuple[str, ...]
    causal: bool

    @property
    def text(self) -> str:
        """The path written out, ``x <- c -> y``."""
        out = self.nodes[0]
        for arrow, node in zip(self.arrows, self.nodes[1:], strict=True):
            out += f" {arrow} {node}"
        return out

    def colliders(self) -> list[str]:
        """Variables where both neighbouring arrows point in."""
        return [
            self.nodes[i]
            for i in range(1, len(self.nodes) - 1)
            if self.arrows[i - 1] == "->" and self.arrows[i] == "<-"
        ]


@lru_cache(maxsize=256)
def all_paths(G: nx.DiGraph, x: str, y: str) -> tuple[PathInfo, ...]:
    """Every path between ``x`` and ``y`` in the (frozen, hence hashable) graph ``G``, causal first, then by
    length, at most :data:`MAX_PATHS`; cached on the graph and the pair.

    Examples
    --------
    >>> from workbench import load_preset
    >>> G = build_graph(load_preset("common_cause"))
    >>> [p.text for p in all_paths(G, "soil_quality", "wheat_yield")]
    ['soil_quality -> wheat_yield', 'soil_quality -> fertiliser -> wheat_yield']
    """
    skeleton = G.to_undirected(as_view=True)
    out = []
    for nodes in nx.all_simple_paths(skeleton, x, y):
        arrows = tuple("->" if G.has_edge(a, b) else "<-" for a, b in itertools.pairwise(nodes))
        out.append(PathInfo(tuple(nodes), arrows, all(a == "->" for a in arrows)))
        if len(out) >= MAX_PATHS:
            break
    out.sort(key=lambda p: (not p.causal, len(p.nodes), p.nodes))
    return tuple(out)


def list_paths(scenario: Scenario, exposure: str | None = None, outcome: str | None = None) -> list[PathInfo]:
    """Every path between the exposure and the outcome (causal first, then by length), at most
    :data:`MAX_PATHS`.

    Examples
    --------
    >>> from workbench import load_preset
    >>> [p.text for p in list_paths(load_preset("common_cause"))]
    ['fertiliser -> wheat_yield', 'fertiliser <- soil_quality -> wheat_yield']
    """
    x = exposure or scenario.question.exposure
    y = outcome or scenario.question.outcome
    return list(all_paths(build_graph(scenario), x, y))


def is_path_open(G: nx.DiGraph, path: PathInfo, adjust) -> bool:
    """Whether ``path`` is open given the set ``adjust`` (Pearl 2009, Def. 1.2.3): every non-collider is
    outside the set and every collider has itself or a descendant in it.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> backdoor = list_paths(sc)[1]
    >>> is_path_open(build_graph(sc), backdoor, []), is_path_open(build_graph(sc), backdoor, ["soil_quality"])
    (True, False)
    """
    adjust = set(adjust)
    for i in range(1, len(path.nodes) - 1):
        node = path.nodes[i]
        collider = path.arrows[i - 1] == "->" and path.arrows[i] == "<-"
        if collider:
            if node not in adjust and not (nx.descendants(G, node) & adjust):
                return False
        elif node in adjust:
            return False
    return True


def arrow_path(G: nx.DiGraph, source: str, target: str, avoid: str | None = None) -> str:
    """A shortest directed path from ``source`` to ``target`` as text, ``a -> b -> c``, optionally avoiding
    one variable (it must exist: the callers ask only for reachable pairs).

    Examples
    --------
    >>> from workbench import load_preset
    >>> G = build_graph(load_preset("common_cause"))
    >>> arrow_path(G, "soil_quality", "wheat_yield"), arrow_path(G, "soil_quality", "fertiliser")
    ('soil_quality -> wheat_yield', 'soil_quality -> fertiliser')
    """
    H = G if avoid is None else nx.restricted_view(G, [avoid], [])
    return " -> ".join(nx.shortest_path(H, source, target))


def path_through(G: nx.DiGraph, x: str, z: str, y: str) -> str:
    """A directed path from ``x`` through ``z`` to ``y`` as text.

    Examples
    --------
    >>> from workbench import load_preset
    >>> path_through(build_graph(load_preset("mediator")), "training", "skill", "output")
    'training -> skill -> output'
    """
    return f"{arrow_path(G, x, z)} -> {arrow_path(G, z, y).split(' -> ', 1)[1]}"
