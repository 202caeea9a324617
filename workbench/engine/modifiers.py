"""Effect modification in the structural equations: arrows whose effect varies with a modifier.

An arrow ``source -> target`` with ``varies_with = { m = c }`` contributes ``(effect + c (m - E[m])) x
source`` to the (continuous) target's equation instead of ``effect x source``; with several modifiers the
terms ``c (m - E[m])`` add up. :func:`with_modifiers` adds these terms to a graph's
:class:`~workbench.engine.generate.Structure` and :func:`add_modification` applies them inside
:func:`~workbench.engine.generate.evaluate`, so every consumer of the equations (the raw engine, ``draw``,
the truth by simulated intervention, the large-sample figures) sees them.

``E[m]`` is the population mean of the modifier under the scenario (no intervention), fixed once per graph:

* in closed form when no modifier descends from (or is) the target of a modified arrow: a binary variable's
  mean is its ``proportion`` (its intercept is calibrated to it), a continuous one's is its ``baseline`` plus
  the sum of its arrows' effects times its causes' means (every equation upstream is linear);
* otherwise from :data:`MEAN_DRAWS` draws of the equations from :data:`MEAN_SEED`, the draws and seed of the
  truth's simulated intervention (:data:`workbench.engine.truth.TRUTH_DRAWS`, ``TRUTH_SEED``; the product
  terms upstream make the mean depend on covariances), modifier after modifier in the graph's order, each
  with the means found before it. Its Monte Carlo error (about ``SD(m) / 1000``) shifts every unit's effect
  by the same small amount.

Under an intervention the modifier keeps its observational mean, so the average effect of the exposure on
the outcome along a modified arrow is ``effect + sum(c (E[m | do] - E[m]))``: just ``effect`` when the
modifier does not descend from the exposure. The truth (:mod:`workbench.engine.truth`) is the simulated
intervention on these equations.

Examples
--------
>>> from workbench import loads_scenario
>>> sc = loads_scenario('''
... title = "Training whose effect grows with skill"
... [question]
... exposure = "training"
... outcome = "output"
... [variables.skill]
... baseline = 2.0
... [variables.training]
... [variables.output]
... [[arrows]]
... from = "skill"
... to = "output"
... effect = 0.0
... [[arrows]]
... from = "training"
... to = "output"
... effect = 1.0
... varies_with = { skill = 0.5 }
... ''')
>>> from workbench.engine.generate import structure, evaluate
>>> st = structure(sc)
>>> [(t.target, t.source, t.modifiers.tolist(), t.means.tolist()) for t in st.modified]
[(2, 1, [0], [2.0])]
>>> evaluate(st, np.array([[1.0], [1.0], [0.0]]), axis=0).ravel().tolist()  # skill 3, effect 1 + 0.5 x 1
[3.0, 1.0, 1.5]
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from workbench.engine.truth import TRUTH_DRAWS, TRUTH_SEED

__all__ = ["MEAN_DRAWS", "MEAN_SEED", "ModifiedArrow", "with_modifiers", "add_modification"]

MEAN_DRAWS = TRUTH_DRAWS
MEAN_SEED = TRUTH_SEED
_CHUNK = 2**16


@dataclass(frozen=True, eq=False)
class ModifiedArrow:
    """One modified arrow in index form.

    Attributes
    ----------
    target, source : int
        Variable indices (file order).
    modifiers : ndarray of int
    coefficients : ndarray of float
        ``c`` of each modifier.
    means : ndarray of float
        ``E[modifier]`` of each modifier (module notes).
    """

    target: int
    source: int
    modifiers: np.ndarray
    coefficients: np.ndarray
    means: np.ndarray


def add_modification(st, j: int, values: np.ndarray, scratch: np.ndarray) -> None:
    """Add the modification terms of the arrows into variable ``j`` to ``values[j]`` in place.

    ``values`` has the variables on axis 0 (``evaluate``'s layout); ``scratch`` has the shape of one
    variable's values.
    """
    for term in st.modified:
        if term.target != j:
            continue
        np.subtract(values[term.modifiers[0]], term.means[0], out=scratch)
        scratch *= term.coefficients[0]
        for m, c, mu in zip(term.modifiers[1:], term.coefficients[1:], term.means[1:], strict=True):
            scratch += c * (values[m] - mu)
        scratch *= values[term.source]
        values[j] += scratch


def _closed_form_means(st, variables) -> np.ndarray:
    """Population means of every variable when every equation is linear (module notes)."""
    means = np.zeros(st.k)
    for j in st.order:
        if st.binary[j]:
            means[j] = variables[j].proportion
        elif j in st.counts:
            means[j] = variables[j].rate  # its intercept is calibrated to this population mean
        else:
            idx, eff = st.parents[j]
            means[j] = st.intercept[j] + float(np.dot(eff, means[idx])) if len(idx) else st.intercept[j]
    return means


def _descendants(st, starts) -> set[int]:
    below = set(starts)
    for j in st.order:
        if any(int(i) in below for i in st.parents[j][0]):
            below.add(j)
    return below


def _simulated_mean(st, j: int) -> float:
    """The mean of variable ``j`` over :data:`MEAN_DRAWS` draws of the equations (its ancestors only)."""
    from workbench.engine.generate import evaluate

    ancestors = {j}
    for i in reversed(st.order):
        if i in ancestors:
            ancestors.update(int(p) for p in st.parents[i][0])
    partial = dataclasses.replace(st, order=tuple(i for i in st.order if i in ancestors))
    rng = np.random.default_rng(MEAN_SEED)
    rows = np.empty((st.k, _CHUNK))
    total = 0.0
    for _ in range(MEAN_DRAWS // _CHUNK):
        rng.standard_normal(out=rows)
        with np.errstate(over="ignore", under="ignore"):
            evaluate(partial, rows, axis=0, out=rows)
        total += float(rows[j].sum())
    return total / MEAN_DRAWS


def with_modifiers(st, variables: tuple, arrows: tuple):
    """``st`` with the modified arrows of ``arrows`` and their modifiers' means (module notes); ``st``
    itself when no arrow has ``varies_with``.

    Parameters
    ----------
    st : Structure
        The graph's equations with calibrated binary intercepts (the parser refuses a binary variable
        below a modified arrow, so the calibration never sees a modification term).
    variables, arrows : tuple
        The scenario's.
    """
    modified = [a for a in arrows if a.varies_with]
    if not modified:
        return st
    index = {name: i for i, name in enumerate(st.names)}
    means = _closed_form_means(st, variables)
    below = _descendants(st, [index[a.target] for a in modified])
    terms = [
        ModifiedArrow(
            index[a.target],
            index[a.source],
            np.array([index[m] for m, _ in a.varies_with], dtype=np.intp),
            np.array([c for _, c in a.varies_with], dtype=float),
            np.zeros(len(a.varies_with)),
        )
        for a in modified
    ]
    needed = sorted({int(m) for t in terms for m in t.modifiers}, key=st.order.index)
    out = dataclasses.replace(st, modified=tuple(terms))
    for m in needed:
        if m in below:  # its mean involves product terms upstream: from draws, with the means found so far
            means[m] = _simulated_mean(out, m)
        for t in terms:
            t.means[t.modifiers == m] = means[m]
    for t in terms:
        t.means.setflags(write=False)
    return out
