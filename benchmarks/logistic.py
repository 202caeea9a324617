"""Benchmark: batched logistic regression against a loop of statsmodels Logit fits (issue 4).

Workload: R replicate datasets of n rows with a randomised binary exposure and two outcome causes (one
continuous and strong, one binary), so each fit has 4 coefficients (intercept, exposure, 2 covariates). Both
sides fit the same arrays and return coefficients and standard errors; the maximum absolute differences are
printed. The batched fit is timed (best of ``--repeats``) with its default single thread, in wall-clock
and in process CPU time (steadier on a machine shared with other work), and with ``workers=2``.

A second, smaller comparison adds the standardised risk difference: batched ``standardized_contrast`` against
statsmodels' ``get_margeff(at="overall", dummy=True)`` per fit (timed on a subset and extrapolated).

With ``--old-logistic FILE`` / ``--old-robust FILE`` (copies of earlier versions of
``workbench/engine/logistic.py`` / ``robust.py``) the earlier and the current fits are timed side by side in
the same run, by process CPU time with one BLAS thread, interleaved so that the load of the machine is shared
alike; the HC3 least squares (``ols_hc3_batch``) is compared with a statsmodels ``OLS(cov_type="HC3")`` loop.
The statsmodels loops get a C-ordered copy of each replicate's design (an analyst's array).

Run from the repository root::

    python benchmarks/logistic.py [--replicates 2000] [--n 500] [--repeats 5]
    python benchmarks/logistic.py --n 20000 --replicates 200 --old-logistic /tmp/logistic_old.py \
        --old-robust /tmp/robust_old.py --side-by-side-only
"""

from __future__ import annotations

import argparse
import importlib.util
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
from scipy.special import expit

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from workbench.engine.logistic import design_matrix, fit_logit_batch  # noqa: E402
from workbench.engine.robust import ols_hc3_batch  # noqa: E402
from workbench.engine.standardize import standardized_contrast  # noqa: E402
from workbench.engine.threads import blas_threads  # noqa: E402


def cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def make_data(replicates: int, n: int, seed: int = 20261202):
    rng = np.random.default_rng(seed)
    exposure = rng.integers(0, 2, (replicates, n)).astype(float)
    fragility = rng.normal(size=(replicates, n))
    heavy = (rng.random((replicates, n)) < 0.3).astype(float)
    X = design_matrix(np.stack([exposure, fragility, heavy], axis=-1), 0, [1, 2])
    y = (rng.random((replicates, n)) < expit(-1.5 - 0.6 * exposure + 1.5 * fragility + 0.4 * heavy)).astype(
        float
    )
    return X, y


def best_of(repeats: int, function):
    """Best wall-clock time, best process CPU time and the result of ``repeats`` calls."""
    walls, cpus, result = [], [], None
    for _ in range(repeats):
        wall, cpu = time.perf_counter(), time.process_time()
        result = function()
        walls.append(time.perf_counter() - wall)
        cpus.append(time.process_time() - cpu)
    return min(walls), min(cpus), result


def load(path: str, name: str):
    """A module loaded from a file (an earlier version of an engine module)."""
    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def side_by_side(X, y, args) -> None:
    """Earlier and current fits, interleaved, by CPU time with one BLAS thread, against statsmodels loops."""
    R, n = y.shape
    m = min(R, args.reference_replicates)
    with blas_threads(1):
        cpu = {"logit new": [], "logit old": [], "hc3 new": [], "hc3 old": []}
        old_logit = load(args.old_logistic, "logistic_old") if args.old_logistic else None
        old_robust = load(args.old_robust, "robust_old") if args.old_robust else None
        loops = {"Logit": [], "Logit (design as given)": [], "OLS HC3": []}
        coef = np.empty((m, X.shape[2]))
        hc3_se = np.empty((m, X.shape[2]))
        for _ in range(args.repeats):  # both sides in every round, so they share the machine's load alike
            for key, function in [
                ("logit new", lambda: fit_logit_batch(X, y)),
                ("logit old", old_logit and (lambda: old_logit.fit_logit_batch(np.ascontiguousarray(X), y))),
                ("hc3 new", lambda: ols_hc3_batch(X, y)),
                ("hc3 old", old_robust and (lambda: old_robust.ols_hc3_batch(np.ascontiguousarray(X), y))),
            ]:
                if function:
                    start = time.process_time()
                    result = function()
                    cpu[key].append(time.process_time() - start)
                    cpu[key + " result"] = result
            spent = dict.fromkeys(loops, 0.0)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                for r in range(m):
                    Xr = np.ascontiguousarray(X[r])
                    start = time.process_time()
                    coef[r] = sm.Logit(y[r], Xr).fit(disp=0).params
                    spent["Logit"] += time.process_time() - start
                    start = time.process_time()
                    sm.Logit(y[r], X[r]).fit(disp=0)
                    spent["Logit (design as given)"] += time.process_time() - start
                    start = time.process_time()
                    hc3_se[r] = sm.OLS(y[r], Xr).fit(cov_type="HC3").bse
                    spent["OLS HC3"] += time.process_time() - start
            for name, total in spent.items():
                loops[name].append(total)
        loops = {name: min(times) for name, times in loops.items()}
    scale = R / m
    fit = cpu["logit new result"]
    ok = ~fit.failed[:m]
    print(
        f"side by side, R = {R}, n = {n}, one BLAS thread, process CPU time, both sides best of {args.repeats} "
        "interleaved rounds"
    )
    for name, total in loops.items():
        print(f"  statsmodels {name} loop: {total * scale:8.3f} s (timed on {m} fits, scaled to {R})")
    t_logit = loops["Logit"] * scale
    t_hc3 = loops["OLS HC3"] * scale
    for key, ref in [("logit new", t_logit), ("logit old", t_logit), ("hc3 new", t_hc3), ("hc3 old", t_hc3)]:
        if cpu[key]:
            best = min(cpu[key])
            print(f"  {key:9s}: {best:8.3f} s -> {ref / best:6.1f}x the statsmodels loop")
    print(
        f"  max |coef difference| from statsmodels Logit {np.max(np.abs(fit.coef[:m][ok] - coef[ok])):.1e}; "
        f"max |HC3 SE difference| {np.nanmax(np.abs(cpu['hc3 new result'][1][:m] - hc3_se)):.1e}"
    )
    if cpu["logit old"]:
        old = cpu["logit old result"]
        print(f"  max |coef difference| old vs new {np.nanmax(np.abs(old.coef - fit.coef)):.1e}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=2000)
    parser.add_argument("--n", type=int, default=500)
    parser.add_argument("--repeats", type=int, default=5, help="batched timings: best of this many")
    parser.add_argument("--margeff-replicates", type=int, default=200)
    parser.add_argument("--old-logistic", help="an earlier logistic.py to time side by side")
    parser.add_argument("--old-robust", help="an earlier robust.py to time side by side")
    parser.add_argument("--reference-replicates", type=int, default=200, help="statsmodels fits timed")
    parser.add_argument("--side-by-side-only", action="store_true")
    args = parser.parse_args(argv)
    R, n = args.replicates, args.n
    if args.side_by_side_only:
        print(f"date {datetime.now(UTC):%Y-%m-%d %H:%M} UTC; {os.cpu_count()} CPUs ({cpu_model()})")
        side_by_side(*make_data(R, n), args)
        return 0

    print(
        f"date {datetime.now(UTC):%Y-%m-%d %H:%M} UTC; {os.cpu_count()} CPUs ({cpu_model()}); "
        f"Python {platform.python_version()}, numpy {np.__version__}, statsmodels {statsmodels.__version__}"
    )
    print(f"workload: {R} replicates x n = {n}, 4 coefficients (intercept, binary exposure, 2 covariates)")
    X, y = make_data(R, n)
    fit_logit_batch(X[:50], y[:50])  # warm-up

    t_threads, _, fit_threads = best_of(args.repeats, lambda: fit_logit_batch(X, y, workers=2))
    t_single, c_single, fit = best_of(args.repeats, lambda: fit_logit_batch(X, y))
    assert np.array_equal(fit.coef, fit_threads.coef, equal_nan=True)

    coef = np.empty((R, 4))
    se = np.empty((R, 4))
    wall, cpu = time.perf_counter(), time.process_time()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in range(R):
            result = sm.Logit(y[r], X[r]).fit(disp=0)
            coef[r] = result.params
            se[r] = result.bse
    t_loop, c_loop = time.perf_counter() - wall, time.process_time() - cpu

    ok = ~fit.failed
    print(
        f"failures in the batch: {int(fit.failed.sum())}; iterations: median {np.median(fit.iterations):.0f}, "
        f"max {fit.iterations.max()}"
    )
    print(
        f"statsmodels loop:          wall {t_loop:7.3f} s, CPU {c_loop:7.3f} s ({1e3 * t_loop / R:.2f} ms per fit)"
    )
    print(
        f"batched (one thread):      wall {t_single:7.3f} s, CPU {c_single:7.3f} s -> {t_loop / t_single:5.1f}x "
        f"faster by wall clock, {c_loop / c_single:5.1f}x by CPU time "
        f"(target >= 10x: {'met' if min(t_loop / t_single, c_loop / c_single) >= 10 else 'NOT met'})"
    )
    print(
        f"batched, workers=2:        wall {t_threads:7.3f} s               -> {t_loop / t_threads:5.1f}x faster"
    )
    print(
        f"max |coef difference| {np.max(np.abs(fit.coef[ok] - coef[ok])):.2e}, "
        f"max |SE difference| {np.max(np.abs(fit.se[ok] - se[ok])):.2e}"
    )

    m = min(args.margeff_replicates, R)
    t_std, _, (estimate, est_se) = best_of(
        args.repeats, lambda: standardized_contrast(fit_logit_batch(X, y), X, 1, exposure_kind="binary")
    )
    ref = np.empty((m, 2))
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in range(m):
            margins = sm.Logit(y[r], X[r]).fit(disp=0).get_margeff(at="overall", dummy=True)
            ref[r] = margins.margeff[0], margins.margeff_se[0]
    t_margeff = (time.perf_counter() - start) * R / m
    print(
        f"standardised risk difference: batched fit + contrast {t_std:.3f} s; statsmodels fit + get_margeff "
        f"{t_margeff:.2f} s (timed on {m}, extrapolated) -> {t_margeff / t_std:.0f}x; "
        f"max |difference| estimate {np.max(np.abs(estimate[:m] - ref[:, 0])):.1e}, "
        f"SE {np.max(np.abs(est_se[:m] - ref[:, 1])):.1e}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
