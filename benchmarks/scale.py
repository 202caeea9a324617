"""The exact engine against a statsmodels OLS loop as the graph grows (issue 12). A script, not a test:

    python benchmarks/scale.py [--quick]

For 4, 20 and 40 variables (a random linear-Gaussian graph: a chain of causes of the exposure and the outcome),
n = 500 and 2,000 replicates, with three strategies (unadjusted, the exposure's parents, every other observed
variable), it prints the per-replicate cost of the exact engine (``run_replicates``, one BLAS thread) and of a
plain statsmodels loop that fits the same strategies on pre-drawn data (drawing not timed for it), and their
ratio, by the wall clock and by CPU time (the two sides measured in alternation, best of the repeats). Targets: >= 300x at 4 variables, >= 150x at
20, >= 100x at 40. It prints the machine, the BLAS thread count and the load average, and the exact engine's cost at
n = 100,000 against n = 100 (target <= 1.2x). Beside each ratio it prints the mean estimate of the "every other
variable" strategy from both methods with its Monte Carlo SE, to show they estimate the same thing.
"""

from __future__ import annotations

import argparse
import os
import platform
import time

import numpy as np
import statsmodels.api as sm
from engine import mean_and_mcse  # the shared helper of benchmarks/engine.py
from threadpoolctl import threadpool_info, threadpool_limits

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
    """Per-replicate (wall, CPU) seconds of fitting the strategies with statsmodels OLS, and the estimates."""
    rows = draw_rows(sc, n, replicates, np.random.default_rng(block_seed(seed, 0)))
    names = sc.names
    x, y = names.index("x"), names.index("y")
    columns = [[x] + [names.index(a) for a in s.adjust] for s in sc.strategies]
    estimates = np.empty((replicates, len(columns)))
    start, cpu = time.perf_counter(), time.process_time()
    for r in range(replicates):
        data = rows[r]
        for s, cols in enumerate(columns):
            fit = sm.OLS(data[:, y], sm.add_constant(data[:, cols], has_constant="add")).fit()
            estimates[r, s] = fit.params[1]
            fit.bse[1], fit.conf_int(0.05)[1], fit.pvalues[1]
    seconds = np.array([time.perf_counter() - start, time.process_time() - cpu])
    return seconds / replicates, estimates


def timed(function) -> np.ndarray:
    """(wall, CPU) seconds of one call. CPU time leaves out the time the process waits for a busy machine's
    cores, so on a loaded machine it is the steadier of the two."""
    start, cpu = time.perf_counter(), time.process_time()
    function()
    return np.array([time.perf_counter() - start, time.process_time() - cpu])


def interleaved(repeats: int, engine_run, loop_run) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Best-of-``repeats`` (wall, CPU) seconds of the engine and of the loop, measured in alternation so that a
    change of load hits both sides; and the loop's estimates."""
    engine, loop, estimates = np.full(2, np.inf), np.full(2, np.inf), None
    for _ in range(repeats):
        engine = np.minimum(engine, timed(engine_run))
        seconds, estimates = loop_run()
        loop = np.minimum(loop, seconds)
    return engine, loop, estimates


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats and loop replicates")
    args = parser.parse_args(argv)
    repeats, loop_reps = (2, 60) if args.quick else (5, 200)
    n, R, seed = 500, 2000, 11
    with threadpool_limits(limits=1, user_api="blas"):
        threads = sorted({info["num_threads"] for info in threadpool_info() if info["user_api"] == "blas"})
        print(
            f"machine: {platform.machine()}, {platform.processor() or 'cpu'}, {os.cpu_count()} CPUs; "
            f"BLAS threads {threads}; load average {os.getloadavg()[0]:.2f} at the start"
        )
        for k, target in ((4, 300), (20, 150), (40, 100)):
            sc = wb.loads_scenario(scenario_text(k))
            run_replicates(sc, n, 50, seed=seed)  # warm-up
            engine, loop, loop_est = interleaved(
                repeats,
                lambda sc=sc: run_replicates(sc, n, R, seed=seed),
                lambda sc=sc: statsmodels_loop(sc, n, loop_reps, seed),
            )
            engine /= R
            arrays = run_replicates(sc, n, R, seed=seed)
            ratio, cpu_ratio = loop / engine
            print(
                f"{k:2d} variables: exact engine {engine[0] * 1e6:6.1f} us per replicate (CPU {engine[1] * 1e6:6.1f}), "
                f"statsmodels loop {loop[0] * 1e3:5.2f} ms (CPU {loop[1] * 1e3:5.2f}) -> {ratio:5.0f}x, CPU "
                f"{cpu_ratio:5.0f}x (target >= {target}x: {'met' if min(ratio, cpu_ratio) >= target else 'NOT met'})"
            )
            print(
                f"    all_other mean estimate: engine {mean_and_mcse(arrays.estimate[:, 2])}, "
                f"loop {mean_and_mcse(loop_est[:, 2])}"
            )
        sc = wb.loads_scenario(scenario_text(4))
        small, large = np.full(2, np.inf), np.full(2, np.inf)
        for _ in range(repeats):
            small = np.minimum(small, timed(lambda: run_replicates(sc, 100, R, seed=seed)))
            large = np.minimum(large, timed(lambda: run_replicates(sc, 100_000, R, seed=seed)))
        wall, cpu = large / small
        print(f"exact engine n = 100,000 vs n = 100: {wall:.2f}x the cost, CPU {cpu:.2f}x (target <= 1.2x)")
        print(f"load average {os.getloadavg()[0]:.2f} at the end")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
