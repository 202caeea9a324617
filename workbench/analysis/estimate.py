"""Fit every strategy of a scenario on one dataset: what a user runs on real data shaped like the scenario.

Each strategy regresses the outcome on an intercept, the exposure and its adjustment set:

* ``model = "ols"`` with a continuous outcome: least squares by a QR decomposition, classical SE, t interval
  and p-value with ``n - p`` degrees of freedom (as ``statsmodels`` ``OLS``);
* ``model = "ols"`` with a binary outcome: the linear probability model with HC3 robust SE and normal
  interval (as ``statsmodels`` ``OLS(...).fit(cov_type="HC3")``);
* ``interactions``: OLS with exposure x (covariate - sample mean) terms; the sample-averaged effect with a
  delta-method SE and a normal interval (:mod:`workbench.engine.interactions`);
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
>>> from workbench import draw, load_preset
>>> sc = load_preset("common_cause")
>>> table = estimate(sc, draw(sc, 400, seed=5))
>>> list(table["strategy"]), list(table.columns[:4])
(['unadjusted', 'adjust_soil'], ['strategy', 'model', 'estimand', 'estimate'])
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.engine.design import design_mask
from workbench.engine.interactions import fit_interactions
from workbench.engine.logistic import design_matrix, fit_logit_batch
from workbench.engine.ols import crossproducts, ols_fit, select_covariates, selected_names, t_inference
from workbench.engine.poisson import fit_poisson_batch
from workbench.engine.robust import ols_hc3_batch
from workbench.engine.splines import fit_flexible, with_spline_columns
from workbench.engine.standardize import standardized_contrast
from workbench.engine.truth import estimand, fit_label, model_kind
from workbench.errors import DataError, SimulationError
from workbench.graph.defaults import with_default_strategies
from workbench.scenario.constraints import check_setting
from workbench.scenario.model import Scenario, Strategy

__all__ = ["estimate", "COLUMNS"]

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
"""The columns of the table :func:`estimate` returns."""


def _column(data: pd.DataFrame, name: str, binary: bool) -> np.ndarray:
    """One needed column as floats, checked: present, numeric, no missing or infinite values, 0/1 when the
    scenario says binary."""
    if name not in data.columns:
        raise DataError(f"no column '{name}' (columns: {', '.join(map(str, data.columns))})", where="data")
    where = f"data[{name!r}]"
    series = data[name]
    if pd.api.types.is_bool_dtype(series):
        series = series.astype(float)
    if not pd.api.types.is_numeric_dtype(series):
        raise DataError(f"must be numeric, got dtype {series.dtype}", where=where)
    values = series.to_numpy(dtype=float, na_value=np.nan)
    missing = int(np.isnan(values).sum())
    if missing:
        raise DataError(f"has {missing} missing value(s); remove or fill them first", where=where)
    if not np.isfinite(values).all():
        raise DataError("has infinite values", where=where)
    if binary and not np.isin(values, (0.0, 1.0)).all():
        raise DataError("is binary in the scenario and must hold only 0 and 1", where=where)
    return values


def _checked_columns(scenario: Scenario, data) -> dict[str, np.ndarray]:
    """Every column the strategies use (exposure, outcome, adjusted, restricted and matched variables),
    checked, and enough rows for the widest strategy."""
    if not isinstance(data, pd.DataFrame):
        raise DataError(f"must be a pandas DataFrame, got {type(data).__name__}", where="data")
    q = scenario.question
    needed = [q.exposure, q.outcome] + sorted(
        {v for s in scenario.strategies for v in (*s.adjust, *s.restricted, *s.match)}
    )
    columns = {name: _column(data, name, scenario.variable(name).is_binary) for name in needed}
    widest = max(scenario.strategies, key=lambda s: s.n_coefficients)
    if len(data) < widest.n_coefficients + 1:
        raise DataError(
            f"{len(data)} rows are too few for strategy '{widest.name}' ({widest.n_coefficients} "
            f"coefficients); at least {widest.n_coefficients + 1} needed",
            where="data",
        )
    return columns


def _kept_rows(columns: dict, exposure: str, strategy: Strategy, n: int) -> np.ndarray:
    """The rows a strategy's restriction and matching keep (:func:`workbench.engine.design.design_mask`,
    the simulation's own rule, on a batch of one); all rows without either."""
    if not (strategy.restrict or strategy.match):
        return np.ones(n, dtype=bool)
    names = list(dict.fromkeys([exposure, *strategy.restricted, *strategy.match]))
    data = np.stack([columns[v] for v in names])[None]
    restrict = tuple((names.index(v), value) for v, value in strategy.restrict)
    match = tuple(names.index(v) for v in strategy.match)
    return design_mask(data, 0, restrict, match)[0]


def _select(columns: dict, exposure: str, outcome: str, strategy: Strategy, alpha: float):
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


def _lpm(X: np.ndarray, y: np.ndarray):
    """The linear probability model with HC3 SE: (estimate, se, failure or None)."""
    p = X.shape[1] + 1
    design = design_matrix(np.column_stack([X, y])[None], 0, list(range(1, p - 1)))
    coef, robust_se, failed = ols_hc3_batch(design, y[None])
    failure = "singular design or a row with leverage 1 (HC3 undefined)" if failed[0] else None
    return coef[0, 1], robust_se[0, 1], failure


def _interaction(X: np.ndarray, y: np.ndarray, s: Strategy):
    """OLS with exposure x covariate terms: the sample-averaged effect and its delta-method SE (estimate,
    se, failure or None); :mod:`workbench.engine.interactions`."""
    if len(y) < s.n_coefficients + 1:
        return np.nan, np.nan, f"too few rows: n = {len(y)} for {s.n_coefficients} coefficients"
    data = np.column_stack([X, y]).T[None]  # (1, variables, rows): exposure, adjust..., outcome
    p = X.shape[1] - 1
    fit = fit_interactions(data, 0, range(1, p + 1), [s.adjust.index(v) for v in s.interactions], p + 1)
    failure = "; ".join(fit.reasons) if fit.failed[0] else None
    return fit.averaged[0], fit.averaged_se[0], failure


def _flexible(X: np.ndarray, y: np.ndarray, s: Strategy):
    """OLS with restricted cubic spline columns (:mod:`workbench.engine.splines`): (estimate, se, df,
    failure or None)."""
    if len(y) < s.n_coefficients + 1:
        return np.nan, np.nan, float("inf"), f"too few rows: n = {len(y)} for {s.n_coefficients} coefficients"
    data = np.column_stack([X, y]).T[None]  # (1, variables, rows): exposure, adjust..., outcome
    p = X.shape[1] - 1
    fit = fit_flexible(data, 0, range(1, p + 1), [s.adjust.index(v) for v in s.flexible], p + 1)
    failure = "; ".join(fit.reasons) if fit.failed[0] else None
    return fit.coef[0, 0], fit.se[0, 0], float(np.asarray(fit.df)), failure


def _design(X: np.ndarray, y: np.ndarray, s: Strategy):
    """The design of a logistic or Poisson fit (with ``flexible``, the spline columns appended), its
    outcome rows, and a failure for tied spline knots (or None)."""
    p = X.shape[1] + 1
    rows = np.column_stack([X, y])[None]
    design = design_matrix(rows, 0, list(range(1, p - 1)))
    if not s.flexible:
        return design, rows[:, :, p - 1], None
    positions = [s.adjust.index(v) for v in s.flexible]
    design, tied = with_spline_columns(design, rows.transpose(0, 2, 1), list(range(1, p - 1)), positions)
    return design, rows[:, :, p - 1], "tied spline knots" if tied[0] else None


def _poisson(X: np.ndarray, y: np.ndarray, kind: str, s: Strategy):
    """Poisson regression (log link), sandwich or model-based SE: (estimate, se, failure or None)."""
    design, outcome, tied = _design(X, y, s)
    fit = fit_poisson_batch(design, outcome)
    failure = tied or (str(fit.failure[0]) if fit.failed[0] else None)
    se = fit.se("classical" if kind == "poisson" else "robust")
    return fit.coef[0, 1], se[0, 1], failure


def _logit(X: np.ndarray, y: np.ndarray, kind: str, scenario: Scenario, s: Strategy):
    """Logistic regression, plain or standardised on the question's scale: (estimate, se, failure or
    None)."""
    design, outcome, tied = _design(X, y, s)
    logit = fit_logit_batch(design, outcome)
    failure = tied or (str(logit.failure[0]) if logit.failed[0] else None)
    if kind != "logit_std":
        return logit.coef[0, 1], logit.se[0, 1], failure
    exposure_kind = "binary" if scenario.exposure.is_binary else "continuous"
    e, v = standardized_contrast(logit, design, 1, exposure_kind=exposure_kind, scale=scenario.question.scale)
    return e[0], v[0], failure


def _strategy_row(scenario: Scenario, s: Strategy, columns: dict, alpha: float) -> list:
    """One row of the table: the strategy fitted on its rows."""
    q = scenario.question
    kind = model_kind(s, scenario.outcome.is_binary)
    keep = _kept_rows(columns, q.exposure, s, len(columns[q.outcome]))
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
    est = se = np.nan
    if failure is not None:
        pass
    elif n < p + 1:
        failure = f"too few rows: n = {n} for {p} coefficients"
    elif kind == "ols":
        fit = ols_fit(X, y, names)
        est, se, df, failure = fit.coef[0], fit.se[0], float(fit.df), fit.failure
    elif kind in ("lpm", "ols_hc3"):
        est, se, failure = _lpm(X, y)
    elif kind == "ols_interaction":
        est, se, failure = _interaction(X, y, s)
    elif kind == "ols_flexible":
        est, se, df, failure = _flexible(X, y, s)
    elif kind in ("poisson", "poisson_robust"):
        est, se, failure = _poisson(X, y, kind, s)
    else:
        est, se, failure = _logit(X, y, kind, scenario, s)
    if failure is not None:
        est = se = np.nan
    low, high, pv = t_inference(np.array([est]), np.array([se]), df, alpha)
    return [
        s.name,
        fit_label(s, scenario),
        estimand(kind, scenario, s.adjust)[0],
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


def estimate(scenario: Scenario, data: pd.DataFrame, alpha: float | None = None) -> pd.DataFrame:
    """Fit every strategy of ``scenario`` on ``data``.

    Parameters
    ----------
    scenario : Scenario
        Without strategies, the default ones (:func:`workbench.graph.defaults.with_default_strategies`).
    data : pandas.DataFrame
        One column per variable the strategies use (the exposure, the outcome and every adjusted, restricted
        or matched variable), numeric, without missing values; at least one row more than the widest
        strategy's coefficients. Other columns are ignored.
    alpha : float, optional
        Level of the intervals, in (0, 0.5]; default the scenario's.

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
    unexposed rows in row order (the simulation's rule, :mod:`workbench.engine.design`); ``n`` counts them.

    Raises
    ------
    DataError
        ``data`` is not a data frame, a needed column is missing, not numeric, has missing or infinite
        values, a binary one holds other values than 0 and 1, or there are too few rows.
    SimulationError
        ``alpha`` outside (0, 0.5].

    References
    ----------
    Seber G.A.F., Lee A.J. (2003). Linear Regression Analysis, 2nd ed., ch. 3.

    Examples
    --------
    >>> from workbench import load_preset
    >>> estimate(load_preset("common_cause"), pd.DataFrame({"fertiliser": [1.0, 2.0]}))
    Traceback (most recent call last):
    ...
    workbench.errors.DataError: data: no column 'wheat_yield' (columns: fertiliser)
    >>> estimate(load_preset("common_cause"), pd.DataFrame({"fertiliser": [1.0, 2.0], "wheat_yield": [3.0, None],
    ...                                                     "soil_quality": [0.0, 1.0]}))
    Traceback (most recent call last):
    ...
    workbench.errors.DataError: data['wheat_yield']: has 1 missing value(s); remove or fill them first
    """
    scenario = with_default_strategies(scenario)
    alpha = scenario.study.alpha if alpha is None else alpha
    alpha = check_setting("alpha", alpha, where="alpha", error=SimulationError)
    columns = _checked_columns(scenario, data)
    rows = [_strategy_row(scenario, s, columns, alpha) for s in scenario.strategies]
    return pd.DataFrame(rows, columns=COLUMNS)
