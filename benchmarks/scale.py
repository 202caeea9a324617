"""The exact engine against a statsmodels OLS loop as the graph grows (issue 12). A script, not a test:

    python benchmarks/scale.py [--quick]

For 4, 20 and 40 variables (a random linear-Gaussian graph: a chain of causes of the exposure and the outcome),
n = 500 and 2,000 replicates, with three strategies (unadjusted, the exposure's parents, every other observed
variable), it prints the per-replicate cost of the exact engine (``run_replicates``, one BLAS thread) and of a
plain statsmodels loop that fits the same strategies on pre-drawn data (drawing not timed for it), and their
ratio. Targets: >= 300x at 4 variables, >= 150x at 20, >= 100x at 40. It also prints the exact engine's cost at
n = 100,000 against n = 100 (target <= 1.2x). Beside each ratio it prints the mean estimate of the "every other
variable" strategy from both methods with its Monte Carlo SE, to show they estimate the same thing.
"""

from __future__ import annotations

import argparse
import platform
import time

import numpy as np
import statsmodels.api as sm
from engine import best_of, mean_and_mcse  # the shared helpers of benchmarks/engine.py
from threadpoolctl import threadpool_limits

import workbench as wb
from workbench.engine.generate import draw_rows
from workbench.engine.replicates import run_replicates
from workbench.engine.streams import block_seed


def scenario_text(k: int, seed: int = 12) -> str:
    """A linear-Gaussian scenario with ``k`` variables: ``k - 2`` covariates, exposure ``x``, outcome ``y``."""
    rng = np.random.default_rng(seed)
    covariates = [f"c{i}" for i in range(k - 2)]
    lines = ['title = "Sensors on a packing line"', "[question]", 'exposure = "x"', 'outcome = "y"']
    for name in [*covariates, "x", "y"]:
        lines += [f"[variables.{name}]"]
    arrows = []
    for i, c in enumerate(covariates):
        if i and rng.random() < 0.5:
            arrows.append((covariates[i - 1], c, 0.3))
        if rng.random() < 0.6:
            arrows.append((c, "x", round(float(rng.uniform(0.1, 0.4)), 2)))
        arrows.append((c, "y", round(float(rng.uniform(-0.4, 0.4)), 2)))
    arrows.append(("x", "y", 0.5))
    for a, b, e in arrows:
        lines += ["[[arrows]]", f'from = "{a}"', f'to = "{b}"', f"effect = {e}"]
    parents = sorted({a for a, b, _ in arrows if b == "x"})
    strategies = [("unadjusted", []), ("parents", parents), ("all_other", covariates)]
    for name, adjust in strategies:
        lines += ["[[strategies]]", f'name = "{name}"', f"adjust = {adjust!r}".replace("'", '"')]
    return "\n".join(lines) + "\n"


def statsmodels_loop(sc, n: int, replicates: int, seed: int):
    rows = draw_rows(sc, n, replicates, np.random.default_rng(block_seed(seed, 0)))
    names = sc.names
    x, y = names.index("x"), names.index("y")
    columns = [[x] + [names.index(a) for a in s.adjust] for s in sc.strategies]
    estimates = np.empty((replicates, len(columns)))
    start = time.perf_counter()
    for r in range(replicates):
        data = rows[r]
        for s, cols in enumerate(columns):
            fit = sm.OLS(data[:, y], sm.add_constant(data[:, cols], has_constant="add")).fit()
            estimates[r, s] = fit.params[1]
            fit.bse[1], fit.conf_int(0.05)[1], fit.pvalues[1]
    return (time.perf_counter() - start) / replicates, estimates


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats and loop replicates")
    args = parser.parse_args(argv)
    repeats, loop_reps = (2, 60) if args.quick else (5, 200)
    print(f"machine: {platform.machine()}, {platform.processor() or 'cpu'}; one BLAS thread")
    n, R, seed = 500, 2000, 11
    with threadpool_limits(limits=1, user_api="blas"):
        for k, target in ((4, 300), (20, 150), (40, 100)):
            sc = wb.loads_scenario(scenario_text(k))
            run_replicates(sc, n, 50, seed=seed)  # warm-up
            engine = best_of(repeats, lambda sc=sc: run_replicates(sc, n, R, seed=seed)) / R
            loop, loop_est = statsmodels_loop(sc, n, loop_reps, seed)
            arrays = run_replicates(sc, n, R, seed=seed)
            ratio = loop / engine
            print(
                f"{k:2d} variables: exact engine {engine * 1e6:7.1f} us per replicate, statsmodels loop "
                f"{loop * 1e3:6.2f} ms -> {ratio:5.0f}x (target >= {target}x: {'met' if ratio >= target else 'NOT met'})"
            )
            print(
                f"    all_other mean estimate: engine {mean_and_mcse(arrays.estimate[:, 2])}, "
                f"loop {mean_and_mcse(loop_est[:, 2])}"
            )
        sc = wb.loads_scenario(scenario_text(4))
        small = best_of(repeats, lambda: run_replicates(sc, 100, R, seed=seed))
        large = best_of(repeats, lambda: run_replicates(sc, 100_000, R, seed=seed))
        print(f"exact engine n = 100,000 vs n = 100: {large / small:.2f}x the cost (target <= 1.2x)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
