"""Sample-size planning: power and precision curves for every strategy, and the smallest n for a target.

Before a study a team asks two questions: *how many units do we need* for the effect to be detectable (power)
or estimated precisely enough (confidence-interval half-width), and *which model must we fit* for the figure to
mean anything. :func:`plan` answers both for every strategy of a scenario at once:

1. It simulates ``replicates`` studies at every size on a grid and scores every strategy there (power, bias,
   empirical and model SE, coverage, RMSE, mean CI half-width, each with its Monte Carlo error as in Morris,
   White & Crowther 2019, Table 6).
2. For each strategy it brackets the smallest n reaching the target power (and, when asked, the target
   half-width) on the grid: the smallest grid size from which every larger grid size reaches it. It then
   bisects between the bracketing sizes until the bracket is within 2% of n or 5 units, re-running the
   simulation at each midpoint with the *same seed* (common random numbers, so that neighbouring sizes share
   their noise and the curve is smooth in n). When even the smallest grid size reaches the target the search
   continues down to the smallest size every strategy can be fitted at.
3. Power of an *invalid* strategy is the probability of rejecting zero for a biased quantity: it is reported,
   but flagged, and its smallest n is marked as misleading with the reason from the graph analysis.
4. On graphs where the closed form applies (linear-Gaussian graphs; large-sample also with binary variables
   that have no causes) the analytic power of :mod:`workbench.analysis.power` sits beside the simulated curve.
5. ``[question] also = [...]`` names further variables whose direct effects (single-door criterion) are
   reported, for every strategy whose model contains them, with their own power, CI half-width and the
   correlation between their estimate and the exposure's across replicates: whether n units can tell the two
   effects apart.

References
----------
1. Morris T.P., White I.R., Crowther M.J. (2019). Using simulation studies to evaluate statistical methods.
   Statistics in Medicine 38(11):2074-2102, Table 6.
2. Cohen J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed. Erlbaum, ch. 2.
3. Pearl J. (2009). Causality, 2nd ed., Def. 3.3.1 and Thm 5.3.1 (validity of adjustment sets).

Examples
--------
>>> from workbench import load_preset
>>> result = plan(load_preset("common_cause"), sample_sizes=[50, 100, 200], replicates=400, seed=1)
>>> list(result.smallest_n.columns)[:5]
['strategy', 'n_for_power', 'n_for_halfwidth', 'valid', 'note']
"""

from __future__ import annotations

import dataclasses
import json
import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from workbench.analysis.power import analytic_covariance, find_smallest_n, large_sample
from workbench.engine.replicates import choose_engine, run_replicates
from workbench.engine.truth import true_effect
from workbench.errors import SimulationError
from workbench.graph.adjustment import judge, judge_strategy
from workbench.scenario.model import Scenario
from workbench.scenario.write import write_text_atomically

__all__ = ["PlanResult", "plan", "RELATIVE_RESOLUTION", "ABSOLUTE_RESOLUTION"]

#: The bisection stops when the bracket is within this share of n ...
RELATIVE_RESOLUTION = 0.02
#: ... or within this many units, whichever is larger.
ABSOLUTE_RESOLUTION = 5

TABLE_COLUMNS = [
    "n",
    "strategy",
    "power",
    "power_mcse",
    "bias",
    "bias_mcse",
    "emp_se",
    "model_se",
    "coverage",
    "coverage_mcse",
    "rmse",
    "mean_ci_halfwidth",
    "analytic_power",
    "analytic_se",
    "analytic_ci_halfwidth",
    "failures",
    "valid",
    "flag",
]
SMALLEST_COLUMNS = [
    "strategy",
    "n_for_power",
    "n_for_halfwidth",
    "valid",
    "note",
    "analytic_n_for_power",
    "analytic_n_for_halfwidth",
    "estimand",
]
ALSO_COLUMNS = [
    "n",
    "strategy",
    "variable",
    "truth",
    "power",
    "power_mcse",
    "bias",
    "bias_mcse",
    "emp_se",
    "coverage",
    "coverage_mcse",
    "mean_ci_halfwidth",
    "correlation",
    "analytic_power",
    "valid",
    "flag",
]
ALSO_SMALLEST_COLUMNS = ["strategy", "variable", "n_for_power", "valid", "note", "analytic_n_for_power"]
SEARCH_COLUMNS = ["n", "strategy", "variable", "power", "power_mcse", "mean_ci_halfwidth", "on_grid"]
_ANALYTIC_CEILING = 10**9


# --------------------------------------------------------------------------------------------------------
# Result
# --------------------------------------------------------------------------------------------------------
def _plain(value: Any) -> Any:
    """A JSON-ready Python value: NaN and infinities become None, numpy scalars Python scalars."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if value is pd.NA or value is pd.NaT:
        return None
    return value


def _rows(frame: pd.DataFrame | None) -> list[dict]:
    if frame is None:
        return []
    return [{k: _plain(v) for k, v in row.items()} for row in frame.to_dict(orient="records")]


@dataclass
class PlanResult:
    """The outcome of :func:`plan`.

    Attributes
    ----------
    title : str
    replicates : int
        Simulated studies at every size.
    seed : int
        The seed used at every size (common random numbers).
    alpha : float
    target_power : float
    target_halfwidth : float or None
    sample_sizes : list of int
        The grid.
    truth, truth_mcse : float
        The target effect and its Monte Carlo error (0 for a closed form).
    engine : str
        The engine that ran (``"exact"`` or ``"raw"``; ``"exact, raw"`` when the search went below the sizes
        the exact engine handles).
    table : DataFrame
        Long, one row per grid size and strategy: ``n, strategy, power, power_mcse, bias, bias_mcse, emp_se,
        model_se, coverage, coverage_mcse, rmse, mean_ci_halfwidth, analytic_power, analytic_se,
        analytic_ci_halfwidth, failures, valid, flag`` (analytic columns NaN where the closed form does not
        apply; ``flag`` empty for a valid strategy).
    smallest_n : DataFrame
        One row per strategy: ``strategy, n_for_power, n_for_halfwidth, valid, note, analytic_n_for_power,
        analytic_n_for_halfwidth, estimand`` (sizes are nullable integers, missing where not reached;
        ``estimand`` says in words what the strategy's estimate targets).
    also_table : DataFrame or None
        When the question names ``also`` variables: ``n, strategy, variable, truth, power, power_mcse, bias,
        bias_mcse, emp_se, coverage, coverage_mcse, mean_ci_halfwidth, correlation, analytic_power, valid,
        flag`` for every strategy whose model contains the variable.
    also_smallest_n : DataFrame or None
        ``strategy, variable, n_for_power, valid, note, analytic_n_for_power``.
    search : DataFrame
        Every size simulated (grid and bisection): ``n, strategy, variable, power, power_mcse,
        mean_ci_halfwidth, on_grid`` (``variable`` is the exposure or an ``also`` variable). With the raw
        engine a bisection size fits only the strategies whose search needs it.
    elapsed : float
        Seconds taken.
    """

    title: str
    replicates: int
    seed: int
    alpha: float
    target_power: float
    target_halfwidth: float | None
    sample_sizes: list[int]
    truth: float
    truth_mcse: float
    engine: str
    exposure: str
    outcome: str
    table: pd.DataFrame
    smallest_n: pd.DataFrame
    also_table: pd.DataFrame | None = None
    also_smallest_n: pd.DataFrame | None = None
    search: pd.DataFrame = field(default_factory=pd.DataFrame)
    elapsed: float = 0.0

    def to_dict(self) -> dict:
        """The result as JSON-ready nested dicts and lists (NaN as None).

        Keys: ``title, exposure, outcome, replicates, seed, alpha, target_power, target_halfwidth,
        sample_sizes, truth, truth_mcse, engine, table, smallest_n`` and, when the question names ``also``
        variables, ``also`` and ``also_smallest_n``; each table is a list of row dicts keyed by column name.
        """
        out = {
            "title": self.title,
            "exposure": self.exposure,
            "outcome": self.outcome,
            "replicates": int(self.replicates),
            "seed": int(self.seed),
            "alpha": float(self.alpha),
            "target_power": float(self.target_power),
            "target_halfwidth": _plain(self.target_halfwidth),
            "sample_sizes": [int(n) for n in self.sample_sizes],
            "truth": _plain(float(self.truth)),
            "truth_mcse": _plain(float(self.truth_mcse)),
            "engine": self.engine,
            "table": _rows(self.table),
            "smallest_n": _rows(self.smallest_n),
        }
        if self.also_table is not None:
            out["also"] = _rows(self.also_table)
            out["also_smallest_n"] = _rows(self.also_smallest_n)
        return out

    def to_json(self, indent: int | None = 2) -> str:
        """The result as JSON text (see :meth:`to_dict`); NaN is written as ``null``."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def to_csv(self, path) -> None:
        """Write :attr:`table` as CSV, atomically (temporary file and rename)."""
        write_text_atomically(path, self.table.to_csv(index=False))

    def to_text(self) -> str:
        """Readable tables: the power curves, the smallest n per strategy with its notes, and the ``also``
        figures."""
        lines = [self.title, "=" * min(len(self.title), 100)]
        lines.append(
            f"effect of {self.exposure} on {self.outcome}: truth {self.truth:.4g}"
            + (f" (MCSE {self.truth_mcse:.2g})" if self.truth_mcse else "")
            + f"; {self.replicates:,} replicates per size, seed {self.seed}, alpha {self.alpha:g}, "
            f"engine {self.engine}"
        )
        target = f"target power {self.target_power:g}"
        if self.target_halfwidth is not None:
            target += f", target CI half-width {self.target_halfwidth:g}"
        lines.append(target)
        lines.append("")
        lines.append("Power by sample size (simulated +/- MCSE; analytic in brackets where available)")
        lines.append(_curve_text(self.table, "power"))
        lines.append("")
        lines.append("Mean CI half-width by sample size")
        lines.append(_curve_text(self.table, "mean_ci_halfwidth"))
        lines.append("")
        lines.append("Bias and coverage by sample size")
        shown = self.table[["n", "strategy", "bias", "bias_mcse", "emp_se", "model_se", "coverage", "rmse"]]
        lines.append(shown.to_string(index=False, float_format=lambda v: f"{v:.4g}"))
        lines.append("")
        lines.append("Smallest n")
        lines.append(
            _smallest_text(self.smallest_n, ["n_for_power", "n_for_halfwidth", "analytic_n_for_power"])
        )
        invalid = self.table.loc[~self.table["valid"].astype(bool), ["strategy", "flag"]].drop_duplicates()
        for _, row in invalid.iterrows():
            lines.append(f"  ! {row['strategy']}: {row['flag']}")
        if self.also_table is not None and len(self.also_table):
            lines.append("")
            lines.append("Separating the effects (direct effects of the 'also' variables)")
            shown = self.also_table[
                ["n", "strategy", "variable", "truth", "power", "bias", "mean_ci_halfwidth", "correlation"]
            ]
            lines.append(shown.to_string(index=False, float_format=lambda v: f"{v:.4g}"))
            lines.append("")
            lines.append(
                _smallest_text(self.also_smallest_n, ["variable", "n_for_power", "analytic_n_for_power"])
            )
        return "\n".join(lines)


def _curve_text(table: pd.DataFrame, column: str) -> str:
    cells = pd.DataFrame(index=pd.Index(sorted(table["n"].unique()), name="n"))
    for strategy in dict.fromkeys(table["strategy"]):
        part = table[table["strategy"] == strategy].set_index("n")
        text = []
        for n in cells.index:
            row = part.loc[n]
            value = row[column]
            if column == "power":
                cell = f"{value:.3f}+/-{row['power_mcse']:.3f}" if np.isfinite(value) else "-"
                if np.isfinite(row["analytic_power"]):
                    cell += f" [{row['analytic_power']:.3f}]"
            else:
                cell = f"{value:.4g}" if np.isfinite(value) else "-"
                if np.isfinite(row["analytic_ci_halfwidth"]):
                    cell += f" [{row['analytic_ci_halfwidth']:.4g}]"
            text.append(cell)
        mark = "" if bool(part["valid"].iloc[0]) else " (invalid!)"
        cells[f"{strategy}{mark}"] = text
    return cells.to_string()


def _smallest_text(frame: pd.DataFrame, columns: list[str]) -> str:
    lines = []
    for _, row in frame.iterrows():
        parts = []
        for c in columns:
            value = row[c]
            if c == "variable":
                parts.append(str(value))
            else:
                parts.append(f"{c} = {'-' if pd.isna(value) else int(value)}")
        lines.append(
            f"  {row['strategy']}: " + ", ".join(parts) + (f"  ({row['note']})" if row["note"] else "")
        )
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------------------
# Checks of the arguments
# --------------------------------------------------------------------------------------------------------
def _is_int(value: Any) -> bool:
    return isinstance(value, int | np.integer) and not isinstance(value, bool)


def _check_arguments(scenario, sample_sizes, replicates, target_power, target_halfwidth, progress):
    if not isinstance(scenario, Scenario):
        raise SimulationError(f"plan: scenario must be a Scenario, got {type(scenario).__name__}")
    study = scenario.study
    widest = max(scenario.strategies, key=lambda s: s.n_coefficients)
    floor = widest.n_coefficients + 2
    sizes = study.sample_sizes if sample_sizes is None else sample_sizes
    if isinstance(sizes, str | bytes) or not isinstance(sizes, Sequence | np.ndarray):
        raise SimulationError(f"plan: sample_sizes must be a list of integers, got {sizes!r}")
    if len(sizes) == 0:
        raise SimulationError("plan: sample_sizes must list at least one size")
    for i, n in enumerate(sizes, start=1):
        if not _is_int(n):
            raise SimulationError(f"plan: sample_sizes[{i}] must be an integer, got {n!r}")
        if n < floor:
            raise SimulationError(
                f"plan: sample_sizes[{i}] = {n} is too small for strategy '{widest.name}' "
                f"({widest.n_coefficients} coefficients); sizes must be at least {floor}"
            )
    replicates = study.replicates if replicates is None else replicates
    if not _is_int(replicates) or replicates < 2:
        raise SimulationError(f"plan: replicates must be an integer >= 2, got {replicates!r}")
    target_power = study.target_power if target_power is None else target_power
    if (
        isinstance(target_power, bool)
        or not isinstance(target_power, int | float)
        or not 0 < target_power < 1
    ):
        raise SimulationError(f"plan: target_power must lie strictly between 0 and 1, got {target_power!r}")
    target_halfwidth = study.target_halfwidth if target_halfwidth is None else target_halfwidth
    if target_halfwidth is not None and (
        isinstance(target_halfwidth, bool)
        or not isinstance(target_halfwidth, int | float)
        or not math.isfinite(target_halfwidth)
        or target_halfwidth <= 0
    ):
        raise SimulationError(f"plan: target_halfwidth must be a number > 0, got {target_halfwidth!r}")
    if progress is not None and not callable(progress):
        raise SimulationError(f"plan: progress must be callable progress(done, total), got {progress!r}")
    sizes = sorted({int(n) for n in sizes})
    return sizes, int(replicates), float(target_power), target_halfwidth, floor


def _normalise_seed(seed, study_seed: int) -> int:
    """The one integer seed used at every size (common random numbers)."""
    if seed is None:
        return int(study_seed)
    if isinstance(seed, np.random.Generator):
        return int(seed.integers(0, 2**63 - 1))
    if _is_int(seed) and seed >= 0:
        return int(seed)
    raise SimulationError(
        f"plan: seed must be None, a non-negative integer or a numpy Generator, got {seed!r}"
    )


# --------------------------------------------------------------------------------------------------------
# Simulation at one size
# --------------------------------------------------------------------------------------------------------
@dataclass
class _Point:
    """Scores of the strategies fitted at one sample size (NaN for the others)."""

    n: int
    fitted: np.ndarray  # (S,) bool
    measures: dict[str, np.ndarray]  # key -> (S,)
    halfwidth: np.ndarray  # (S,)
    also_measures: list[dict[str, np.ndarray]]  # per also variable, key -> (S,)
    also_halfwidth: np.ndarray  # (S, A)
    correlation: np.ndarray  # (S, A)

    def merge(self, other: _Point) -> None:
        """Take the strategies fitted in ``other`` (same n, same seed, other strategies)."""
        take = other.fitted & ~self.fitted
        for key, values in other.measures.items():
            self.measures[key] = np.where(take, values, self.measures[key])
        self.halfwidth = np.where(take, other.halfwidth, self.halfwidth)
        for mine, theirs in zip(self.also_measures, other.also_measures, strict=True):
            for key, values in theirs.items():
                mine[key] = np.where(take, values, mine[key])
        self.also_halfwidth = np.where(take[:, None], other.also_halfwidth, self.also_halfwidth)
        self.correlation = np.where(take[:, None], other.correlation, self.correlation)
        self.fitted = self.fitted | other.fitted


def _scatter(values: np.ndarray, index: list[int], size: int) -> np.ndarray:
    """Columns ``index`` of a full-width (size, ...) array filled with NaN elsewhere."""
    out = np.full((size, *np.shape(values)[1:]), np.nan)
    out[index] = values
    return out


def _mean_halfwidth(low: np.ndarray, high: np.ndarray) -> np.ndarray:
    width = (high - low) / 2.0
    finite = np.isfinite(width)
    count = finite.sum(axis=0)
    total = np.where(finite, width, 0.0).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(count > 0, total / np.maximum(count, 1), np.nan)


def _correlation(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Column-wise correlation of (R, S) with (R, S, A) over the rows where both are finite -> (S, A)."""
    a = np.broadcast_to(a[:, :, None], b.shape)
    ok = np.isfinite(a) & np.isfinite(b)
    count = ok.sum(axis=0)
    safe = np.maximum(count, 1)
    a0 = np.where(ok, a, 0.0)
    b0 = np.where(ok, b, 0.0)
    am = a0.sum(axis=0) / safe
    bm = b0.sum(axis=0) / safe
    da = np.where(ok, a - am, 0.0)
    db = np.where(ok, b - bm, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = (da * db).sum(axis=0) / np.sqrt((da * da).sum(axis=0) * (db * db).sum(axis=0))
    return np.where(count > 2, r, np.nan)


# --------------------------------------------------------------------------------------------------------
# The search for the smallest n
# --------------------------------------------------------------------------------------------------------
@dataclass
class _Criterion:
    """One target for one strategy (and variable): reached(point) -> bool."""

    key: tuple
    strategy: int
    reached: Callable[[_Point], bool]
    low: int = 0
    high: int | None = None
    done: bool = False
    below_grid: bool = False


def _bracket(criterion: _Criterion, grid: list[int], points: dict[int, _Point], floor: int) -> None:
    """The smallest grid size from which every larger grid size reaches the target, and the size below it."""
    flags = [criterion.reached(points[n]) for n in grid]
    if not flags[-1]:
        criterion.done = True
        criterion.high = None
        return
    i = len(grid) - 1
    while i > 0 and flags[i - 1]:
        i -= 1
    criterion.high = grid[i]
    if i == 0:
        criterion.low = floor - 1
        criterion.below_grid = grid[0] > floor
    else:
        criterion.low = grid[i - 1]


def _narrow_enough(low: int, high: int) -> bool:
    return high - low <= max(ABSOLUTE_RESOLUTION, RELATIVE_RESOLUTION * high)


def _search_steps(low: int, high: int) -> int:
    steps = 0
    while not _narrow_enough(low, high):
        high = (low + high) // 2 + 1
        steps += 1
    return steps


# --------------------------------------------------------------------------------------------------------
# The planner
# --------------------------------------------------------------------------------------------------------
class _Planner:
    """The state of one plan: settings, the graph's verdicts, the closed forms, and every size simulated."""

    def __init__(self, scenario, sizes, replicates, target_power, target_halfwidth, floor, seed, progress):
        self.scenario = scenario
        self.sizes = sizes
        self.replicates = replicates
        self.target_power = target_power
        self.target_halfwidth = target_halfwidth
        self.floor = floor
        self.seed = seed
        self.progress = progress
        self.alpha = float(scenario.study.alpha)
        q = scenario.question
        self.exposure = q.exposure
        self.strategies = list(scenario.strategies)
        self.names = [s.name for s in self.strategies]
        self.also = list(q.also)
        truth = true_effect(scenario)
        self.truth = float(truth.value)
        self.truth_mcse = float(truth.mcse)
        # each strategy's own target (the scale its model estimates), filled in by the engine's first run
        self.strategy_truth = np.full(len(self.names), self.truth)
        self.estimand = [""] * len(self.names)

        self.verdicts = [judge_strategy(scenario, s) for s in self.strategies]
        self.valid = np.array([v.valid for v in self.verdicts], dtype=bool)
        sigma = analytic_covariance(scenario)
        self.analytic = [
            # no closed form for a set chosen from the data or a restricted or matched sample
            large_sample(scenario, s.adjust, sigma=sigma)
            if sigma is not None and s.selection is None and not s.restrict and not s.match
            else None
            for s in self.strategies
        ]

        # 'also' variables: the strategies whose model has them, their truth (the arrow into the outcome) and
        # whether the model identifies their direct effect (single-door criterion)
        outcome_parents = scenario.parents(q.outcome)
        self.also_truth = {
            v: float(sum(e for source, e in outcome_parents if source == v)) for v in self.also
        }
        self.also_pairs: list[tuple[int, int]] = []  # (strategy index, also index)
        self.also_verdicts: dict[tuple[int, int], Any] = {}
        self.also_analytic: dict[tuple[int, int], Any] = {}
        for i, s in enumerate(self.strategies):
            for a, v in enumerate(self.also):
                if v in s.adjust:
                    regressors = (q.exposure, *s.adjust)
                    self.also_pairs.append((i, a))
                    self.also_verdicts[i, a] = judge(scenario, regressors, target="direct", exposure=v)
                    self.also_analytic[i, a] = (
                        large_sample(scenario, regressors, variable=v, sigma=sigma)
                        if sigma is not None and s.selection is None and not s.restrict and not s.match
                        else None
                    )

        self.points: dict[int, _Point] = {}
        self.subsets: dict[tuple[int, ...], Scenario] = {}
        self.runs = 0
        self.engines: set[str] = set()
        self.runs_planned = len(sizes)
        self.reported = 0

    # ---- simulation ----------------------------------------------------------------------------------
    def _report(self, done: int, total: int) -> None:
        if self.progress is None:
            return
        self.reported = done = max(done, self.reported)
        self.progress(int(done), int(max(total, done)))

    def _subset_scenario(self, subset: tuple[int, ...]) -> Scenario:
        if len(subset) == len(self.names):
            return self.scenario
        if subset not in self.subsets:
            strategies = tuple(self.strategies[i] for i in subset)
            self.subsets[subset] = dataclasses.replace(self.scenario, strategies=strategies)
        return self.subsets[subset]

    def evaluate(self, n: int, strategies=None) -> _Point:
        """Simulate ``replicates`` studies of ``n`` units with the plan's one seed and score the strategies.

        ``strategies`` (indices) limits the fits when the raw engine runs: its data do not depend on which
        strategies are fitted, so a subset gives the same numbers for those strategies at a fraction of the
        cost. The exact engine's draws depend on the variables the strategies use, and it is cheap, so it
        always fits them all.
        """
        S = len(self.names)
        subset = range(S) if strategies is None or choose_engine(self.scenario, n) == "exact" else strategies
        have = self.points.get(n)
        subset = tuple(sorted(i for i in set(subset) if have is None or not have.fitted[i]))
        if not subset:
            return have
        R = self.replicates
        base = self.runs * R

        def inner(done, total):
            self._report(base + int(R * done / total if total else R), self.runs_planned * R)

        arrays = run_replicates(
            self._subset_scenario(subset),
            n,
            R,
            self.seed,
            alpha=self.alpha,
            progress=inner if self.progress else None,
        )
        index = list(subset)
        self.strategy_truth[index] = arrays.truth
        for i, words in zip(index, arrays.estimand, strict=True):
            self.estimand[i] = words
        measures = arrays.score()
        also_measures = []
        also_halfwidth = np.full((len(index), len(self.also)), np.nan)
        correlation = also_halfwidth.copy()
        if self.also:
            columns = [list(arrays.also_names).index(v) for v in self.also]
            for a, v in enumerate(self.also):
                j = columns[a]
                low, high = arrays.also_ci_low[:, :, j], arrays.also_ci_high[:, :, j]
                also_measures.append(arrays.score_also(j, self.also_truth[v]))
                also_halfwidth[:, a] = _mean_halfwidth(low, high)
            correlation = _correlation(arrays.estimate, arrays.also_estimate[:, :, columns])
        fitted = np.zeros(S, dtype=bool)
        fitted[index] = True
        point = _Point(
            n,
            fitted,
            {key: _scatter(values, index, S) for key, values in measures.items()},
            _scatter(_mean_halfwidth(arrays.ci_low, arrays.ci_high), index, S),
            [{key: _scatter(values, index, S) for key, values in m.items()} for m in also_measures],
            _scatter(also_halfwidth, index, S),
            _scatter(correlation, index, S),
        )
        self.engines.add(str(arrays.engine))
        if have is None:
            self.points[n] = have = point
        else:
            have.merge(point)
        self.runs += 1
        self.runs_planned = max(self.runs_planned, self.runs)
        self._report(self.runs * R, self.runs_planned * R)
        return have

    # ---- the search for the smallest n ---------------------------------------------------------------
    def criteria(self) -> list[_Criterion]:
        power, width = self.target_power, self.target_halfwidth
        out = []
        for i, name in enumerate(self.names):
            out.append(_Criterion(("power", name), i, lambda p, i=i: p.measures["power"][i] >= power))
            if width is not None:
                out.append(_Criterion(("halfwidth", name), i, lambda p, i=i: p.halfwidth[i] <= width))
        for i, a in self.also_pairs:
            key = ("also_power", self.names[i], self.also[a])
            out.append(_Criterion(key, i, lambda p, i=i, a=a: p.also_measures[a]["power"][i] >= power))
        return out

    def search(self) -> dict[tuple, _Criterion]:
        """Bracket every criterion on the grid, then bisect all open brackets together."""
        criteria = self.criteria()
        for c in criteria:
            _bracket(c, self.sizes, self.points, self.floor)
            if not c.done and _narrow_enough(c.low, c.high):
                c.done = True

        def inside(c: _Criterion) -> list[int]:
            return [n for n, p in self.points.items() if c.low < n < c.high and p.fitted[c.strategy]]

        while open_criteria := [c for c in criteria if not c.done]:
            self.runs_planned = self.runs + sum(_search_steps(c.low, c.high) for c in open_criteria)
            wanted: dict[int, set[int]] = {}
            for c in open_criteria:
                # a size already simulated inside the bracket (for another criterion) narrows it for free
                if not inside(c):
                    wanted.setdefault((c.low + c.high) // 2, set()).add(c.strategy)
            for n in sorted(wanted):
                self.evaluate(n, wanted[n])
            for c in open_criteria:
                middle = (c.low + c.high) / 2
                n = min(inside(c), key=lambda m: (abs(m - middle), m))
                if c.reached(self.points[n]):
                    c.high = n
                else:
                    c.low = n
                c.done = _narrow_enough(c.low, c.high)
        done = self.runs * self.replicates
        self._report(done, done)
        return {c.key: c for c in criteria}

    # ---- tables ----------------------------------------------------------------------------------------
    def table(self) -> pd.DataFrame:
        grid = np.array(self.sizes)
        nan = np.full(len(grid), np.nan)
        curves = [
            (ls.power(grid, self.alpha), ls.se(grid), ls.halfwidth(grid, self.alpha)) if ls else (nan,) * 3
            for ls in self.analytic
        ]
        flags = [
            ""
            if v.valid
            else "invalid: " + ("; ".join(v.reasons[:2]) or "the graph says this set is not valid")
            for v in self.verdicts
        ]
        rows = []
        for g, n in enumerate(self.sizes):
            p = self.points[n]
            for i, name in enumerate(self.names):
                row = {"n": n, "strategy": name}
                for key in TABLE_COLUMNS[2 : TABLE_COLUMNS.index("mean_ci_halfwidth")]:
                    row[key] = p.measures[key][i]
                row["mean_ci_halfwidth"] = p.halfwidth[i]
                row["analytic_power"], row["analytic_se"], row["analytic_ci_halfwidth"] = (
                    c[g] for c in curves[i]
                )
                row.update(failures=p.measures["failures"][i], valid=bool(self.valid[i]), flag=flags[i])
                rows.append(row)
        table = pd.DataFrame(rows, columns=TABLE_COLUMNS)
        for column in TABLE_COLUMNS[2:-3]:
            table[column] = table[column].astype(float)
        table["failures"] = table["failures"].astype(int)
        return table

    def _analytic_n(self, ls, what: str) -> int | None:
        if ls is None:
            return None
        if what == "power":
            return _analytic_n(lambda m: ls.power(m, self.alpha) >= self.target_power, ls, self.floor)
        if self.target_halfwidth is None:
            return None
        return _analytic_n(lambda m: ls.halfwidth(m, self.alpha) <= self.target_halfwidth, ls, self.floor)

    def smallest_n(self, found: dict[tuple, _Criterion]) -> pd.DataFrame:
        largest = self.points[self.sizes[-1]]
        rows = []
        for i, name in enumerate(self.names):
            ls = self.analytic[i]
            power, width = found["power", name], found.get(("halfwidth", name))
            truth = self.strategy_truth[i]
            notes = []
            if not self.valid[i]:
                reasons = self.verdicts[i].reasons
                estimand = ls.estimand if ls else float(largest.measures["mean"][i])
                notes.append(
                    f"misleading: '{name}' is not a valid adjustment set ({reasons[0] if reasons else 'see check'}); "
                    f"its power detects {estimand:.4g}, a biased quantity, not the effect {truth:.4g}"
                )
            notes += _criterion_notes(
                power, "power", self.target_power, largest.measures["power"][i], self.sizes
            )
            if width is not None:
                notes += _criterion_notes(
                    width, "CI half-width", self.target_halfwidth, largest.halfwidth[i], self.sizes
                )
            bias, bias_mcse = largest.measures["bias"][i], largest.measures["bias_mcse"][i]
            biased = self.valid[i] and abs(bias) > 4 * bias_mcse and abs(bias) > 0.05 * abs(truth)
            if biased and self.scenario.strategy(name).selection is not None:
                notes.append(
                    f"biased in simulation: bias {bias:.3g} (MCSE {bias_mcse:.2g}) at n = {self.sizes[-1]}, "
                    "because the covariates are chosen from the data and a needed one is often left out; "
                    "its power is not a fair guide"
                )
            elif biased:
                notes.append(
                    f"valid by the graph but biased in simulation: bias {bias:.3g} (MCSE {bias_mcse:.2g}) at "
                    f"n = {self.sizes[-1]}; the model estimates a {self.estimand[i] or 'different quantity'}, "
                    f"scored against {truth:.4g}"
                )
            if self.valid[i] and not biased:
                nominal = 1 - self.alpha
                short = [
                    (n, p.measures["coverage"][i])
                    for n, p in sorted(self.points.items())
                    if p.fitted[i]
                    and nominal - p.measures["coverage"][i] > 3 * p.measures["coverage_mcse"][i]
                ]
                if short:
                    n_low, worst = min(short, key=lambda item: item[1])
                    notes.append(
                        f"optimistic: its {nominal:.0%} intervals cover the truth in only {worst:.1%} of studies "
                        f"at n = {n_low}, so its SEs are too small and its power overstates what a study "
                        "would honestly detect"
                    )
            if self.valid[i] and abs(truth) < 1e-12:
                notes.append(f"the true effect is 0: power stays at alpha = {self.alpha:g} whatever n")
            rows.append(
                {
                    "strategy": name,
                    "n_for_power": power.high,
                    "n_for_halfwidth": width.high if width is not None else None,
                    "valid": bool(self.valid[i]),
                    "note": "; ".join(notes),
                    "analytic_n_for_power": self._analytic_n(ls, "power"),
                    "analytic_n_for_halfwidth": self._analytic_n(ls, "halfwidth"),
                    "estimand": self.estimand[i],
                }
            )
        return _with_sizes(pd.DataFrame(rows, columns=SMALLEST_COLUMNS))

    def search_table(self) -> pd.DataFrame:
        rows = []
        for n in sorted(self.points):
            p = self.points[n]
            for i, name in enumerate(self.names):
                if not p.fitted[i]:
                    continue
                rows.append(
                    {
                        "n": n,
                        "strategy": name,
                        "variable": self.exposure,
                        "power": p.measures["power"][i],
                        "power_mcse": p.measures["power_mcse"][i],
                        "mean_ci_halfwidth": p.halfwidth[i],
                        "on_grid": n in self.sizes,
                    }
                )
                for j, a in self.also_pairs:
                    if j == i:
                        m = p.also_measures[a]
                        rows.append(
                            {
                                "n": n,
                                "strategy": name,
                                "variable": self.also[a],
                                "power": m["power"][i],
                                "power_mcse": m["power_mcse"][i],
                                "mean_ci_halfwidth": p.also_halfwidth[i, a],
                                "on_grid": n in self.sizes,
                            }
                        )
        return pd.DataFrame(rows, columns=SEARCH_COLUMNS)

    def also_tables(self, found: dict[tuple, _Criterion]) -> tuple[pd.DataFrame | None, pd.DataFrame | None]:
        if not self.also:
            return None, None
        rows = []
        for n in self.sizes:
            p = self.points[n]
            for i, a in self.also_pairs:
                m, verdict, ls = p.also_measures[a], self.also_verdicts[i, a], self.also_analytic[i, a]
                row = {
                    "n": n,
                    "strategy": self.names[i],
                    "variable": self.also[a],
                    "truth": self.also_truth[self.also[a]],
                }
                for key in ALSO_COLUMNS[
                    ALSO_COLUMNS.index("power") : ALSO_COLUMNS.index("mean_ci_halfwidth")
                ]:
                    row[key] = m[key][i]
                row.update(
                    mean_ci_halfwidth=p.also_halfwidth[i, a],
                    correlation=p.correlation[i, a],
                    analytic_power=ls.power(n, self.alpha) if ls else np.nan,
                    valid=bool(verdict.valid),
                    flag=""
                    if verdict.valid
                    else "invalid for the direct effect: " + "; ".join(verdict.reasons[:2]),
                )
                rows.append(row)
        table = pd.DataFrame(rows, columns=ALSO_COLUMNS)
        for column in ALSO_COLUMNS[3:-2]:
            table[column] = table[column].astype(float)

        largest = self.points[self.sizes[-1]]
        small = []
        for i, a in self.also_pairs:
            name, v = self.names[i], self.also[a]
            c, verdict = found["also_power", name, v], self.also_verdicts[i, a]
            notes = []
            if not verdict.valid:
                why = verdict.reasons[0] if verdict.reasons else "the single-door criterion fails"
                notes.append(f"misleading: the model does not identify the direct effect of {v} ({why})")
            notes += _criterion_notes(
                c, "power", self.target_power, largest.also_measures[a]["power"][i], self.sizes
            )
            small.append(
                {
                    "strategy": name,
                    "variable": v,
                    "n_for_power": c.high,
                    "valid": bool(verdict.valid),
                    "note": "; ".join(notes),
                    "analytic_n_for_power": self._analytic_n(self.also_analytic[i, a], "power"),
                }
            )
        return table, _with_sizes(pd.DataFrame(small, columns=ALSO_SMALLEST_COLUMNS))


def _with_sizes(frame: pd.DataFrame) -> pd.DataFrame:
    """Size columns as nullable integers (missing where a target is not reached)."""
    for column in frame.columns:
        if column.startswith(("n_for", "analytic_n_for")):
            frame[column] = frame[column].astype("Int64")
    return frame


def plan(
    scenario: Scenario,
    *,
    sample_sizes: Sequence[int] | None = None,
    replicates: int | None = None,
    target_power: float | None = None,
    target_halfwidth: float | None = None,
    seed: int | np.random.Generator | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> PlanResult:
    """Power and precision curves of every strategy, and the smallest n reaching each target.

    Parameters
    ----------
    scenario : Scenario
    sample_sizes : sequence of int, optional
        The grid; default ``scenario.study.sample_sizes``. Each must exceed the widest strategy's
        coefficients by 2.
    replicates : int, optional
        Simulated studies at every size (grid and bisection); default ``scenario.study.replicates``.
    target_power : float, optional
        In (0, 1); default ``scenario.study.target_power``.
    target_halfwidth : float, optional
        Target mean CI half-width (in the effect's units); default ``scenario.study.target_halfwidth``;
        None skips that search.
    seed : None, int or numpy.random.Generator, optional
        Default ``scenario.study.seed``. One integer seed is used at every size (common random numbers);
        a Generator gives that integer.
    progress : callable ``progress(done, total)``, optional
        Called as the work proceeds, in replicates over the whole plan; ``total`` grows when the bisection
        needs more sizes than first estimated. It may raise :class:`~workbench.errors.Cancelled` to stop.

    Returns
    -------
    PlanResult

    Raises
    ------
    SimulationError
        For bad settings, before any work.

    Notes
    -----
    Smallest n: the target is bracketed on the grid by the smallest grid size from which every larger grid
    size reaches it, then the bracket is bisected with the same seed at every size until it is within
    ``max(5, 0.02 n)`` units; the upper end is reported. All strategies are fitted at every simulated size,
    and a size simulated for one strategy's search narrows every other bracket it falls into.

    References
    ----------
    Morris T.P., White I.R., Crowther M.J. (2019). Statistics in Medicine 38(11):2074-2102, Table 6.
    Cohen J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed., ch. 2.

    Examples
    --------
    >>> from workbench import load_preset
    >>> result = plan(load_preset("common_cause"), sample_sizes=[50, 100, 200, 400], replicates=500, seed=3)
    >>> result.table[["n", "strategy"]].head(2).to_dict(orient="records")
    [{'n': 50, 'strategy': 'unadjusted'}, {'n': 50, 'strategy': 'adjust_soil'}]
    >>> row = result.smallest_n.set_index("strategy").loc["adjust_soil"]
    >>> bool(100 < row["n_for_power"] < 200), bool(row["valid"])
    (True, True)
    >>> result.smallest_n.set_index("strategy").loc["unadjusted", "note"][:10]
    'misleading'
    """
    started = time.perf_counter()
    sizes, replicates, target_power, target_halfwidth, floor = _check_arguments(
        scenario, sample_sizes, replicates, target_power, target_halfwidth, progress
    )
    seed = _normalise_seed(seed, scenario.study.seed)
    planner = _Planner(scenario, sizes, replicates, target_power, target_halfwidth, floor, seed, progress)
    for n in sizes:
        planner.evaluate(n)
    found = planner.search()
    also_table, also_smallest = planner.also_tables(found)
    return PlanResult(
        title=scenario.title,
        replicates=replicates,
        seed=seed,
        alpha=planner.alpha,
        target_power=target_power,
        target_halfwidth=target_halfwidth,
        sample_sizes=sizes,
        truth=planner.truth,
        truth_mcse=planner.truth_mcse,
        engine=", ".join(sorted(planner.engines)),
        exposure=scenario.question.exposure,
        outcome=scenario.question.outcome,
        table=planner.table(),
        smallest_n=planner.smallest_n(found),
        also_table=also_table,
        also_smallest_n=also_smallest,
        search=planner.search_table(),
        elapsed=time.perf_counter() - started,
    )


def _criterion_notes(
    c: _Criterion, what: str, target: float, at_largest: float, sizes: list[int]
) -> list[str]:
    if c.high is None:
        return [
            f"{what} target {target:g} not reached within the largest size {sizes[-1]} ({at_largest:.3g} there)"
        ]
    if c.below_grid and c.high < sizes[0]:
        return [f"{what} target reached below the smallest size on the grid ({sizes[0]})"]
    return []


def _analytic_n(reached, ls, floor: int) -> int | None:
    """Smallest n by the closed form (None where unavailable or not reached below 10^9)."""
    if ls is None or not (math.isfinite(ls.se_factor) and ls.se_factor > 0):
        return None
    low, high = floor - 1, max(floor, 16)
    while not reached(high):
        if high >= _ANALYTIC_CEILING:
            return None
        low, high = high, min(high * 4, _ANALYTIC_CEILING)
    return find_smallest_n(reached, low, high)
