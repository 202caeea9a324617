"""Verdicts on adjustment sets and whole strategies, with the reasons in plain words.

:func:`judge` answers "is Z a valid adjustment set for the target?" with the criteria of
:mod:`workbench.graph.criteria` (the adjustment criterion [2, 3] for the total effect, the single-door
criterion [1] for the direct effect) and says why, naming the paths a reader can follow:

* ``leaves the non-causal path x <- c -> y open``: a back-door path no member of Z blocks;
* ``adjusting for m blocks part of the effect (x -> m -> y)``: a member of the forbidden set;
* ``adjusting for k, a consequence of both, opens x -> k <- y``: conditioning on a collider opens a path.

It adds precision notes (:func:`workbench.graph.roles.precision_notes`). :func:`judge_strategy` extends the
verdict to a whole strategy: restriction and exact matching condition by design [1, Def. 3.3.1; 4], a band of
a continuous variable only approximately, and a data-driven selection rule is judged on its full candidate
set [5].

References
----------
1. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press. Def. 1.2.3, Def. 3.3.1, Thm 5.3.1.
2. Shpitser I., VanderWeele T., Robins J. (2010). On the validity of covariate adjustment for estimating
   causal effects. UAI.
3. Perkovic E., Textor J., Kalisch M., Maathuis M.H. (2018). Complete graphical characterization and
   construction of adjustment sets in Markov equivalence classes of ancestral graphs. JMLR 18(220).
4. Rosenbaum P.R., Rubin D.B. (1983). The central role of the propensity score in observational studies for
   causal effects. Biometrika 70(1):41-55 (from memory, for the balancing idea).
5. Mickey R.M., Greenland S. (1989). The impact of confounder selection criteria on effect estimation.
   American Journal of Epidemiology 129(1):125-137.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> judge(sc, ["soil_quality"]).reasons
['blocks every non-causal path (fertiliser <- soil_quality -> wheat_yield)', 'leaves every causal path open']
"""

from __future__ import annotations

from dataclasses import dataclass, field

import networkx as nx

from workbench.graph.build import build_graph
from workbench.graph.criteria import (
    backdoor_graph,
    causal_nodes,
    forbidden_set,
    is_separated,
    single_door_graph,
)
from workbench.graph.paths import PathInfo, all_paths, arrow_path, is_path_open, path_through
from workbench.graph.roles import precision_notes
from workbench.scenario.model import Scenario, Strategy

__all__ = ["Verdict", "judge", "judge_strategy", "SELECTION_REASON"]


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

    Examples
    --------
    >>> Verdict(True, ["blocks every non-causal path"]).valid
    True
    """

    valid: bool
    reasons: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    open_paths: list[PathInfo] = field(default_factory=list)
    blocked_paths: list[PathInfo] = field(default_factory=list)


SELECTION_REASON = (
    "the set is chosen from the data in each study: valid only in the studies whose chosen set is valid "
    "(see selected_valid_share)"
)


def _forbidden_reason(G: nx.DiGraph, x: str, y: str, z: str, cn: set[str]) -> str:
    """Why adjusting for the forbidden ``z`` biases the total effect."""
    de_y = nx.descendants(G, y)
    if z in cn:
        return f"adjusting for {z} blocks part of the effect ({path_through(G, x, z, y)})"
    if z in de_y:
        without_y = nx.restricted_view(G, [y], [])
        if z in nx.descendants(without_y, x):
            x_side = nx.shortest_path(without_y, x, z)
            y_side = nx.shortest_path(G, y, z)
            joined = " -> ".join(x_side) + " <- " + " <- ".join(reversed(y_side[:-1]))
            return f"adjusting for {z}, a consequence of both, opens {joined}"
        return f"adjusting for {z}, a consequence of the outcome ({arrow_path(G, y, z)}), biases the estimate"
    mediators = sorted(nx.ancestors(G, z) & cn - {y}, key=lambda m: len(nx.shortest_path(G, m, z)))
    via = mediators[0] if mediators else x
    return (
        f"adjusting for {z}, a consequence of the mediator {via} ({arrow_path(G, via, z)}), distorts "
        f"the part of the effect through {via}"
    )


def _open_reason(G: nx.DiGraph, path: PathInfo, zset: set[str]) -> str:
    """Why the non-causal ``path`` is open given ``zset``: left open, or opened by a collider in the set."""
    opened_by = [c for c in path.colliders() if c in zset or nx.descendants(G, c) & zset]
    if opened_by:
        c = opened_by[0]
        if c in zset:
            return f"adjusting for {c} opens {path.text}"
        via = sorted(nx.descendants(G, c) & zset)[0]
        return f"adjusting for {via}, a consequence of {c}, opens {path.text}"
    return f"leaves the non-causal path {path.text} open"


def _judge_direct(G: nx.DiGraph, x: str, y: str, adjust: list[str], open_paths) -> tuple[bool, list[str]]:
    """The single-door criterion (Pearl 2009, Thm 5.3.1) and its reasons."""
    zset = set(adjust)
    reasons: list[str] = []
    de_y = nx.descendants(G, y)
    bad = [z for z in adjust if z in de_y]
    for z in bad:
        reasons.append(
            f"adjusting for {z}, a consequence of the outcome ({arrow_path(G, y, z)}), biases the direct effect"
        )
    separated = is_separated(single_door_graph(G, x, y), x, y, zset)
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
    return valid, reasons


def _judge_total(
    G: nx.DiGraph, x: str, y: str, adjust: list[str], paths, open_paths
) -> tuple[bool, list[str]]:
    """The adjustment criterion (Shpitser et al. 2010; Perkovic et al. 2018) and its reasons."""
    zset = set(adjust)
    reasons: list[str] = []
    cn = causal_nodes(G, x, y)
    forb = forbidden_set(G, x, y)
    bad = [z for z in adjust if z in forb]
    for z in bad:
        reasons.append(_forbidden_reason(G, x, y, z, cn))
    for p in open_paths:
        if not p.causal and not (set(p.nodes) & set(bad)):
            reasons.append(_open_reason(G, p, zset))
    valid = not bad and is_separated(backdoor_graph(G, x, y), x, y, zset)
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
    return valid, reasons


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
    paths = all_paths(G, x, y)
    open_paths = [p for p in paths if is_path_open(G, p, zset)]
    blocked_paths = [p for p in paths if p not in open_paths]
    if target == "direct":
        valid, reasons = _judge_direct(G, x, y, adjust, open_paths)
    else:
        valid, reasons = _judge_total(G, x, y, adjust, paths, open_paths)
    return Verdict(valid, reasons, precision_notes(scenario, adjust), open_paths, blocked_paths)


def _conditioned_sets(strategy: Strategy) -> tuple[tuple[str, ...], list[str], list[str], list[str]]:
    """What a strategy conditions on: exactly (adjusted, restricted to a value, matched and balanced), only
    approximately (restricted to a band), and matched but not balanced within the adjusted covariates."""
    adjust = tuple(strategy.adjust)
    exact = adjust + tuple(n for n, v in strategy.restrict if not isinstance(v, tuple) and n not in adjust)
    balanced = [n for n in strategy.match if not adjust or n in adjust]
    unbalanced = [n for n in strategy.match if n not in balanced]
    exact += tuple(n for n in balanced if n not in exact)
    bands = [n for n, v in strategy.restrict if isinstance(v, tuple) and n not in exact]
    return exact, bands, balanced, unbalanced


def _design_reasons(strategy: Strategy, balanced: list[str], unbalanced: list[str]) -> list[str]:
    """The reasons a strategy's restriction to values, matching and selection rule add."""
    reasons = []
    for name, value in strategy.restrict:
        if not isinstance(value, tuple):
            reasons.append(f"restricting to {name} = {value} conditions on {name} by design")
    for name in balanced:
        reasons.append(f"matching on {name} balances it between exposure groups by design")
    for name in unbalanced:
        reasons.append(
            f"matching on {name} balances it only marginally: within levels of {', '.join(strategy.adjust)} "
            f"it is not balanced, so it counts as conditioned on only if 'adjust' includes it too"
        )
    if strategy.selection is not None:
        reasons.append(SELECTION_REASON)
    return reasons


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
    exact, bands, balanced, unbalanced = _conditioned_sets(strategy)
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
    reasons += _design_reasons(strategy, balanced, unbalanced)
    return Verdict(valid, reasons, verdict.notes, verdict.open_paths, verdict.blocked_paths)
