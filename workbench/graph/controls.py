"""Good, neutral and bad controls: the consequence of adjusting for each candidate covariate, alone and on top
of the optimal set.

For a candidate Z and a base set B (the empty set, or the optimal set without Z) the criterion of
:mod:`workbench.graph.criteria` is asked twice, for B and for B + {Z}, and the paths between the exposure
and the outcome are compared [1, 2]:

* **good**: B + {Z} is valid and B is not, or Z blocks a path B leaves open without opening another;
* **bad**: Z opens a path closed at a collider, blocks part of the effect (a forbidden variable), or, when
  confounding is left open, is a cause of the exposure only and so amplifies that bias [3];
* **neutral**: both sets are valid (or Z changes no path); for a linear-Gaussian graph with the
  large-sample SE ratio of B + {Z} to B (a precision gain below 1, a loss above 1).

Each consequence names the path concerned. For a direct-effect target the paths to block are all paths
other than the arrow X -> Y, indirect causal paths included.

References
----------
1. Cinelli C., Forney A., Pearl J. (2022). A Crash Course in Good and Bad Controls. Sociological Methods &
   Research.
2. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press. Def. 1.2.3, Def. 3.3.1, Thm 5.3.1.
3. Pearl J. (2010). On a class of bias-amplifying variables that endanger effect estimates. UAI.

Examples
--------
>>> from workbench import load_preset
>>> c = consequences(load_preset("m_bias"))
>>> c["show_rating"]["alone"].label, c["show_rating"]["with_optimal"].label
('bad', 'bad')
>>> c["show_rating"]["alone"].why
'supplement <- experience -> show_rating <- genetics -> milk_yield is closed at a collider; adjusting for show_rating opens it'
>>> c["experience"]["alone"].label
'neutral'
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from workbench.graph import linear
from workbench.graph.criteria import Criterion, criterion
from workbench.graph.paths import PathInfo, all_paths, is_path_open, path_through
from workbench.graph.search import minimal_sets, optimal_set
from workbench.scenario.model import Scenario

__all__ = ["LABELS", "Consequence", "consequence", "consequences"]

LABELS = ("good", "neutral", "bad")
"""The three verdicts on adjusting for one covariate."""


@dataclass(frozen=True)
class Consequence:
    """What adjusting for one covariate on top of a base set does.

    Attributes
    ----------
    label : {"good", "neutral", "bad"}
    why : str
        One sentence naming the path concerned.
    base : tuple of str
        The set it is added to.
    se_ratio : float or None
        Large-sample SE of the exposure's coefficient with the covariate over without it (linear-Gaussian
        graphs with both sets valid; None otherwise).

    Examples
    --------
    >>> Consequence("good", "blocks x <- c -> y", ()).to_dict()["label"]
    'good'
    """

    label: str
    why: str
    base: tuple[str, ...]
    se_ratio: float | None = None

    def to_dict(self) -> dict:
        """The JSON shape: label, why, base, se_ratio."""
        return {"label": self.label, "why": self.why, "base": list(self.base), "se_ratio": self.se_ratio}


def _relevant(paths: tuple[PathInfo, ...], crit: Criterion) -> list[PathInfo]:
    """The paths an adjustment set must block: non-causal ones (total effect), every path but the arrow
    X -> Y (direct effect)."""
    if crit.target == "direct":
        return [p for p in paths if p.nodes != (crit.exposure, crit.outcome)]
    return [p for p in paths if not p.causal]


def _se_ratio(scenario: Scenario, base: tuple[str, ...], z: str) -> float | None:
    if not scenario.is_linear_gaussian:
        return None
    sigma = linear.implied_covariance(scenario)
    q = scenario.question
    before = linear.population_regression(sigma, scenario.names, q.outcome, [q.exposure, *base])
    after = linear.population_regression(sigma, scenario.names, q.outcome, [q.exposure, *base, z])
    return float(after.se_factor / before.se_factor) if before.se_factor > 0 else None


def _neutral(scenario: Scenario, base: tuple[str, ...], z: str, valid: bool) -> Consequence:
    ratio = _se_ratio(scenario, base, z) if valid else None
    if ratio is None:
        return Consequence("neutral", f"adjusting for {z} opens and blocks no path: neutral for bias", base)
    change = "a precision gain" if ratio < 1 else "a precision loss"
    return Consequence(
        "neutral",
        f"neutral for bias; {change}: the large-sample SE is {ratio:.2f} times that without {z}",
        base,
        ratio,
    )


def _bad_forbidden(crit: Criterion, z: str, base: tuple[str, ...]) -> Consequence | None:
    G, x, y = crit.graph, crit.exposure, crit.outcome
    if z not in crit.forbidden:
        return None
    if crit.target == "total" and z in nx.ancestors(G, y):
        why = f"adjusting for {z} blocks part of the effect ({path_through(G, x, z, y)})"
        return Consequence("bad", why, base)
    without_y = nx.restricted_view(G, [y], [])
    if z in nx.descendants(G, y) and z in nx.descendants(without_y, x):
        x_side = " -> ".join(nx.shortest_path(without_y, x, z))
        y_side = " <- ".join(reversed(nx.shortest_path(G, y, z)[:-1]))
        why = f"{x_side} <- {y_side} is closed at the collider {z}; adjusting for {z} opens it"
        return Consequence("bad", why, base)
    if z in nx.descendants(G, y):
        why = f"{z} is a consequence of {y}: adjusting for it absorbs part of the effect"
        return Consequence("bad", why, base)
    why = f"{z} is a consequence of a mediator: adjusting for it distorts the effect through that mediator"
    return Consequence("bad", why, base)


def consequence(scenario: Scenario, z: str, base=()) -> Consequence:
    """The consequence of adjusting for ``z`` on top of the set ``base``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("two_exposures")
    >>> consequence(sc, "heating").label
    'good'
    >>> consequence(sc, "heating").why
    'removes the bias: adjusting for heating blocks lighting <- energy_budget -> heating -> tomato_yield, left open without it'
    """
    crit = criterion(scenario)
    G, x, y = crit.graph, crit.exposure, crit.outcome
    base = tuple(b for b in base if b != z)
    after = (*base, z)
    paths = _relevant(all_paths(G, x, y), crit)
    open_before = [p for p in paths if is_path_open(G, p, set(base))]
    open_after = [p for p in paths if is_path_open(G, p, set(after))]
    blocked = [p for p in open_before if p not in open_after]
    opened = [p for p in open_after if p not in open_before]
    valid_before, valid_after = crit.admits(base), crit.admits(after)
    forbidden = _bad_forbidden(crit, z, base)
    if forbidden is not None:
        return forbidden
    if opened:
        return Consequence(
            "bad", f"{opened[0].text} is closed at a collider; adjusting for {z} opens it", base
        )
    if blocked:
        texts = "; ".join(p.text for p in blocked[:2])
        if valid_after and not valid_before:
            return Consequence(
                "good", f"removes the bias: adjusting for {z} blocks {texts}, left open without it", base
            )
        rest = "; ".join(p.text for p in open_after[:2])
        tail = f", but {rest} stays open" if rest else ""
        return Consequence("good", f"adjusting for {z} blocks {texts}{tail}", base)
    if not valid_after and open_after and z in nx.ancestors(G, x):
        return Consequence(
            "bad",
            f"{z} causes {x} but is on no open path: with {open_after[0].text} left open, adjusting for it "
            "amplifies that bias",
            base,
        )
    return _neutral(scenario, base, z, valid_before and valid_after)


def consequences(scenario: Scenario) -> dict[str, dict[str, Consequence | None]]:
    """For every observed covariate, the consequence of adjusting for it alone (``"alone"``) and on top of
    the optimal valid set (``"with_optimal"``; the optimal set without it when it is a member). When the
    optimal set needs a latent variable the first minimal valid set of observed variables stands in for it;
    ``with_optimal`` is None when no observed set is valid.

    Examples
    --------
    >>> from workbench import load_preset
    >>> c = consequences(load_preset("common_cause"))["soil_quality"]
    >>> c["alone"].label, c["with_optimal"].label
    ('good', 'good')
    """
    q = scenario.question
    optimal, _, _ = optimal_set(scenario)
    if optimal is None:  # an unobserved optimal set: the first minimal valid set of observed variables
        minimal = minimal_sets(scenario)
        optimal = minimal[0] if minimal else None
    out: dict[str, dict[str, Consequence | None]] = {}
    for v in scenario.variables:
        if v.name in (q.exposure, q.outcome) or not v.observed:
            continue
        alone = consequence(scenario, v.name, ())
        with_optimal = consequence(scenario, v.name, optimal) if optimal is not None else None
        out[v.name] = {"alone": alone, "with_optimal": with_optimal}
    return out
