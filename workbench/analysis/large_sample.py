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

from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

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
    from workbench.engine.generate import draw_rows
    from workbench.engine.streams import generator

    m, k = LARGE_SAMPLE_BATCH_N, LARGE_SAMPLE_BATCHES
    with blas_threads():  # many small least-squares fits: one BLAS thread (engine/threads.py)
        # the rows of engine.generate.draw (same stream), as the (variables, rows) array the engine fills
        raw = draw_rows(scenario, m * k, 1, generator(LARGE_SAMPLE_SEED))[0].T
        binary = scenario.outcome.is_binary
        plain = [s for s in scenario.strategies if _plain_ols(s, binary)]
        others = [s for s in scenario.strategies if not _plain_ols(s, binary)]
        figures = _plain_batches(scenario, raw, plain, m, k) if plain else {}
        if others:
            figures.update(_fitted_batches(scenario, raw, others, m, k))
    out = {}
    for s in scenario.strategies:
        estimates, ses, ratio = figures[s.name]
        _, scale, _ = estimand(model_kind(s, binary), scenario, s.adjust)
        truth = true_effect(scenario, scale)
        finite = estimates[np.isfinite(estimates)]  # every batch fails for a constant regressor
        sd = float(np.std(finite, ddof=1)) if finite.size > 1 else float("nan")
        out[s.name] = LargeSample(
            estimate=float(np.mean(finite)) if finite.size else float("nan"),
            mcse=sd / np.sqrt(finite.size) if finite.size else float("nan"),
            se_factor=float(np.mean(ses[np.isfinite(ses)])) * np.sqrt(m) if finite.size else float("nan"),
            emp_se_factor=sd * np.sqrt(m),
            se_ratio=ratio,
            truth=float(truth.value),
            truth_mcse=float(truth.mcse),
        )
    return out


def _fitted_batches(scenario: Scenario, raw: np.ndarray, strategies, m: int, k: int) -> dict:
    """Batch estimates and SEs of the strategies that need their own fit (restriction, matching, selection,
    a binary outcome's linear probability or logistic model), by :func:`workbench.analysis.estimate.estimate`
    on each batch: ``{name: (estimates, ses, None)}``."""
    import pandas as pd

    from workbench.analysis.estimate import estimate

    # framed without a copy of the (variables, rows) array the engine fills
    data = pd.DataFrame(raw.T, columns=scenario.names, copy=False)
    data.attrs["latent"] = list(scenario.latent_names)
    only = replace(scenario, strategies=tuple(strategies))
    names = [s.name for s in strategies]
    estimates = np.full((k, len(names)), np.nan)
    ses = np.full((k, len(names)), np.nan)
    for b in range(k):
        fits = estimate(only, data.iloc[b * m : (b + 1) * m]).set_index("strategy")
        estimates[b] = fits.loc[names, "estimate"].to_numpy(float)
        ses[b] = fits.loc[names, "se"].to_numpy(float)
    return {name: (estimates[:, j], ses[:, j], None) for j, name in enumerate(names)}


def _plain_batches(scenario: Scenario, raw: np.ndarray, strategies, m: int, k: int) -> dict:
    """Batch estimates, classical SEs and the all-units SE ratio of the plain OLS strategies, all from
    cross-products: one batched product gives every batch's centred cross-product matrix of every variable,
    and each strategy is then a batched Cholesky fit of its block (:func:`workbench.engine.ols.fit_crossproducts`,
    the simulation's own fit; the same numbers as a QR fit per batch up to rounding, Golub & Van Loan 2013,
    sec. 5.3). ``{name: (estimates, ses, ratio)}``."""
    from workbench.engine.ols import fit_crossproducts

    names = list(scenario.names)
    q = scenario.question
    x, y = names.index(q.exposure), names.index(q.outcome)
    batches = raw.reshape(raw.shape[0], k, m).transpose(1, 0, 2)  # (batch, variable, row), no copy
    means = batches.mean(axis=2)
    S = np.matmul(batches, batches.transpose(0, 2, 1))
    S -= m * means[:, :, None] * means[:, None, :]
    # all units: the within-batch sums plus the between-batch term, so no large mean is subtracted twice
    mean = means.mean(axis=0)
    gap = means - mean
    total = S.sum(axis=0) + m * np.einsum("bi,bj->ij", gap, gap)
    out = {}
    for s in strategies:
        regressors = [x, *(names.index(v) for v in s.adjust)]
        fit = fit_crossproducts(S, m, y, regressors, names, wanted=[0])
        ratio = _sandwich_ratio(raw, total, mean, y, regressors)
        out[s.name] = (fit.coef[:, 0], fit.se[:, 0], ratio)
    return out


def _sandwich_ratio(raw: np.ndarray, total: np.ndarray, mean: np.ndarray, y: int, regressors) -> float:
    """:func:`classical_to_sandwich` on all units from their centred cross-products ``total`` and one pass
    over the rows of ``raw`` (variables, rows) for the residuals. The exposure's coefficient is
    ``sum_i c_i y_i`` with ``c_i = w . (x_i - mean)``, ``w`` the exposure's row of the inverse centred
    cross-product matrix, so its HC0 variance is ``sum_i c_i^2 e_i^2`` (White 1980, from memory)."""
    n = raw.shape[1]
    cols = np.asarray(regressors)
    try:
        inverse = np.linalg.inv(total[np.ix_(cols, cols)])
    except np.linalg.LinAlgError:  # a constant or collinear regressor (noise_sd = 0): no ratio to report
        return float("nan")
    beta = inverse @ total[cols, y]
    w = inverse[0]
    ee, meat = 0.0, 0.0
    for a in range(0, n, _RATIO_BLOCK):
        b = min(a + _RATIO_BLOCK, n)
        X = raw[cols, a:b] - mean[cols, None]
        e = (raw[y, a:b] - mean[y]) - beta @ X
        ee += float(e @ e)
        ce = (w @ X) * e
        meat += float(ce @ ce)
    classical = ee / (n - len(cols) - 1) * inverse[0, 0]
    return float(np.sqrt(classical / meat))


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
