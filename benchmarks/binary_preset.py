"""Benchmark: the whole binary_outcome preset, the raw engine against its statsmodels equivalent (issue 12).

The preset has a binary exposure (``express``), a continuous confounder (``fragility``) and a binary outcome
(``damaged``), and five strategies: the linear probability model with HC3 SEs, unadjusted and adjusted;
logistic regression, unadjusted and adjusted; and the standardised risk difference from the adjusted
logistic model. Both sides fit the same data:

- workbench: ``run_replicates(scenario, n, R, seed=..., engine="raw")``, which draws the data, fits every
  strategy (HC3, logistic and standardisation batched over replicates) and scores them;
- statsmodels: the same rows, drawn by ``workbench.engine.generate.draw_rows`` from the engine's block
  streams (block ``b`` of 250 replicates from child ``b`` of the seed), then per replicate
  ``OLS(y, X).fit(cov_type="HC3")`` for each linear probability strategy, ``Logit(y, X).fit(disp=0)`` for
  each logistic strategy, and ``get_margeff(at="overall", dummy=True)`` on the adjusted logistic fit for the
  standardised risk difference (one Logit fit serves both adjusted logistic strategies, as in the engine).

Drawing the data is timed on both sides (the engine draws inside ``run_replicates``; the loop's
``draw_rows`` is added to its fits). Times are process CPU time with one BLAS thread, the two sides
interleaved and the best of ``--repeats`` taken for the engine; the statsmodels loop is timed on
``--reference-replicates`` replicates and scaled per replicate. The per-replicate estimates and SEs of the
two sides are compared (the same data, so they agree to rounding), and each strategy's mean estimate is
printed with its Monte Carlo SE.

Run from the repository root::

    python benchmarks/binary_preset.py [--n 1000 --replicates 2000] [--n 20000 --replicates 200]
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
import time
import warnings
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import statsmodels
import statsmodels.api as sm

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import workbench as wb  # noqa: E402
from workbench.engine.generate import draw_rows  # noqa: E402
from workbench.engine.replicates import run_replicates  # noqa: E402
from workbench.engine.streams import BLOCK, block_seed  # noqa: E402
from workbench.engine.threads import blas_threads  # noqa: E402

SEED = 20261214


def engine_rows(scenario, n: int, replicates: int, seed: int) -> np.ndarray:
    """The rows the raw engine draws for ``replicates`` replicates, (R, n, k), block by block."""
    parts = []
    for block, start in enumerate(range(0, replicates, BLOCK)):
        count = min(BLOCK, replicates - start)
        parts.append(draw_rows(scenario, n, count, np.random.default_rng(block_seed(seed, block))))
    return np.concatenate(parts)


def statsmodels_loop(scenario, n: int, replicates: int, seed: int):
    """CPU seconds of drawing and fitting ``replicates`` replicates with statsmodels, and the (R, S)
    estimates and SEs of the exposure, strategy by strategy."""
    names = list(scenario.names)
    x = names.index(scenario.question.exposure)
    y = names.index(scenario.question.outcome)
    strategies = scenario.strategies
    estimate = np.full((replicates, len(strategies)), np.nan)
    se = np.full_like(estimate, np.nan)
    start = time.process_time()
    rows = engine_rows(scenario, n, replicates, seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in range(replicates):
            data = rows[r]
            logits = {}
            for s, strategy in enumerate(strategies):
                columns = [x] + [names.index(a) for a in strategy.adjust]
                design = sm.add_constant(data[:, columns], has_constant="add")
                if strategy.model == "ols":
                    fit = sm.OLS(data[:, y], design).fit(cov_type="HC3")
                    estimate[r, s], se[r, s] = fit.params[1], fit.bse[1]
                    continue
                key = tuple(columns)
                if key not in logits:
                    logits[key] = sm.Logit(data[:, y], design).fit(disp=0)
                fit = logits[key]
                if strategy.standardize:
                    margins = fit.get_margeff(at="overall", dummy=True)
                    estimate[r, s], se[r, s] = margins.margeff[0], margins.margeff_se[0]
                else:
                    estimate[r, s], se[r, s] = fit.params[1], fit.bse[1]
    return time.process_time() - start, estimate, se


def mean_and_mcse(values: np.ndarray) -> str:
    values = values[np.isfinite(values)]
    return f"{values.mean():.4f} (MCSE {values.std(ddof=1) / np.sqrt(values.size):.4f})"


def compare(scenario, n: int, replicates: int, reference: int, repeats: int) -> float:
    """Print one size's comparison; returns the ratio (statsmodels CPU per replicate / engine's)."""
    m = min(reference, replicates)
    run_replicates(scenario, n, min(replicates, 50), seed=SEED, engine="raw")  # warm caches (truth, plan)
    engine_cpu, loop_cpu = [], []
    with blas_threads(1):
        for i in range(repeats):
            start = time.process_time()
            result = run_replicates(scenario, n, replicates, seed=SEED, engine="raw")
            engine_cpu.append(time.process_time() - start)
            if i == 0:  # the loop once, between two engine runs, so both see the same load
                seconds, estimate, se = statsmodels_loop(scenario, n, m, SEED)
                loop_cpu.append(seconds)
    engine = min(engine_cpu) / replicates
    loop = loop_cpu[0] / m
    ratio = loop / engine
    print(
        f"n = {n:,}, {replicates:,} replicates: engine {engine * 1e3:.3f} ms per replicate "
        f"(best of {repeats}; {', '.join(f'{t:.2f}' for t in engine_cpu)} s); statsmodels {loop * 1e3:.2f} ms "
        f"per replicate (timed on {m}) -> {ratio:.1f}x"
    )
    for s, name in enumerate(result.strategies):
        ok = np.isfinite(estimate[:, s]) & np.isfinite(result.estimate[:m, s])
        diff = np.max(np.abs(result.estimate[:m, s][ok] - estimate[ok, s]), initial=0.0)
        diff_se = np.max(np.abs(result.se[:m, s][ok] - se[ok, s]), initial=0.0)
        print(
            f"   {name:30s} max |difference| estimate {diff:.1e}, SE {diff_se:.1e}; mean estimate engine "
            f"{mean_and_mcse(result.estimate[:, s])}, statsmodels {mean_and_mcse(estimate[:, s])}"
        )
    return ratio


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, action="append", help="sizes (default 1000 and 20000)")
    parser.add_argument("--replicates", type=int, action="append", help="replicates per size")
    parser.add_argument("--reference-replicates", type=int, default=100, help="statsmodels replicates timed")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    sizes = args.n or [1000, 20000]
    counts = args.replicates or [2000 if n <= 5000 else 200 for n in sizes]
    if len(counts) != len(sizes):
        parser.error("give one --replicates per --n")
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(
        f"date {datetime.now(UTC):%Y-%m-%d %H:%M} UTC; {os.cpu_count()} CPUs, load average {load:.1f}; "
        f"Python {platform.python_version()}, numpy {np.__version__}, statsmodels {statsmodels.__version__}"
    )
    scenario = wb.load_preset("binary_outcome")
    targets = {1000: 10.0, 20000: 5.0}
    met = True
    for n, replicates in zip(sizes, counts, strict=True):
        ratio = compare(scenario, n, replicates, args.reference_replicates, args.repeats)
        if n in targets:
            ok = ratio >= targets[n]
            met &= ok
            print(f"   target >= {targets[n]:.0f}x: {'met' if ok else 'NOT met'}")
    return 0 if met else 1


if __name__ == "__main__":
    raise SystemExit(main())
