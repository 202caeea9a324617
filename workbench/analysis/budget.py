"""The time and memory a run or a plan will take, estimated before any work, and the budget it must fit.

:func:`estimate_cost` reads only the scenario's fitting plan (:func:`workbench.engine.fitplan.fit_plan`) and
the engine's chunk sizes (:mod:`workbench.engine.chunks`); it simulates nothing, so it costs well under a
millisecond once the plan is cached. The model of the time follows the two engines
(:mod:`workbench.engine.replicates`):

- exact engine: one Wishart draw per replicate and every fit from its cross-products, so the time does not
  depend on ``n``: ``replicates x (a + b x sum over fits of (p + 1)^2)``, ``p`` a fit's regressors;
- raw engine: every replicate's rows are drawn (``n x k`` values), their ``k x k`` cross-products formed, and
  the fits that need the rows (logistic, linear probability model with HC3 SEs, restriction, matching) pass
  over them: ``replicates x n x (c k + d k^2 + e x sum of (p + 1)^2 over row fits + f x sum over logistic
  fits)``; a logistic fit's constant covers its usual five to eight Newton iterations.

Each ``question.also`` variable adds scoring work per replicate and fit. A data-driven selection rule adds ``1 + candidates`` fits of its own kind of work (it compares nested models
in every replicate, then refits each group of replicates that chose the same subset).
A plan is the sum over its grid sizes, plus the bisection towards each strategy's smallest n, counted as
the steps a gap of the grid can need (:func:`workbench.analysis.plan_search.search_steps`) at the gap's
middle, averaged over the gaps (which gap holds a strategy's n is not known before the run), one strategy
at a time; on the raw engine the grid and the bisection with a quarter of the
replicates and two sizes per strategy confirmed with the full count, as the planner runs them
(:mod:`workbench.analysis.plan_search`): a rough figure (``binary_outcome``'s default plan: estimated
within a factor of three of the measured time).

The constants (:data:`SECONDS_PER`) were fitted by ``benchmarks/budget_calibration.py`` (non-negative least
squares on the relative error over small runs of every preset). Peak memory is the interpreter with the
library loaded, plus one chunk's working arrays (:func:`~workbench.engine.chunks.replicates_per_chunk`,
:func:`~workbench.engine.chunks.raw_bytes_per_replicate`; a raw replicate larger than the chunk budget is
one chunk by itself unless it can be drawn piecewise), plus the per-replicate results kept for the whole run.

:func:`check_budget` turns an estimate over the budget (default: 10 minutes or 2 GiB) into a one-line
:class:`~workbench.errors.UsageError` naming the option that accepts it.

Examples
--------
>>> from workbench import load_preset
>>> cost = estimate_cost(load_preset("common_cause"), n=200, replicates=1000)
>>> cost.engine, cost.seconds < 60, cost.text
('exact', True, 'under a second and ... MiB')
>>> check_budget(estimate_cost(load_preset("binary_outcome"), n=10**6, replicates=10**5))
Traceback (most recent call last):
...
workbench.errors.UsageError: run: estimated ... over the budget of 10 min and 2 GiB; pass --allow-long to run it anyway
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from workbench.errors import UsageError
from workbench.scenario.model import Scenario

__all__ = [
    "Cost",
    "estimate_cost",
    "check_budget",
    "cost_features",
    "format_duration",
    "format_bytes",
    "SECONDS_PER",
    "BASE_BYTES",
    "MAX_SECONDS",
    "MAX_BYTES",
]

MAX_SECONDS = 600.0
"""The default time budget of one command: 10 minutes."""
MAX_BYTES = 2 * 1024**3
"""The default memory budget of one command: 2 GiB."""

# Fitted by benchmarks/budget_calibration.py on the development machine (x86_64 virtual machine, 2 cores of
# an AMD EPYC, 23 GiB RAM, Linux 6.18, Python 3.11.7, numpy with OpenBLAS), 2026-12-02, while other work
# loaded the machine (load average about 7; an earlier, quieter run took 0.3 to 0.5 of those times). The fit
# is scaled by 0.6, so an estimate lies between the quiet and the loaded timings. Seconds per unit of each
# feature of :func:`cost_features`. ``logistic_fit`` re-measured 2026-12-03 after the faster batched logistic
# and Poisson fits: binary_outcome at n = 1,000, 600 replicates took 0.41 s on a quiet machine (load 0.15),
# 0.31 s of it in the IRLS fits, against 0.92 s estimated with the old constant; 2.4e-8 puts the estimate
# (0.57 s) between the quiet timing and a loaded one. ``exact_replicate``, ``crossproduct_fit`` and
# ``selection_fit`` scaled by 0.55 the same day after the faster exact engine (issue 12): on a quiet machine
# (load 0.01) common_cause, larger_graph and selection_by_significance ran in 0.125, 0.147 and 0.142 s
# against 0.25, 0.52 and 0.33 s estimated (2.0x, 3.5x, 2.3x); now 1.2x, 2.0x, 1.3x. On 2026-12-04 the same
# machine kind ran 1.6 times faster again (quiet: common_cause 0.075 s, larger_graph 0.093 s, binary_outcome
# 0.172 s, count_outcome 0.567 s), so the estimates were 1.8x to 3.3x the timings: ``exact_replicate`` and
# ``crossproduct_fit`` scaled by 0.8 and ``logistic_fit`` by 0.75, which puts both days' quiet timings within
# 1.0x to 2.7x of the estimate, and a machine loaded to three times slower still within the factor of three.
SECONDS_PER: dict[str, float] = {
    "run": 0.0112,
    "exact_replicate": 9.0e-08,
    "crossproduct_fit": 2.56e-08,
    "raw_values": 2.35e-08,
    "raw_crossproducts": 2.27e-09,
    "row_fit": 5.04e-09,
    "logistic_fit": 1.8e-08,
    "selection_fit": 4.75e-08,
    "also": 7.38e-07,
}
"""Seconds per unit of each cost feature (see :func:`cost_features`)."""

BASE_BYTES = 380 * 2**20
"""Resident memory of the interpreter with numpy, scipy, pandas and the library loaded (measured)."""

_RESULT_BYTES = 8 * 14
"""Bytes kept per replicate and fit for the whole run (estimate, SE, interval, df, flags, references...)."""


@dataclass(frozen=True)
class Cost:
    """The estimated cost of a run or a plan.

    Attributes
    ----------
    seconds : float
        Wall-clock time on a machine like the one :data:`SECONDS_PER` was measured on.
    peak_bytes : int
        Peak resident memory of the process.
    engine : str
        ``"exact"``, ``"raw"`` or, for a plan using both, ``"exact+raw"``.
    text : str
        One line, e.g. ``about 3 min and 1.2 GiB``.
    verb : str
        ``"run"`` or ``"plan"``.
    """

    seconds: float
    peak_bytes: int
    engine: str
    text: str
    verb: str = "run"


def format_duration(seconds: float) -> str:
    """A duration for people, two significant figures at most.

    Examples
    --------
    >>> format_duration(0.2), format_duration(42), format_duration(185), format_duration(5.4 * 3600)
    ('under a second', '42 s', '3.1 min', '5.4 h')
    >>> format_duration(3 * 86400)
    '3 days'
    """
    if seconds < 1:
        return "under a second"
    for unit, size in (("days", 86400), ("h", 3600), ("min", 60)):
        if seconds >= 1.5 * size or (unit == "min" and seconds >= 90):
            value = seconds / size
            return f"{value:.1f} {unit}".replace(".0 ", " ") if value < 10 else f"{value:,.0f} {unit}"
    return f"{seconds:.0f} s"


def format_bytes(size: float) -> str:
    """A memory size for people.

    Examples
    --------
    >>> format_bytes(300 * 2**20), format_bytes(1.25 * 2**30), format_bytes(3 * 2**40)
    ('300 MiB', '1.2 GiB', '3 TiB')
    """
    for unit, scale in (("TiB", 2**40), ("GiB", 2**30)):
        if size >= scale:
            value = size / scale
            return f"{value:.1f} {unit}".replace(".0 ", " ") if value < 10 else f"{value:,.0f} {unit}"
    return f"{size / 2**20:.0f} MiB"


def cost_features(plan, engine: str, n: int, replicates: int, k: int, fits=None) -> dict[str, float]:
    """The counts the time model multiplies by :data:`SECONDS_PER` for one run of ``replicates`` studies.

    Parameters
    ----------
    plan : workbench.engine.fitplan.Plan
    engine : {"exact", "raw"}
    n, replicates : int
    k : int
        Variables of the scenario (the raw engine draws them all, latent ones included).
    fits : sequence of Fit, optional
        The fits run (default: all of the plan's).

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.fitplan import fit_plan
    >>> f = cost_features(fit_plan(load_preset("common_cause")), "exact", 200, 1000, 3)
    >>> f["exact_replicate"], f["crossproduct_fit"], f["raw_values"]
    (16000.0, 13000.0, 0.0)
    """
    fits = plan.fits if fits is None else fits
    R, n = float(replicates), float(n)
    features = dict.fromkeys(SECONDS_PER, 0.0)
    features["run"] = 1.0
    features["crossproduct_fit"] = R * sum((len(f.regressors) + 1) ** 2 for f in fits)
    features["selection_fit"] = R * sum(
        (1 + len(f.adjust)) * (len(f.regressors) + 1) ** 2 for f in fits if f.selection is not None
    )
    features["also"] = R * len(fits) * len(plan.also_names)
    if engine == "exact":
        m = len(plan.used)
        features["exact_replicate"] = R * (m + 1) ** 2
        return features
    k = float(k)
    features["raw_values"] = R * n * k
    features["raw_crossproducts"] = R * n * k * k
    for f in fits:
        size = (len(f.regressors) + 1) ** 2
        if f.kind in ("logit", "logit_std", "poisson", "poisson_robust"):  # IRLS fits of about one cost
            features["logistic_fit"] += R * n * size * (1.5 if f.kind == "logit_std" else 1.0)
        elif f.kind != "ols" or f.masked:
            features["row_fit"] += R * n * size
    return features


def _seconds(features: dict[str, float]) -> float:
    return sum(SECONDS_PER[name] * value for name, value in features.items())


def _peak_bytes(plan, engine: str, n: int, replicates: int, k: int) -> int:
    """Peak memory of one run: the loaded library, one chunk's working arrays and the kept results."""
    from workbench.engine.chunks import (
        MEMORY_BUDGET,
        draws_piecewise,
        raw_bytes_per_replicate,
        replicates_per_chunk,
    )

    results = replicates * len(plan.fits) * _RESULT_BYTES
    if engine == "exact":
        chunk = replicates_per_chunk("exact", n, k, plan, replicates)
        working = chunk * 8 * (len(plan.used) + 1) ** 2 * (6 + len(plan.fits))
    elif draws_piecewise(n, k, plan):
        working = MEMORY_BUDGET
    else:
        chunk = replicates_per_chunk("raw", n, k, plan, replicates)
        working = chunk * raw_bytes_per_replicate(n, k, plan)
    return int(BASE_BYTES + working + results)


def _one_run(scenario, plan, engine: str, n: int, replicates: int) -> tuple[float, int, str]:
    from workbench.engine.replicates import choose_engine

    used = choose_engine(scenario, n, engine)
    k = len(scenario.variables)
    features = cost_features(plan, used, n, replicates, k)
    return _seconds(features), _peak_bytes(plan, used, n, replicates, k), used


def _search_seconds(scenario, plan, sizes: list[int], replicates: int) -> float:
    """Seconds of the planner's search after the grid: the bisection of each strategy alone, in a gap of the
    grid that is not known before the run, so averaged over the gaps (the steps each can need, at its
    middle); on the raw engine with a quarter of the replicates, then two sizes per strategy confirmed with
    the full count (:mod:`workbench.analysis.plan_search`)."""
    grid = sorted(set(sizes))
    gaps = list(zip(grid[:-1], grid[1:], strict=True)) if len(grid) > 1 else [(max(1, grid[0] // 2), grid[0])]
    return sum(_gap_seconds(scenario, plan, low, high, replicates) for low, high in gaps) / len(gaps)


def _gap_seconds(scenario, plan, low: int, high: int, replicates: int) -> float:
    """Seconds of the bisection of every strategy within one gap ``(low, high]`` of the grid."""
    from workbench.analysis.plan_search import search_steps, stage_replicates
    from workbench.engine.replicates import choose_engine

    steps = search_steps(low, high)
    if not steps:
        return 0.0
    middle = (low + high) // 2  # the steps' sizes lie between the gap's ends
    engine = choose_engine(scenario, middle)
    k = len(scenario.variables)

    def step(replicates: int, fits=None) -> float:  # one size simulated inside the plan's run: no start-up
        features = cost_features(plan, engine, middle, replicates, k, fits)
        features["run"] = 0.0
        return _seconds(features)

    if engine == "exact":  # every step fits every strategy at once
        return steps * step(replicates)
    first = stage_replicates(replicates)
    confirmed = 2 if first < replicates else 0
    total = 0.0
    for f in plan.reported:
        fits = [f] if f.reference == plan.fits.index(f) else [f, plan.fits[f.reference]]
        total += steps * step(first, fits) + confirmed * step(replicates, fits)
    return total


def _grid_replicates(scenario, size: int, replicates: int) -> int:
    """Replicates the planner's grid runs at ``size`` with: a quarter on the raw engine (staged search)."""
    from workbench.analysis.plan_search import stage_replicates
    from workbench.engine.replicates import choose_engine

    return stage_replicates(replicates) if choose_engine(scenario, size) == "raw" else replicates


def estimate_cost(
    scenario: Scenario,
    *,
    verb: str = "run",
    n: int | None = None,
    replicates: int | None = None,
    sizes=None,
    engine: str = "auto",
) -> Cost:
    """Estimate the time and peak memory of ``simulate`` (``verb="run"``) or ``plan`` (``verb="plan"``).

    Parameters
    ----------
    scenario : Scenario
        Default strategies are filled in when it has none.
    verb : {"run", "plan"}
    n : int, optional
        Units per study (a run); default ``scenario.study.n``.
    replicates : int, optional
        Studies per run or per plan size; default ``scenario.study.replicates``.
    sizes : sequence of int, optional
        The plan's grid; default ``scenario.study.sample_sizes``.
    engine : {"auto", "exact", "raw"}
        The engine asked for (a run; a plan always uses ``"auto"``).

    Returns
    -------
    Cost
        Within a factor of about three of the truth on the presets on the machine of :data:`SECONDS_PER`.

    Raises
    ------
    SimulationError
        An unknown engine, or ``"exact"`` where it does not apply.

    Examples
    --------
    >>> from workbench import load_preset
    >>> estimate_cost(load_preset("binary_outcome"), n=10**6, replicates=10**5).seconds > 3600
    True
    >>> estimate_cost(load_preset("common_cause"), verb="plan", sizes=[50, 100], replicates=200).verb
    'plan'
    """
    from workbench.engine.fitplan import fit_plan
    from workbench.graph.defaults import with_default_strategies

    if verb not in ("run", "plan"):
        raise ValueError(f"verb must be 'run' or 'plan', got {verb!r}")
    scenario = with_default_strategies(scenario)
    plan = fit_plan(scenario)
    study = scenario.study
    replicates = study.replicates if replicates is None else int(replicates)
    if verb == "run":
        seconds, peak, used = _one_run(scenario, plan, engine, study.n if n is None else int(n), replicates)
        engines = {used}
    else:
        grid = [int(size) for size in (study.sample_sizes if sizes is None else sizes)]
        runs = [_one_run(scenario, plan, "auto", size, replicates) for size in grid]
        first = [_one_run(scenario, plan, "auto", s, _grid_replicates(scenario, s, replicates)) for s in grid]
        seconds = sum(r[0] for r in first) + _search_seconds(scenario, plan, grid, replicates)
        seconds -= (len(runs) - 1) * SECONDS_PER["run"]  # one start-up for the whole plan
        peak = max(r[1] for r in runs)  # the full count at a grid size (a confirmed neighbour)
        engines = {r[2] for r in runs}
    name = "+".join(sorted(engines))
    duration = format_duration(seconds)
    text = f"{'' if duration.startswith('under') else 'about '}{duration} and {format_bytes(peak)}"
    return Cost(seconds=float(seconds), peak_bytes=int(peak), engine=name, text=text, verb=verb)


def check_budget(
    cost: Cost, *, max_seconds: float = MAX_SECONDS, max_bytes: int = MAX_BYTES, where: str = "--allow-long"
) -> None:
    """Refuse a cost over the budget with one line giving the estimate and how to accept it.

    Parameters
    ----------
    cost : Cost
    max_seconds, max_bytes : float
        The budget (default 10 minutes and 2 GiB).
    where : str
        What accepts the cost: the option named in the message.

    Raises
    ------
    UsageError
        ``run: estimated about 15 h and 1.1 GiB, over the budget of 10 min and 2 GiB; pass --allow-long to
        run it anyway``.

    Examples
    --------
    >>> check_budget(Cost(seconds=5.0, peak_bytes=2**28, engine="exact", text="about 5 s and 256 MiB"))
    >>> check_budget(Cost(seconds=5.0, peak_bytes=2**28, engine="exact", text="x"), max_seconds=1)
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: run: estimated x, over the budget of 1 s and 2 GiB; pass --allow-long to run it anyway
    """
    if cost.seconds <= max_seconds and cost.peak_bytes <= max_bytes:
        return
    budget = f"{_budget_duration(max_seconds)} and {format_bytes(max_bytes)}"
    raise UsageError(
        f"estimated {cost.text}, over the budget of {budget}; pass {where} to run it anyway", where=cost.verb
    )


def _budget_duration(seconds: float) -> str:
    """The budget's time limit in words (exact, e.g. ``10 min``, ``1 s``)."""
    if seconds >= 60 and math.isclose(seconds % 60, 0):
        return f"{seconds / 60:g} min"
    return f"{seconds:g} s"
