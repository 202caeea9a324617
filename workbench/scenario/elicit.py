"""Effect sizes people can elicit: standardized arrows and a variable's R^2, converted to raw effects.

Two keys let a scenario state sizes on scales people can judge:

* on an arrow, ``standardized_effect = b*`` instead of ``effect``: the change in the target, in SDs of the
  target, per SD of the cause (a path coefficient, Wright 1934). All arrows into one target use the same
  kind. The target's total variance is then 1 (standardized arrows fix its unit), so its raw effects are
  ``b_i = b*_i / sd(cause_i)`` and its ``noise_sd`` is ``sqrt(1 - R^2)`` with ``R^2 = b*' R b*`` and ``R``
  the correlation matrix of its causes (Bollen 1989, ch. 2); ``noise_sd`` and ``r_squared`` may not be
  given for it.
* on a continuous variable, ``r_squared = R^2`` in (0, 1) instead of ``noise_sd``: the share of its variance
  explained by its causes, so ``noise_sd^2 = (1 - R^2) / R^2 * b' Sigma b`` with ``Sigma`` the covariance of
  its causes under raw effects.

Both are converted once, in the topological order of the graph, using the covariance the graph implies so
far (the linear recursion ``Cov(V_j, V_m) = sum_i b_ij Cov(V_i, V_m)``). The converted target must be
continuous, and its causes continuous or binary without causes (a Bernoulli(p) root, SD ``sqrt(p(1-p))``)
with no binary variable with causes among its ancestors: no closed form exists otherwise, and the file is
refused with a one-line located error. The converted values fill ``Arrow.effect`` and
``Variable.noise_sd``; ``Arrow.standardized`` and ``Variable.r_squared`` keep what the user wrote, so a
saved file writes the same keys back.

References
----------
1. Wright S. (1934). The method of path coefficients. Annals of Mathematical Statistics 5:161-215.
2. Bollen K.A. (1989). Structural Equations with Latent Variables. Wiley, ch. 2 and 4.

Examples
--------
>>> from workbench.scenario.parse import parse_scenario_text
>>> sc = parse_scenario_text('''
... title = "t"
... [question]
... exposure = "a"
... outcome = "b"
... [variables.a]
... noise_sd = 2.0
... [variables.b]
... [[arrows]]
... from = "a"
... to = "b"
... standardized_effect = 0.6
... ''')
>>> sc.arrows[0].effect, sc.arrows[0].standardized, sc.variable("b").noise_sd
(0.3, 0.6, 0.8)
"""

from __future__ import annotations

import dataclasses
import graphlib
import math
from typing import Any

import numpy as np

from workbench.errors import ScenarioError, shown
from workbench.scenario.fields import get_field
from workbench.scenario.limits import MAX_MAGNITUDE, MIN_NOISE_SD, check_magnitude
from workbench.scenario.model import Arrow, Variable

__all__ = [
    "read_arrow_effect",
    "read_r_squared",
    "resolve_elicited",
    "implied_moments",
    "standardized_effects",
]


def read_arrow_effect(table: dict, where: str) -> tuple[float, float | None]:
    """An arrow's ``effect`` or ``standardized_effect`` (exactly one): ``(effect, standardized)``, the
    effect 0.0 until :func:`resolve_elicited` converts a standardized one."""
    if "effect" in table and "standardized_effect" in table:
        raise ScenarioError("give either 'effect' or 'standardized_effect', not both", where=where)
    if "standardized_effect" in table:
        value = get_field(table, "standardized_effect", "number", where, required=True)
        check_magnitude(value, f"{where}.standardized_effect")
        return 0.0, float(value)
    value = get_field(table, "effect", "number", where, required=True)
    return check_magnitude(value, f"{where}.effect", what="larger effects overflow the simulation"), None


def read_r_squared(table: dict, where: str) -> float | None:
    """A continuous variable's ``r_squared``: in (0, 1), never together with ``noise_sd``."""
    value = get_field(table, "r_squared", "number", where)
    if value is None:
        return None
    place = f"{where}.r_squared"
    if "noise_sd" in table:
        raise ScenarioError(
            "give either 'r_squared' or 'noise_sd', not both (r_squared sets it)", where=place
        )
    if not 0.0 < value < 1.0:
        raise ScenarioError(f"must lie strictly between 0 and 1, got {shown(value)}", where=place)
    return float(value)


def _order(variables, arrows) -> list[str]:
    sorter = graphlib.TopologicalSorter({v.name: () for v in variables})
    for a in arrows:
        sorter.add(a.target, a.source)
    return list(sorter.static_order())


def implied_moments(variables, arrows) -> tuple[list[str], np.ndarray, list[bool]]:
    """The covariance the graph implies, exact where a closed form exists.

    Continuous variables follow the linear recursion; a binary variable without causes is Bernoulli(p),
    variance ``p(1-p)``, independent of everything before it. A binary variable with causes, a variable
    whose noise spreads with a covariate (``spread_with``), and every descendant of one, have no closed
    form here: their rows are NaN and their flags False.

    Returns
    -------
    names : list of str
        Variable names in file order.
    sigma : ndarray of shape (k, k)
    known : list of bool
        Per variable, whether its row of ``sigma`` is exact.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> names, sigma, known = implied_moments(sc.variables, sc.arrows)
    >>> round(float(sigma[1, 1]), 6), all(known)
    (1.36, True)
    """
    names = [v.name for v in variables]
    index = {name: i for i, name in enumerate(names)}
    by_name = {v.name: v for v in variables}
    sigma = np.full((len(names), len(names)), np.nan)
    known = [False] * len(names)
    done: list[int] = []
    for name in _order(variables, arrows):
        j = index[name]
        causes = [(index[a.source], a.effect) for a in arrows if a.target == name]
        v = by_name[name]
        unknown = v.type == "count" or v.is_binary and causes or getattr(v, "spread_with", ())
        if unknown or any(not known[i] for i, _ in causes):
            done.append(j)
            continue
        if v.is_binary:
            p = float(v.proportion)
            sigma[j, done] = sigma[done, j] = 0.0
            sigma[j, j] = p * (1.0 - p)
        else:
            idx = [i for i, _ in causes]
            b = np.array([e for _, e in causes])
            rows = b @ sigma[np.ix_(idx, done)] if idx else np.zeros(len(done))
            sigma[j, done] = sigma[done, j] = rows
            explained = float(b @ sigma[np.ix_(idx, idx)] @ b) if idx else 0.0
            sigma[j, j] = explained + v.noise_sd**2
        known[j] = True
        done.append(j)
    return names, sigma, known


def _refuse_unknown(name, into, arrows, known, index, key) -> None:
    for i, a in into:
        if not known[index[a.source]]:
            raise ScenarioError(
                f"'{a.source}' is binary with causes, a count, or descends from one: its SD has no closed form, "
                f"so the {key} of '{name}' cannot be converted; give raw effects and noise_sd",
                where=f"arrows[{i}].from",
            )


def _checked_noise(noise_sd: float, place: str) -> float:
    if not MIN_NOISE_SD <= noise_sd <= MAX_MAGNITUDE:
        raise ScenarioError(
            f"implies noise_sd = {noise_sd:.3g}, outside [{MIN_NOISE_SD:g}, {MAX_MAGNITUDE:g}]", where=place
        )
    return noise_sd


def _convert_standardized(v, into, data_table, sigma, index) -> tuple[list[Arrow], float]:
    """Raw effects and noise_sd of a target whose arrows are all standardized (total variance 1)."""
    where = f"variables.{v.name}"
    for key in ("noise_sd", "r_squared"):
        if key in data_table:
            raise ScenarioError(
                f"not allowed when the arrows into '{v.name}' are standardized (they fix its variance to 1)",
                where=f"{where}.{key}",
            )
    idx = [index[a.source] for _, a in into]
    sd = np.sqrt(np.diag(sigma)[idx])
    for (i, a), s in zip(into, sd, strict=True):
        if not s > 0:
            raise ScenarioError(
                f"'{a.source}' has variance 0; a standardized effect needs a varying cause",
                where=f"arrows[{i}].from",
            )
    beta = np.array([a.standardized for _, a in into])
    corr = sigma[np.ix_(idx, idx)] / np.outer(sd, sd)
    r2 = float(beta @ corr @ beta)
    if not r2 < 1.0 - MIN_NOISE_SD**2:
        raise ScenarioError(
            f"the standardized effects into '{v.name}' explain R^2 = {r2:.3g} of its variance; it must be "
            "below 1 (with correlated causes R^2 = b' R b, not the sum of squares)",
            where=f"arrows[{into[-1][0]}].standardized_effect",
        )
    raw = [
        dataclasses.replace(
            a, effect=check_magnitude(float(a.standardized / s), f"arrows[{i}].standardized_effect")
        )
        for (i, a), s in zip(into, sd, strict=True)
    ]
    return raw, _checked_noise(math.sqrt(1.0 - r2), f"{where}.noise_sd")


def _noise_for_r_squared(v, into, sigma, index) -> float:
    place = f"variables.{v.name}.r_squared"
    if not into:
        raise ScenarioError(f"'{v.name}' has no causes; r_squared needs arrows into it", where=place)
    idx = [index[a.source] for _, a in into]
    b = np.array([a.effect for _, a in into])
    explained = float(b @ sigma[np.ix_(idx, idx)] @ b)
    if not explained > 0:
        raise ScenarioError(f"the causes of '{v.name}' explain none of its variance (effects 0)", where=place)
    return _checked_noise(
        math.sqrt(explained * (1.0 - v.r_squared) / v.r_squared), f"variables.{v.name}.noise_sd"
    )


def _check_kinds(name: str, into, by_name) -> None:
    kinds = {a.standardized is None for _, a in into}
    if len(kinds) > 1:
        first = next(i for i, a in into if (a.standardized is None) != (into[0][1].standardized is None))
        raise ScenarioError(
            f"all arrows into '{name}' must use the same kind: 'effect' or 'standardized_effect'",
            where=f"arrows[{first}]",
        )
    if into and into[0][1].standardized is not None and not by_name[name].is_continuous:
        scale = "log odds" if by_name[name].is_binary else "log rate ratio"
        raise ScenarioError(
            f"'{name}' is {by_name[name].type}; standardized effects need a continuous target (give effect, "
            f"{scale})",
            where=f"arrows[{into[0][0]}].standardized_effect",
        )


def resolve_elicited(
    data: dict, variables: tuple[Variable, ...], arrows: tuple[Arrow, ...]
) -> tuple[tuple[Variable, ...], tuple[Arrow, ...]]:
    """Convert standardized arrows and ``r_squared`` into raw effects and ``noise_sd``, in topological order.

    Parameters
    ----------
    data : dict
        The TOML document (to see which keys each variable's table gives).
    variables, arrows
        As parsed, acyclic; standardized arrows carry effect 0.0.

    Returns
    -------
    variables, arrows
        With every ``effect`` and ``noise_sd`` raw; unchanged when no elicited key is used.

    Raises
    ------
    ScenarioError
        A located one-line message for a rule broken or a conversion without closed form.
    """
    if all(a.standardized is None for a in arrows) and all(v.r_squared is None for v in variables):
        return variables, arrows
    tables: dict[str, Any] = data.get("variables", {})
    by_name = {v.name: v for v in variables}
    arrows = list(arrows)
    for name in _order(variables, arrows):
        into = [(i, a) for i, a in enumerate(arrows, start=1) if a.target == name]
        _check_kinds(name, into, by_name)
        v = by_name[name]
        standardized = bool(into) and into[0][1].standardized is not None
        if not standardized and v.r_squared is None:
            continue
        current = tuple(by_name[n.name] for n in variables)
        names, sigma, known = implied_moments(current, arrows)
        index = {n: k for k, n in enumerate(names)}
        key = "standardized effects" if standardized else "r_squared"
        _refuse_unknown(name, into, arrows, known, index, key)
        if standardized:
            raw, noise_sd = _convert_standardized(v, into, tables.get(name, {}), sigma, index)
            for (i, _), a in zip(into, raw, strict=True):
                arrows[i - 1] = a
        else:
            noise_sd = _noise_for_r_squared(v, into, sigma, index)
        by_name[name] = dataclasses.replace(v, noise_sd=noise_sd)
    return tuple(by_name[v.name] for v in variables), tuple(arrows)


def standardized_effects(variables, arrows) -> list[float | None]:
    """Each arrow's standardized effect: the one the file gave, else ``effect * sd(cause) / sd(target)``
    from the implied covariance; None for a binary target or where no closed form exists.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> [round(b, 4) for b in standardized_effects(sc.variables, sc.arrows)]  # 0.6 / sqrt(1.36); 0.5 / sqrt(1.485); ...
    [0.5145, 0.4103, 0.2392]
    """
    names, sigma, known = implied_moments(variables, arrows)
    index = {n: k for k, n in enumerate(names)}
    binary = {v.name for v in variables if not v.is_continuous}  # binary and count targets: no SD scale
    out: list[float | None] = []
    for a in arrows:
        i, j = index[a.source], index[a.target]
        if a.standardized is not None:
            out.append(a.standardized)
        elif a.target in binary or not (known[i] and known[j]) or not sigma[j, j] > 0:
            out.append(None)
        else:
            out.append(float(a.effect * math.sqrt(sigma[i, i] / sigma[j, j])))
    return out
