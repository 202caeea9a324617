"""The role of each variable relative to the question (exposure X, outcome Y and target), and precision notes.

Roles explain verdicts; they never decide them (the criteria of :mod:`workbench.graph.criteria` do). The
classification follows the canonical graphs of Cinelli, Forney & Pearl (2022) [1], written in our own words.
Each role is read off ancestor and descendant sets of G and off the paths between X and Y that are open
when nothing is adjusted for (*open paths*, no collider on them):

1. *confounder*: a common cause, an ancestor of X and of Y by a path that avoids X;
2. *back-door link*: a non-collider on an open back-door path X <- ... -> Y that is not a common cause
   (models 2, 3, 5 and 6 of [1]); adjusting for it blocks that path, so it is a good control;
3. *mediator*: on a causal path X -> ... -> Y; *mediator descendant*: a consequence of a mediator off the
   causal paths (model 12);
4. *common effect*: a consequence of both X (by a path avoiding Y) and Y (model 16); *collider on a path*: a
   consequence of X that is a collider on a non-causal path (model 15); *pre-exposure collider*: a collider
   on a non-causal path that X does not cause (M-bias, model 7); *collider descendant*: a consequence of one
   of these colliders off the path;
5. *exposure descendant* / *outcome descendant*: a consequence of X only (model 14) / of Y (model 17);
6. *instrument*: a cause of X that reaches Y only through X and lies on no open back-door path (models 9
   and 10): neutral for bias, costs precision, amplifies any confounding left open [2];
7. *outcome cause*: a cause of Y with no directed path to or from X and on no open back-door path (models
   8 and 13): neutral for bias, gains precision;
8. *proxy of a confounder*: none of the above, a consequence of a confounder;
9. *unrelated*: none of the above.

A variable may hold several roles; each comes with a sentence saying why. For a **direct-effect** target
the causal paths other than the arrow X -> Y are paths to block, and the reasons say so (a mediator must
then be adjusted for).

References
----------
1. Cinelli C., Forney A., Pearl J. (2022). A Crash Course in Good and Bad Controls. Sociological Methods &
   Research (model numbers from memory).
2. Pearl J. (2010). On a class of bias-amplifying variables that endanger effect estimates. UAI.

Examples
--------
>>> from workbench import load_preset
>>> find_roles(load_preset("common_cause"))["soil_quality"][0][0]
'confounder'
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from workbench.graph.build import build_graph
from workbench.graph.paths import PathInfo, all_paths, arrow_path
from workbench.scenario.model import Scenario

__all__ = ["ROLES", "find_roles", "role_names", "precision_notes"]

#: Role names, in the order they are listed, with a short description.
ROLES = {
    "confounder": "a cause of the exposure and, not only through it, of the outcome",
    "back_door_link": "on an open back-door path without being a common cause: adjusting blocks the path",
    "mediator": "on a causal path from the exposure to the outcome",
    "mediator_descendant": "a consequence of a mediator, off the causal paths",
    "common_effect": "a consequence of both the exposure and the outcome",
    "collider_on_path": "a consequence of the exposure where two arrows meet on a non-causal path",
    "pre_exposure_collider": "a common effect on a non-causal path between exposure and outcome",
    "collider_descendant": "a consequence of a collider on a path between exposure and outcome",
    "exposure_descendant": "a consequence of the exposure only",
    "outcome_descendant": "a consequence of the outcome only",
    "instrument": "a cause of the exposure that reaches the outcome only through it, on no back-door path",
    "outcome_cause": "a cause of the outcome with no path to the exposure: it sharpens the estimate",
    "proxy_of_confounder": "a consequence of a confounder only: a noisy stand-in for it",
    "unrelated": "no path of consequence to the exposure or the outcome",
}


@dataclass(frozen=True)
class _Ancestry:
    """The ancestor and descendant sets, and the paths, the roles are read from."""

    G: nx.DiGraph
    x: str
    y: str
    direct: bool
    de_x: set[str]
    de_y: set[str]
    an_x: set[str]
    an_y: set[str]
    an_y_without_x: set[str]
    de_x_not_via_y: set[str]
    confounders: list[str]
    colliders: dict[str, PathInfo]
    links: dict[str, PathInfo]


def _ancestry(scenario: Scenario) -> _Ancestry:
    G = build_graph(scenario)
    q = scenario.question
    x, y = q.exposure, q.outcome
    an_x = nx.ancestors(G, x)
    an_y_without_x = nx.ancestors(nx.restricted_view(G, [x], []), y)
    confounders = [c for c in scenario.names if c not in (x, y) and c in an_x and c in an_y_without_x]
    colliders: dict[str, PathInfo] = {}
    links: dict[str, PathInfo] = {}
    for path in all_paths(G, x, y):
        if path.causal:
            continue
        found = path.colliders()
        for c in found:
            colliders.setdefault(c, path)
        if not found and path.arrows[0] == "<-":  # an open back-door path
            for v in path.nodes[1:-1]:
                links.setdefault(v, path)
    return _Ancestry(
        G,
        x,
        y,
        direct=q.target == "direct",
        de_x=nx.descendants(G, x),
        de_y=nx.descendants(G, y),
        an_x=an_x,
        an_y=nx.ancestors(G, y),
        an_y_without_x=an_y_without_x,
        de_x_not_via_y=nx.descendants(nx.restricted_view(G, [y], []), x),
        confounders=confounders,
        colliders=colliders,
        links=links,
    )


def _back_door_roles(v: str, a: _Ancestry) -> list[tuple[str, str]]:
    """Confounder and back-door link."""
    G, x, y = a.G, a.x, a.y
    if v in a.an_x and v in a.an_y_without_x:
        return [
            (
                "confounder",
                f"{v} causes {x} ({arrow_path(G, v, x)}) and {y} not only through {x} "
                f"({arrow_path(G, v, y, avoid=x)}): adjusting for it blocks the back-door path",
            )
        ]
    if v in a.links:
        return [
            (
                "back_door_link",
                f"{v} lies on the open back-door path {a.links[v].text} without being a common cause: "
                "adjusting for it blocks that path",
            )
        ]
    return []


def _effect_roles(v: str, a: _Ancestry) -> list[tuple[str, str]]:
    """Mediator, mediator descendant and the descendant roles."""
    G, x, y = a.G, a.x, a.y
    found: list[tuple[str, str]] = []
    if v in a.de_x and v in a.an_y:
        tail = arrow_path(G, v, y).split(" -> ", 1)[1]
        why = f"{v} lies on the causal path {arrow_path(G, x, v)} -> {tail}"
        if a.direct:
            why += ": for the direct effect that path must be blocked, so adjusting for it is needed"
        found.append(("mediator", why))
    elif v in a.de_x and v not in a.de_y:
        mediators = sorted((nx.ancestors(G, v) & a.de_x & a.an_y) - {y})
        if mediators:
            m = mediators[0]
            found.append(
                ("mediator_descendant", f"{v} is a consequence of the mediator {m} ({arrow_path(G, m, v)})")
            )
        elif v not in a.colliders:
            found.append(
                (
                    "exposure_descendant",
                    f"{v} is a consequence of {x} ({arrow_path(G, x, v)}) and does not affect {y}",
                )
            )
    if v in a.de_y and v not in a.de_x_not_via_y:
        found.append(("outcome_descendant", f"{v} is a consequence of {y} ({arrow_path(G, y, v)})"))
    return found


def _collider_roles(v: str, a: _Ancestry) -> list[tuple[str, str]]:
    """Common effect, collider on a path, pre-exposure collider and collider descendant."""
    G, x, y = a.G, a.x, a.y
    if v in a.de_x_not_via_y and v in a.de_y and v not in a.an_y:
        return [
            (
                "common_effect",
                f"{v} is a consequence of both {x} ({arrow_path(G, x, v)}) and {y} ({arrow_path(G, y, v)}): "
                f"adjusting for it opens a path closed at a collider",
            )
        ]
    if v in a.colliders:
        kind = "collider_on_path" if v in a.de_x else "pre_exposure_collider"
        return [
            (
                kind,
                f"two arrows meet at {v} on the non-causal path {a.colliders[v].text}, which is closed at "
                f"{v}: adjusting for {v} opens it",
            )
        ]
    below = sorted(c for c in a.colliders if c in nx.ancestors(G, v))
    if below and v not in a.an_y:
        c = below[0]
        return [
            (
                "collider_descendant",
                f"{v} is a consequence of {c} ({arrow_path(G, c, v)}), where the path {a.colliders[c].text} "
                f"is closed: adjusting for {v} opens it",
            )
        ]
    return []


def _side_roles(v: str, a: _Ancestry) -> list[tuple[str, str]]:
    """Instrument and outcome cause (only for variables on no open back-door path)."""
    G, x, y = a.G, a.x, a.y
    if v in a.links or v in a.an_y_without_x and v in a.an_x:
        return []
    if v in a.an_x and v not in a.an_y_without_x:
        return [
            (
                "instrument",
                f"{v} causes {x} ({arrow_path(G, v, x)}) and reaches {y} only through {x}: neutral for bias, "
                "it costs precision and amplifies any confounding left open",
            )
        ]
    if v in a.an_y and v not in a.an_x and v not in a.de_x:
        return [
            (
                "outcome_cause",
                f"{v} causes {y} ({arrow_path(G, v, y)}) and has no directed path to or from {x}: neutral "
                "for bias, it narrows the SE",
            )
        ]
    return []


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
    """The roles of every variable other than the exposure and the outcome, each with a one-sentence reason.

    A variable may carry several roles (a confounder can also be a collider on another path). The role
    names are the keys of :data:`ROLES`; they are relative to the question's exposure, outcome and target.

    Returns
    -------
    dict of str to list of (role, reason)

    Examples
    --------
    >>> from workbench import load_preset
    >>> [r for r, _ in find_roles(load_preset("m_bias"))["show_rating"]]
    ['pre_exposure_collider']
    >>> [r for r, _ in find_roles(load_preset("two_exposures"))["heating"]]
    ['back_door_link']
    """
    a = _ancestry(scenario)
    roles: dict[str, list[tuple[str, str]]] = {}
    for v in scenario.names:
        if v in (a.x, a.y):
            continue
        found = _back_door_roles(v, a) + _effect_roles(v, a) + _collider_roles(v, a) + _side_roles(v, a)
        roles[v] = found or [_fallback_role(v, a)]
    return roles


def role_names(scenario: Scenario) -> dict[str, list[str]]:
    """The role names of every variable other than the exposure and the outcome (no reasons).

    Examples
    --------
    >>> from workbench import load_preset
    >>> role_names(load_preset("mediator"))
    {'skill': ['mediator']}
    """
    return {v: [r for r, _ in found] for v, found in find_roles(scenario).items()}


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
    roles = role_names(scenario)
    x, y = scenario.question.exposure, scenario.question.outcome
    notes = []
    for z in adjust:
        names = roles.get(z, [])
        if "instrument" in names:
            notes.append(
                f"{z} causes {x} only: adjusting for it is expected to widen the SE (and to amplify "
                "any bias left by an unadjusted confounder)"
            )
        elif "outcome_cause" in names and nx.is_d_separator(build_graph(scenario), {z}, {x}, set()):
            notes.append(f"{z} causes {y} only: adjusting for it is expected to narrow the SE")
    return notes
