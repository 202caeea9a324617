"""Sensitivity to an unmeasured confounder: what a latent U of given strengths does to a strategy's estimate.

The graph is an assumption, and the most common worry about it is a confounder nobody wrote down. Following
Cinelli & Hazlett (2020), a hypothetical latent U is described by two strengths on the scale of the measured
covariates:

* ``r2_exposure``: the partial R^2 of U with the exposure D, given the strategy's covariates X
  (``R^2_{D~U|X}``);
* ``r2_outcome``: the partial R^2 of U with the outcome Y, given the exposure and the covariates
  (``R^2_{Y~U|D,X}``).

Omitting U from the regression of Y on D and X moves the exposure's coefficient by (their Theorem 2, in the
population form)::

    |bias| = sqrt(r2_outcome * r2_exposure / (1 - r2_exposure)) * sd(Y resid) / sd(D resid)

with ``sd(Y resid) / sd(D resid)`` the ratio of the residual SDs of the outcome (given D and X) and of the
exposure (given X): the strategy's SE times sqrt(n) in large samples. In a sample, the same is
``se * sqrt(df) * sqrt(...)``. The table assumes, as they do, that U's bias points away from zero, so the
adjusted estimate is the large-sample estimate moved toward zero by ``|bias|``.

Two summaries:

* the robustness value ``RV_q = (sqrt(f_q^4 + 4 f_q^2) - f_q^2) / 2`` with ``f_q = q |t| / sqrt(df)``: a U
  with both partial R^2 equal to ``RV_q`` brings the estimate down by ``100 q`` percent. Here ``t`` is the
  *expected* t statistic at the planned n (the large-sample estimate over its large-sample SE at n), and
  ``df = n - p`` with p the strategy's coefficients;
* benchmarks (their section 4.4): each observed covariate ``Z_j`` of the strategy, with its partial R^2 with
  the exposure given the other covariates (``R^2_{D~Z_j|X_-j}``) and with the outcome given the exposure
  and the other covariates (``R^2_{Y~Z_j|D,X_-j}``), and the bounds on a U "k times as strong as Z_j" (k =
  1, 2, 3) that the contour plot marks.

For a binary outcome the E-value of VanderWeele & Ding (2017), ``RR + sqrt(RR (RR - 1))`` (with ``1/RR`` for
a risk ratio below 1), is computed from the marginal risk ratio of the strategy's large-sample fit.

Linear-Gaussian graphs use the implied covariance (:mod:`workbench.graph.linear`); other graphs use the
large simulation of :mod:`workbench.analysis.large_sample` for the estimate and its SE factor, and the
covariance of one large simulated data set for the benchmarks. The partial-R^2 algebra is that of linear
regression; for a logistic strategy it is applied to the estimate and its SE as an approximation.

``simulate=True`` adds, at each grid point, a latent U to a copy of the scenario (U -> exposure and
U -> outcome, path coefficients solved so that U has the grid point's partial R^2 in the copy) and runs the
engine at the planned n: coverage of the assumed truth and power, with Monte Carlo SEs. This is available for
linear-Gaussian graphs.

References
----------
1. Cinelli C., Hazlett C. (2020). Making sense of sensitivity: extending omitted variable bias. Journal of the
   Royal Statistical Society B 82(1):39-67.
2. VanderWeele T.J., Ding P. (2017). Sensitivity analysis in observational research: introducing the
   E-value. Annals of Internal Medicine 167(4):268-274.
3. Wooldridge J.M. Introductory Econometrics: A Modern Approach, sec. 3.3 (omitted-variable bias).

Examples
--------
>>> from workbench import load_preset
>>> res = sensitivity(load_preset("common_cause"), strategy="adjust_soil", grid=3)
>>> list(res.table.columns)
['r2_exposure', 'r2_outcome', 'bias', 'estimate']
>>> round(res.robustness_value, 3)
0.222
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.analysis.sensitivity_result import ASSUMPTION, SensitivityResult
from workbench.errors import SimulationError, UsageError
from workbench.graph import linear, with_default_strategies
from workbench.scenario.model import Arrow, Scenario, Strategy, Variable

__all__ = [
    "sensitivity",
    "default_strategy",
    "SensitivityResult",
    "partial_r2",
    "confounder_bias",
    "robustness_value",
    "e_value",
    "benchmark_bounds",
    "BENCHMARK_MULTIPLES",
    "DEFAULT_GRID",
    "DEFAULT_SIMULATED_GRID",
    "MAX_SIMULATED_GRID",
    "ASSUMPTION",
]

BENCHMARK_MULTIPLES = (1, 2, 3)
"""The "k times as strong as Z_j" multiples marked as benchmarks."""
DEFAULT_GRID = 11
"""Grid points per strength without simulation."""
DEFAULT_SIMULATED_GRID = 5
"""Grid points per strength with ``simulate=True`` (each point is one simulation)."""
MAX_SIMULATED_GRID = 15
"""Grid points per strength at most with ``simulate=True``."""
DEFAULT_SIMULATED_REPLICATES = 500
"""Replicates per grid point of ``simulate=True`` at most (fewer when the scenario's study asks for fewer)."""
_BENCHMARK_DRAW_N = 200_000
"""Rows of the simulated data set whose covariance gives the benchmarks of graphs without a closed form."""


def partial_r2(sigma: np.ndarray, names: list[str], a: str, b: str, given: list[str]) -> float:
    """The partial R^2 of ``a`` with ``b`` given ``given``, from a covariance matrix: the squared correlation of
    their residuals after the population least-squares projection on ``given``.

    Examples
    --------
    >>> import numpy as np
    >>> sigma = np.array([[1.0, 0.5, 0.5], [0.5, 1.0, 0.25], [0.5, 0.25, 1.0]])
    >>> round(partial_r2(sigma, ["c", "x", "y"], "x", "y", []), 4)   # the squared correlation
    0.0625
    >>> round(partial_r2(sigma, ["c", "x", "y"], "x", "y", ["c"]), 4)  # x and y independent given c
    0.0
    """
    index = {name: i for i, name in enumerate(names)}
    ab = [index[a], index[b]]
    g = [index[v] for v in given]
    s = sigma[np.ix_(ab, ab)]
    if g:
        s_gg = sigma[np.ix_(g, g)]
        s_ga = sigma[np.ix_(g, ab)]
        s = s - s_ga.T @ np.linalg.solve(s_gg, s_ga)
    denominator = s[0, 0] * s[1, 1]
    return float(s[0, 1] ** 2 / denominator) if denominator > 0 else float("nan")


def confounder_bias(r2_exposure, r2_outcome, se_factor: float):
    """The absolute bias a U of these partial R^2 causes, in the large sample (Cinelli & Hazlett 2020):
    ``sqrt(r2_outcome * r2_exposure / (1 - r2_exposure)) * se_factor``, with ``se_factor`` the ratio of
    the outcome's to the exposure's residual SD (the SE times sqrt(n)).

    Examples
    --------
    >>> round(float(confounder_bias(0.5, 0.5, 2.0)), 4)   # sqrt(0.25 / 0.5) * 2
    1.4142
    """
    r2_exposure = np.asarray(r2_exposure, dtype=float)
    r2_outcome = np.asarray(r2_outcome, dtype=float)
    return np.sqrt(r2_outcome * r2_exposure / (1.0 - r2_exposure)) * se_factor


def robustness_value(t: float, df: float, q: float = 1.0) -> float:
    """``RV_q = (sqrt(f_q^4 + 4 f_q^2) - f_q^2) / 2`` with ``f_q = q |t| / sqrt(df)`` (Cinelli & Hazlett 2020):
    the partial R^2 a U needs with both exposure and outcome to move the estimate by ``100 q`` percent.

    Examples
    --------
    >>> round(robustness_value(4.18, 783), 3)   # t and df of the paper's example, from memory
    0.139
    """
    f = q * abs(t) / np.sqrt(df)
    return float((np.sqrt(f**4 + 4 * f**2) - f**2) / 2)


def e_value(risk_ratio: float) -> float:
    """The E-value of a risk ratio (VanderWeele & Ding 2017): ``RR + sqrt(RR (RR - 1))``, with ``1 / RR`` for
    a risk ratio below 1.

    Examples
    --------
    >>> round(e_value(3.9), 2), round(e_value(0.80), 2)
    (7.26, 1.81)
    """
    rr = float(risk_ratio)
    if not np.isfinite(rr) or rr <= 0:
        return float("nan")
    rr = 1.0 / rr if rr < 1 else rr
    return float(rr + np.sqrt(rr * (rr - 1.0)))


def benchmark_bounds(r2_exposure_j: float, r2_outcome_j: float, k: float) -> tuple[float, float]:
    """Bounds on the partial R^2 of a U ``k`` times as strong as covariate ``Z_j`` (Cinelli & Hazlett 2020,
    sec. 4.4, with ``k_D = k_Y = k``; written from memory of the paper's formulas).

    ``r2_exposure_j`` is ``R^2_{D~Z_j|X_-j}`` and ``r2_outcome_j`` is ``R^2_{Y~Z_j|D,X_-j}``. Returns
    ``(R^2_{D~U|X}, R^2_{Y~U|D,X})``: ``k f^2_{D~Z_j|X_-j}`` and
    ``((sqrt(k) + sqrt(r)) / sqrt(1 - r))^2 f^2_{Y~Z_j|D,X_-j}`` with
    ``r = k R^4_{D~Z_j|X_-j} / ((1 - k R^2_{D~Z_j|X_-j}) (1 - R^2_{D~Z_j|X_-j}))``, capped at 1; NaN where
    such a U cannot exist (``R^2_{D~U|X} >= 1``).

    Examples
    --------
    >>> [round(v, 4) for v in benchmark_bounds(0.1, 0.2, 1)]
    [0.1111, 0.3125]
    """
    d, y = float(r2_exposure_j), float(r2_outcome_j)
    if not (0 <= d < 1 and 0 <= y < 1):
        return float("nan"), float("nan")
    r2_d = k * d / (1 - d)
    if r2_d >= 1 or k * d >= 1:
        return float("nan"), float("nan")
    r = k * d**2 / ((1 - k * d) * (1 - d))
    if r >= 1:
        return float(r2_d), float("nan")
    r2_y = ((np.sqrt(k) + np.sqrt(r)) / np.sqrt(1 - r)) ** 2 * (y / (1 - y))
    return float(r2_d), float(min(r2_y, 1.0))


# ---- inputs ---------------------------------------------------------------------------------------------------
def _pick_strategy(scenario: Scenario, strategy, report) -> Strategy:
    """The strategy asked for (by name or object), else the first valid one, else the first."""
    if isinstance(strategy, Strategy):
        return strategy
    if strategy is not None:
        if not isinstance(strategy, str):
            raise UsageError(f"must be a strategy name, got {type(strategy).__name__}", where="strategy")
        return scenario.strategy(strategy)
    return scenario.strategy(default_strategy(scenario, report))


def default_strategy(scenario: Scenario, report=None) -> str:
    """The strategy examined when none is named: the first valid one, else the first.

    Examples
    --------
    >>> from workbench import load_preset
    >>> default_strategy(load_preset("common_cause"))
    'adjust_soil'
    """
    if report is None:
        from workbench.analysis.check import check

        report = check(with_default_strategies(scenario))
    valid = [c.name for c in report.checks if c.valid]
    return valid[0] if valid else report.checks[0].name


def _grid_values(grid, default_k: int, upper: float) -> tuple[np.ndarray, np.ndarray]:
    """The two axes of the grid: ``K`` points from 0 to ``upper`` each, or the two sequences given."""
    if grid is None:
        grid = default_k
    if isinstance(grid, bool):
        raise UsageError(f"must be a whole number of points or two sequences, got {grid!r}", where="grid")
    if isinstance(grid, int | np.integer):
        if not 2 <= int(grid) <= 101:
            raise UsageError(f"must be from 2 to 101 points per strength, got {int(grid)}", where="grid")
        axis = np.linspace(0.0, upper, int(grid))
        return axis, axis.copy()
    try:
        exposure, outcome = (np.asarray(v, dtype=float).ravel() for v in grid)
    except (TypeError, ValueError):
        raise UsageError(
            "must be a number of points, or two sequences (r2_exposure values, r2_outcome values)",
            where="grid",
        ) from None
    for name, values in (("r2_exposure", exposure), ("r2_outcome", outcome)):
        if values.size == 0 or not np.all(np.isfinite(values)) or values.min() < 0 or values.max() >= 1:
            raise UsageError(f"{name} values must be partial R^2 in [0, 1)", where="grid")
    return exposure, outcome


def _observed_covariance(scenario: Scenario) -> tuple[np.ndarray, list[str]]:
    """The covariance of every variable: implied (linear-Gaussian) or of one large simulated data set."""
    if scenario.is_linear_gaussian:
        return linear.implied_covariance(scenario), scenario.names
    from workbench.analysis.large_sample import LARGE_SAMPLE_SEED
    from workbench.engine.generate import draw

    data = draw(scenario, _BENCHMARK_DRAW_N, seed=LARGE_SAMPLE_SEED)
    return np.cov(data.to_numpy(float), rowvar=False), list(data.columns)


def _benchmarks(scenario: Scenario, strategy: Strategy, estimate: float, se_factor: float) -> pd.DataFrame:
    """One row per covariate of the strategy and multiple k: the covariate's own partial R^2 and the bounds
    on a U k times as strong, with the bias and adjusted estimate at the bound."""
    columns = [
        "covariate",
        "r2_exposure_covariate",
        "r2_outcome_covariate",
        "k",
        "r2_exposure",
        "r2_outcome",
        "bias",
        "estimate",
    ]
    if not strategy.adjust:
        return pd.DataFrame(columns=columns)
    sigma, names = _observed_covariance(scenario)
    q = scenario.question
    rows = []
    for z in strategy.adjust:
        others = [v for v in strategy.adjust if v != z]
        d_j = partial_r2(sigma, names, q.exposure, z, others)
        y_j = partial_r2(sigma, names, q.outcome, z, [q.exposure, *others])
        for k in BENCHMARK_MULTIPLES:
            r2_d, r2_y = benchmark_bounds(d_j, y_j, k)
            bias = float(confounder_bias(r2_d, r2_y, se_factor))
            rows.append([z, d_j, y_j, k, r2_d, r2_y, bias, _adjusted(estimate, bias)])
    return pd.DataFrame(rows, columns=columns)


def _adjusted(estimate: float, bias):
    """The estimate moved toward zero by ``bias`` (U's bias taken to point away from zero)."""
    direction = 1.0 if estimate >= 0 else -1.0
    return estimate - direction * bias


def _upper(rv: float, benchmarks: pd.DataFrame) -> float:
    """The grid's largest partial R^2: room for the robustness value and the k = 1 benchmarks, 0.2 at least."""
    ones = benchmarks[benchmarks["k"] == 1][["r2_exposure", "r2_outcome"]].to_numpy(float).ravel()
    marks = [rv * 1.5] + [v * 1.2 for v in ones]
    marks = [m for m in marks if np.isfinite(m)]
    top = max([0.2, *marks])
    return float(min(0.9, np.ceil(top * 20) / 20))


# ---- E-value --------------------------------------------------------------------------------------------------
def _marginal_risk_ratio(scenario: Scenario, strategy: Strategy, estimate: float) -> float:
    """The marginal risk ratio of the strategy's large-sample fit (binary outcome): the mean predicted risk
    with the exposure one unit higher (1 against 0 for a binary exposure) over the mean predicted risk
    as observed, from a large simulated data set."""
    from workbench.analysis.large_sample import LARGE_SAMPLE_SEED
    from workbench.engine.generate import draw

    q = scenario.question
    data = draw(scenario, _BENCHMARK_DRAW_N // 4, seed=LARGE_SAMPLE_SEED)
    x = data[q.exposure].to_numpy(float)
    y = data[q.outcome].to_numpy(float)
    binary_exposure = scenario.exposure.is_binary
    if strategy.model == "ols":  # a linear probability model: predictions move by the coefficient
        if binary_exposure:
            return float((y.mean() + estimate * (1 - x.mean())) / (y.mean() - estimate * x.mean()))
        return float((y.mean() + estimate) / y.mean())
    import statsmodels.api as sm

    design = np.column_stack([np.ones_like(x), x, data[list(strategy.adjust)].to_numpy(float)])
    beta = sm.GLM(y, design, family=sm.families.Binomial()).fit().params
    high, low = design.copy(), design.copy()
    if binary_exposure:
        high[:, 1], low[:, 1] = 1.0, 0.0
    else:
        high[:, 1] = x + 1.0

    def risk(m):
        return 1.0 / (1.0 + np.exp(-(m @ beta)))

    return float(risk(high).mean() / risk(low).mean())


# ---- simulation at the grid points ----------------------------------------------------------------------------
def _latent_name(scenario: Scenario) -> str:
    name, i = "unmeasured_u", 1
    while name in scenario.names:
        i += 1
        name = f"unmeasured_u{i}"
    return name


def _with_u(scenario: Scenario, strategy: Strategy, u: str, a: float, b: float) -> Scenario:
    """A copy of the scenario with a latent standard-normal U: U -> exposure (a) and U -> outcome (b)."""
    q = scenario.question
    variables = (*scenario.variables, Variable(name=u, observed=False, noise_sd=1.0))
    arrows = (*scenario.arrows, Arrow(u, q.exposure, float(a)), Arrow(u, q.outcome, float(b)))
    return scenario.replace(variables=variables, arrows=arrows, strategies=(strategy,))


def _solve(strength, target: float, bracket: float) -> float:
    """The smallest non-negative c with ``strength(c) = target`` (``strength`` increasing), by bisection."""
    if target <= 0:
        return 0.0
    low, high = 0.0, bracket
    while strength(high) < target and high < 1e6:
        high *= 4
    for _ in range(80):
        mid = (low + high) / 2
        low, high = (mid, high) if strength(mid) < target else (low, mid)
    return (low + high) / 2


def _path_coefficients(scenario, strategy, u, r2_d, r2_y, sign) -> tuple[float, float]:
    """U's path coefficients on exposure and outcome that give it these partial R^2 in the copy (a few
    alternating bisections, as a covariate downstream of the outcome can tie the two)."""
    q = scenario.question
    adjust = list(strategy.adjust)
    scale = float(np.sqrt(max(linear.implied_covariance(scenario).diagonal().max(), 1e-12)))

    def r2s(a, b):
        copy = _with_u(scenario, strategy, u, a, b)
        sigma, names = linear.implied_covariance(copy), copy.names
        return (
            partial_r2(sigma, names, q.exposure, u, adjust),
            partial_r2(sigma, names, q.outcome, u, [q.exposure, *adjust]),
        )

    a, b = 0.0, 0.0
    for _ in range(3):
        a = _solve(lambda c, b=b: r2s(c, b)[0], r2_d, scale)
        b = sign * _solve(lambda c, a=a: r2s(a, sign * c)[1], r2_y, scale)
    return a, b


def _simulated_columns(scenario, strategy, estimate, exposure, outcome, n, replicates, seed, progress):
    """Coverage and power at the planned n at each grid point, a simulation of the copy with U each."""
    from workbench.analysis.simulate import simulate

    u = _latent_name(scenario)
    sign = 1.0 if estimate >= 0 else -1.0
    out = {k: np.full(len(exposure), np.nan) for k in ("coverage", "coverage_mcse", "power", "power_mcse")}
    for i, (r2_d, r2_y) in enumerate(zip(exposure, outcome, strict=True)):
        a, b = _path_coefficients(scenario, strategy, u, r2_d, r2_y, sign)
        copy = _with_u(scenario, strategy, u, a, b)
        row = simulate(copy, n=n, replicates=replicates, seed=seed).table.iloc[0]
        for key in out:
            out[key][i] = float(row[key])
        if progress is not None:
            progress(i + 1, len(exposure))
    return out


# ---- the verb -------------------------------------------------------------------------------------------------
def sensitivity(
    scenario: Scenario,
    strategy=None,
    grid=None,
    n: int | None = None,
    *,
    simulate: bool = False,
    replicates: int | None = None,
    seed=None,
    progress=None,
) -> SensitivityResult:
    """How a latent confounder U of given strengths would move one strategy's estimate (module notes).

    Parameters
    ----------
    scenario : Scenario
    strategy : str or Strategy, optional
        By default the first valid strategy (the first strategy when none is valid).
    grid : int or (sequence, sequence), optional
        Points per strength (from 0 to a top that leaves room for the robustness value and the benchmarks;
        :data:`DEFAULT_GRID`, or :data:`DEFAULT_SIMULATED_GRID` with ``simulate``), or the two axes:
        ``(r2_exposure values, r2_outcome values)``, each in [0, 1). The table is their product.
    n : int, optional
        The planned sample size (``scenario.study.n`` by default), for the expected t, the robustness value
        and the simulation.
    simulate : bool, default False
        Add coverage and power at ``n`` at each grid point, by the engine (linear-Gaussian graphs).
    replicates : int, optional
        Per grid point with ``simulate`` (the study's replicates, at most 500, by default).
    seed : optional
        Of each grid point's simulation (the scenario's seed by default).
    progress : callable, optional
        ``progress(done_points, total_points)`` during the simulation.

    Returns
    -------
    SensitivityResult

    Raises
    ------
    UnknownNameError
        An unknown strategy name.
    UsageError
        A strategy that selects its covariates from the data, or a bad grid.
    SimulationError
        A bad ``n`` or ``replicates``, or ``simulate`` on a graph with a binary variable.

    References
    ----------
    Cinelli & Hazlett (2020), JRSS-B 82(1):39-67; VanderWeele & Ding (2017), Ann Intern Med 167(4):268-274.

    Examples
    --------
    >>> from workbench import load_preset
    >>> res = sensitivity(load_preset("common_cause"), grid=([0.0, 0.1], [0.0, 0.1]))
    >>> res.table.round(4).values.tolist()[-1]
    [0.1, 0.1, 0.1054, 0.1446]
    """
    from workbench.analysis.check import check
    from workbench.scenario.constraints import check_setting

    scenario = with_default_strategies(scenario)
    if simulate and not scenario.is_linear_gaussian:
        raise SimulationError(
            "simulating the grid needs a linear-Gaussian graph (every variable continuous); "
            "the large-sample table is available without it",
            where="simulate",
        )
    if (
        simulate
        and isinstance(grid, int | np.integer)
        and not isinstance(grid, bool)
        and grid > MAX_SIMULATED_GRID
    ):
        raise UsageError(
            f"at most {MAX_SIMULATED_GRID} points per strength with simulate (one simulation each), got {grid}",
            where="grid",
        )
    report = check(scenario)
    chosen = _pick_strategy(scenario, strategy, report)
    if chosen.selection is not None:
        raise UsageError(
            f"strategy '{chosen.name}' selects its covariates from the data; choose one with a fixed set",
            where="strategy",
        )
    n = check_setting("n", scenario.study.n if n is None else n, where="n", error=SimulationError)
    found = {c.name: c for c in report.checks}.get(chosen.name)
    estimate = None if found is None else found.large_sample_estimate
    se_factor = None if found is None else found.large_sample_se_factor
    if estimate is None or se_factor is None or not np.isfinite(estimate) or not np.isfinite(se_factor):
        raise UsageError(
            f"strategy '{chosen.name}' has no large-sample estimate to start from", where="strategy"
        )
    df = n - chosen.n_coefficients
    if df < 1:
        raise UsageError(f"n = {n} leaves no residual degrees of freedom for '{chosen.name}'", where="n")
    se = se_factor / np.sqrt(n)
    t = estimate / se if se > 0 else float("inf")
    rv = robustness_value(t, df)
    benchmarks = _benchmarks(scenario, chosen, estimate, se_factor)
    exposure_axis, outcome_axis = _grid_values(
        grid, DEFAULT_SIMULATED_GRID if simulate else DEFAULT_GRID, _upper(rv, benchmarks)
    )
    exposure, outcome = (v.ravel() for v in np.meshgrid(exposure_axis, outcome_axis, indexing="ij"))
    bias = confounder_bias(exposure, outcome, se_factor)
    table = pd.DataFrame(
        {"r2_exposure": exposure, "r2_outcome": outcome, "bias": bias, "estimate": _adjusted(estimate, bias)}
    )
    if simulate:
        if replicates is None:
            replicates = min(scenario.study.replicates, DEFAULT_SIMULATED_REPLICATES)
        replicates = check_setting("replicates", replicates, where="replicates", error=SimulationError)
        seed = scenario.study.seed if seed is None else seed
        columns = _simulated_columns(
            scenario, chosen, estimate, exposure, outcome, n, replicates, seed, progress
        )
        for key, values in columns.items():
            table[key] = values
    risk_ratio = None
    if scenario.outcome.is_binary:
        risk_ratio = _marginal_risk_ratio(scenario, chosen, estimate)
    return SensitivityResult(
        title=scenario.title,
        strategy=chosen.name,
        adjust=tuple(chosen.adjust),
        exposure=scenario.question.exposure,
        outcome=scenario.question.outcome,
        n=int(n),
        df=int(df),
        large_sample_estimate=float(estimate),
        se=float(se),
        se_factor=float(se_factor),
        t=float(t),
        robustness_value=rv,
        benchmarks=benchmarks,
        table=table,
        risk_ratio=risk_ratio,
        e_value=None if risk_ratio is None else e_value(risk_ratio),
        method="closed form" if scenario.is_linear_gaussian else "large simulated data set",
        simulated=bool(simulate),
        replicates=int(replicates) if simulate else None,
        seed=seed if simulate else None,
    )
