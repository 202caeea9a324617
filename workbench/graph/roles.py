"""The role of each variable relative to the exposure X and the outcome Y, and precision notes.

Roles explain verdicts; they never decide them (the criteria of :mod:`workbench.graph.criteria` do). Each
role is read off ancestor and descendant sets of G:

1. *confounder*: an ancestor of X and of Y by a path that avoids X;
2. *mediator*: a descendant of X and an ancestor of Y;
3. *common effect*: a descendant of X (by a path avoiding Y) and of Y, not an ancestor of Y;
4. *exposure descendant* / *outcome descendant*: a consequence of one of them only;
5. *instrument*: an ancestor of X that reaches Y only through X;
6. *outcome cause*: an ancestor of Y, neither an ancestor nor a descendant of X;
7. *pre-exposure collider*: a collider on a non-causal path, not a descendant of X (M-bias);
8. *proxy of a confounder*: none of the above, a descendant of a confounder;
9. *unrelated*: none of the above.

The good/bad/neutral reading of each role follows [1]; the precision notes follow its models 8 and 9 (an
outcome cause narrows the SE, an instrument widens it and amplifies a bias left by an unadjusted confounder,
[2]).

References
----------
1. Cinelli C., Forney A., Pearl J. (2022). A Crash Course in Good and Bad Controls. Sociological Methods &
   Research.
2. Pearl J. (2010). On a class of bias-amplifying variables that endanger effect estimates. UAI.

Examples
--------
>>> from workbench import load_preset
>>> find_roles(load_preset("common_cause"))["soil_quality"]
[('confounder', 'soil_quality causes fertiliser (soil_quality -> fertiliser) and wheat_yield
  not only through fertiliser (soil_quality -> wheat_yield)')]
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from workbench.graph.build import build_graph
from workbench.graph.paths import PathInfo, all_paths, arrow_path
from workbench.scenario.model import Scenario

__all__ = ["ROLES", "find_roles", "precision_notes"]

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
class _Ancestry:
    """The ancestor and descendant sets the roles are read from."""

    G: nx.DiGraph
    x: str
    y: str
    de_x: set[str]
    de_y: set[str]
    an_x: set[str]
    an_y: set[str]
    an_y_without_x: set[str]
    de_x_not_via_y: set[str]
    confounders: list[str]
    colliders: dict[str, PathInfo]


def _ancestry(scenario: Scenario) -> _Ancestry:
    G = build_graph(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    an_x = nx.ancestors(G, x)
    an_y_without_x = nx.ancestors(nx.restricted_view(G, [x], []), y)
    confounders = [c for c in scenario.names if c not in (x, y) and c in an_x and c in an_y_without_x]
    colliders: dict[str, PathInfo] = {}
    for path in all_paths(G, x, y):
        if not path.causal:
            for c in path.colliders():
                colliders.setdefault(c, path)
    return _Ancestry(
        G,
        x,
        y,
        de_x=nx.descendants(G, x),
        de_y=nx.descendants(G, y),
        an_x=an_x,
        an_y=nx.ancestors(G, y),
        an_y_without_x=an_y_without_x,
        de_x_not_via_y=nx.descendants(nx.restricted_view(G, [y], []), x),
        confounders=confounders,
        colliders=colliders,
    )


def _causal_roles(v: str, a: _Ancestry) -> list[tuple[str, str]]:
    """Confounder, mediator, common effect and the descendant roles of ``v``."""
    G, x, y = a.G, a.x, a.y
    found: list[tuple[str, str]] = []
    if v in a.an_x and v in a.an_y_without_x:
        found.append(
            (
                "confounder",
                f"{v} causes {x} ({arrow_path(G, v, x)}) and {y} not only "
                f"through {x} ({arrow_path(G, v, y, avoid=x)})",
            )
        )
    if v in a.de_x and v in a.an_y:
        found.append(
            (
                "mediator",
                f"{v} lies on the causal path {arrow_path(G, x, v)} -> {arrow_path(G, v, y).split(' -> ', 1)[1]}",
            )
        )
    if v in a.de_x_not_via_y and v in a.de_y and v not in a.an_y:
        found.append(
            (
                "common_effect",
                f"{v} is a consequence of both {x} ({arrow_path(G, x, v)}) and {y} ({arrow_path(G, y, v)})",
            )
        )
    if v in a.de_x and v not in a.de_y and v not in a.an_y:
        found.append(
            (
                "exposure_descendant",
                f"{v} is a consequence of {x} ({arrow_path(G, x, v)}) and does not affect {y}",
            )
        )
    if v in a.de_y and v not in a.de_x_not_via_y:
        found.append(("outcome_descendant", f"{v} is a consequence of {y} ({arrow_path(G, y, v)})"))
    return found


def _side_roles(v: str, a: _Ancestry) -> list[tuple[str, str]]:
    """Instrument, outcome cause and pre-exposure collider roles of ``v``."""
    G, x, y = a.G, a.x, a.y
    found: list[tuple[str, str]] = []
    if v in a.an_x and v not in a.an_y_without_x:
        found.append(
            ("instrument", f"{v} causes {x} ({arrow_path(G, v, x)}) and reaches {y} only through {x}")
        )
    if v in a.an_y and v not in a.an_x and v not in a.de_x:
        found.append(
            ("outcome_cause", f"{v} causes {y} ({arrow_path(G, v, y)}) and has no directed path to {x}")
        )
    if v in a.colliders and v not in a.de_x:
        found.append(
            ("pre_exposure_collider", f"{v} is a common effect on the non-causal path {a.colliders[v].text}")
        )
    return found


def _fallback_role(v: str, a: _Ancestry) -> tuple[str, str]:
    """The role of a variable that has none of the others: a proxy of a confounder, or unrelated."""
    proxied = [c for c in a.confounders if c in nx.ancestors(a.G, v)]
    if proxied:
        return (
            "proxy_of_confounder",
            f"{v} is a consequence of the confounder {proxied[0]} only (a proxy): adjusting for it "
            "removes part, not all, of the confounding",
        )
    return ("unrelated", f"{v} has no directed path to or from {a.x} or {a.y} that matters here")


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
    a = _ancestry(scenario)
    roles: dict[str, list[tuple[str, str]]] = {}
    for v in scenario.names:
        if v in (a.x, a.y):
            continue
        found = _causal_roles(v, a) + _side_roles(v, a)
        roles[v] = found or [_fallback_role(v, a)]
    return roles


def precision_notes(scenario: Scenario, adjust) -> list[str]:
    """Notes on what adjusting for each member of ``adjust`` is expected to do to the SE: an instrument
    widens it (and amplifies a bias left by an unadjusted confounder), an outcome cause independent of the
    exposure narrows it (Cinelli, Forney & Pearl 2022, models 8 and 9).

    Examples
    --------
    >>> from workbench import load_preset
    >>> precision_notes(load_preset("outcome_cause"), ["kitchen_temperature"])
    ['kitchen_temperature causes loaf_volume only: adjusting for it is expected to narrow the SE']
    """
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
