"""Fit every strategy of a scenario on one dataset: what a user runs on real data shaped like the scenario.

Each strategy regresses the outcome on an intercept, the exposure and its adjustment set:

* ``model = "ols"`` with a continuous outcome: least squares by a QR decomposition, classical SE, t interval
  and p-value with ``n - p`` degrees of freedom (as ``statsmodels`` ``OLS``);
* ``model = "ols"`` with a binary outcome: the linear probability model with HC3 robust SE and normal
  interval (as ``statsmodels`` ``OLS(...).fit(cov_type="HC3")``);
* ``model = "logit"``: logistic regression by Newton-Raphson, SE from the inverse information and normal
  interval (as ``statsmodels`` ``Logit``); with ``standardize = true`` the marginal contrast on the question's
  scale by standardisation over the rows, with a delta-method SE.

The estimates are only as good as the graph behind the strategies, which the data cannot confirm.

References
----------
1. Seber G.A.F., Lee A.J. (2003). Linear Regression Analysis, 2nd ed. Wiley, ch. 3.
2. Long J.S., Ervin L.H. (2000). Using heteroscedasticity consistent standard errors in the linear
   regression model. The American Statistician 54(3):217-224.
3. McCullagh P., Nelder J.A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall, sec. 4.4.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.engine.generate import draw
>>> sc = load_preset("common_cause")
>>> table = estimate(sc, draw(sc, 400, seed=5))
>>> list(table["strategy"]), list(table.columns[:4])
(['unadjusted', 'adjust_soil'], ['strategy', 'model', 'estimand', 'estimate'])
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.ols import crossproducts, ols_fit, select_covariates, selected_names, t_inference
from workbench.engine.truth import estimand, model_kind
from workbench.errors import ScenarioError
from workbench.scenario.model import Scenario

__all__ = ["estimate"]

COLUMNS = [
    "strategy",
    "model",
    "estimand",
    "estimate",
    "se",
    "ci_low",
    "ci_high",
    "p_value",
    "df",
    "n",
    "failure",
    "adjusted_for",
]


def _column(data: pd.DataFrame, name: str, binary: bool) -> np.ndarray:
    if name not in data.columns:
        raise ScenarioError(
            f"the data have no column '{name}' (columns: {', '.join(map(str, data.columns))})", where="data"
        )
    series = data[name]
    if pd.api.types.is_bool_dtype(series):
        series = series.astype(float)
    if not pd.api.types.is_numeric_dtype(series):
        raise ScenarioError(f"column '{name}' must be numeric, got dtype {series.dtype}", where="data")
    values = series.to_numpy(dtype=float, na_value=np.nan)
    missing = int(np.isnan(values).sum())
    if missing:
        raise ScenarioError(
            f"column '{name}' has {missing} missing value(s); remove or fill them first", where="data"
        )
    if not np.isfinite(values).all():
        raise ScenarioError(f"column '{name}' has infinite values", where="data")
    if binary and not np.isin(values, (0.0, 1.0)).all():
        raise ScenarioError(
            f"column '{name}' is binary in the scenario and must hold only 0 and 1", where="data"
        )
    return values


def estimate(scenario: Scenario, data: pd.DataFrame, alpha: float | None = None) -> pd.DataFrame:
    """Fit every strategy of ``scenario`` on ``data``.

    Parameters
    ----------
    scenario : Scenario
    data : pandas.DataFrame
        One column per variable the strategies use (the exposure, the outcome and every adjusted variable),
        numeric, without missing values. Other columns are ignored.
    alpha : float, optional
        Level of the intervals; default the scenario's.

    Returns
    -------
    pandas.DataFrame
        One row per strategy: ``strategy, model, estimand, estimate, se, ci_low, ci_high, p_value, df, n,
        failure, adjusted_for`` (``df`` is ``inf`` for normal intervals; ``n`` the rows used, fewer than the
        data's under a restriction; ``failure`` is None or why the fit failed, in which case the numbers are
        NaN; ``adjusted_for`` the covariates in the final model, for a selection rule the ones it kept).

    Notes
    -----
    A strategy with ``selection`` applies its rule to these data exactly as the simulation does in each
    study (:func:`workbench.engine.ols.select_covariates`) and reports the final model's naive SE and interval.
    A strategy with ``restrict`` keeps only the rows inside the restriction. A strategy with ``match`` then
    keeps, within each stratum of the matched variables, the first ``min(exposed, unexposed)`` exposed and
    unexposed rows in row order (the simulation's rule, ``docs/scenario-format.md``); ``n`` counts them.

    Raises
    ------
    ScenarioError
        A needed column is missing, not numeric, has missing values, or a binary one holds other values.

    References
    ----------
    Seber G.A.F., Lee A.J. (2003). Linear Regression Analysis, 2nd ed., ch. 3.

    Examples
    --------
    >>> from workbench import load_preset
    >>> estimate(load_preset("common_cause"), pd.DataFrame({"fertiliser": [1.0, 2.0]}))
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: data: the data have no column 'wheat_yield' (columns: fertiliser)
    """
    from workbench.engine.logistic import design_matrix, fit_logit_batch, standardized_contrast
    from workbench.engine.robust import ols_hc3_batch

    if not isinstance(data, pd.DataFrame):
        raise ScenarioError(f"must be a pandas DataFrame, got {type(data).__name__}", where="data")
    alpha = scenario.study.alpha if alpha is None else alpha
    q = scenario.question
    binary_outcome = scenario.outcome.is_binary
    needed = [q.exposure, q.outcome] + sorted(
        {v for s in scenario.strategies for v in (*s.adjust, *s.restricted, *s.match)}
    )
    columns = {name: _column(data, name, scenario.variable(name).is_binary) for name in needed}
    rows = []
    for s in scenario.strategies:
        kind = model_kind(s, binary_outcome)
        target = estimand(kind, scenario, s.adjust)[0]
        keep = _restriction_rows(columns, s.restrict, len(data))
        if s.match:
            keep = _matched_rows(columns, q.exposure, s.match, keep)
        used = {v: values[keep] for v, values in columns.items()} if s.restrict or s.match else columns
        n = int(keep.sum())
        failure = None
        adjusted_for = tuple(s.adjust)
        if s.selection is not None:
            adjusted_for, failure = _select(used, q.exposure, q.outcome, s, alpha)
        names = [q.exposure, *adjusted_for]
        X = np.column_stack([used[v] for v in names])
        y = used[q.outcome]
        p = len(names) + 1
        df = float("inf")
        if failure is not None:
            est = se = np.nan
        elif n < p + 1:
            failure = f"too few rows: n = {n} for {p} coefficients"
            est = se = np.nan
        elif kind == "ols":
            fit = ols_fit(X, y, names)
            est, se, df, failure = fit.coef[0], fit.se[0], float(fit.df), fit.failure
        elif kind == "lpm":
            design = design_matrix(np.column_stack([X, y])[None], 0, list(range(1, p - 1)))
            coef, robust_se, failed = ols_hc3_batch(design, y[None])
            est, se = coef[0, 1], robust_se[0, 1]
            if failed[0]:
                failure = "singular design or a row with leverage 1 (HC3 undefined)"
        else:
            rows_data = np.column_stack([X, y])[None]
            design = design_matrix(rows_data, 0, list(range(1, p - 1)))
            logit = fit_logit_batch(design, rows_data[:, :, p - 1])
            if logit.failed[0]:
                failure = str(logit.failure[0])
            if kind == "logit_std":
                e, v = standardized_contrast(
                    logit,
                    design,
                    1,
                    exposure_kind="binary" if scenario.exposure.is_binary else "continuous",
                    scale=q.scale,
                )
                est, se = e[0], v[0]
            else:
                est, se = logit.coef[0, 1], logit.se[0, 1]
        if failure is not None:
            est = se = np.nan
        low, high, pv = t_inference(np.array([est]), np.array([se]), df, alpha)
        rows.append(
            [
                s.name,
                s.model + (" (standardised)" if s.standardize else ""),
                target,
                float(est),
                float(se),
                float(low[0]),
                float(high[0]),
                float(pv[0]),
                df,
                n,
                failure,
                list(adjusted_for),
            ]
        )
    return pd.DataFrame(rows, columns=COLUMNS)


def _restriction_rows(columns: dict, restrict, n: int) -> np.ndarray:
    """The rows inside every restriction of a strategy (all rows when it has none)."""
    keep = np.ones(n, dtype=bool)
    for name, value in restrict:
        if isinstance(value, tuple):
            keep &= (columns[name] >= value[0]) & (columns[name] <= value[1])
        else:
            keep &= columns[name] == value
    return keep


def _matched_rows(columns: dict, exposure: str, match, keep: np.ndarray) -> np.ndarray:
    """The rows among ``keep`` that exact 1:1 matching on ``match`` retains (the simulation's rule)."""
    from workbench.engine.replicates import _matching_mask

    names = [exposure, *match]
    data = np.stack([columns[v] for v in names])[None]
    return _matching_mask(data, 0, tuple(range(1, len(names))), keep[None])[0]


def _select(columns: dict, exposure: str, outcome: str, strategy, alpha: float):
    """Apply a strategy's selection rule to one dataset: (kept covariates, failure or None). The rule is the
    simulation's own (:func:`workbench.engine.ols.select_covariates` on this dataset's cross-products)."""
    candidates = list(strategy.adjust)
    names = [exposure, outcome, *candidates]
    n = len(columns[outcome])
    if n < len(names) + 1:
        return (), f"too few rows: n = {n} for the full model's {len(names)} coefficients"
    S = crossproducts(np.stack([columns[v] for v in names])[None])
    pattern, full = select_covariates(
        S, n, 1, 0, list(range(2, len(names))), strategy.selection, alpha, names
    )
    if pattern[0] < 0:
        why = next(iter(full.reasons), "failed")
        return (), f"full model: {why}"
    return selected_names(int(pattern[0]), candidates), None
