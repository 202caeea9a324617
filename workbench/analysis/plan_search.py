"""The planner's search for the smallest n: simulate at a size, bracket each target on the grid, bisect.

:class:`Planner` holds the state of one plan (its settings, the graph's verdicts, the closed forms and every
size simulated, each a :class:`Point`). Each target of each strategy is a :class:`Criterion`:

1. :func:`bracket` finds, on the grid, the smallest size from which every larger grid size reaches the target,
   and the size below it;
2. :meth:`Planner.search` bisects every open bracket together until it is within
   ``max(ABSOLUTE_RESOLUTION, RELATIVE_RESOLUTION x n)`` units (:func:`narrow_enough`), simulating each
   midpoint with the plan's one seed (common random numbers: neighbouring sizes share their noise, so the
   curve is smooth in n). A size simulated for one bracket narrows every other bracket it falls into.
3. On the raw engine (binary outcomes, selections; costly per replicate) the search is sequential
   (:func:`stage_replicates`): the grid and the bisection run with a quarter of the replicates (whole
   random-stream blocks, so they are the first replicates of the full run), then each target's final
   neighbours are simulated with the full count (:meth:`Planner.confirm`); where the full count disagrees,
   the bracket moves to the next grid size and is bisected again with the full count. The reported n thus
   rests on full-count runs at both ends of its bracket, as before; grid sizes far from every target keep
   the quarter count (their ``power_mcse`` says so).

Examples
--------
>>> narrow_enough(100, 104), narrow_enough(100, 120), search_steps(100, 200)
(True, False, 5)
>>> stage_replicates(2000), stage_replicates(1000), stage_replicates(600)
(500, 250, 600)
"""

from __future__ import annotations

import dataclasses
import functools
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from workbench.analysis.power import analytic_covariance, large_sample
from workbench.engine.replicates import choose_engine, run_replicates
from workbench.engine.streams import BLOCK
from workbench.engine.truth import true_effect
from workbench.graph import judge, judge_strategy
from workbench.scenario.model import Scenario

__all__ = [
    "RELATIVE_RESOLUTION",
    "ABSOLUTE_RESOLUTION",
    "FIRST_STAGE_SHARE",
    "Point",
    "Criterion",
    "Planner",
    "bracket",
    "narrow_enough",
    "search_steps",
    "stage_replicates",
    "scatter",
    "mean_halfwidth",
    "estimate_correlation",
]

RELATIVE_RESOLUTION = 0.02
"""The bisection stops when the bracket is within this share of n ..."""
ABSOLUTE_RESOLUTION = 5
"""... or within this many units, whichever is larger."""
FIRST_STAGE_SHARE = 4
"""On the raw engine the grid and the bisection first run with 1/FIRST_STAGE_SHARE of the replicates."""


@dataclass
class Point:
    """Scores of the strategies fitted at one sample size (NaN for the others)."""

    n: int
    fitted: np.ndarray  # (S,) bool
    measures: dict[str, np.ndarray]  # key -> (S,)
    halfwidth: np.ndarray  # (S,)
    also_measures: list[dict[str, np.ndarray]]  # per also variable, key -> (S,)
    also_halfwidth: np.ndarray  # (S, A)
    correlation: np.ndarray  # (S, A)

    def merge(self, other: Point) -> None:
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


def scatter(values: np.ndarray, index: list[int], size: int) -> np.ndarray:
    """Columns ``index`` of a full-width (size, ...) array filled with NaN elsewhere."""
    out = np.full((size, *np.shape(values)[1:]), np.nan)
    out[index] = values
    return out


def mean_halfwidth(low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """Per column, the mean half-width of the intervals ``[low, high]`` over the replicates where it is
    finite (NaN where none is).

    Examples
    --------
    >>> mean_halfwidth(np.array([[0.0], [1.0]]), np.array([[2.0], [np.nan]]))
    array([1.])
    """
    width = (high - low) / 2.0
    finite = np.isfinite(width)
    count = finite.sum(axis=0)
    total = np.where(finite, width, 0.0).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(count > 0, total / np.maximum(count, 1), np.nan)


def estimate_correlation(a: np.ndarray, b: np.ndarray) -> np.ndarray:
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
class Criterion:
    """One target for one strategy (and variable): reached(point) -> bool."""

    key: tuple
    strategy: int
    reached: Callable[[Point], bool]
    low: int = 0
    high: int | None = None
    done: bool = False
    below_grid: bool = False


def bracket(criterion: Criterion, grid: list[int], points: dict[int, Point], floor: int) -> None:
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


def narrow_enough(low: int, high: int) -> bool:
    """True when the bracket ``(low, high]`` is within ``max(ABSOLUTE_RESOLUTION, RELATIVE_RESOLUTION x
    high)`` units: the bisection stops."""
    return high - low <= max(ABSOLUTE_RESOLUTION, RELATIVE_RESOLUTION * high)


def search_steps(low: int, high: int) -> int:
    """The most bisection steps the bracket ``(low, high]`` can still need (for the progress total)."""
    steps = 0
    while not narrow_enough(low, high):
        high = (low + high) // 2 + 1
        steps += 1
    return steps


def stage_replicates(replicates: int) -> int:
    """Replicates per size while a bracket is wide on the raw engine: a quarter of ``replicates`` in whole
    random-stream blocks (:data:`~workbench.engine.streams.BLOCK`); ``replicates`` itself when a quarter is
    less than one block (the search is then not staged)."""
    rough = (replicates // FIRST_STAGE_SHARE) // BLOCK * BLOCK
    return rough if rough >= BLOCK else replicates


# --------------------------------------------------------------------------------------------------------
# The planner
# --------------------------------------------------------------------------------------------------------
class Planner:
    """The state of one plan: settings, the graph's verdicts, the closed forms, and every size simulated.

    Parameters
    ----------
    scenario : Scenario
        With its strategies filled in.
    sizes : list of int
        The grid, sorted.
    replicates : int
    target_power : float
    target_halfwidth : float or None
    floor : int
        The smallest size every strategy can be fitted at.
    seed : numpy.random.SeedSequence
        The one root sequence used at every size (common random numbers).
    progress : callable or None
        ``progress(done, total)`` in replicates over the whole plan.
    """

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

        self.points: dict[int, Point] = {}
        # sequential rule on the raw engine: the first replicates of the full run while brackets are wide
        raw = any(choose_engine(scenario, n) != "exact" for n in sizes)
        self.first_replicates = stage_replicates(replicates) if raw else replicates
        self.rough: dict[int, Point] = {}
        self.work = 0  # replicates simulated so far (for the progress)
        self.subsets: dict[tuple[int, ...], Scenario] = {}
        self.runs = 0
        self.engines: set[str] = set()
        self.runs_planned = len(sizes) * self.first_replicates  # replicates planned in all (progress)
        self.reported = 0

    # ---- simulation ----------------------------------------------------------------------------------
    def _report(self, done: int, total: int) -> None:
        if self.progress is None:
            return
        self.reported = done = max(done, self.reported)
        self.progress(int(done), int(max(total, done)))

    def _planned(self, runs: int, replicates: int) -> int:
        """Replicates planned in all: those done, plus ``runs`` more of ``replicates`` each."""
        return self.work + runs * replicates

    def _subset_scenario(self, subset: tuple[int, ...]) -> Scenario:
        if len(subset) == len(self.names):
            return self.scenario
        if subset not in self.subsets:
            strategies = tuple(self.strategies[i] for i in subset)
            self.subsets[subset] = dataclasses.replace(self.scenario, strategies=strategies)
        return self.subsets[subset]

    def evaluate(self, n: int, strategies=None, replicates: int | None = None) -> Point:
        """Simulate ``replicates`` (default the plan's) studies of ``n`` units with the plan's one seed and
        score the strategies.

        ``strategies`` (indices) limits the fits when the raw engine runs: its data do not depend on which
        strategies are fitted, so a subset gives the same numbers for those strategies at a fraction of the
        cost. The exact engine's draws depend on the variables the strategies use, and it is cheap, so it
        always fits them all. Runs with fewer replicates than the plan's are kept apart (:attr:`rough`).
        """
        S = len(self.names)
        R = self.replicates if replicates is None else replicates
        store = self.points if R == self.replicates else self.rough
        subset = range(S) if strategies is None or choose_engine(self.scenario, n) == "exact" else strategies
        have = store.get(n)
        subset = tuple(sorted(i for i in set(subset) if have is None or not have.fitted[i]))
        if not subset:
            return have
        base = self.work

        def inner(done, total):
            self._report(base + int(R * done / total if total else R), self.runs_planned)

        arrays = run_replicates(
            self._subset_scenario(subset),
            n,
            R,
            self.seed,
            alpha=self.alpha,
            progress=inner if self.progress else None,
        )
        point = self._score(n, subset, arrays)
        self.engines.add(str(arrays.engine))
        if have is None:
            store[n] = have = point
        else:
            have.merge(point)
        self.runs += 1
        self.work += R
        self.runs_planned = max(self.runs_planned, self.work)
        self._report(self.work, self.runs_planned)
        return have

    def _score(self, n: int, subset: tuple[int, ...], arrays) -> Point:
        """The :class:`Point` of the strategies ``subset`` fitted in ``arrays``."""
        S = len(self.names)
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
                also_halfwidth[:, a] = mean_halfwidth(low, high)
            correlation = estimate_correlation(arrays.estimate, arrays.also_estimate[:, :, columns])
        fitted = np.zeros(S, dtype=bool)
        fitted[index] = True
        return Point(
            n,
            fitted,
            {key: scatter(values, index, S) for key, values in measures.items()},
            scatter(mean_halfwidth(arrays.ci_low, arrays.ci_high), index, S),
            [{key: scatter(values, index, S) for key, values in m.items()} for m in also_measures],
            scatter(also_halfwidth, index, S),
            scatter(correlation, index, S),
        )

    @functools.cached_property
    def model_checks(self) -> dict:
        """check's record of every strategy (its model verdict), by name; computed once per plan."""
        from workbench.analysis.check import check

        return {c.name: c for c in check(self.scenario).checks}

    def evaluate_grid(self) -> None:
        """Simulate every grid size (with the first-stage count on the raw engine)."""
        self.runs_planned = len(self.sizes) * self.first_replicates
        for n in self.sizes:
            self.evaluate(n, replicates=self.first_replicates)

    # ---- the search for the smallest n ---------------------------------------------------------------
    def criteria(self) -> list[Criterion]:
        """Every target of the plan: power (and half-width) per strategy, power per ``also`` pair."""
        power, width = self.target_power, self.target_halfwidth
        out = []
        for i, name in enumerate(self.names):
            out.append(Criterion(("power", name), i, lambda p, i=i: p.measures["power"][i] >= power))
            if width is not None:
                out.append(Criterion(("halfwidth", name), i, lambda p, i=i: p.halfwidth[i] <= width))
        for i, a in self.also_pairs:
            key = ("also_power", self.names[i], self.also[a])
            out.append(Criterion(key, i, lambda p, i=i, a=a: p.also_measures[a]["power"][i] >= power))
        return out

    def search(self) -> dict[tuple, Criterion]:
        """Bracket every criterion on the grid, then bisect all open brackets together; on the raw engine
        with the first-stage count, then confirm each bracket with the full count (:meth:`confirm`)."""
        criteria = self.criteria()
        first = self.first_replicates
        points = self.points if first == self.replicates else self.rough
        for c in criteria:
            bracket(c, self.sizes, points, self.floor)
            if not c.done and narrow_enough(c.low, c.high):
                c.done = True
        self.bisect(criteria, first)
        if first != self.replicates:
            self.confirm(criteria)
            for n, rough in self.rough.items():
                if n in self.points:
                    self.points[n].merge(rough)
                else:
                    self.points[n] = rough
        self._report(self.work, self.work)
        return {c.key: c for c in criteria}

    def bisect(self, criteria: list[Criterion], replicates: int) -> None:
        """Bisect every open criterion together with ``replicates`` per size until each is narrow enough."""
        points = self.points if replicates == self.replicates else self.rough

        def inside(c: Criterion) -> list[int]:
            return [n for n, p in points.items() if c.low < n < c.high and p.fitted[c.strategy]]

        while open_criteria := [c for c in criteria if not c.done]:
            steps = sum(search_steps(c.low, c.high) for c in open_criteria)
            self.runs_planned = self._planned(steps, replicates)
            wanted: dict[int, set[int]] = {}
            for c in open_criteria:
                # a size already simulated inside the bracket (for another criterion) narrows it for free
                if not inside(c):
                    wanted.setdefault((c.low + c.high) // 2, set()).add(c.strategy)
            for n in sorted(wanted):
                self.evaluate(n, wanted[n], replicates)
            for c in open_criteria:
                middle = (c.low + c.high) / 2
                n = min(inside(c), key=lambda m: (abs(m - middle), m))
                if c.reached(points[n]):
                    c.high = n
                else:
                    c.low = n
                c.done = narrow_enough(c.low, c.high)

    def confirm(self, criteria: list[Criterion]) -> None:
        """Check each bracket's ends with the full count; move a bracket whose ends disagree (up when its
        upper end falls short, down when its lower end reaches) by twice its width, until its ends agree,
        then bisect it again with the full count."""
        pending = list(criteria)
        for _ in range(64):  # a bracket's width doubles at each move and it never leaves the grid
            if not pending:
                break
            self.runs_planned = self._planned(2 * len(pending), self.replicates)
            ends: dict[int, set[int]] = {}
            for c in pending:
                for n in (c.low, self.sizes[-1] if c.high is None else c.high):
                    if n >= self.floor:
                        ends.setdefault(n, set()).add(c.strategy)
            for n in sorted(ends):
                self.evaluate(n, ends[n])
            moved = [c for c in pending if self._move(c)]
            # ends that agree: bisect with the full count (a bracket widened by moves is narrowed again)
            agreed = [c for c in pending if c not in moved and c.high is not None]
            for c in agreed:
                c.done = narrow_enough(c.low, c.high)
            self.bisect(agreed, self.replicates)
            pending = [c for c in moved if c.high is not None]

    def _move(self, c: Criterion) -> bool:
        """Move ``c``'s bracket where the full count at its ends says; True if it moved.

        The move is a step of twice the bracket's width (at least the resolution; so the width doubles with
        each move in one direction), never past the next grid size."""
        points = self.points
        if c.high is None:
            if not c.reached(points[self.sizes[-1]]):
                return False  # not reached on the grid, as the first stage found
            below = [m for m in self.sizes if m < self.sizes[-1]]
            c.high, c.low = self.sizes[-1], below[-1] if below else self.floor - 1
            c.below_grid = False
            return True
        step = 2 * max(c.high - c.low, ABSOLUTE_RESOLUTION, int(RELATIVE_RESOLUTION * c.high))
        if not c.reached(points[c.high]):
            above = [m for m in self.sizes if m > c.high]
            c.low = c.high
            if not above:
                c.high, c.done = None, True
                return False
            c.high = min(above[0], c.high + step)
            return True
        if c.low >= self.floor and c.reached(points[c.low]):
            below = [m for m in self.sizes if m < c.low]
            c.high = c.low
            c.low = max(below[-1] if below else self.floor - 1, c.low - step)
            c.below_grid = c.low < self.floor and self.sizes[0] > self.floor
            return True
        return False
