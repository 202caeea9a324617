"""The Monte Carlo engine: simulate many studies from a scenario, fit every strategy, score each one.

Two engines give the same distribution of results:

``exact``
    For a linear-Gaussian graph (every variable continuous) the centred cross-product matrix of one
    replicate's data is Wishart(n - 1, Sigma), with Sigma the implied covariance of the variables the
    strategies use. It is drawn directly by the Bartlett decomposition (:mod:`workbench.engine.wishart`) and
    every strategy's OLS slope, residual variance and classical SE are computed from it
    (:mod:`workbench.engine.ols`). The cost per replicate does not depend on ``n``.
``raw``
    Everything else (binary variables): each replicate's rows are drawn (:mod:`workbench.engine.generate`),
    their cross-product matrix is formed once by a batched matrix product, and the OLS strategies are fitted
    from its sub-blocks. Logistic strategies and the linear probability model (OLS on a binary outcome, with
    HC3 SEs) are fitted from the rows, batched (:mod:`workbench.engine.logistic`).

A strategy may choose its covariates from the data (``selection``): in each replicate the rule is applied to
the cross-products (:func:`workbench.engine.ols.fit_selected`), replicates are grouped by the subset they
chose and each group is refitted in one batched call, in both engines. A strategy may restrict the sample
(``restrict``) or match exactly (``match``): the raw engine forms masked cross-products of the retained rows
(:mod:`workbench.engine.design`), so the retained ``n`` and the degrees of freedom vary by replicate.

The steps of a run, each in its own module: the fitting plan of the scenario (:mod:`workbench.engine.fitplan`),
the replicates drawn chunk by chunk from the block streams (:mod:`workbench.engine.chunks`,
:mod:`workbench.engine.streams`), every fit on each chunk (:mod:`workbench.engine.fitting`), and here the
arrays of the whole run. ``engine="auto"`` picks ``exact`` when it applies (never with a restriction or
matching). A seed gives identical numbers whatever the chunk size.

Each strategy is then scored against the truth it targets (:mod:`workbench.engine.truth`) with the
performance measures of Morris, White & Crowther (2019) and their Monte Carlo SEs
(:mod:`workbench.engine.metrics`), plus two signals practitioners read beside the graph: the change in
estimate relative to the unadjusted fit of the same model (median over replicates and share of replicates
where it exceeds 10%, the rule of thumb studied by Mickey & Greenland 1989) and the ratio of model SEs to it,
with the exposure's variance inflation factor.

References
----------
1. Morris T.P., White I.R., Crowther M.J. (2019). Using simulation studies to evaluate statistical methods.
   Statistics in Medicine 38(11):2074-2102.
2. Bartlett M.S. (1933). On the theory of statistical regression. Proc. Royal Society of Edinburgh 53:260-283.
3. Mickey R.M., Greenland S. (1989). The impact of confounder selection criteria on effect estimation.
   American Journal of Epidemiology 129(1):125-137.

Examples
--------
>>> from workbench import load_preset
>>> arrays = run_replicates(load_preset("common_cause"), 200, 500, seed=1)
>>> arrays.engine, arrays.strategies, arrays.estimate.shape
('exact', ['unadjusted', 'adjust_soil'], (500, 2))
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import numpy as np

from workbench.engine.chunks import ChunkDraws
from workbench.engine.fitplan import Plan, fit_plan
from workbench.engine.fitting import FitResult, fit_chunk
from workbench.engine.metrics import joint_power, performance
from workbench.engine.ols import selected_names, t_inference
from workbench.engine.streams import seed_entropy, seed_sequence
from workbench.engine.threads import blas_threads
from workbench.engine.truth import KIND_WORDS
from workbench.errors import SimulationError
from workbench.scenario.constraints import check_setting
from workbench.scenario.model import Scenario, minimum_study_size

__all__ = [
    "ENGINES",
    "ReplicateArrays",
    "run_replicates",
    "choose_engine",
    "check_arguments",
]

ENGINES = ("auto", "exact", "raw")
"""The engines a run may ask for."""


@dataclass
class ReplicateArrays:
    """Every strategy's results in every replicate.

    Attributes
    ----------
    strategies : list of str
        Strategy names (columns ``S``), in scenario order.
    estimate, se, ci_low, ci_high, p_value : ndarray of shape (R, S)
        NaN where the fit failed.
    failed : ndarray of bool, shape (R, S)
    reasons : dict of str to dict of str to int
        Per strategy, the count of each failure reason.
    df : ndarray of shape (S,)
        Degrees of freedom of the intervals: ``n - p`` for classical OLS, ``inf`` (normal) for HC3 and
        logistic fits.
    vif : ndarray of shape (R, S)
        The exposure's variance inflation factor in each replicate.
    also_names : tuple of str
        The question's ``also`` variables (axis ``A``).
    also_estimate, also_se, also_ci_low, also_ci_high, also_p_value : ndarray of shape (R, S, A)
        Their coefficients; NaN where the strategy does not adjust for the variable.
    reference : list of str
        The unadjusted strategy of the same model that each strategy is compared with (a name in parentheses
        when it is fitted internally, not reported).
    reference_estimate, reference_se : ndarray of shape (R, S)
        That reference's estimates and SEs (for the change in estimate and the SE ratio).
    truth, truth_mcse : ndarray of shape (S,)
        What each strategy is scored against and its Monte Carlo error.
    estimand : list of str
        What each strategy's estimate targets, in words.
    engine : {"exact", "raw"}
    n, replicates : int
    seed : int or list of int
        The entropy of the root seed sequence (:func:`workbench.engine.streams.seed_entropy`: the given
        seed, or the fresh one drawn for ``seed=None``); passing it back as ``seed`` repeats the run.
    alpha : float
    selected : ndarray of int, shape (R, S)
        For a strategy with a selection rule, the bit pattern of the candidates kept in each replicate (bit
        ``j`` for ``candidates[s][j]``, see :func:`workbench.engine.ols.selected_names`); -1 for fixed strategies
        and where the full model failed.
    candidates : list of tuple of str
        Each strategy's ``adjust`` (the candidates of a selection rule).
    selection : list of str or None
        Each strategy's selection rule.
    retained_n : ndarray of shape (R, S)
        Units kept by a restricted strategy in each replicate; NaN for unrestricted ones.
    interaction_estimate, interaction_se : ndarray of shape (R, S)
        The coefficient of the first exposure x covariate term of an ``interactions`` strategy and its
        classical SE; NaN for the other strategies (:mod:`workbench.engine.interactions`).

    Examples
    --------
    >>> from workbench import load_preset
    >>> arrays = run_replicates(load_preset("selection_by_significance"), 200, 250, seed=3)
    >>> arrays.selection
    [None, None, 'p_value', 'change_in_estimate']
    >>> [(names, round(share, 2)) for names, share in arrays.selected_sets(2)]
    [(('complexity', 'team_experience'), 0.69), (('team_experience',), 0.31)]
    >>> arrays.score()["bias"].shape
    (4,)
    """

    strategies: list[str]
    estimate: np.ndarray
    se: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    p_value: np.ndarray
    failed: np.ndarray
    reasons: dict[str, dict[str, int]]
    df: np.ndarray
    vif: np.ndarray
    also_names: tuple[str, ...]
    also_estimate: np.ndarray
    also_se: np.ndarray
    also_ci_low: np.ndarray
    also_ci_high: np.ndarray
    also_p_value: np.ndarray
    reference: list[str]
    reference_estimate: np.ndarray
    reference_se: np.ndarray
    truth: np.ndarray
    truth_mcse: np.ndarray
    estimand: list[str]
    engine: str
    n: int
    replicates: int
    seed: int | list[int]
    alpha: float
    selected: np.ndarray
    candidates: list[tuple[str, ...]]
    selection: list[str | None]
    retained_n: np.ndarray
    interaction_estimate: np.ndarray | None = None
    interaction_se: np.ndarray | None = None

    def selected_sets(self, s: int) -> list[tuple[tuple[str, ...], float]]:
        """The sets strategy ``s`` selected, most frequent first, each with its share of the replicates
        whose full model could be fitted; empty for a fixed strategy."""
        if self.selection[s] is None:
            return []
        codes = self.selected[:, s]
        codes = codes[codes >= 0]
        if not codes.size:
            return []
        values, counts = np.unique(codes, return_counts=True)
        order = np.lexsort((values, -counts))
        return [
            (selected_names(int(values[i]), self.candidates[s]), float(counts[i] / codes.size)) for i in order
        ]

    def score(self) -> dict[str, np.ndarray]:
        """Performance of each strategy's exposure estimate against its truth
        (:func:`workbench.engine.metrics.performance`; arrays of shape (S,)), with the joint power of the
        exposure and every ``also`` effect (:func:`workbench.engine.metrics.joint_power`)."""
        measures = performance(
            self.estimate,
            self.se,
            self.ci_low,
            self.ci_high,
            self.p_value,
            self.truth,
            self.alpha,
            truth_mcse=self.truth_mcse,
        )
        measures.update(joint_power(self.p_value, self.also_p_value, self.alpha))
        return measures

    def score_also(self, variable: int, truth: float) -> dict[str, np.ndarray]:
        """Performance of the ``also`` variable at index ``variable`` against ``truth`` (its arrow's
        effect); arrays of shape (S,), NaN for strategies that do not adjust for it."""
        return performance(
            self.also_estimate[:, :, variable],
            self.also_se[:, :, variable],
            self.also_ci_low[:, :, variable],
            self.also_ci_high[:, :, variable],
            self.also_p_value[:, :, variable],
            truth,
            self.alpha,
        )


def choose_engine(scenario: Scenario, n: int, engine: str = "auto") -> str:
    """The engine that will run: ``"exact"`` or ``"raw"``.

    Raises
    ------
    SimulationError
        Unknown engine, or ``"exact"`` forced where it does not apply.

    Examples
    --------
    >>> from workbench import load_preset
    >>> choose_engine(load_preset("common_cause"), 200)
    'exact'
    """
    if engine not in ENGINES:
        raise SimulationError(f"engine: must be one of 'auto', 'exact', 'raw', got {engine!r}")
    if engine == "raw":
        return "raw"
    plan = fit_plan(scenario)
    if plan.restricts:
        if engine == "exact":
            restricted = [f for f in plan.fits if f.masked]
            what = "restrict" if restricted[0].restrict else "match"
            raise SimulationError(
                f"engine: 'exact' cannot {what} the sample (strategy '{restricted[0].name}'); use 'raw' or 'auto'"
            )
        return "raw"
    if not scenario.is_linear_gaussian:
        if engine == "exact":
            binary = [v.name for v in scenario.variables if v.is_binary]
            modified = [f"{x.source} -> {x.target}" for x in scenario.arrows if x.varies_with]
            bent = [f"{x.source} -> {x.target} ({x.form})" for x in scenario.arrows if x.form != "linear"]
            why = (
                f"every variable continuous; binary: {', '.join(binary)}"
                if binary
                else f"constant effects; varies_with on {', '.join(modified)}"
                if modified
                else f"linear arrows; form on {', '.join(bent)}"
                if bent
                else "normal noise with a constant SD; noise or spread_with on "
                + ", ".join(v.name for v in scenario.variables if v.noise != "normal" or v.spread_with)
            )
            raise SimulationError(f"engine: 'exact' needs {why} (use 'raw' or 'auto')")
        return "raw"
    rows_fit = next((f for f in plan.fits if f.kind != "ols"), None)
    if rows_fit is not None:  # the exact engine draws cross-products only, never the rows these fits need
        if engine == "exact":
            raise SimulationError(
                f"engine: 'exact' cannot fit strategy '{rows_fit.name}' ({KIND_WORDS[rows_fit.kind]}), which "
                "needs the rows; use 'raw' or 'auto'"
            )
        return "raw"
    if n - 1 < len(plan.used):
        if engine == "exact":
            raise SimulationError(
                f"engine: 'exact' needs n > {len(plan.used)} (the variables the strategies use), got n = {n}"
            )
        return "raw"
    return "exact"


def check_arguments(
    scenario: Scenario, n, replicates, alpha, engine: str = "auto"
) -> tuple[int, int, float, str]:
    """Check a run's arguments before any work and pick the engine.

    ``n``, ``replicates`` and ``alpha`` are checked against the study settings' constraints
    (:func:`workbench.scenario.constraints.check_setting`), then ``n`` against the widest strategy
    (:func:`workbench.engine.fitplan.smallest_n`), then the engine (:func:`choose_engine`).

    Returns
    -------
    (n, replicates, alpha, engine)

    Raises
    ------
    SimulationError

    Examples
    --------
    >>> from workbench import load_preset
    >>> check_arguments(load_preset("common_cause"), 200, 1000, 0.05)
    (200, 1000, 0.05, 'exact')
    >>> check_arguments(load_preset("common_cause"), 200, 0, 0.05)
    Traceback (most recent call last):
    ...
    workbench.errors.SimulationError: replicates: must be an integer from 1 to 1,000,000, got 0
    """
    n = check_setting("n", n, where="n", error=SimulationError)
    replicates = check_setting("replicates", replicates, where="replicates", error=SimulationError)
    alpha = check_setting("alpha", alpha, where="alpha", error=SimulationError)
    widest, p, needed = minimum_study_size(scenario)
    if n < needed:
        raise SimulationError(
            f"n = {n} is too small for strategy '{widest}' ({p} coefficients); n must be at least {needed}"
        )
    return n, replicates, alpha, choose_engine(scenario, n, engine)


class _Collector:
    """Every fit's per-replicate results (arrays of shape (R, F), also-variables (R, F, A)), chunk by chunk."""

    def __init__(self, replicates: int, fits: int, also: int):
        self.estimate = np.full((replicates, fits), np.nan)
        self.se = np.full((replicates, fits), np.nan)
        self.failed = np.zeros((replicates, fits), dtype=bool)
        self.vif = np.full((replicates, fits), np.nan)
        self.also_estimate = np.full((replicates, fits, also), np.nan)
        self.also_se = np.full((replicates, fits, also), np.nan)
        self.reasons = [Counter() for _ in range(fits)]
        self.df = np.full((replicates, fits), np.nan)
        self.selected = np.full((replicates, fits), -1, dtype=np.int64)
        self.retained = np.full((replicates, fits), np.nan)
        self.interaction_estimate = np.full((replicates, fits), np.nan)
        self.interaction_se = np.full((replicates, fits), np.nan)

    def put(self, start: int, size: int, results: list[FitResult]) -> None:
        """Store one chunk's results for replicates ``start`` to ``start + size``."""
        rows = slice(start, start + size)
        for j, result in enumerate(results):
            self.df[rows, j] = result.df
            self.selected[rows, j] = result.selected
            self.retained[rows, j] = result.retained
            self.estimate[rows, j] = result.estimate
            self.se[rows, j] = result.se
            self.also_estimate[rows, j] = result.also_estimate
            self.also_se[rows, j] = result.also_se
            self.vif[rows, j] = result.vif
            self.failed[rows, j] = result.failed
            self.reasons[j].update(result.reasons)
            if result.interaction_estimate is not None:
                self.interaction_estimate[rows, j] = result.interaction_estimate
                self.interaction_se[rows, j] = result.interaction_se


def _interval_df(plan: Plan, n: int, store: _Collector) -> np.ndarray:
    """One df per fit for the table: ``n - p`` for a fixed OLS fit, the mean over fitted replicates for a
    selection rule or a restriction (their df vary by replicate), inf (normal intervals) otherwise. The
    per-replicate df of non-OLS fits are set to inf."""
    df = np.full(len(plan.fits), np.inf)
    for j, f in enumerate(plan.fits):
        if f.kind not in ("ols", "ols_flexible"):
            store.df[:, j] = np.inf
        elif f.fixed:
            df[j] = n - len(f.regressors) - 1 - 2 * len(f.flexible)
        else:
            fitted = ~store.failed[:, j]
            df[j] = float(np.mean(store.df[fitted, j])) if fitted.any() else np.nan
    return df


def _replicate_arrays(plan: Plan, store: _Collector, df: np.ndarray, **run) -> ReplicateArrays:
    """The reported strategies' arrays, with intervals, references and truths; ``run`` holds ``engine, n,
    replicates, seed, alpha``."""
    alpha = run["alpha"]
    # reported fits come first, hidden references after: basic slices keep views, not copies
    S = len(plan.reported)
    shown = slice(0, S)
    fits = plan.fits[:S]
    refs = [f.reference for f in fits]
    est, se, dfs = store.estimate, store.se, store.df
    ci_low, ci_high, p_value = t_inference(est[:, shown], se[:, shown], dfs[:, shown], alpha)
    also_est, also_se = store.also_estimate[:, shown], store.also_se[:, shown]
    a_low, a_high, a_p = t_inference(also_est, also_se, dfs[:, shown, None], alpha)
    truths = [plan.truths[f.scale] for f in fits]
    return ReplicateArrays(
        strategies=[f.name for f in fits],
        estimate=est[:, shown],
        se=se[:, shown],
        ci_low=ci_low,
        ci_high=ci_high,
        p_value=p_value,
        failed=store.failed[:, shown],
        reasons={f.name: dict(store.reasons[j]) for j, f in enumerate(fits)},
        df=df[shown],
        vif=store.vif[:, shown],
        also_names=plan.also_names,
        also_estimate=also_est,
        also_se=also_se,
        also_ci_low=a_low,
        also_ci_high=a_high,
        also_p_value=a_p,
        reference=[plan.fits[j].name for j in refs],
        reference_estimate=est[:, refs],
        reference_se=se[:, refs],
        truth=np.array([t.value for t in truths]),
        truth_mcse=np.array([t.mcse for t in truths]),
        estimand=[f.estimand for f in fits],
        selected=store.selected[:, shown],
        candidates=[f.adjust for f in fits],
        selection=[f.selection for f in fits],
        retained_n=store.retained[:, shown],
        interaction_estimate=store.interaction_estimate[:, shown],
        interaction_se=store.interaction_se[:, shown],
        **run,
    )


def run_replicates(
    scenario: Scenario,
    n: int,
    replicates: int,
    seed=None,
    engine: str = "auto",
    alpha: float | None = None,
    progress=None,
    *,
    chunk_size: int | None = None,
) -> ReplicateArrays:
    """Simulate ``replicates`` studies of ``n`` units and fit every strategy in each.

    Parameters
    ----------
    scenario : Scenario
    n : int
        Units per study; at least ``p + 2`` for every strategy with ``p`` coefficients.
    replicates : int
        From 1 to :data:`~workbench.scenario.constraints.MAX_REPLICATES`.
    seed : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Root of the random streams (:func:`workbench.engine.streams.seed_sequence`; block ``b`` uses child
        ``b`` of the root sequence).
    engine : {"auto", "exact", "raw"}
    alpha : float, optional
        Level of the intervals and tests, in (0, 0.5]; default the scenario's.
    progress : callable, optional
        Called as ``progress(done_replicates, total_replicates)`` after each chunk. If it raises
        :class:`~workbench.errors.Cancelled` the run stops and the exception propagates.
    chunk_size : int, optional
        Replicates per chunk (default: sized to :data:`workbench.engine.chunks.MEMORY_BUDGET`). The exact
        engine rounds it to whole blocks. The results do not depend on it.

    Returns
    -------
    ReplicateArrays

    Raises
    ------
    SimulationError
        Before any work: bad ``n``, ``replicates``, ``alpha``, ``seed`` or ``engine`` (:func:`check_arguments`).

    Examples
    --------
    >>> from workbench import load_preset
    >>> arrays = run_replicates(load_preset("common_cause"), 200, 1000, seed=7)
    >>> arrays.estimate.shape, arrays.engine, arrays.df.tolist()
    ((1000, 2), 'exact', [198.0, 197.0])
    """
    alpha = scenario.study.alpha if alpha is None else alpha
    n, replicates, alpha, engine = check_arguments(scenario, n, replicates, alpha, engine)
    root = seed_sequence(seed)
    plan = fit_plan(scenario)
    draws = ChunkDraws(scenario, plan, engine, n, replicates, root, chunk_size, progress is not None)
    store = _Collector(replicates, len(plan.fits), len(plan.also_names))
    done = 0
    with blas_threads():
        for chunk in draws:
            results = fit_chunk(plan, chunk.crossproducts, chunk.data, n, draws.index, draws.names, alpha)
            store.put(done, chunk.size, results)
            done += chunk.size
            if progress is not None:
                progress(done, replicates)
    df = _interval_df(plan, n, store)
    return _replicate_arrays(
        plan, store, df, engine=engine, n=n, replicates=replicates, seed=seed_entropy(root), alpha=alpha
    )
