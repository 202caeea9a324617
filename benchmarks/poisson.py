"""Benchmark: batched (modified) Poisson regression against a loop of statsmodels GLM(Poisson) fits (issue 13).

Workload: R replicate datasets of n = 1,000 rows with a randomised binary exposure, a continuous and a binary
outcome cause, and a binary outcome from a log-linear risk, so each fit has 4 coefficients. Both sides fit
the same arrays and return the coefficients with model-based and HC0 sandwich SEs (statsmodels fits twice,
``cov_type="nonrobust"`` and ``"HC0"``, as an analyst would; a third line times statsmodels' single fit with
``cov_type="HC0"`` only). Timings are the best of ``--repeats`` with one BLAS thread on both sides
(``workbench.engine.threads.blas_threads``); the statsmodels loop runs on a subset and is scaled per
replicate. The mean exposure estimate of both sides is printed with its Monte Carlo SE, and the largest
absolute difference between them. Target: the batched fit >= 8x the statsmodels loop.

Run from the repository root::

    python benchmarks/poisson.py [--replicates 2000] [--n 1000] [--repeats 3] [--outcome binary|count]
"""

from __future__ import annotations

import argparse
import os
import platform
import sys
from pathlib import Path

import numpy as np
import statsmodels.api as sm

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from engine import best_of, mean_and_mcse  # noqa: E402

from workbench.engine.logistic import design_matrix  # noqa: E402
from workbench.engine.poisson import fit_poisson_batch  # noqa: E402
from workbench.engine.threads import blas_threads  # noqa: E402


def make_data(replicates: int, n: int, seed: int = 20261203, outcome: str = "binary"):
    rng = np.random.default_rng(seed)
    data = np.stack(
        [
            rng.integers(0, 2, (replicates, n)),
            rng.normal(size=(replicates, n)),
            rng.integers(0, 2, (replicates, n)),
        ],
        axis=-1,
    ).astype(float)
    X = design_matrix(data, 0, [1, 2])
    if outcome == "count":  # a Poisson count of mean 2 exp(...): the log rate ratio of a count outcome
        return X, rng.poisson(2.0 * np.exp(0.4 * X[..., 1] + 0.3 * X[..., 2] + 0.3 * X[..., 3])).astype(float)
    risk = np.clip(0.12 * np.exp(0.4 * X[..., 1] + 0.3 * X[..., 2] + 0.3 * X[..., 3]), 0, 1)
    return X, (rng.random((replicates, n)) < risk).astype(float)


def statsmodels_loop(X, y, both: bool = True):
    out = np.empty((len(y), 3))
    for r in range(len(y)):
        Xr = np.ascontiguousarray(X[r])
        model = sm.GLM(y[r], Xr, family=sm.families.Poisson())
        robust = model.fit(cov_type="HC0")
        classical = model.fit() if both else robust
        out[r] = robust.params[1], robust.bse[1], classical.bse[1]
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=2000)
    parser.add_argument("--n", type=int, default=1000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--loop-replicates", type=int, default=200)
    parser.add_argument("--outcome", choices=("binary", "count"), default="binary")
    args = parser.parse_args()
    X, y = make_data(args.replicates, args.n, outcome=args.outcome)
    m = min(args.loop_replicates, args.replicates)
    with blas_threads():
        batched = best_of(args.repeats, lambda: fit_poisson_batch(X, y))
        loop = best_of(args.repeats, lambda: statsmodels_loop(X[:m], y[:m]))
        loop_one = best_of(args.repeats, lambda: statsmodels_loop(X[:m], y[:m], both=False))
        fit = fit_poisson_batch(X, y)
        ref = statsmodels_loop(X[:m], y[:m])
    per_batched = batched / args.replicates
    per_loop, per_loop_one = loop / m, loop_one / m
    cpu = next(
        (
            ln.split(":", 1)[1].strip()
            for ln in Path("/proc/cpuinfo").read_text().splitlines()
            if "model name" in ln
        ),
        platform.processor(),
    )
    print(
        f"machine: {cpu}, {os.cpu_count()} CPUs; one BLAS thread; numpy {np.__version__}, statsmodels {sm.__version__}"
    )
    print(
        f"workload: {args.replicates} replicates of n = {args.n}, {args.outcome} outcome, 4 coefficients; "
        f"best of {args.repeats}"
    )
    print(f"batched Poisson (both covariances): {per_batched * 1e3:.3f} ms per replicate")
    print(f"statsmodels GLM loop (nonrobust + HC0 fits): {per_loop * 1e3:.3f} ms per replicate")
    print(f"statsmodels GLM loop (one HC0 fit):          {per_loop_one * 1e3:.3f} ms per replicate")
    print(
        f"ratio: {per_loop / per_batched:.1f}x (two fits), {per_loop_one / per_batched:.1f}x (one fit); target >= 8x"
    )
    diff = max(
        np.max(np.abs(fit.coef[:m, 1] - ref[:, 0])),
        np.max(np.abs(fit.se("robust")[:m, 1] - ref[:, 1])),
        np.max(np.abs(fit.se("classical")[:m, 1] - ref[:, 2])),
    )
    print(f"largest |difference| from statsmodels (estimate, both SEs): {diff:.2e}")
    print(f"mean estimate: batched {mean_and_mcse(fit.coef[:m, 1])}, statsmodels {mean_and_mcse(ref[:, 0])}")
    print(f"failures: {int(fit.failed.sum())} of {args.replicates}")


if __name__ == "__main__":
    main()
