"""Non-linear arrows in the structural equations: square and step forms of a cause.

An arrow ``source -> target`` with ``form = "square"`` contributes ``effect x (source - E[source])^2`` to the
(continuous) target's equation instead of ``effect x source``; with ``form = "step"`` and ``at = a`` it
contributes ``effect x 1[source > a]``. :func:`with_forms` records these arrows in a graph's
:class:`~workbench.engine.generate.Structure` (their linear effect set to 0) and :func:`add_forms` adds their
terms inside :func:`~workbench.engine.generate.evaluate`, so every consumer of the equations (the raw engine,
``draw``, the truth by simulated intervention, the large-sample figures) sees them.

``E[source]`` is the population mean of the cause under the scenario (no intervention), fixed once per
graph, as :mod:`workbench.engine.modifiers` fixes a modifier's mean:

* in closed form when no ancestor of the cause (nor the cause) is the target of a non-linear or modified
  arrow: a continuous variable's mean is its ``baseline`` plus the sum of its arrows' effects times its
  causes' means, a binary one's its ``proportion`` (the parser refuses a binary cause and a binary variable
  below a non-linear arrow, so binary variables only appear upstream);
* otherwise from :data:`~workbench.engine.modifiers.MEAN_DRAWS` draws of the equations from
  :data:`~workbench.engine.modifiers.MEAN_SEED` (the truth's draws and seed), cause after cause in the
  graph's order, each with the means found before it.

Under an intervention the centre stays the observational mean, so shifting a cause moves the square term
of every unit by ``effect x ((c + d - E[c])^2 - (c - E[c])^2)``: the average effect of a unit shift along a
square arrow is ``effect x (2 (E[c | do] - E[c]) + 1)`` times the shift's reach, which depends on the size of
the shift. The truth (:mod:`workbench.engine.truth`) is the simulated intervention on these equations, a
shift of 1 for a continuous exposure.

Examples
--------
>>> from workbench import loads_scenario
>>> sc = loads_scenario('''
... title = "Machine age and downtime"
... [question]
... exposure = "servicing"
... outcome = "downtime"
... [variables.age]
... baseline = 5.0
... [variables.servicing]
... [variables.downtime]
... [[arrows]]
... from = "age"
... to = "downtime"
... effect = 0.5
... form = "square"
... [[arrows]]
... from = "servicing"
... to = "downtime"
... effect = 1.0
... ''')
>>> from workbench.engine.generate import structure, evaluate
>>> st = structure(sc)
>>> [(t.target, t.source, t.form, t.centre) for t in st.forms]
[(2, 0, 'square', 5.0)]
>>> evaluate(st, np.array([[2.0], [0.0], [0.0]]), axis=0).ravel().tolist()  # age 7: 0.5 x (7 - 5)^2
[7.0, 0.0, 2.0]
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from workbench.engine.modifiers import MEAN_DRAWS, MEAN_SEED

__all__ = ["FormArrow", "ancestors", "with_forms", "add_forms", "direct_step_effect"]

_CHUNK = 2**16


@dataclass(frozen=True)
class FormArrow:
    """One non-linear arrow in index form.

    Attributes
    ----------
    target, source : int
        Variable indices (file order).
    form : {"square", "step"}
    effect : float
    centre : float
        ``E[source]`` for a square form (module notes), the threshold ``at`` for a step.
    """

    target: int
    source: int
    form: str
    effect: float
    centre: float


def add_forms(st, j: int, values: np.ndarray, scratch: np.ndarray) -> None:
    """Add the terms of the non-linear arrows into variable ``j`` to ``values[j]`` in place.

    ``values`` has the variables on axis 0 (``evaluate``'s layout); ``scratch`` has the shape of one
    variable's values.
    """
    for term in st.forms:
        if term.target != j:
            continue
        if term.form == "square":
            np.subtract(values[term.source], term.centre, out=scratch)
            np.square(scratch, out=scratch)
            scratch *= term.effect
            values[j] += scratch
        else:
            np.greater(values[term.source], term.centre, out=scratch, casting="unsafe")
            scratch *= term.effect
            values[j] += scratch


def ancestors(st, j: int) -> set[int]:
    """Variable ``j`` and every variable above it in the structure ``st`` (indices)."""
    found = {j}
    for i in reversed(st.order):
        if i in found:
            found.update(int(p) for p in st.parents[i][0])
    return found


def _closed_form_mean(st, variables, j: int) -> float:
    """The mean of variable ``j`` when every equation above it is linear (module notes)."""
    means: dict[int, float] = {}
    for i in st.order:
        if st.binary[i]:
            means[i] = variables[i].proportion
        elif i in st.counts:
            means[i] = variables[i].rate  # its intercept is calibrated to this population mean
        else:
            idx, eff = st.parents[i]
            means[i] = float(st.intercept[i]) + sum(
                float(e) * means[int(p)] for p, e in zip(idx, eff, strict=True)
            )
        if i == j:
            break
    return means[j]


def _simulated_mean(st, j: int) -> float:
    """The mean of variable ``j`` over :data:`MEAN_DRAWS` draws of the equations (its ancestors only)."""
    from workbench.engine.generate import evaluate

    above = ancestors(st, j)
    partial = dataclasses.replace(st, order=tuple(i for i in st.order if i in above))
    rng = np.random.default_rng(MEAN_SEED)
    rows = np.empty((st.k, _CHUNK))
    total = 0.0
    for _ in range(MEAN_DRAWS // _CHUNK):
        rng.standard_normal(out=rows)
        with np.errstate(over="ignore", under="ignore"):
            evaluate(partial, rows, axis=0, out=rows)
        total += float(rows[j].sum())
    return total / MEAN_DRAWS


def with_forms(st, variables: tuple, arrows: tuple):
    """``st`` with the non-linear arrows of ``arrows`` (their linear effect set to 0 in ``st.parents``) and
    the means of the square arrows' causes; ``st`` itself when every arrow is linear.

    Parameters
    ----------
    st : Structure
        The graph's equations with calibrated binary intercepts and modified arrows
        (:func:`workbench.engine.modifiers.with_modifiers`).
    variables, arrows : tuple
        The scenario's.
    """
    bent = [a for a in arrows if a.form != "linear"]
    if not bent:
        return st
    index = {name: i for i, name in enumerate(st.names)}
    parents = list(st.parents)
    for a in bent:
        idx, eff = parents[index[a.target]]
        eff = eff.copy()
        eff[idx == index[a.source]] = 0.0
        parents[index[a.target]] = (idx, eff)
    out = dataclasses.replace(st, parents=tuple(parents))
    special = {index[a.target] for a in bent} | {t.target for t in st.modified}
    terms = []
    for a in sorted(bent, key=lambda a: st.order.index(index[a.source])):
        j = index[a.source]
        centre = a.at
        if a.form == "square":
            if ancestors(st, j) & special:  # the cause's mean involves non-linear terms upstream
                centre = _simulated_mean(dataclasses.replace(out, forms=tuple(terms)), j)
            else:
                centre = _closed_form_mean(st, variables, j)
        terms.append(FormArrow(index[a.target], j, a.form, float(a.effect), float(centre)))
    order = {(index[a.target], index[a.source]): i for i, a in enumerate(arrows)}
    terms.sort(key=lambda t: order[(t.target, t.source)])
    return dataclasses.replace(out, forms=tuple(terms))


def direct_step_effect(scenario) -> tuple[float, float] | None:
    """The direct effect of a unit shift of the exposure through a step arrow exposure -> outcome, with its
    Monte Carlo SE: ``effect x P(at - 1 < X <= at)`` over :data:`~workbench.engine.modifiers.MEAN_DRAWS`
    draws of the exposure (its own distribution under the scenario); None when that arrow is not a step.

    A square arrow needs no draws: with its centre at ``E[X]`` a unit shift changes ``(X - E[X])^2`` by
    ``2 (X - E[X]) + 1``, whose mean is 1, so the direct effect is the arrow's ``effect``.

    Examples
    --------
    >>> from workbench import loads_scenario
    >>> sc = loads_scenario('title = "t"\\n[question]\\nexposure = "dose"\\noutcome = "response"\\n'
    ...     'target = "direct"\\n[variables.dose]\\n[variables.response]\\n[[arrows]]\\nfrom = "dose"\\n'
    ...     'to = "response"\\neffect = 2.0\\nform = "step"\\nat = 0.5\\n')
    >>> value, mcse = direct_step_effect(sc)
    >>> bool(abs(value - 2.0 * 0.38292) < 4 * mcse)  # 2 (Phi(0.5) - Phi(-0.5))
    True
    """
    from workbench.engine.generate import evaluate, structure

    q = scenario.question
    arrow = next((a for a in scenario.arrows if a.source == q.exposure and a.target == q.outcome), None)
    if arrow is None or arrow.form != "step":
        return None
    st = structure(scenario)
    j = st.index(q.exposure)
    partial = dataclasses.replace(st, order=tuple(i for i in st.order if i in ancestors(st, j)))
    rng = np.random.default_rng(MEAN_SEED)
    rows = np.empty((st.k, _CHUNK))
    total = 0.0
    for _ in range(MEAN_DRAWS // _CHUNK):
        rng.standard_normal(out=rows)
        with np.errstate(over="ignore", under="ignore"):
            evaluate(partial, rows, axis=0, out=rows)
        crossed = (rows[j] > arrow.at - 1.0) & (rows[j] <= arrow.at)
        total += float(crossed.sum())
    share = total / MEAN_DRAWS
    return float(arrow.effect * share), float(abs(arrow.effect) * np.sqrt(share * (1 - share) / MEAN_DRAWS))
