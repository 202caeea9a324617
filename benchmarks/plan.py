"""Benchmark of the sample-size planner (issue 5).

Runs, in one process:

1. ``workbench.plan`` on a linear-Gaussian preset (``larger_graph``, its first 5 strategies) over a 12-size
   grid with 2,000 replicates per size, including the smallest-n search (bisection) for the target power and
   a target CI half-width. Target: 1 second or less. The best of three runs is reported (the first includes
   one-off costs such as imports and caches, shown separately).
2. The same work done the plain way: draw each dataset (``workbench.draw``) and fit every strategy with
   ``statsmodels`` OLS in a Python loop. That loop is far too slow to run in full, so a subset of replicates
   at every grid size is timed and the cost is extrapolated to 2,000 replicates per size, once for the grid
   alone and once for every size the planner simulated (grid + bisection). Both ratios are printed.

Usage: ``python benchmarks/plan.py [--replicates-loop K]``.
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import platform
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np  # noqa: E402
import statsmodels.api as sm  # noqa: E402

from workbench import load_preset  # noqa: E402
from workbench.analysis.plan import plan  # noqa: E402
from workbench.engine.generate import draw  # noqa: E402

GRID = [25, 50, 75, 100, 150, 200, 300, 400, 600, 800, 1200, 1600]
REPLICATES = 2000
STRATEGIES = 5


def scenario():
    sc = load_preset("larger_graph")
    return dataclasses.replace(sc, strategies=sc.strategies[:STRATEGIES])


def time_plan(sc):
    times = []
    result = None
    for _ in range(4):
        start = time.perf_counter()
        result = plan(sc, sample_sizes=GRID, replicates=REPLICATES, seed=20261202, target_halfwidth=0.5)
        times.append(time.perf_counter() - start)
    return result, times


def time_statsmodels_loop(sc, per_size: int) -> float:
    """Seconds per replicate-and-size (all strategies), averaged over the grid, for draw + statsmodels OLS."""
    x = sc.question.exposure
    y = sc.question.outcome
    rng = np.random.default_rng(1)
    seconds = []
    for n in GRID:
        start = time.perf_counter()
        for _ in range(per_size):
            data = draw(sc, n, seed=rng)
            for s in sc.strategies:
                design = sm.add_constant(data[[x, *s.adjust]].to_numpy())
                fit = sm.OLS(data[y].to_numpy(), design).fit()
                fit.params[1], fit.bse[1], fit.conf_int(0.05)[1], fit.pvalues[1]
        seconds.append((time.perf_counter() - start) / per_size)
    return float(np.mean(seconds)), seconds


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--replicates-loop", type=int, default=20, help="replicates per size in the timed loop"
    )
    args = parser.parse_args(argv)

    sc = scenario()
    print(
        f"machine: {platform.machine()}, {os.cpu_count()} CPUs, {platform.processor() or 'unknown CPU'}; "
        f"Python {platform.python_version()}, numpy {np.__version__}"
    )
    print(
        f"preset larger_graph, {len(sc.variables)} variables, {len(sc.strategies)} strategies: "
        + ", ".join(s.name for s in sc.strategies)
    )
    print(f"grid ({len(GRID)} sizes): {GRID}; {REPLICATES} replicates per size")

    result, times = time_plan(sc)
    best = min(times[1:])
    simulated = sorted(result.search["n"].unique())
    extra = [n for n in simulated if n not in GRID]
    print(
        f"\nplan(): first run {times[0]:.3f} s (one-off costs included), best of the next three {best:.3f} s "
        f"(target <= 1 s: {'met' if best <= 1.0 else 'NOT met'}); engine {result.engine}"
    )
    print(f"  sizes simulated: {len(simulated)} ({len(GRID)} on the grid + {len(extra)} for the bisection)")
    print(
        result.smallest_n[
            ["strategy", "n_for_power", "n_for_halfwidth", "valid", "analytic_n_for_power"]
        ].to_string(index=False)
    )

    per_replicate, per_size = time_statsmodels_loop(sc, args.replicates_loop)
    grid_loop = per_replicate * REPLICATES * len(GRID)
    full_loop = per_replicate * REPLICATES * len(simulated)
    print(
        f"\nstatsmodels loop (draw + OLS for {len(sc.strategies)} strategies), timed on {args.replicates_loop} "
        f"replicates at each grid size and extrapolated to {REPLICATES}:"
    )
    print(
        f"  {per_replicate * 1e3:.2f} ms per replicate (from {per_size[0] * 1e3:.2f} ms at n = {GRID[0]} "
        f"to {per_size[-1] * 1e3:.2f} ms at n = {GRID[-1]})"
    )
    print(f"  grid only: {grid_loop:.0f} s -> planner (with its search) is {grid_loop / best:,.0f}x faster")
    print(f"  every size the planner simulated: {full_loop:.0f} s -> {full_loop / best:,.0f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
