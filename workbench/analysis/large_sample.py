"""Large-sample figures of graphs without a closed form: one large simulation per scenario, in batches.

A graph with a binary variable (or a strategy that restricts or matches) has no closed-form large-sample
estimate. :func:`simulated_large_sample` draws :data:`LARGE_SAMPLE_BATCHES` data sets of
:data:`LARGE_SAMPLE_BATCH_N` units from one fixed seed, fits every strategy on each
(:func:`workbench.analysis.estimate.estimate`), and reports per strategy

* the mean of the batch estimates (the large-sample estimate) and its Monte Carlo SE, the SD of the batch
  estimates over sqrt(batches);
* the empirical SE and the mean model SE of one batch, each times sqrt(batch size) (SE x sqrt(n));
* for a classical OLS fit, the ratio of the classical SE to the heteroskedasticity-consistent (sandwich,
  HC0) SE on all units together: the factor by which the classical SE is wrong in large samples, since the
  sandwich SE is consistent for the sampling SD whatever the variance of the errors (White 1980, from
  memory; MacKinnon & White 1985);
* the truth on the strategy's own scale (:func:`workbench.engine.truth.true_effect`) and its Monte Carlo SE.

Results are cached per scenario (a frozen, hashable dataclass), so :func:`workbench.analysis.check.check`
pays once per scenario and session.

References
----------
1. MacKinnon J.G., White H. (1985). Some heteroskedasticity-consistent covariance matrix estimators with
   improved finite sample properties. Journal of Econometrics 29:305-325.
2. Morris T.P., White I.R., Crowther M.J. (2019). Using simulation studies to evaluate statistical methods.
   Statistics in Medicine 38(11):2074-2102 (Monte Carlo SE of a mean of estimates).

Examples
--------
>>> from workbench import load_preset
>>> figures = simulated_large_sample(load_preset("binary_outcome"))
>>> round(figures["lpm_unadjusted"].estimate, 2), bool(figures["lpm_unadjusted"].mcse < 0.002)
(-0.06, True)
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd

from workbench.engine.threads import blas_threads
from workbench.engine.truth import estimand, model_kind, true_effect
from workbench.scenario.model import Scenario, Strategy

__all__ = [
    "LARGE_SAMPLE_BATCHES",
    "LARGE_SAMPLE_BATCH_N",
    "LARGE_SAMPLE_N",
    "LARGE_SAMPLE_SEED",
    "LargeSample",
    "classical_to_sandwich",
    "simulated_large_sample",
    "model_verdict",
    "se_note",
    "SE_RATIO_TOLERANCE",
    "model_word",
    "with_model_verdicts",
]

LARGE_SAMPLE_BATCHES = 48
"""Batches of the large simulation (their spread gives the Monte Carlo SE)."""
LARGE_SAMPLE_BATCH_N = 6_250
"""Units per batch."""
LARGE_SAMPLE_N = LARGE_SAMPLE_BATCHES * LARGE_SAMPLE_BATCH_N
"""Units of the large simulation in all."""
LARGE_SAMPLE_SEED = 20261202
"""Its seed (fixed, so that the figures are deterministic)."""


@dataclass(frozen=True)
class LargeSample:
    """One strategy's simulated large-sample figures (see the module notes).

    Attributes
    ----------
    estimate, mcse : float
    se_factor, emp_se_factor : float
        Mean model SE and empirical SE of one batch, times sqrt(batch size).
    se_ratio : float or None
        Classical over sandwich SE on all units (classical OLS fits only).
    truth, truth_mcse : float
        The truth on the strategy's scale and its Monte Carlo SE.
    """

    estimate: float
    mcse: float
    se_factor: float
    emp_se_factor: float
    se_ratio: float | None
    truth: float
    truth_mcse: float

    @property
    def bias(self) -> float:
        """Estimate minus truth."""
        return self.estimate - self.truth

    @property
    def bias_mcse(self) -> float:
        """The Monte Carlo SE of :attr:`bias` (the two errors taken as independent, which errs on the safe
        side)."""
        return float(np.hypot(self.mcse, self.truth_mcse))


def classical_to_sandwich(X: np.ndarray, y: np.ndarray) -> float:
    """The ratio of the classical OLS SE of the second column's coefficient to its sandwich (HC0) SE.

    ``X`` includes the intercept column; the second column is the exposure.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> x = rng.normal(size=200_000)
    >>> y = x + rng.normal(size=x.size)                       # constant error variance: ratio near 1
    >>> X = np.column_stack([np.ones_like(x), x])
    >>> bool(abs(classical_to_sandwich(X, y) - 1) < 0.01)
    True
    >>> y = x + np.abs(x) * rng.normal(size=x.size)            # variance grows with |x|: classical too small
    >>> bool(classical_to_sandwich(X, y) < 0.7)
    True
    """
    return _ratio_in_blocks(lambda a, b: (X[a:b], y[a:b]), len(y))


_RATIO_BLOCK = 2**15


def _ratio_in_blocks(block, n: int) -> float:
    """:func:`classical_to_sandwich` from row blocks ``block(start, stop) -> (X, y)``: two passes, first the
    cross-products, then the residuals' sums, so no product of all rows is ever held."""
    xtx, xty = 0.0, 0.0
    for a in range(0, n, _RATIO_BLOCK):
        Xb, yb = block(a, min(a + _RATIO_BLOCK, n))
        xtx = xtx + Xb.T @ Xb
        xty = xty + Xb.T @ yb
    xtx_inv = np.linalg.inv(xtx)
    beta = xtx_inv @ xty
    ee, meat = 0.0, 0.0
    for a in range(0, n, _RATIO_BLOCK):
        Xb, yb = block(a, min(a + _RATIO_BLOCK, n))
        e = yb - Xb @ beta
        ee += float(e @ e)
        meat = meat + (Xb * (e**2)[:, None]).T @ Xb
    p = xtx_inv.shape[0]
    classical = ee / (n - p) * xtx_inv[1, 1]
    sandwich = (xtx_inv @ meat @ xtx_inv)[1, 1]
    return float(np.sqrt(classical / sandwich))


def _plain_ols(strategy: Strategy, binary_outcome: bool) -> bool:
    """A classical OLS fit on all units with a fixed set (the case whose SE the sandwich ratio checks)."""
    plain = not (strategy.selection or strategy.restrict or strategy.match)
    return plain and model_kind(strategy, binary_outcome) == "ols"


@lru_cache(maxsize=64)
def simulated_large_sample(scenario: Scenario) -> dict[str, LargeSample]:
    """Per strategy, the large simulation's figures (module notes); cached per scenario.

    Parameters
    ----------
    scenario : Scenario
        With its strategies filled in (:func:`workbench.graph.defaults.with_default_strategies`).

    Returns
    -------
    dict of str to LargeSample
    """
    # the simulation engine is loaded only for scenarios without a closed form
    from workbench.analysis.estimate import estimate
    from workbench.engine.generate import draw_rows
    from workbench.engine.streams import generator

    def draw(sc: Scenario, n: int, seed) -> pd.DataFrame:
        # the rows of engine.generate.draw (same stream), framed without a copy of the (variables, rows)
        # array the engine fills
        rows = draw_rows(sc, n, 1, generator(seed))[0]
        df = pd.DataFrame(rows, columns=sc.names, copy=False)
        df.attrs["latent"] = list(sc.latent_names)
        return df

    with blas_threads():  # many small least-squares fits: one BLAS thread (engine/threads.py)
        return _simulated_large_sample(scenario, draw, estimate)


def _simulated_large_sample(scenario: Scenario, draw, estimate) -> dict[str, LargeSample]:
    q = scenario.question
    m, k = LARGE_SAMPLE_BATCH_N, LARGE_SAMPLE_BATCHES
    data = draw(scenario, m * k, seed=LARGE_SAMPLE_SEED)
    names = [s.name for s in scenario.strategies]
    estimates = np.full((k, len(names)), np.nan)
    ses = np.full((k, len(names)), np.nan)
    for b in range(k):
        fits = estimate(scenario, data.iloc[b * m : (b + 1) * m]).set_index("strategy")
        estimates[b] = fits.loc[names, "estimate"].to_numpy(float)
        ses[b] = fits.loc[names, "se"].to_numpy(float)
    binary = scenario.outcome.is_binary
    out = {}
    for j, s in enumerate(scenario.strategies):
        _, scale, _ = estimand(model_kind(s, binary), scenario, s.adjust)
        truth = true_effect(scenario, scale)
        ratio = None
        if _plain_ols(s, binary):
            columns, outcome = [q.exposure, *s.adjust], data[q.outcome].to_numpy(float)

            def block(a, b, columns=columns, outcome=outcome):
                part = data.iloc[a:b][columns].to_numpy(float)
                return np.column_stack([np.ones(b - a), part]), outcome[a:b]

            ratio = _ratio_in_blocks(block, len(data))
        sd = float(np.nanstd(estimates[:, j], ddof=1))
        out[s.name] = LargeSample(
            estimate=float(np.nanmean(estimates[:, j])),
            mcse=sd / np.sqrt(np.isfinite(estimates[:, j]).sum()),
            se_factor=float(np.nanmean(ses[:, j])) * np.sqrt(m),
            emp_se_factor=sd * np.sqrt(m),
            se_ratio=ratio,
            truth=float(truth.value),
            truth_mcse=float(truth.mcse),
        )
    return out


SE_RATIO_TOLERANCE = 0.10
"""A model SE more than this share off the empirical SE in large samples is flagged."""


def model_verdict(
    set_valid: bool, bias: float | None, bias_mcse: float | None, truth: float | None, closed_form: bool
) -> tuple[bool | None, str]:
    """The second verdict of a strategy: does its model estimate the target, given a valid set?

    * a closed form (a linear-Gaussian graph): linear regression is the right model, so yes;
    * no large-sample figure: not judged (None);
    * an invalid set: not judged (None), the large-sample bias then mixes the set's and the model's;
    * otherwise ``misspecified`` (False) when the large-sample bias is more than 3 Monte Carlo SEs and more
      than 1% of the target away from 0, else yes.

    Examples
    --------
    >>> model_verdict(True, 0.0615, 0.0017, 0.1297, False)
    (False, 'misspecified: large-sample bias +0.0615 (47% of the target 0.13)')
    >>> model_verdict(True, 0.0007, 0.0015, 0.1297, False)[0]
    True
    """
    if closed_form:
        if set_valid:
            return (
                True,
                "the model estimates the target: a linear regression is right for a linear-Gaussian graph",
            )
        return True, "the model is right for a linear-Gaussian graph; the bias comes from the adjustment set"
    if bias is None or truth is None:
        return None, "not judged: no large-sample figure for this strategy"
    if not set_valid:
        return (
            None,
            "not judged: the adjustment set is invalid, so its large-sample bias is not the model's alone",
        )
    noise = 3 * (bias_mcse or 0.0)
    material = 0.01 * abs(truth) if truth else 0.0
    if abs(bias) > noise and abs(bias) > material:
        share = f" ({100 * abs(bias) / abs(truth):.0f}% of the target {truth:.3g})" if truth else ""
        return False, f"misspecified: large-sample bias {bias:+.3g}{share}"
    return True, f"the model estimates the target (large-sample bias {bias:+.2g}, within 3 Monte Carlo SEs)"


def se_note(se_ratio: float | None) -> str:
    """A note when the classical SE is wrong in large samples (ratio to the empirical, i.e. sandwich, SE).

    Examples
    --------
    >>> se_note(1.172)
    'the classical SE is 17% too large in large samples (ratio to the empirical SE 1.17)'
    >>> se_note(1.02)
    ''
    """
    if se_ratio is None or abs(se_ratio - 1) <= SE_RATIO_TOLERANCE:
        return ""
    way = "too large" if se_ratio > 1 else "too small"
    return (
        f"the classical SE is {100 * abs(se_ratio - 1):.0f}% {way} in large samples "
        f"(ratio to the empirical SE {se_ratio:.2f})"
    )


def model_word(row) -> str:
    """The model-verdict cell of a strategy's row: ``ok``, ``MISSPECIFIED`` or ``-`` (not judged).

    Examples
    --------
    >>> model_word({"model_ok": False}), model_word({"model_ok": None})
    ('MISSPECIFIED', '-')
    """
    value = row.get("model_ok")
    if value is None or (isinstance(value, float) and value != value):
        return "-"
    return "ok" if value else "MISSPECIFIED"


def with_model_verdicts(scenario: Scenario, table):
    """A run's table (a pandas DataFrame) with the graph's two verdicts per strategy and the large-sample figures
    (:func:`workbench.analysis.check.check`, cached per scenario for graphs without a closed form)."""
    from workbench.analysis.check import check

    by_name = {c.name: c for c in check(scenario).checks}
    table = table.copy()
    table["set_valid"] = table["valid"]
    table["model_ok"] = [by_name[n].model_ok if n in by_name else None for n in table["name"]]
    for key in ("large_sample_estimate", "large_sample_bias"):
        values = [getattr(by_name[n], key) if n in by_name else None for n in table["name"]]
        table[key] = [float("nan") if v is None else float(v) for v in values]
    return table
