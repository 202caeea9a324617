"""The Monte Carlo engine: simulate many studies from a scenario, fit every strategy, score each one.

Two engines give the same distribution of results:

``exact``
    For a linear-Gaussian graph (every variable continuous) the centred cross-product matrix of one
    replicate's data is Wishart(n - 1, Sigma), with Sigma the implied covariance of the variables the
    strategies use. It is drawn directly by the Bartlett decomposition (:mod:`workbench.engine.wishart`) and every
    strategy's OLS slope, residual variance and classical SE are computed from it (:mod:`workbench.engine.ols`). The
    cost per replicate does not depend on ``n``.
``raw``
    Everything else (binary variables): each replicate's rows are drawn (:mod:`workbench.engine.generate`), their
    cross-product matrix is formed once by a batched matrix product, and the OLS strategies are fitted from
    its sub-blocks. Logistic strategies and the linear probability model (OLS on a binary outcome, with
    HC3 SEs) are fitted from the rows, batched (:mod:`workbench.engine.logistic`).

A strategy may choose its covariates from the data (``selection``): in each replicate the rule is applied to
the cross-products (:func:`workbench.engine.ols.fit_selected`), replicates are grouped by the subset they chose and
each group is refitted in one batched call, in both engines. A strategy may restrict the sample
(``restrict``): the raw engine forms masked cross-products of the retained rows (:func:`workbench.engine.ols.
masked_crossproducts`), so the retained ``n`` and the degrees of freedom vary by replicate. A strategy may
match exactly (``match``): within each stratum of the matched binary variables the first ``min(exposed,
unexposed)`` exposed and unexposed units in row order are kept (a random choice, the rows being i.i.d.), the
keep-mask built for all replicates at once from cumulative counts, then fitted like a restriction.

``engine="auto"`` picks ``exact`` when it applies (never with a restriction). Replicates are processed in chunks sized so that working
memory stays near :data:`MEMORY_BUDGET`. Random streams come from ``SeedSequence(seed)``: replicate block
``b`` (of :data:`BLOCK` replicates) uses child ``b``, never one per chunk, and each replicate's draws are one
contiguous run of its block's stream, so a seed gives identical numbers whatever the chunk size.

Each strategy is then scored against the truth it targets (:mod:`workbench.engine.truth`) with the performance
measures of Morris, White & Crowther (2019) and their Monte Carlo SEs (:mod:`workbench.engine.metrics`), plus two
signals practitioners read beside the graph: the change in estimate relative to the unadjusted fit of the
same model (median over replicates and share of replicates where it exceeds 10%, the rule of thumb studied
by Mickey & Greenland 1989) and the ratio of model SEs to it, with the exposure's variance inflation factor.

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

import dataclasses
import functools
from collections import Counter
from dataclasses import dataclass

import numpy as np

from workbench.engine.generate import PIECE, block_seed, draw_noise, evaluate, noise_pieces, structure
from workbench.engine.metrics import performance
from workbench.engine.ols import (
    BatchFit,
    crossproducts,
    fit_crossproducts,
    fit_selected,
    masked_crossproducts,
    selected_names,
    t_inference,
)
from workbench.engine.truth import (
    KIND_WORDS,
    estimand,
    model_kind,
    true_effect,
)
from workbench.engine.wishart import bartlett_draws, bartlett_matrices, square_root
from workbench.errors import SimulationError
from workbench.graph.linear import implied_covariance
from workbench.scenario.model import Scenario

__all__ = [
    "BLOCK",
    "ENGINES",
    "MEMORY_BUDGET",
    "ReplicateArrays",
    "run_replicates",
    "choose_engine",
    "fit_plan",
    "is_valid_set",
    "strategy_is_valid",
]

BLOCK = 250
"""Replicates per random-stream block: block ``b`` draws from child ``b`` of ``SeedSequence(seed)``."""
MEMORY_BUDGET = 256 * 2**20
"""Working memory aimed at per chunk, in bytes (peak resident memory stays well below 1 GiB)."""
ENGINES = ("auto", "exact", "raw")


# --------------------------------------------------------------------------------------------------------
# The fitting plan of a scenario (cached)
# --------------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class _Fit:
    name: str
    adjust: tuple[str, ...]
    kind: str  # "ols" (classical, from cross-products), "lpm" (OLS + HC3), "logit", "logit_std"
    regressors: tuple[int, ...]  # variable indices (file order), exposure first
    also: tuple[int, ...]  # for each question.also variable: its position among the regressors, or -1
    reference: int  # index of the fit of the unadjusted reference (same model)
    reported: bool
    estimand: str
    scale: str  # the truth's scale: "difference" or "log_odds_ratio"
    note: str
    selection: str | None = None  # a data-driven rule choosing among ``adjust`` in each replicate
    restrict: tuple = ()  # ((variable index, value or (low, high)), ...)
    match: tuple[int, ...] = ()  # variable indices matched on exactly

    @property
    def masked(self) -> bool:
        """Fitted on a subset of each replicate's rows (a restriction or matching)."""
        return bool(self.restrict or self.match)

    @property
    def fixed(self) -> bool:
        """A plain fit: fixed set, whole sample (usable as the unadjusted reference)."""
        return self.selection is None and not self.masked


@dataclass(frozen=True, eq=False)
class _Plan:
    fits: tuple[_Fit, ...]
    exposure: int
    outcome: int
    used: tuple[int, ...]  # variables any strategy uses, file order
    binary_outcome: bool
    binary_exposure: bool
    linear_gaussian: bool
    also_names: tuple[str, ...]
    truths: dict

    @property
    def reported(self) -> list[_Fit]:
        return [f for f in self.fits if f.reported]

    @property
    def needs_rows(self) -> bool:
        return any(f.kind != "ols" or f.masked for f in self.fits)

    @property
    def restricts(self) -> bool:
        return any(f.masked for f in self.fits)


@functools.lru_cache(maxsize=256)
def is_valid_set(scenario: Scenario, adjust: tuple[str, ...]) -> bool:
    from workbench.graph.adjustment import judge

    return bool(judge(scenario, adjust).valid)


@functools.lru_cache(maxsize=256)
def strategy_is_valid(scenario: Scenario, strategy) -> bool:
    from workbench.graph.adjustment import judge_strategy

    return bool(judge_strategy(scenario, strategy).valid)


@functools.lru_cache(maxsize=64)
def fit_plan(scenario: Scenario) -> _Plan:
    names = scenario.names
    q = scenario.question
    x, y = names.index(q.exposure), names.index(q.outcome)
    binary_outcome = scenario.outcome.is_binary
    fits: list[_Fit] = []
    hidden: list[_Fit] = []
    kinds = [model_kind(s, binary_outcome) for s in scenario.strategies]

    def make(name, adjust, kind, reported, reference=-1, selection=None, restrict=(), match=()):
        regressors = (x,) + tuple(names.index(a) for a in adjust)
        also = tuple((1 + adjust.index(v)) if v in adjust else -1 for v in q.also)
        words, scale, note = estimand(kind, scenario, tuple(adjust))
        restrict = tuple((names.index(v), value) for v, value in restrict)
        return _Fit(
            name,
            tuple(adjust),
            kind,
            regressors,
            also,
            reference,
            reported,
            words,
            scale,
            note,
            selection,
            restrict,
            tuple(names.index(v) for v in match),
        )

    for s, kind in zip(scenario.strategies, kinds, strict=True):
        fits.append(
            make(s.name, s.adjust, kind, True, selection=s.selection, restrict=s.restrict, match=s.match)
        )
    # the unadjusted reference of each fit: a reported plain strategy with no adjustment and the same model
    resolved = []
    for f in fits:
        ref = next((j for j, g in enumerate(fits) if g.kind == f.kind and not g.adjust and g.fixed), None)
        if ref is None:
            ref = next((len(fits) + j for j, g in enumerate(hidden) if g.kind == f.kind), None)
        if ref is None:
            ref = len(fits) + len(hidden)
            hidden.append(make(f"(unadjusted {KIND_WORDS[f.kind]})", (), f.kind, False, ref))
        resolved.append(ref)
    fits = [dataclasses.replace(f, reference=r) for f, r in zip(fits, resolved, strict=True)] + hidden
    used = sorted({x, y} | {i for f in fits for i in f.regressors} | {i for f in fits for i in f.match})
    truths = {}
    for f in fits:
        if f.scale not in truths:
            truths[f.scale] = true_effect(scenario, f.scale)
    if q.scale not in truths:
        truths[q.scale] = true_effect(scenario, q.scale)
    return _Plan(
        tuple(fits),
        x,
        y,
        tuple(used),
        binary_outcome,
        scenario.exposure.is_binary,
        scenario.is_linear_gaussian,
        tuple(q.also),
        truths,
    )


@functools.lru_cache(maxsize=64)
def _used_covariance(scenario: Scenario, used: tuple[int, ...]) -> np.ndarray:
    sigma = implied_covariance(scenario)
    return sigma[np.ix_(used, used)]


# --------------------------------------------------------------------------------------------------------
# Checking arguments
# --------------------------------------------------------------------------------------------------------
def _is_int(value) -> bool:
    return isinstance(value, int | np.integer) and not isinstance(value, bool)


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
            raise SimulationError(
                f"engine: 'exact' needs every variable continuous; binary: {', '.join(binary)} (use 'raw' or 'auto')"
            )
        return "raw"
    if n - 1 < len(plan.used):
        if engine == "exact":
            raise SimulationError(
                f"engine: 'exact' needs n > {len(plan.used)} (the variables the strategies use), got n = {n}"
            )
        return "raw"
    return "exact"


def _check(scenario: Scenario, n, replicates, alpha, engine) -> str:
    if not _is_int(n) or n < 1:
        raise SimulationError(f"n: must be a positive whole number, got {n!r}")
    if not _is_int(replicates) or replicates < 1:
        raise SimulationError(f"replicates: must be a whole number of at least 1, got {replicates!r}")
    if isinstance(alpha, bool) or not isinstance(alpha, int | float) or not 0.0 < alpha <= 0.5:
        raise SimulationError(f"alpha: must lie in (0, 0.5], got {alpha!r}")
    widest = max(scenario.strategies, key=lambda s: s.n_coefficients)
    p = widest.n_coefficients
    if n < p + 2:
        raise SimulationError(
            f"n = {n} is too small for strategy '{widest.name}' ({p} coefficients); n must be at least {p + 2}"
        )
    return choose_engine(scenario, int(n), engine)


def _root_seed(seed) -> np.random.SeedSequence:
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if isinstance(seed, np.random.Generator):
        return np.random.SeedSequence(int(seed.integers(2**63)))
    if seed is None:
        return np.random.SeedSequence()
    if not _is_int(seed) or seed < 0:
        raise SimulationError(f"seed: must be a non-negative whole number, got {seed!r}")
    return np.random.SeedSequence(int(seed))


# --------------------------------------------------------------------------------------------------------
# Arrays of one run
# --------------------------------------------------------------------------------------------------------
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
    seed : int
        The entropy of the root seed sequence (the given seed, or the fresh one drawn for ``seed=None``).
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
    seed: int
    alpha: float
    selected: np.ndarray | None = None
    candidates: list | None = None
    selection: list | None = None
    retained_n: np.ndarray | None = None

    def selected_sets(self, s: int) -> list[tuple[tuple[str, ...], float]]:
        """The sets strategy ``s`` selected, most frequent first, each with its share of the replicates
        whose full model could be fitted; empty for a fixed strategy."""
        if self.selected is None or not self.selection or self.selection[s] is None:
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
        (:func:`workbench.engine.metrics.performance`; arrays of shape (S,))."""
        return performance(
            self.estimate,
            self.se,
            self.ci_low,
            self.ci_high,
            self.p_value,
            self.truth,
            self.alpha,
            truth_mcse=self.truth_mcse,
        )

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


class _Stream:
    """Walks the replicate blocks' random streams in order, whatever the chunk size."""

    def __init__(self, root: np.random.SeedSequence):
        self.root = root
        self.block = 0
        self.offset = 0
        self.rng = np.random.default_rng(block_seed(root, 0))

    def _advance(self, count: int) -> None:
        self.offset += count
        if self.offset == BLOCK:
            self.block += 1
            self.offset = 0
            self.rng = np.random.default_rng(block_seed(self.root, self.block))

    def noise(self, out: np.ndarray) -> None:
        """Fill ``out`` (r, k, n) with the next r replicates' standard normals."""
        pos = 0
        while pos < out.shape[0]:
            take = min(out.shape[0] - pos, BLOCK - self.offset)
            draw_noise(self.rng, take, out.shape[1], out.shape[2], out=out[pos : pos + take])
            pos += take
            self._advance(take)

    def pieces(self, k: int, n: int, rows: int):
        """The next replicate's noise in row groups (see :func:`workbench.engine.generate.noise_pieces`)."""
        yield from noise_pieces(self.rng, k, n, rows)
        self._advance(1)

    def wishart(self, r: int, sigma: np.ndarray, df: int) -> np.ndarray:
        """The next r replicates' Wishart draws; r must cover whole blocks (or end the run)."""
        k = sigma.shape[0]
        chi = np.empty((r, k))
        normals = np.empty((r, k * (k - 1) // 2))
        pos = 0
        while pos < r:
            take = min(r - pos, BLOCK - self.offset)
            if self.offset != 0:
                raise RuntimeError("exact engine chunks must start at a block boundary")
            chi[pos : pos + take], normals[pos : pos + take] = bartlett_draws(k, df, take, self.rng)
            pos += take
            self._advance(take)
        return bartlett_matrices(square_root(sigma), chi, normals)


def _raw_bytes_per_replicate(n: int, k: int, plan: _Plan) -> int:
    per = 8 * n * (k + 3)
    if plan.needs_rows:
        widest = max(len(f.regressors) for f in plan.fits) + 1
        per += 8 * n * (widest + 10)
    if plan.restricts:  # the masked copy of the rows behind the restricted cross-products
        per += 8 * n * (k + 1)
    return per


def _chunk_size(
    engine: str, n: int, k: int, plan: _Plan, replicates: int, chunk_size: int | None, reports: bool = False
) -> int:
    if engine == "exact":
        if chunk_size is None:
            per = 8 * (len(plan.used) + 1) ** 2 * (6 + len(plan.fits))
            chunk_size = max(1, MEMORY_BUDGET // per)
        chunk = max(BLOCK, (int(chunk_size) // BLOCK) * BLOCK)
        return min(chunk, replicates) if replicates > chunk else replicates
    if chunk_size is None:
        chunk_size = max(1, MEMORY_BUDGET // _raw_bytes_per_replicate(n, k, plan))
        if reports:  # about 16 progress reports per run (the numbers do not depend on the chunk size)
            chunk_size = min(chunk_size, max(64, -(-replicates // 16)))
    return max(1, min(int(chunk_size), replicates))


def _piecewise(n: int, k: int, plan: _Plan) -> bool:
    """One replicate alone exceeds the memory budget: draw its rows in groups and accumulate its
    cross-products (possible when every fit works from cross-products)."""
    return n > PIECE and not plan.needs_rows and _raw_bytes_per_replicate(n, k, plan) > MEMORY_BUDGET


def _restriction_mask(data: np.ndarray, restrict: tuple) -> np.ndarray:
    """The rows (R, n) inside every restriction: value equal for a binary variable, inside the closed
    interval for a continuous one."""
    mask = np.ones((data.shape[0], data.shape[2]), dtype=bool)
    for v, value in restrict:
        column = data[:, v, :]
        if isinstance(value, tuple):
            mask &= (column >= value[0]) & (column <= value[1])
        else:
            mask &= column == value
    return mask


def _matching_mask(data: np.ndarray, exposure: int, match: tuple, base: np.ndarray) -> np.ndarray:
    """The rows (R, n) kept by exact 1:1 matching among the rows in ``base``: within each stratum of the
    matched binary variables, the first ``min(exposed, unexposed)`` exposed and unexposed rows in row order.

    Batched over replicates: one pass per stratum (at most ``2**len(match)``) with cumulative counts.
    """
    code = np.zeros(base.shape, dtype=np.int64)
    for j, v in enumerate(match):
        code += (data[:, v, :] == 1).astype(np.int64) << j
    exposed = data[:, exposure, :] == 1
    keep = np.zeros(base.shape, dtype=bool)
    for stratum in range(2 ** len(match)):
        inside = base & (code == stratum)
        treated = inside & exposed
        control = inside & ~exposed
        treated_rank = np.cumsum(treated, axis=1)
        control_rank = np.cumsum(control, axis=1)
        pairs = np.minimum(treated_rank[:, -1], control_rank[:, -1])[:, None]
        keep |= (treated & (treated_rank <= pairs)) | (control & (control_rank <= pairs))
    return keep


def _fit_mask(data: np.ndarray, f: _Fit, exposure: int) -> np.ndarray:
    """The rows (R, n) a restricted and/or matched fit uses: matching applies within the restriction."""
    mask = _restriction_mask(data, f.restrict)
    if f.match:
        mask = _matching_mask(data, exposure, f.match, mask)
    return mask


def _fit_restricted(f: _Fit, S: np.ndarray, kept: np.ndarray, y: int, regs: list[int], names, alpha: float):
    """OLS (or a selection rule) on each replicate's units inside the restriction; replicates with fewer
    than ``p + 2`` such units fail with a counted reason."""
    R = S.shape[0]
    need = len(regs) + 2
    ok = kept >= need
    coef = np.full((R, len(regs)), np.nan)
    se = coef.copy()
    vif = np.full(R, np.nan)
    sigma2 = np.full(R, np.nan)
    df = np.full(R, np.nan)
    selected = np.full(R, -1, dtype=np.int64)
    failed = ~ok
    reasons: Counter = Counter()
    if (~ok).any():
        where = "inside the restriction" if not f.match else "after matching"
        reasons[f"too few units {where} (fewer than {need})"] = int((~ok).sum())
    rows = np.flatnonzero(ok)
    if rows.size:
        if f.selection is not None:
            part = fit_selected(S[rows], kept[rows], y, regs[0], regs[1:], f.selection, alpha, names)
            selected[rows] = part.selected
        else:
            part = fit_crossproducts(S[rows], kept[rows], y, regs, names)
        coef[rows], se[rows], vif[rows], sigma2[rows] = part.coef, part.se, part.vif, part.residual_variance
        df[rows] = part.df
        failed[rows] = part.failed
        reasons.update(part.reasons)
    return BatchFit(coef, se, df, failed, reasons, vif, sigma2, selected if f.selection is not None else None)


def _fit_chunk(
    plan: _Plan, S: np.ndarray, data: np.ndarray | None, n: int, index: list[int], names, alpha: float = 0.05
):
    """Fit every planned fit on one chunk. ``index`` maps file-order variable indices to rows of S."""
    from workbench.engine.logistic import design_matrix, fit_logit_batch, standardized_contrast
    from workbench.engine.robust import ols_hc3_batch

    out = []
    y = index[plan.outcome]
    logit_fits = {}
    restricted = {}  # restriction -> (masked cross-products, rows kept)
    R = S.shape[0]
    for f in plan.fits:
        regs = [index[i] for i in f.regressors]
        if f.masked:
            key = (f.restrict, f.match)
            if key not in restricted:
                restricted[key] = masked_crossproducts(data, _fit_mask(data, f, plan.exposure))
            fit_S, kept = restricted[key]
            batch = _fit_restricted(f, fit_S, kept, y, regs, names, alpha)
        elif f.selection is not None:
            kept = None
            batch = fit_selected(S, n, y, regs[0], regs[1:], f.selection, alpha, names)
        else:
            kept = None
            batch = fit_crossproducts(S, n, y, regs, names)
        reasons = Counter(batch.reasons)
        df_rep = np.broadcast_to(np.asarray(batch.df, dtype=float), (R,)).copy()
        selected = batch.selected if batch.selected is not None else np.full(R, -1, dtype=np.int64)
        kept_n = kept.astype(float) if kept is not None else np.full(R, np.nan)
        if f.kind == "ols":
            coef, se, failed = batch.coef, batch.se, batch.failed
        elif f.kind == "lpm":
            rows = data.transpose(0, 2, 1)
            X = design_matrix(rows, plan.exposure, list(f.regressors[1:]))
            coef, se, hc3_failed = ols_hc3_batch(X, rows[:, :, plan.outcome])
            coef, se = coef[:, 1:], se[:, 1:]
            failed = batch.failed | hc3_failed
            extra = hc3_failed & ~batch.failed
            if extra.any():
                reasons["HC3 SE undefined: a row with leverage 1"] += int(extra.sum())
        else:
            if f.regressors not in logit_fits:  # plain and standardised logit with one set share a fit
                rows = data.transpose(0, 2, 1)
                X = design_matrix(rows, plan.exposure, list(f.regressors[1:]))
                logit_fits[f.regressors] = (X, fit_logit_batch(X, rows[:, :, plan.outcome]))
            X, logit = logit_fits[f.regressors]
            failed = logit.failed
            reasons = Counter(str(r) for r in logit.failure[failed])
            coef = logit.coef[:, 1:]
            se = logit.se[:, 1:]
            if f.kind == "logit_std":
                est, est_se = standardized_contrast(
                    logit,
                    X,
                    1,
                    exposure_kind="binary" if plan.binary_exposure else "continuous",
                    scale=f.scale,
                )
                coef = coef.copy()
                se = se.copy()
                coef[:, 0] = est
                se[:, 0] = est_se
        est = coef[:, 0]
        est_se = se[:, 0]
        bad = ~failed & ~(np.isfinite(est) & np.isfinite(est_se))
        if bad.any():
            reasons["non-finite estimate or SE"] += int(bad.sum())
            failed = failed | bad
        est = np.where(failed, np.nan, est)
        est_se = np.where(failed, np.nan, est_se)
        A = len(f.also)
        also_est = np.full((len(est), A), np.nan)
        also_se = np.full((len(est), A), np.nan)
        for a, pos in enumerate(f.also):
            if pos >= 0:
                also_est[:, a] = np.where(failed, np.nan, coef[:, pos])
                also_se[:, a] = np.where(failed, np.nan, se[:, pos])
        vif = np.where(failed, np.nan, batch.vif)
        out.append((est, est_se, also_est, also_se, vif, failed, reasons, df_rep, selected, kept_n))
    return out


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
        At least 1.
    seed : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Root of the random streams (block ``b`` uses child ``b`` of ``SeedSequence(seed)``).
    engine : {"auto", "exact", "raw"}
    alpha : float, optional
        Level of the intervals and tests; default the scenario's.
    progress : callable, optional
        Called as ``progress(done_replicates, total_replicates)`` after each chunk. If it raises
        :class:`~workbench.errors.Cancelled` the run stops and the exception propagates.
    chunk_size : int, optional
        Replicates per chunk (default: sized to :data:`MEMORY_BUDGET`). The exact engine rounds it to whole
        blocks. The results do not depend on it.

    Returns
    -------
    ReplicateArrays

    Raises
    ------
    SimulationError
        Before any work: bad ``n``, ``replicates``, ``alpha``, ``seed`` or ``engine``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> arrays = run_replicates(load_preset("common_cause"), 200, 1000, seed=7)
    >>> arrays.estimate.shape, arrays.engine, arrays.df.tolist()
    ((1000, 2), 'exact', [198.0, 197.0])
    """
    alpha = scenario.study.alpha if alpha is None else alpha
    engine = _check(scenario, n, replicates, alpha, engine)
    n, replicates = int(n), int(replicates)
    root = _root_seed(seed)
    plan = fit_plan(scenario)
    st = structure(scenario)
    k = st.k
    F = len(plan.fits)
    A = len(plan.also_names)
    est = np.full((replicates, F), np.nan)
    se = np.full((replicates, F), np.nan)
    failed = np.zeros((replicates, F), dtype=bool)
    vif = np.full((replicates, F), np.nan)
    also_est = np.full((replicates, F, A), np.nan)
    also_se = np.full((replicates, F, A), np.nan)
    reasons = [Counter() for _ in range(F)]
    dfs = np.full((replicates, F), np.nan)
    selected = np.full((replicates, F), -1, dtype=np.int64)
    retained = np.full((replicates, F), np.nan)

    chunk = _chunk_size(engine, n, k, plan, replicates, chunk_size, progress is not None)
    stream = _Stream(root)
    names = list(st.names)
    if engine == "exact":
        sigma = _used_covariance(scenario, plan.used)
        index = {v: i for i, v in enumerate(plan.used)}
        index_list = [index.get(i, -1) for i in range(k)]
        used_names = [names[i] for i in plan.used]
    else:
        index_list = list(range(k))
        used_names = names
        piecewise = _piecewise(n, k, plan)
        if piecewise:
            chunk = 1
            group_rows = max(PIECE, MEMORY_BUDGET // (8 * (k + 3)))
        else:
            buffer = np.empty((chunk, k, n))

    done = 0
    while done < replicates:
        r = min(chunk, replicates - done)
        data = None
        if engine == "exact":
            S = stream.wishart(r, sigma, n - 1)
        elif piecewise:
            sums = np.zeros(k)
            M = np.zeros((k, k))
            for _, group in stream.pieces(k, n, group_rows):
                evaluate(st, group, axis=0, out=group)
                sums += group.sum(axis=1)
                M += group @ group.T
            S = (M - np.outer(sums, sums) / n)[None]
        else:
            data = buffer[:r]
            stream.noise(data)
            evaluate(st, data, axis=1, out=data)
            S = crossproducts(data)
        results = _fit_chunk(plan, S, data, n, index_list, used_names, alpha)
        rows = slice(done, done + r)
        for j, (e, s, ae, ase, v, fl, why, d, chosen, kept) in enumerate(results):
            dfs[rows, j] = d
            selected[rows, j] = chosen
            retained[rows, j] = kept
            est[rows, j] = e
            se[rows, j] = s
            also_est[rows, j] = ae
            also_se[rows, j] = ase
            vif[rows, j] = v
            failed[rows, j] = fl
            reasons[j].update(why)
        done += r
        if progress is not None:
            progress(done, replicates)

    # one df per strategy for the table: n - p for a fixed OLS fit, the mean over fitted replicates for a
    # selection rule or a restriction (their df vary by replicate), inf (normal intervals) otherwise
    df = np.full(F, np.inf)
    for j, f in enumerate(plan.fits):
        if f.kind != "ols":
            dfs[:, j] = np.inf
        elif f.fixed:
            df[j] = n - len(f.regressors) - 1
        else:
            fitted = ~failed[:, j]
            df[j] = float(np.mean(dfs[fitted, j])) if fitted.any() else np.nan
    # reported fits come first, hidden references after: basic slices keep views, not copies
    S = len(plan.reported)
    shown = slice(0, S)
    fits = plan.fits[:S]
    refs = [f.reference for f in fits]
    ci_low, ci_high, p_value = t_inference(est[:, shown], se[:, shown], dfs[:, shown], alpha)
    a_low, a_high, a_p = t_inference(also_est[:, shown], also_se[:, shown], dfs[:, shown, None], alpha)
    truths = [plan.truths[f.scale] for f in fits]
    return ReplicateArrays(
        strategies=[f.name for f in fits],
        estimate=est[:, shown],
        se=se[:, shown],
        ci_low=ci_low,
        ci_high=ci_high,
        p_value=p_value,
        failed=failed[:, shown],
        reasons={f.name: dict(reasons[j]) for j, f in enumerate(fits)},
        df=df[shown],
        vif=vif[:, shown],
        also_names=plan.also_names,
        also_estimate=also_est[:, shown],
        also_se=also_se[:, shown],
        also_ci_low=a_low,
        also_ci_high=a_high,
        also_p_value=a_p,
        reference=[plan.fits[j].name for j in refs],
        reference_estimate=est[:, refs],
        reference_se=se[:, refs],
        truth=np.array([t.value for t in truths]),
        truth_mcse=np.array([t.mcse for t in truths]),
        estimand=[f.estimand for f in fits],
        engine=engine,
        n=n,
        replicates=replicates,
        seed=int(root.entropy) if isinstance(root.entropy, int) else root.entropy,
        alpha=float(alpha),
        selected=selected[:, shown],
        candidates=[f.adjust for f in fits],
        selection=[f.selection for f in fits],
        retained_n=retained[:, shown],
    )
