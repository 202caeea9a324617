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
   their noise and the curve is smooth in n; :mod:`workbench.analysis.plan_search`). When even the smallest
   grid size reaches the target the search continues down to the smallest size every strategy can be fitted
   at. On the raw engine the grid and the bisection first run with a quarter of the replicates, then each
   bracket's ends are confirmed with the full count (the sequential rule of ``plan_search``).
3. Power of an *invalid* strategy is the probability of rejecting zero for a biased quantity: it is reported,
   but flagged, and its smallest n is marked as misleading with the reason from the graph analysis. A valid
   strategy that is biased in simulation (:func:`workbench.engine.metrics.is_biased`) or whose intervals cover
   too rarely (:func:`workbench.engine.metrics.coverage_is_off`) is flagged too.
4. On graphs where the closed form applies (linear-Gaussian graphs; large-sample also with binary variables
   that have no causes) the analytic power of :mod:`workbench.analysis.power` sits beside the simulated curve.
5. ``[question] also = [...]`` names further variables whose direct effects (single-door criterion) are
   reported, for every strategy whose model contains them, with their own power, CI half-width and the
   correlation between their estimate and the exposure's across replicates: whether n units can tell the two
   effects apart.

The result is a :class:`~workbench.analysis.plan_result.PlanResult`.

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

import math
import time
from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd

from workbench.analysis.plan_result import (
    ALSO_COLUMNS,
    ALSO_SMALLEST_COLUMNS,
    SEARCH_COLUMNS,
    SMALLEST_COLUMNS,
    TABLE_COLUMNS,
    PlanResult,
)
from workbench.analysis.plan_search import Criterion, Planner
from workbench.analysis.power import find_smallest_n
from workbench.engine.metrics import coverage_is_off, is_biased
from workbench.engine.streams import seed_entropy, seed_sequence
from workbench.errors import SimulationError
from workbench.formatting.numbers import with_mcse
from workbench.graph.defaults import with_default_strategies
from workbench.scenario.constraints import MAX_REPLICATES, check_setting
from workbench.scenario.model import Scenario, minimum_study_size

__all__ = [
    "plan",
    "PlanResult",
    "curve_table",
    "smallest_n_table",
    "search_table",
    "also_curve_table",
    "also_smallest_table",
]

_ANALYTIC_CEILING = 10**9


# --------------------------------------------------------------------------------------------------------
# Checks of the arguments
# --------------------------------------------------------------------------------------------------------
def _check_sizes(scenario: Scenario, sizes) -> tuple[list[int], int]:
    """The grid, sorted and without repeats, and the smallest size every strategy can be fitted at."""
    if isinstance(sizes, str | bytes) or not isinstance(sizes, Sequence | np.ndarray) or len(sizes) == 0:
        raise SimulationError(f"must be a list of at least one integer, got {sizes!r}", where="sample_sizes")
    widest, p, floor = minimum_study_size(scenario)
    for i, n in enumerate(sizes, start=1):
        where = f"sample_sizes[{i}]"
        n = check_setting("sample_size", n, where=where, error=SimulationError)
        if n < floor:
            raise SimulationError(
                f"must be at least {floor} for strategy '{widest}' ({p} coefficients), got {n}", where=where
            )
    return sorted({int(n) for n in sizes}), floor


def _check_replicates(replicates) -> int:
    """At least 2 replicates per size: the Monte Carlo SEs of power, bias and coverage, which the search
    and the notes compare with the targets, divide by ``replicates - 1``."""
    replicates = check_setting("replicates", replicates, error=SimulationError)
    if replicates < 2:
        raise SimulationError(
            f"must be an integer from 2 to {MAX_REPLICATES:,} in a plan (Monte Carlo SEs need two "
            f"studies per size), got {replicates}",
            where="replicates",
        )
    return replicates


def _check_arguments(scenario, sample_sizes, replicates, target_power, target_halfwidth, progress):
    """The plan's settings (the study's where an argument is None), checked before any work."""
    if not isinstance(scenario, Scenario):
        raise SimulationError(f"must be a Scenario, got {type(scenario).__name__}", where="scenario")
    study = scenario.study
    sizes, floor = _check_sizes(scenario, study.sample_sizes if sample_sizes is None else sample_sizes)
    replicates = _check_replicates(study.replicates if replicates is None else replicates)
    target_power = study.target_power if target_power is None else target_power
    target_power = check_setting("target_power", target_power, error=SimulationError)
    target_halfwidth = study.target_halfwidth if target_halfwidth is None else target_halfwidth
    if target_halfwidth is not None:
        target_halfwidth = check_setting("target_halfwidth", target_halfwidth, error=SimulationError)
    if progress is not None and not callable(progress):
        raise SimulationError(f"must be callable progress(done, total), got {progress!r}", where="progress")
    return sizes, replicates, target_power, target_halfwidth, floor


# --------------------------------------------------------------------------------------------------------
# The tables of the result
# --------------------------------------------------------------------------------------------------------
def curve_table(planner: Planner) -> pd.DataFrame:
    """The power and precision curves at every grid size: :data:`TABLE_COLUMNS`, one row per size and
    strategy."""
    grid = np.array(planner.sizes)
    nan = np.full(len(grid), np.nan)
    curves = [
        (ls.power(grid, planner.alpha), ls.se(grid), ls.halfwidth(grid, planner.alpha)) if ls else (nan,) * 3
        for ls in planner.analytic
    ]
    flags = [
        "" if v.valid else "invalid: " + ("; ".join(v.reasons[:2]) or "the graph says this set is not valid")
        for v in planner.verdicts
    ]
    rows = []
    for g, n in enumerate(planner.sizes):
        p = planner.points[n]
        for i, name in enumerate(planner.names):
            row = {"n": n, "strategy": name}
            for key in TABLE_COLUMNS[2 : TABLE_COLUMNS.index("mean_ci_halfwidth")]:
                row[key] = p.measures[key][i]
            row["mean_ci_halfwidth"] = p.halfwidth[i]
            row["analytic_power"], row["analytic_se"], row["analytic_ci_halfwidth"] = (
                c[g] for c in curves[i]
            )
            row.update(failures=p.measures["failures"][i], valid=bool(planner.valid[i]), flag=flags[i])
            rows.append(row)
    table = pd.DataFrame(rows, columns=TABLE_COLUMNS)
    for column in TABLE_COLUMNS[2:-3]:
        table[column] = table[column].astype(float)
    table["failures"] = table["failures"].astype(int)
    return table


def _analytic_size(planner: Planner, ls, what: str) -> int | None:
    """The closed form's smallest n for the target power or half-width (None where unavailable)."""
    if ls is None:
        return None
    if what == "power":
        return _analytic_n(lambda m: ls.power(m, planner.alpha) >= planner.target_power, ls, planner.floor)
    if planner.target_halfwidth is None:
        return None
    return _analytic_n(
        lambda m: ls.halfwidth(m, planner.alpha) <= planner.target_halfwidth, ls, planner.floor
    )


def search_table(planner: Planner) -> pd.DataFrame:
    """Every size simulated (grid and bisection): :data:`SEARCH_COLUMNS`."""
    rows = []
    for n in sorted(planner.points):
        p = planner.points[n]
        for i, name in enumerate(planner.names):
            if not p.fitted[i]:
                continue
            rows.append(
                {
                    "n": n,
                    "strategy": name,
                    "variable": planner.exposure,
                    "power": p.measures["power"][i],
                    "power_mcse": p.measures["power_mcse"][i],
                    "mean_ci_halfwidth": p.halfwidth[i],
                    "on_grid": n in planner.sizes,
                }
            )
            for j, a in planner.also_pairs:
                if j == i:
                    m = p.also_measures[a]
                    rows.append(
                        {
                            "n": n,
                            "strategy": name,
                            "variable": planner.also[a],
                            "power": m["power"][i],
                            "power_mcse": m["power_mcse"][i],
                            "mean_ci_halfwidth": p.also_halfwidth[i, a],
                            "on_grid": n in planner.sizes,
                        }
                    )
    return pd.DataFrame(rows, columns=SEARCH_COLUMNS)


def also_curve_table(planner: Planner) -> pd.DataFrame:
    """The ``also`` variables' figures at every grid size: :data:`ALSO_COLUMNS`, one row per size, strategy
    and variable its model contains."""
    rows = []
    for n in planner.sizes:
        p = planner.points[n]
        for i, a in planner.also_pairs:
            m, verdict, ls = p.also_measures[a], planner.also_verdicts[i, a], planner.also_analytic[i, a]
            row = {
                "n": n,
                "strategy": planner.names[i],
                "variable": planner.also[a],
                "truth": planner.also_truth[planner.also[a]],
            }
            for key in ALSO_COLUMNS[ALSO_COLUMNS.index("power") : ALSO_COLUMNS.index("mean_ci_halfwidth")]:
                row[key] = m[key][i]
            row.update(
                mean_ci_halfwidth=p.also_halfwidth[i, a],
                correlation=p.correlation[i, a],
                analytic_power=ls.power(n, planner.alpha) if ls else np.nan,
                valid=bool(verdict.valid),
                flag=""
                if verdict.valid
                else "invalid for the direct effect: " + "; ".join(verdict.reasons[:2]),
            )
            rows.append(row)
    table = pd.DataFrame(rows, columns=ALSO_COLUMNS)
    for column in ALSO_COLUMNS[3:-2]:
        table[column] = table[column].astype(float)
    return table


def also_smallest_table(planner: Planner, found: dict[tuple, Criterion]) -> pd.DataFrame:
    """The smallest n for the target power of each ``also`` variable: :data:`ALSO_SMALLEST_COLUMNS`."""
    largest = planner.points[planner.sizes[-1]]
    small = []
    for i, a in planner.also_pairs:
        name, v = planner.names[i], planner.also[a]
        c, verdict = found["also_power", name, v], planner.also_verdicts[i, a]
        notes = []
        if not verdict.valid:
            why = verdict.reasons[0] if verdict.reasons else "the single-door criterion fails"
            notes.append(f"misleading: the model does not identify the direct effect of {v} ({why})")
        notes += _criterion_notes(
            c, "power", planner.target_power, largest.also_measures[a]["power"][i], planner.sizes
        )
        small.append(
            {
                "strategy": name,
                "variable": v,
                "n_for_power": c.high,
                "valid": bool(verdict.valid),
                "note": "; ".join(notes),
                "analytic_n_for_power": _analytic_size(planner, planner.also_analytic[i, a], "power"),
            }
        )
    return _with_sizes(pd.DataFrame(small, columns=ALSO_SMALLEST_COLUMNS))


def _with_sizes(frame: pd.DataFrame) -> pd.DataFrame:
    """Size columns as nullable integers (missing where a target is not reached)."""
    for column in frame.columns:
        if column.startswith(("n_for", "analytic_n_for")):
            frame[column] = frame[column].astype("Int64")
    return frame


def _criterion_notes(
    c: Criterion, what: str, target: float, at_largest: float, sizes: list[int]
) -> list[str]:
    """What the search says about one target: not reached on the grid, or reached below it."""
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


def _invalid_note(planner: Planner, i: int) -> str:
    """Why the power of an invalid strategy misleads: it detects a biased quantity."""
    name, ls, truth = planner.names[i], planner.analytic[i], planner.strategy_truth[i]
    largest = planner.points[planner.sizes[-1]]
    reasons = planner.verdicts[i].reasons
    estimand = ls.estimand if ls else float(largest.measures["mean"][i])
    return (
        f"misleading: '{name}' is not a valid adjustment set ({reasons[0] if reasons else 'see check'}); "
        f"its power detects {estimand:.4g}, a biased quantity, not the effect {truth:.4g}"
    )


def _bias_note(planner: Planner, i: int) -> str:
    """The note of a valid strategy that is biased in simulation at the largest grid size ('' if it is not,
    by :func:`workbench.engine.metrics.is_biased`)."""
    largest, n, truth = planner.points[planner.sizes[-1]], planner.sizes[-1], planner.strategy_truth[i]
    bias, bias_mcse = largest.measures["bias"][i], largest.measures["bias_mcse"][i]
    if not is_biased(bias, bias_mcse, truth):
        return ""
    figure = f"bias {with_mcse(bias, bias_mcse)} at n = {n}"
    if planner.scenario.strategy(planner.names[i]).selection is not None:
        return (
            f"biased in simulation: {figure}, because the covariates are chosen from the data and a needed one "
            "is often left out; its power is not a fair guide"
        )
    return (
        f"valid by the graph but biased in simulation: {figure}; the model estimates a "
        f"{planner.estimand[i] or 'different quantity'}, scored against {truth:.4g}"
    )


def _coverage_note(planner: Planner, i: int) -> str:
    """The note of a valid strategy whose intervals cover the truth too rarely at some size (coverage more
    than 3 MCSEs below nominal, :func:`workbench.engine.metrics.coverage_is_off`), '' otherwise."""
    nominal = 1 - planner.alpha
    short = [
        (n, p.measures["coverage"][i])
        for n, p in sorted(planner.points.items())
        if p.fitted[i]
        and p.measures["coverage"][i] < nominal
        and coverage_is_off(p.measures["coverage"][i], p.measures["coverage_mcse"][i], nominal)
    ]
    if not short:
        return ""
    n_low, worst = min(short, key=lambda item: item[1])
    return (
        f"optimistic: its {nominal:.0%} intervals cover the truth in only {worst:.1%} of studies at n = {n_low}, "
        "so its SEs are too small and its power overstates what a study would honestly detect"
    )


def _strategy_notes(planner: Planner, i: int, power: Criterion, width: Criterion | None) -> list[str]:
    """Everything the plan says beside one strategy's smallest n."""
    largest = planner.points[planner.sizes[-1]]
    notes = [] if planner.valid[i] else [_invalid_note(planner, i)]
    notes += _criterion_notes(
        power, "power", planner.target_power, largest.measures["power"][i], planner.sizes
    )
    if width is not None:
        notes += _criterion_notes(
            width, "CI half-width", planner.target_halfwidth, largest.halfwidth[i], planner.sizes
        )
    if planner.valid[i]:
        model = planner.model_checks.get(planner.names[i])
        if model is not None and model.model_ok is False:  # check's second verdict: the model itself
            reason = (model.model_reason or "see check").removeprefix("misspecified: ")
            notes.append(f"valid set, misspecified model ({reason}): its power is not a fair guide")
            notes.append(_coverage_note(planner, i))
        else:
            notes.append(_bias_note(planner, i) or _coverage_note(planner, i))
        if abs(planner.strategy_truth[i]) < 1e-12:
            notes.append(f"the true effect is 0: power stays at alpha = {planner.alpha:g} whatever n")
    return [note for note in notes if note]


def smallest_n_table(planner: Planner, found: dict[tuple, Criterion]) -> pd.DataFrame:
    """The smallest n of every strategy for each target, with its notes: :data:`SMALLEST_COLUMNS`."""
    rows = []
    for i, name in enumerate(planner.names):
        ls = planner.analytic[i]
        power, width = found["power", name], found.get(("halfwidth", name))
        rows.append(
            {
                "strategy": name,
                "n_for_power": power.high,
                "n_for_halfwidth": width.high if width is not None else None,
                "valid": bool(planner.valid[i]),
                "note": "; ".join(_strategy_notes(planner, i, power, width)),
                "analytic_n_for_power": _analytic_size(planner, ls, "power"),
                "analytic_n_for_halfwidth": _analytic_size(planner, ls, "halfwidth"),
                "estimand": planner.estimand[i],
            }
        )
    return _with_sizes(pd.DataFrame(rows, columns=SMALLEST_COLUMNS))


# --------------------------------------------------------------------------------------------------------
# The verb
# --------------------------------------------------------------------------------------------------------
def plan(
    scenario: Scenario,
    *,
    sample_sizes: Sequence[int] | None = None,
    replicates: int | None = None,
    target_power: float | None = None,
    target_halfwidth: float | None = None,
    seed=None,
    progress: Callable[[int, int], None] | None = None,
) -> PlanResult:
    """Power and precision curves of every strategy, and the smallest n reaching each target.

    Parameters
    ----------
    scenario : Scenario
        Without strategies, the default strategies of its graph are planned.
    sample_sizes : sequence of int, optional
        The grid; default ``scenario.study.sample_sizes``. Each must exceed the widest strategy's
        coefficients by 2.
    replicates : int, optional
        Simulated studies at every size (grid and bisection), at least 2; default
        ``scenario.study.replicates``.
    target_power : float, optional
        In (0, 1); default ``scenario.study.target_power``.
    target_halfwidth : float, optional
        Target mean CI half-width (in the effect's units); default ``scenario.study.target_halfwidth``;
        None skips that search.
    seed : None, int, numpy.random.SeedSequence or numpy.random.Generator, optional
        The root of the random streams (:func:`workbench.engine.streams.seed_sequence`), one sequence used at
        every size (common random numbers). None draws fresh entropy, as numpy does; ``result.seed`` records
        it, and ``plan(scenario, seed=result.seed)`` repeats the plan. Pass ``scenario.study.seed`` for the
        file's seed.
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
    if isinstance(scenario, Scenario):
        scenario = with_default_strategies(scenario)
    sizes, replicates, target_power, target_halfwidth, floor = _check_arguments(
        scenario, sample_sizes, replicates, target_power, target_halfwidth, progress
    )
    root = seed_sequence(seed)
    planner = Planner(scenario, sizes, replicates, target_power, target_halfwidth, floor, root, progress)
    planner.evaluate_grid()
    found = planner.search()
    return PlanResult(
        title=scenario.title,
        replicates=replicates,
        seed=seed_entropy(root),
        alpha=planner.alpha,
        target_power=target_power,
        target_halfwidth=target_halfwidth,
        sample_sizes=sizes,
        truth=planner.truth,
        truth_mcse=planner.truth_mcse,
        engine=", ".join(sorted(planner.engines)),
        exposure=scenario.question.exposure,
        outcome=scenario.question.outcome,
        table=curve_table(planner),
        smallest_n=smallest_n_table(planner, found),
        also_table=also_curve_table(planner) if planner.also else None,
        also_smallest_n=also_smallest_table(planner, found) if planner.also else None,
        search=search_table(planner),
        elapsed=time.perf_counter() - started,
    )
