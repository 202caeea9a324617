"""Searching the valid adjustment sets: all inclusion-minimal ones, and the optimal one.

1. *Minimal sets*. A valid set is minimal when no member can be dropped. Minimal d-separators of X and Y lie
   inside the ancestors of X and Y [3], so only those observed variables are candidates. For every such
   candidate set Z the ancestral set of ``{X, Y} | Z`` is ``An({X, Y})`` itself, so d-separation given Z is
   plain separation in one fixed moral graph [4]: X and Y are d-separated by Z iff every path between them
   in the moralised ancestral graph passes through Z. The search enumerates subsets by size, skips the
   supersets of sets already found, and tests each with a breadth-first search over integer bitmasks (one
   bit per node). Beyond :data:`MAX_ENUMERATED_CANDIDATES` candidates one minimal set is found with
   networkx's ``find_minimal_d_separator`` and :func:`minimal_sets_note` says so.
2. *Optimal set*. ``O(X, Y) = pa(cn(X, Y)) \\ forb(X, Y)`` has the smallest asymptotic variance among valid
   sets in linear models [2]. For the direct target the outcome's other parents are used, which satisfy the
   single-door criterion [1] when observed; no optimality is claimed for them.

The tests in :mod:`workbench.graph.criteria` decide validity; the searches are cached per scenario.

References
----------
1. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press. Thm 5.3.1.
2. Henckel L., Perkovic E., Maathuis M.H. (2022). Graphical criteria for efficient total effect estimation
   via adjustment in causal linear models. JRSSB 84(2):579-599.
3. Tian J., Paz A., Pearl J. (1998). Finding minimal d-separators. Technical report R-254, UCLA.
4. Lauritzen S.L., Dawid A.P., Larsen B.N., Leimer H.-G. (1990). Independence properties of directed Markov
   fields. Networks 20:491-505.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> minimal_sets(sc), optimal_set(sc)[0]
([('soil_quality',)], ('soil_quality',))
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from functools import lru_cache

import networkx as nx

from workbench.graph.build import build_graph
from workbench.graph.criteria import causal_nodes, criterion, forbidden_set, judge_any
from workbench.scenario.model import Scenario

__all__ = [
    "MAX_ENUMERATED_CANDIDATES",
    "minimal_sets",
    "minimal_sets_note",
    "optimal_set",
    "moral_separation",
    "clear_search_cache",
]

MAX_ENUMERATED_CANDIDATES = 15
"""Candidate covariates up to which every minimal valid set is enumerated."""


def moral_separation(H: nx.DiGraph, x: str, y: str) -> tuple[Callable[[int], bool], dict[str, int]]:
    """A fast test of ``Z d-separates x and y in H`` for every ``Z`` inside the ancestors of x and y.

    For such ``Z`` the ancestral set of ``{x, y} | Z`` is always ``An({x, y})``, so d-separation is plain
    separation in one fixed moral graph (Lauritzen et al. 1990, Networks 20:491-505): x and y are
    d-separated by Z iff every path between them in the moralised ancestral graph passes through Z. Nodes
    are bits of an integer; the test is a breadth-first search over bitmasks.

    Returns
    -------
    (separated, bit)
        ``separated(mask) -> bool`` for a bitmask of conditioning nodes, and the node-to-bit mapping.

    Examples
    --------
    >>> H = nx.DiGraph([("c", "x"), ("c", "y")])
    >>> separated, bit = moral_separation(H, "x", "y")
    >>> separated(0), separated(bit["c"])
    (False, True)
    """
    nodes = sorted(nx.ancestors(H, x) | nx.ancestors(H, y) | {x, y})
    bit = {n: 1 << i for i, n in enumerate(nodes)}
    adjacency = [0] * len(nodes)
    index = {n: i for i, n in enumerate(nodes)}
    for n in nodes:
        parents = list(H.predecessors(n))
        for p in parents:
            adjacency[index[n]] |= bit[p]
            adjacency[index[p]] |= bit[n]
        for p, q in itertools.combinations(parents, 2):
            adjacency[index[p]] |= bit[q]
            adjacency[index[q]] |= bit[p]
    everything = (1 << len(nodes)) - 1
    start, goal = bit[x], bit[y]

    def separated(mask: int) -> bool:
        allowed = everything & ~mask
        seen = frontier = start
        while frontier:
            reach = 0
            while frontier:
                low = frontier & -frontier
                reach |= adjacency[low.bit_length() - 1]
                frontier ^= low
            if reach & goal:
                return False
            frontier = reach & allowed & ~seen
            seen |= frontier
        return True

    return separated, bit


def _enumerate_minimal(H: nx.DiGraph, x: str, y: str, candidates: list[str]) -> tuple[tuple[str, ...], ...]:
    """Every inclusion-minimal separating subset of ``candidates``, smallest first."""
    separated, bit = moral_separation(H, x, y)
    found_sets: list[tuple[str, ...]] = []
    found_masks: list[int] = []
    for size in range(len(candidates) + 1):
        for combo in itertools.combinations(candidates, size):
            mask = 0
            for c in combo:
                mask |= bit[c]
            if any(mask & f == f for f in found_masks):
                continue
            if separated(mask):
                found_sets.append(combo)
                found_masks.append(mask)
    return tuple(found_sets)


@lru_cache(maxsize=256)
def _minimal_sets_cached(scenario: Scenario) -> tuple[tuple[tuple[str, ...], ...], str | None]:
    rule = criterion(scenario)
    H, x, y = rule.test_graph, rule.exposure, rule.outcome
    observed = set(scenario.observed_names) - {x, y}
    # Minimal separators lie inside the ancestors of X and Y (Tian, Paz & Pearl 1998).
    relevant = nx.ancestors(H, x) | nx.ancestors(H, y)
    candidates = sorted((observed & relevant) - rule.forbidden, key=scenario.names.index)
    if len(candidates) <= MAX_ENUMERATED_CANDIDATES:
        return _enumerate_minimal(H, x, y, candidates), None
    found = nx.find_minimal_d_separator(H, {x}, {y}, restricted=set(candidates) | {x, y})
    if found is None:
        return (), None
    ordered = tuple(sorted(found, key=scenario.names.index))
    return (ordered,), (
        f"{len(candidates)} candidate covariates: listing one minimal valid set, not all "
        f"(all are enumerated up to {MAX_ENUMERATED_CANDIDATES})"
    )


def clear_search_cache() -> None:
    """Forget the cached minimal-set searches (for timing the search afresh).

    Examples
    --------
    >>> clear_search_cache()
    """
    _minimal_sets_cached.cache_clear()


def minimal_sets(scenario: Scenario) -> list[tuple[str, ...]]:
    """All inclusion-minimal valid adjustment sets made of observed variables, smallest first.

    An empty list means no valid set exists among the observed variables (for example a latent
    confounder); ``[()]`` means no adjustment is needed. Beyond :data:`MAX_ENUMERATED_CANDIDATES` candidate
    covariates one minimal set is returned (found with networkx's ``find_minimal_d_separator``) and
    :func:`minimal_sets_note` says so.

    Examples
    --------
    >>> from workbench import load_preset
    >>> minimal_sets(load_preset("common_cause"))
    [('soil_quality',)]
    """
    return list(_minimal_sets_cached(scenario)[0])


def minimal_sets_note(scenario: Scenario) -> str | None:
    """A note when :func:`minimal_sets` did not enumerate every set, else None.

    Examples
    --------
    >>> from workbench import load_preset
    >>> minimal_sets_note(load_preset("common_cause")) is None
    True
    """
    return _minimal_sets_cached(scenario)[1]


def optimal_set(scenario: Scenario) -> tuple[tuple[str, ...] | None, list[str], str]:
    """The optimal valid adjustment set O(X, Y) = pa(cn(X, Y)) minus forb(X, Y) (Henckel et al. 2022).

    For the ``direct`` target the set used is the outcome's other parents, which satisfies the single-door
    criterion whenever they are observed; no optimality result is claimed for it.

    Returns
    -------
    (set or None, latent members, note)
        The set (ordered as the scenario's variables) when it is valid and fully observed; otherwise None,
        with the latent members that make it unusable, and a note saying why.

    Examples
    --------
    >>> from workbench import load_preset
    >>> optimal_set(load_preset("common_cause"))[0]
    ('soil_quality',)
    """
    G = build_graph(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    if scenario.question.target == "direct":
        members = set(G.predecessors(y)) - {x}
        note = "the outcome's other parents (single-door criterion)"
    else:
        cn = causal_nodes(G, x, y)
        if not cn:
            return (
                None,
                [],
                f"{x} has no causal path to {y}: the total effect is 0 and O(X, Y) is not defined",
            )
        members = set()
        for c in cn:
            members |= set(G.predecessors(c))
        members -= forbidden_set(G, x, y) | {x}
        note = "O(X, Y) = pa(cn(X, Y)) minus forb(X, Y), the most precise valid set in linear models"
    ordered = tuple(sorted(members, key=scenario.names.index))
    latent = [m for m in ordered if not G.nodes[m]["observed"]]
    if not judge_any(scenario, ordered):
        return None, latent, "no valid adjustment set exists, even with the latent variables"
    if latent:
        return None, latent, f"the optimal set needs latent variables: {', '.join(latent)}"
    return ordered, [], note
