"""Calibrate the time model of :mod:`workbench.analysis.budget` on this machine. A script, not a test:

    python benchmarks/budget_calibration.py [--quick]

It times small runs of every preset (the exact engine where it applies, and the raw engine forced on the
linear ones too, so the raw model sees graphs of 3 to 13 variables), fits the constants of
:data:`workbench.analysis.budget.SECONDS_PER` by non-negative least squares on the relative error (each run's
row divided by its measured time), and prints them as Python to paste into ``budget.py`` with the machine and
the date. It then prints each run's measured and estimated seconds with the ratio, the ratios of the
constants now in ``budget.py``, and the peak resident memory of a fresh interpreter after a small run
(:data:`~workbench.analysis.budget.BASE_BYTES`) and after a raw run with a large chunk, beside their estimates.
"""

from __future__ import annotations

import argparse
import datetime
import functools
import os
import platform
import subprocess
import sys
import textwrap

import numpy as np
from engine import best_of  # the shared helper of benchmarks/engine.py
from scipy.optimize import nnls

import workbench as wb
from workbench.analysis import budget
from workbench.engine.fitplan import fit_plan
from workbench.engine.replicates import choose_engine
from workbench.graph.defaults import with_default_strategies
from workbench.scenario.presets import list_presets


def settings(quick: bool):
    """(preset, engine, n, replicates) of every timed run."""
    scale = 1 if quick else 2
    runs = []
    for name in list_presets():
        scenario = with_default_strategies(wb.load_preset(name))
        if choose_engine(scenario, 200) == "exact":
            runs += [(name, "exact", 200, 5_000 * scale), (name, "exact", 200, 40_000 * scale)]
        runs += [(name, "raw", 200, 1_000 * scale), (name, "raw", 2_000, 500 * scale)]
    return runs


def measure(runs, repeats: int):
    """Rows of features and measured seconds, one per run."""
    names = list(budget.SECONDS_PER)
    rows, seconds = [], []
    for name, engine, n, replicates in runs:
        scenario = with_default_strategies(wb.load_preset(name))
        plan = fit_plan(scenario)
        run = functools.partial(wb.simulate, scenario, n=n, replicates=replicates, seed=1, engine=engine)
        taken = best_of(repeats, run)
        features = budget.cost_features(plan, engine, n, replicates, len(scenario.variables))
        rows.append([features[key] for key in names])
        seconds.append(taken)
    return names, np.array(rows), np.array(seconds)


def peak_rss(code: str) -> int:
    """Peak resident memory (bytes) of a fresh interpreter running ``code``."""
    script = code + "\nimport resource; print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)"
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True)
    return int(done.stdout.split()[-1]) * 1024


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer replicates and one repeat")
    args = parser.parse_args(argv)
    runs = settings(args.quick)
    names, X, y = measure(runs, 1 if args.quick else 2)
    weights = 1.0 / y
    scale = X.max(axis=0)
    scale[scale == 0] = 1.0
    coef, _ = nnls(X / scale * weights[:, None], y * weights)
    coef = coef / scale
    machine = f"{platform.machine()} {platform.processor() or ''} {os.cpu_count()} cores".strip()
    print(
        f"# {machine}, {platform.system()} {platform.release()}, Python {platform.python_version()}, "
        f"{datetime.date.today().isoformat()}"
    )
    print("SECONDS_PER = {")
    for key, value in zip(names, coef, strict=True):
        print(f'    "{key}": {value:.3g},')
    print("}")
    fitted = X @ coef
    current = X @ np.array([budget.SECONDS_PER[key] for key in names])
    print(f"\n{'run':<52} {'seconds':>8} {'fitted':>8} {'ratio':>6} {'budget.py':>9}")
    for (name, engine, n, replicates), taken, fit, now in zip(runs, y, fitted, current, strict=True):
        label = f"{name} {engine} n={n} R={replicates}"
        print(f"{label:<52} {taken:8.3f} {fit:8.3f} {fit / taken:6.2f} {now / taken:9.2f}")
    ratios = current / y
    print(f"\nbudget.py's constants: estimate / measured from {ratios.min():.2f} to {ratios.max():.2f}")
    base = peak_rss(
        "import workbench as wb\nwb.simulate(wb.load_preset('common_cause'), replicates=200, seed=1)"
    )
    print(
        f"peak RSS after a small run: {base / 2**20:.0f} MiB (BASE_BYTES = {budget.BASE_BYTES / 2**20:.0f} MiB)"
    )
    code = textwrap.dedent("""
        import workbench as wb
        wb.simulate(wb.load_preset('binary_outcome'), n=20000, replicates=2000, seed=1)
    """)
    big = peak_rss(code)
    cost = budget.estimate_cost(wb.load_preset("binary_outcome"), n=20000, replicates=2000)
    print(
        f"peak RSS of binary_outcome n=20,000 R=2,000: {big / 2**20:.0f} MiB, estimated "
        f"{cost.peak_bytes / 2**20:.0f} MiB ({cost.text}, estimate / measured memory "
        f"{cost.peak_bytes / big:.2f})"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
