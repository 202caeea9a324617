"""Graph analysis for one exposure X and one outcome Y: roles, paths, verdicts on adjustment sets.

Definitions used throughout (a DAG ``G``; ``Z`` a set of variables a regression adjusts for):

* A *path* between X and Y is a sequence of distinct variables joined by arrows of either direction. It is
  *causal* when every arrow points away from X. A variable on a path is a *collider* when both neighbouring
  arrows point into it.
* A path is *blocked* by Z when a non-collider on it is in Z, or a collider on it has neither itself nor a
  descendant in Z (d-separation; Pearl 2009, Def. 1.2.3). Otherwise it is *open*.
* Total effect: Z is a valid adjustment set iff (a) no member of Z is a descendant of a variable (other than
  X) on a proper causal path from X to Y, and (b) Z blocks every proper non-causal path; equivalently Z
  d-separates X and Y in the proper back-door graph. This *adjustment criterion* is complete (Shpitser,
  VanderWeele & Robins 2010; Perkovic et al. 2018): a child of X that is not on a causal path is allowed.
* Direct effect (the X -> Y arrow alone, a path coefficient): Z is valid iff it has no descendant of Y and
  d-separates X and Y once the arrow X -> Y is removed (single-door criterion; Pearl 2009, Thm 5.3.1).
* The optimal valid set ``O(X, Y) = pa(cn(X, Y)) \\ forb(X, Y)`` has the smallest asymptotic variance among
  valid sets in linear models (Henckel, Perkovic & Maathuis 2022).

The graph is the user's assumption: every verdict here is a consequence of that assumption.

References
----------
1. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press. Def. 1.2.3, Def. 3.3.1, Thm 5.3.1.
2. Shpitser I., VanderWeele T., Robins J. (2010). On the validity of covariate adjustment for estimating
   causal effects. UAI.
3. Perkovic E., Textor J., Kalisch M., Maathuis M.H. (2018). Complete graphical characterization and
   construction of adjustment sets in Markov equivalence classes of ancestral graphs. JMLR 18(220).
4. Henckel L., Perkovic E., Maathuis M.H. (2022). Graphical criteria for efficient total effect estimation
   via adjustment in causal linear models. JRSSB 84(2):579-599.
5. Cinelli C., Forney A., Pearl J. (2022). A Crash Course in Good and Bad Controls. Sociological Methods &
   Research.
6. Tian J., Paz A., Pearl J. (1998). Finding minimal d-separators. Technical report R-254, UCLA.
7. Lauritzen S.L., Dawid A.P., Larsen B.N., Leimer H.-G. (1990). Independence properties of directed Markov
   fields. Networks 20:491-505.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from functools import lru_cache

import networkx as nx

from workbench.scenario.model import Scenario, Strategy

__all__ = [
    "ROLES",
    "PathInfo",
    "Verdict",
    "build_graph",
    "find_roles",
    "list_paths",
    "is_path_open",
    "forbidden_set",
    "judge",
    "judge_strategy",
    "SELECTION_REASON",
    "minimal_sets",
    "optimal_set",
    "MAX_PATHS",
    "MAX_ENUMERATED_CANDIDATES",
]

MAX_PATHS = 500
MAX_ENUMERATED_CANDIDATES = 15

#: Role names, in the order they are listed, with a short description.
ROLES = {
    "confounder": "a cause of the exposure and, not only through it, of the outcome",
    "mediator": "on a causal path from the exposure to the outcome",
    "common_effect": "a consequence of both the exposure and the outcome",
    "exposure_descendant": "a consequence of the exposure only",
    "outcome_descendant": "a consequence of the outcome only",
    "instrument": "a cause of the exposure that reaches the outcome only through it",
    "outcome_cause": "a cause of the outcome with no path to the exposure",
    "pre_exposure_collider": "a common effect on a non-causal path between exposure and outcome",
    "proxy_of_confounder": "a consequence of a confounder only: a noisy stand-in for it",
    "unrelated": "no path of consequence to the exposure or the outcome",
}


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
    """

    nodes: tuple[str, ...]
    arrows: tuple[str, ...]
    causal: bool

    @property
    def text(self) -> str:
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


@dataclass(frozen=True)
class Verdict:
    """Whether an adjustment set identifies the target, and why, in plain words.

    Attributes
    ----------
    valid : bool
    reasons : list of str
        Why, naming paths ("leaves the non-causal path a <- c -> y open").
    notes : list of str
        Precision notes (an instrument widens the SE; an outcome cause narrows it).
    open_paths, blocked_paths : list of PathInfo
        The paths between exposure and outcome that the set leaves open or blocks.
    """

    valid: bool
    reasons: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    open_paths: list[PathInfo] = field(default_factory=list)
    blocked_paths: list[PathInfo] = field(default_factory=list)


# --------------------------------------------------------------------------------------------------------
# Graph and paths
# --------------------------------------------------------------------------------------------------------
@lru_cache(maxsize=256)
def _graph(variables: tuple, arrows: tuple) -> nx.DiGraph:
    G = nx.DiGraph()
    for v in variables:
        G.add_node(v.name, observed=v.observed, type=v.type, label=v.display)
    for a in arrows:
        G.add_edge(a.source, a.target, effect=a.effect)
    return nx.freeze(G)


def build_graph(scenario: Scenario) -> nx.DiGraph:
    """The scenario's DAG as a frozen networkx DiGraph (nodes carry ``observed``, ``type``, ``label``;
    edges carry ``effect``).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sorted(build_graph(load_preset("common_cause")).edges)
    [('fertiliser', 'wheat_yield'), ('soil_quality', 'fertiliser'), ('soil_quality', 'wheat_yield')]
    """
    return _graph(scenario.variables, scenario.arrows)


@lru_cache(maxsize=256)
def _paths(G: nx.DiGraph, x: str, y: str) -> tuple[PathInfo, ...]:
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
    return list(_paths(build_graph(scenario), x, y))


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


def _causal_nodes(G: nx.DiGraph, x: str, y: str) -> set[str]:
    """cn(X, Y): variables other than X on a directed path from X to Y (Y included when reachable)."""
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
    cn = _causal_nodes(G, x, y)
    out = set(cn)
    for node in cn:
        out |= nx.descendants(G, node)
    return out


def _backdoor_graph(G: nx.DiGraph, x: str, y: str) -> nx.DiGraph:
    """The proper back-door graph: G without the first arrow of every proper causal path."""
    cn = _causal_nodes(G, x, y)
    H = nx.DiGraph(G)
    H.remove_edges_from([(x, c) for c in list(G.successors(x)) if c in cn])
    return H


def _separated(G: nx.DiGraph, x: str, y: str, adjust: set[str]) -> bool:
    return nx.is_d_separator(G, {x}, {y}, set(adjust))


# --------------------------------------------------------------------------------------------------------
# Roles
# --------------------------------------------------------------------------------------------------------
def _arrow_path(G: nx.DiGraph, source: str, target: str, avoid: str | None = None) -> str:
    H = G if avoid is None else nx.restricted_view(G, [avoid], [])
    return " -> ".join(nx.shortest_path(H, source, target))


def find_roles(scenario: Scenario) -> dict[str, list[tuple[str, str]]]:
    """The role of every variable other than the exposure and the outcome, each with a one-sentence reason.

    A variable may carry several roles (a confounder can also be a collider on another path). The role
    names are the keys of :data:`ROLES`.

    Returns
    -------
    dict of str to list of (role, reason)

    Examples
    --------
    >>> from workbench import load_preset
    >>> find_roles(load_preset("common_cause"))["soil_quality"][0][0]
    'confounder'
    """
    G = build_graph(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    de_x, de_y = nx.descendants(G, x), nx.descendants(G, y)
    an_x, an_y = nx.ancestors(G, x), nx.ancestors(G, y)
    an_y_without_x = nx.ancestors(nx.restricted_view(G, [x], []), y)
    de_x_not_via_y = nx.descendants(nx.restricted_view(G, [y], []), x)
    confounders = [c for c in scenario.names if c not in (x, y) and c in an_x and c in an_y_without_x]
    colliders: dict[str, PathInfo] = {}
    for path in _paths(G, x, y):
        if not path.causal:
            for c in path.colliders():
                colliders.setdefault(c, path)
    roles: dict[str, list[tuple[str, str]]] = {}
    for v in scenario.names:
        if v in (x, y):
            continue
        found: list[tuple[str, str]] = []
        if v in an_x and v in an_y_without_x:
            found.append(
                (
                    "confounder",
                    f"{v} causes {x} ({_arrow_path(G, v, x)}) and {y} not only "
                    f"through {x} ({_arrow_path(G, v, y, avoid=x)})",
                )
            )
        if v in de_x and v in an_y:
            found.append(
                (
                    "mediator",
                    f"{v} lies on the causal path {_arrow_path(G, x, v)} -> "
                    f"{_arrow_path(G, v, y).split(' -> ', 1)[1]}",
                )
            )
        if v in de_x_not_via_y and v in de_y and v not in an_y:
            found.append(
                (
                    "common_effect",
                    f"{v} is a consequence of both {x} ({_arrow_path(G, x, v)}) and "
                    f"{y} ({_arrow_path(G, y, v)})",
                )
            )
        if v in de_x and v not in de_y and v not in an_y:
            found.append(
                (
                    "exposure_descendant",
                    f"{v} is a consequence of {x} ({_arrow_path(G, x, v)}) and does not affect {y}",
                )
            )
        if v in de_y and v not in de_x_not_via_y:
            found.append(("outcome_descendant", f"{v} is a consequence of {y} ({_arrow_path(G, y, v)})"))
        if v in an_x and v not in an_y_without_x:
            found.append(
                ("instrument", f"{v} causes {x} ({_arrow_path(G, v, x)}) and reaches {y} only through {x}")
            )
        if v in an_y and v not in an_x and v not in de_x:
            found.append(
                ("outcome_cause", f"{v} causes {y} ({_arrow_path(G, v, y)}) and has no directed path to {x}")
            )
        if v in colliders and v not in de_x:
            found.append(
                (
                    "pre_exposure_collider",
                    f"{v} is a common effect on the non-causal path {colliders[v].text}",
                )
            )
        proxied = [c for c in confounders if c in nx.ancestors(G, v)]
        if not found and proxied:
            found.append(
                (
                    "proxy_of_confounder",
                    f"{v} is a consequence of the confounder {proxied[0]} only (a proxy): adjusting for it "
                    "removes part, not all, of the confounding",
                )
            )
        if not found:
            found.append(("unrelated", f"{v} has no directed path to or from {x} or {y} that matters here"))
        roles[v] = found
    return roles


# --------------------------------------------------------------------------------------------------------
# Verdicts
# --------------------------------------------------------------------------------------------------------
def _path_through(G: nx.DiGraph, x: str, z: str, y: str) -> str:
    return f"{_arrow_path(G, x, z)} -> {_arrow_path(G, z, y).split(' -> ', 1)[1]}"


def _forbidden_reason(G: nx.DiGraph, x: str, y: str, z: str, cn: set[str]) -> str:
    de_y = nx.descendants(G, y)
    if z in cn:
        return f"adjusting for {z} blocks part of the effect ({_path_through(G, x, z, y)})"
    if z in de_y:
        without_y = nx.restricted_view(G, [y], [])
        if z in nx.descendants(without_y, x):
            x_side = nx.shortest_path(without_y, x, z)
            y_side = nx.shortest_path(G, y, z)
            joined = " -> ".join(x_side) + " <- " + " <- ".join(reversed(y_side[:-1]))
            return f"adjusting for {z}, a consequence of both, opens {joined}"
        return (
            f"adjusting for {z}, a consequence of the outcome ({_arrow_path(G, y, z)}), biases the estimate"
        )
    mediators = sorted(nx.ancestors(G, z) & cn - {y}, key=lambda m: len(nx.shortest_path(G, m, z)))
    via = mediators[0] if mediators else x
    return (
        f"adjusting for {z}, a consequence of the mediator {via} ({_arrow_path(G, via, z)}), distorts "
        f"the part of the effect through {via}"
    )


def _precision_notes(scenario: Scenario, adjust) -> list[str]:
    roles = find_roles(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    notes = []
    for z in adjust:
        names = [r for r, _ in roles.get(z, [])]
        if "instrument" in names and "confounder" not in names:
            notes.append(
                f"{z} causes {x} only: adjusting for it is expected to widen the SE (and to amplify "
                "any bias left by an unadjusted confounder)"
            )
        elif (
            "outcome_cause" in names
            and "confounder" not in names
            and nx.is_d_separator(build_graph(scenario), {z}, {x}, set())
        ):
            notes.append(f"{z} causes {y} only: adjusting for it is expected to narrow the SE")
    return notes


def judge(
    scenario: Scenario,
    adjust,
    *,
    target: str | None = None,
    exposure: str | None = None,
    outcome: str | None = None,
) -> Verdict:
    """Is ``adjust`` a valid adjustment set for the target effect of the exposure on the outcome?

    Parameters
    ----------
    scenario : Scenario
    adjust : iterable of str
        Variables the regression adjusts for (besides the exposure).
    target : {"total", "direct"}, optional
        Defaults to the scenario's question. ``"total"`` uses the adjustment criterion (Shpitser et al.
        2010; Perkovic et al. 2018); ``"direct"`` the single-door criterion (Pearl 2009, Thm 5.3.1).
    exposure, outcome : str, optional
        Another pair than the question's (used for the direct effects of ``question.also`` variables).

    Returns
    -------
    Verdict

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> judge(sc, []).valid, judge(sc, ["soil_quality"]).valid
    (False, True)
    >>> judge(sc, []).reasons[0]
    'leaves the non-causal path fertiliser <- soil_quality -> wheat_yield open'
    """
    G = build_graph(scenario)
    x = exposure or scenario.question.exposure
    y = outcome or scenario.question.outcome
    target = target or scenario.question.target
    adjust = [z for z in adjust if z != x]
    zset = set(adjust)
    paths = _paths(G, x, y)
    open_paths = [p for p in paths if is_path_open(G, p, zset)]
    blocked_paths = [p for p in paths if p not in open_paths]
    reasons: list[str] = []
    if target == "direct":
        de_y = nx.descendants(G, y)
        bad = [z for z in adjust if z in de_y]
        for z in bad:
            reasons.append(
                f"adjusting for {z}, a consequence of the outcome ({_arrow_path(G, y, z)}), "
                "biases the direct effect"
            )
        H = nx.DiGraph(G)
        if H.has_edge(x, y):
            H.remove_edge(x, y)
        separated = _separated(H, x, y, zset)
        for p in open_paths:
            if p.nodes == (x, y):
                continue
            if p.causal:
                reasons.append(
                    f"leaves the indirect path {p.text} open: it carries effect not through the direct arrow"
                )
            else:
                reasons.append(_open_reason(G, p, zset))
        valid = separated and not bad
        if valid:
            reasons.insert(0, f"blocks every path between {x} and {y} other than the arrow {x} -> {y}")
        return Verdict(valid, reasons, _precision_notes(scenario, adjust), open_paths, blocked_paths)

    cn = _causal_nodes(G, x, y)
    forb = forbidden_set(G, x, y)
    bad = [z for z in adjust if z in forb]
    for z in bad:
        reasons.append(_forbidden_reason(G, x, y, z, cn))
    for p in open_paths:
        if not p.causal and not (set(p.nodes) & set(bad)):
            reasons.append(_open_reason(G, p, zset))
    valid = not bad and _separated(_backdoor_graph(G, x, y), x, y, zset)
    if valid:
        non_causal = [p for p in paths if not p.causal]
        if non_causal:
            reasons.insert(
                0,
                "blocks every non-causal path ("
                + "; ".join(p.text for p in non_causal[:3])
                + ("; ..." if len(non_causal) > 3 else "")
                + ")",
            )
        else:
            reasons.insert(0, f"there is no non-causal path between {x} and {y} to block")
        if cn:
            reasons.append("leaves every causal path open")
    elif not reasons:
        reasons.append("leaves a non-causal path open through the adjusted variables' descendants")
    return Verdict(valid, reasons, _precision_notes(scenario, adjust), open_paths, blocked_paths)


SELECTION_REASON = (
    "the set is chosen from the data in each study: valid only in the studies whose chosen set is valid "
    "(see selected_valid_share)"
)


def judge_strategy(scenario: Scenario, strategy: Strategy) -> Verdict:
    """The verdict on a whole strategy: its adjustment set, any restriction, matching and selection rule.

    * Restricted variables are conditioned on: they join the adjustment set for d-separation. Restricting a
      continuous variable to a band only approximately conditions on it, which the reasons say.
    * Variables matched on exactly are conditioned on too when the model has no other covariate or also
      adjusts for them: matching balances them between exposure groups by design (Rosenbaum & Rubin 1983,
      from memory, for the balancing idea). The balance is marginal only: within levels of another adjusted
      covariate that is related to the exposure a matched variable is no longer balanced (the pairs were
      chosen by exposure), so a matched variable left out of a non-empty ``adjust`` does not count.
    * With a selection rule the set is chosen from the data in each study; the verdict is that of the full
      candidate set, with a reason saying so (the simulation reports the share of studies whose chosen set
      is valid).

    Parameters
    ----------
    scenario : Scenario
    strategy : Strategy

    Returns
    -------
    Verdict

    References
    ----------
    Pearl J. (2009). Causality, 2nd ed., Def. 3.3.1 (conditioning by restriction blocks paths as adjustment
    does).
    Rosenbaum P.R., Rubin D.B. (1983). The central role of the propensity score in observational studies for
    causal effects. Biometrika 70(1):41-55 (from memory: balancing scores, of which the matched covariates
    themselves are the finest).
    Mickey R.M., Greenland S. (1989). American Journal of Epidemiology 129(1):125-137.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> v = judge_strategy(sc, Strategy("band", (), restrict=(("soil_quality", (-0.5, 0.5)),)))
    >>> v.valid, v.reasons[0][:43]
    (False, 'restricting to a band of soil_quality only ')
    """
    adjust = tuple(strategy.adjust)
    exact = adjust + tuple(n for n, v in strategy.restrict if not isinstance(v, tuple) and n not in adjust)
    balanced = [n for n in strategy.match if not adjust or n in adjust]
    unbalanced = [n for n in strategy.match if n not in balanced]
    exact += tuple(n for n in balanced if n not in exact)
    bands = [n for n, v in strategy.restrict if isinstance(v, tuple) and n not in exact]
    verdict = judge(scenario, exact + tuple(bands))
    valid = verdict.valid
    reasons = list(verdict.reasons)
    if bands and valid and not judge(scenario, exact).valid:
        valid = False
        kept = [
            r for r in reasons if not r.startswith(("blocks every non-causal path", "leaves every causal"))
        ]
        reasons = [
            f"restricting to a band of {name} only approximately conditions on it: the confounding "
            f"through {name} that the band was meant to remove partly remains within the band"
            for name in bands
        ] + kept
    else:
        for name in bands:
            reasons.append(f"restricting to a band of {name} only approximately conditions on it")
    for name, value in strategy.restrict:
        if not isinstance(value, tuple):
            reasons.append(f"restricting to {name} = {value} conditions on {name} by design")
    for name in balanced:
        reasons.append(f"matching on {name} balances it between exposure groups by design")
    for name in unbalanced:
        reasons.append(
            f"matching on {name} balances it only marginally: within levels of {', '.join(adjust)} it is not "
            f"balanced, so it counts as conditioned on only if 'adjust' includes it too"
        )
    if strategy.selection is not None:
        reasons.append(SELECTION_REASON)
    return Verdict(valid, reasons, verdict.notes, verdict.open_paths, verdict.blocked_paths)


def _open_reason(G: nx.DiGraph, path: PathInfo, zset: set[str]) -> str:
    opened_by = [c for c in path.colliders() if c in zset or nx.descendants(G, c) & zset]
    if opened_by:
        c = opened_by[0]
        if c in zset:
            return f"adjusting for {c} opens {path.text}"
        via = sorted(nx.descendants(G, c) & zset)[0]
        return f"adjusting for {via}, a consequence of {c}, opens {path.text}"
    return f"leaves the non-causal path {path.text} open"


# --------------------------------------------------------------------------------------------------------
# Searches
# --------------------------------------------------------------------------------------------------------
def _is_valid(
    G: nx.DiGraph, x: str, y: str, zset: set[str], target: str, forb: set[str], H: nx.DiGraph
) -> bool:
    if target == "direct":
        if zset & nx.descendants(G, y):
            return False
    elif zset & forb:
        return False
    return _separated(H, x, y, zset)


def _search_setup(scenario: Scenario, target: str):
    G = build_graph(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    if target == "direct":
        H = nx.DiGraph(G)
        if H.has_edge(x, y):
            H.remove_edge(x, y)
        forb = nx.descendants(G, y) | {y}
    else:
        H = _backdoor_graph(G, x, y)
        forb = forbidden_set(G, x, y)
    return G, H, x, y, forb


@lru_cache(maxsize=256)
def _minimal_sets_cached(scenario: Scenario) -> tuple[tuple[tuple[str, ...], ...], str | None]:
    target = scenario.question.target
    G, H, x, y, forb = _search_setup(scenario, target)
    observed = set(scenario.observed_names) - {x, y}
    # Minimal separators lie inside the ancestors of X and Y (Tian, Paz & Pearl 1998).
    relevant = nx.ancestors(H, x) | nx.ancestors(H, y)
    candidates = sorted((observed & relevant) - forb, key=scenario.names.index)
    if len(candidates) > MAX_ENUMERATED_CANDIDATES:
        restricted = set(candidates) | {x, y}
        found = nx.find_minimal_d_separator(H, {x}, {y}, restricted=restricted)
        if found is None:
            return (), None
        ordered = tuple(sorted(found, key=scenario.names.index))
        return (ordered,), (
            f"{len(candidates)} candidate covariates: listing one minimal valid set, not all "
            f"(all are enumerated up to {MAX_ENUMERATED_CANDIDATES})"
        )
    separated, bit = _moral_separation(H, x, y)
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
    return tuple(found_sets), None


def _moral_separation(H: nx.DiGraph, x: str, y: str):
    """A fast test of ``Z d-separates x and y in H`` for every ``Z`` inside the ancestors of x and y.

    For such ``Z`` the ancestral set of ``{x, y} | Z`` is always ``An({x, y})``, so d-separation is plain
    separation in one fixed moral graph (Lauritzen et al. 1990, Networks 20:491-505): x and y are
    d-separated by Z iff every path between them in the moralised ancestral graph passes through Z. Nodes
    are bits of an integer; the test is a breadth-first search over bitmasks.

    Returns
    -------
    (separated, bit)
        ``separated(mask) -> bool`` for a bitmask of conditioning nodes, and the node-to-bit mapping.
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
    """A note when :func:`minimal_sets` did not enumerate every set, else None."""
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
    order = scenario.names.index
    if scenario.question.target == "direct":
        members = set(G.predecessors(y)) - {x}
        note = "the outcome's other parents (single-door criterion)"
    else:
        cn = _causal_nodes(G, x, y)
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
    ordered = tuple(sorted(members, key=order))
    latent = [m for m in ordered if not G.nodes[m]["observed"]]
    if not judge_any(scenario, ordered):
        return None, latent, "no valid adjustment set exists, even with the latent variables"
    if latent:
        return None, latent, f"the optimal set needs latent variables: {', '.join(latent)}"
    return ordered, [], note


def judge_any(scenario: Scenario, adjust) -> bool:
    """Validity of ``adjust`` ignoring whether its members are observed."""
    target = scenario.question.target
    G, H, x, y, forb = _search_setup(scenario, target)
    return _is_valid(G, x, y, set(adjust), target, forb, H)
