"""The interaction terms of a run: how well each ``interactions`` strategy estimates its product term.

A strategy with ``interactions = ["skill"]`` reports the population-averaged effect in the run's main table
(:mod:`workbench.engine.interactions`); the coefficient of its first exposure x covariate term is scored
here, one row per such strategy, so the power to detect the effect modification itself sits beside the
power for the averaged effect. The truth is the ``varies_with`` coefficient of that covariate on the arrow
exposure -> outcome (0 without one): the product term's value when the outcome's equation is the fitted
model; like the ``also`` figures, the arrow's own number. Intervals and tests are t with ``n - p``
degrees of freedom (``p`` the strategy's coefficients; classical SEs).

Examples
--------
>>> from workbench import load_preset, simulate
>>> result = simulate(load_preset("varying_effect"), replicates=100, seed=1)
>>> [(r["strategy"], r["term"], r["truth"]) for r in interaction_rows(result.scenario, result.arrays)]
[('interaction_skill', 'training x skill', 1.5)]
"""

from __future__ import annotations

import numpy as np

from workbench.engine.metrics import performance
from workbench.engine.ols import t_inference
from workbench.formatting.numbers import effect_digits
from workbench.formatting.tables import Column, Table, TableSpec

__all__ = ["INTERACTION_TABLE", "interaction_rows", "interaction_parts"]


def _digits(record) -> int:
    return effect_digits(record.get("emp_se"))


INTERACTION_TABLE = TableSpec(
    (
        Column("term", "term"),
        Column("strategy", "strategy"),
        Column("truth", "truth", align="right", digits=_digits),
        Column("mean", "mean", align="right", digits=_digits),
        Column("bias", "bias (MCSE)", align="right", mcse="bias_mcse", digits=_digits),
        Column("emp_se", "emp SE (MCSE)", align="right", mcse="emp_se_mcse", digits=_digits),
        Column("model_se", "model SE (MCSE)", align="right", mcse="model_se_mcse", digits=_digits),
        Column("coverage", "coverage (MCSE)", align="right", mcse="coverage_mcse"),
        Column("power", "power (MCSE)", align="right", mcse="power_mcse"),
    )
)
"""The interaction terms' table: one row per ``interactions`` strategy (its first product term)."""

_KEYS = ("mean", "bias", "bias_mcse", "emp_se", "emp_se_mcse", "model_se", "model_se_mcse", "coverage")
_KEYS += ("coverage_mcse", "power", "power_mcse", "n_ok")


def interaction_rows(scenario, arrays) -> list[dict]:
    """Performance of each ``interactions`` strategy's first product term (module notes).

    Parameters
    ----------
    scenario : Scenario
        The run's scenario, its strategies filled in.
    arrays : ReplicateArrays
        The run's per-replicate results (:func:`workbench.engine.replicates.run_replicates`).

    Returns
    -------
    list of dict
        ``strategy, term, truth`` and the measures of :func:`workbench.engine.metrics.performance` (``mean,
        bias, bias_mcse, emp_se, emp_se_mcse, model_se, model_se_mcse, coverage, coverage_mcse, power,
        power_mcse, n_ok``); empty when no strategy has interactions.
    """
    if arrays.interaction_estimate is None:
        return []
    q = scenario.question
    arrow = next((a for a in scenario.arrows if (a.source, a.target) == (q.exposure, q.outcome)), None)
    modifiers = dict(arrow.varies_with) if arrow is not None else {}
    rows = []
    for s, name in enumerate(arrays.strategies):
        strategy = scenario.strategy(name)
        if not strategy.interactions:
            continue
        covariate = strategy.interactions[0]
        est = arrays.interaction_estimate[:, s : s + 1]
        se = arrays.interaction_se[:, s : s + 1]
        low, high, p_value = t_inference(est, se, arrays.n - strategy.n_coefficients, arrays.alpha)
        truth = float(modifiers.get(covariate, 0.0))
        m = performance(est, se, low, high, p_value, truth, arrays.alpha)
        row = {"strategy": name, "term": f"{q.exposure} x {covariate}", "truth": truth}
        rows.append(row | {key: float(np.asarray(m[key])[0]) for key in _KEYS})
    return rows


def interaction_parts(scenario, arrays) -> list:
    """The interaction terms' table as a part of the run's report (:mod:`workbench.formatting.tables`), or
    nothing when no strategy has interactions."""
    rows = interaction_rows(scenario, arrays)
    if not rows:
        return []
    title = "Interaction terms: the first exposure x covariate coefficient (truth = the arrow's varies_with)"
    return [Table(INTERACTION_TABLE, tuple(rows), title)]
