"""The three parts of `check` on the 40-variable graph of ``check_scale.py`` (issue 12), each against its
previous method, measured in one run with one BLAS thread. A script, not a test:

    python benchmarks/check_scale_parts.py [--variables 40] [--binary 20]

* calibration of the binary intercepts (``graph_structure``): safeguarded Newton steps against Brent's method
  alone (the fallback, forced by making the Newton solver give up); the noise rows are drawn ahead in a
  thread, so wall and CPU time differ;
* the simulated intervention (``simulated_effect``): :data:`~workbench.engine.truth.EXACT_DRAWS` draws where
  the contrast is the same in every draw (every variable on a causal path continuous) against the full
  :data:`~workbench.engine.truth.TRUTH_DRAWS`;
* the large-sample simulation (``simulated_large_sample``): plain OLS strategies fitted from one batched
  cross-product per batch against :func:`workbench.analysis.estimate.estimate` on each batch.

It prints the wall and CPU seconds (``time.perf_counter``, ``time.process_time``) and the largest change of
a calibrated intercept, of the simulated effect and of a large-sample figure between the two methods.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from check_scale import scenario_text  # noqa: E402

from workbench.analysis import large_sample  # noqa: E402
from workbench.engine import calibration, generate, truth  # noqa: E402
from workbench.engine.threads import blas_threads  # noqa: E402
from workbench.graph.defaults import with_default_strategies  # noqa: E402
from workbench.scenario.parse import parse_scenario_text  # noqa: E402


def _time(fn):
    wall, cpu = time.perf_counter(), time.process_time()
    out = fn()
    return time.perf_counter() - wall, time.process_time() - cpu, out


def _swapped(module, name, value, fn):
    keep = getattr(module, name)
    setattr(module, name, value)
    try:
        return _time(fn)
    finally:
        setattr(module, name, keep)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--variables", type=int, default=40)
    parser.add_argument("--binary", type=int, default=20)
    args = parser.parse_args(argv)
    sc = with_default_strategies(parse_scenario_text(scenario_text(args.variables, args.binary)))
    q = sc.question
    calibrate = generate.graph_structure.__wrapped__
    effect = truth.simulated_effect.__wrapped__
    large = large_sample.simulated_large_sample.__wrapped__
    with blas_threads():
        newton = _time(lambda: calibrate(sc.variables, sc.arrows))
        brent = _swapped(
            calibration, "_newton_root", lambda *a: None, lambda: calibrate(sc.variables, sc.arrows)
        )
        moved = float(abs(newton[2].intercept - brent[2].intercept).max())
        generate.graph_structure(sc.variables, sc.arrows)  # calibrated once, outside the timings below
        exact = _time(lambda: effect(sc.variables, sc.arrows, q.exposure, q.outcome, "difference"))
        full = _swapped(
            truth,
            "truth_draws",
            lambda *a: truth.TRUTH_DRAWS,
            lambda: effect(sc.variables, sc.arrows, q.exposure, q.outcome, "difference"),
        )
        truth.true_effect(sc)  # cached once, outside the timings below
        cross = _time(lambda: large(sc))
        fitted = _swapped(large_sample, "_plain_ols", lambda s, binary: False, lambda: large(sc))
    change = max(
        abs(getattr(cross[2][n], f) - getattr(fitted[2][n], f))
        for n in cross[2]
        for f in ("estimate", "mcse", "se_factor")
    )
    mcse = max(f.mcse for f in cross[2].values())
    print(f"{args.variables} variables ({args.binary} binary), seconds wall / CPU, one BLAS thread:")
    print(
        f"  calibration: Newton {newton[0]:.2f} / {newton[1]:.2f}, Brent {brent[0]:.2f} / {brent[1]:.2f}; "
        f"intercepts moved <= {moved:.1e}"
    )
    print(
        f"  simulated effect: {truth.truth_draws(sc.variables, sc.arrows, q.exposure, q.outcome)} draws "
        f"{exact[0]:.2f} / {exact[1]:.2f}, {truth.TRUTH_DRAWS} draws {full[0]:.2f} / {full[1]:.2f}; "
        f"effect moved {abs(exact[2][0] - full[2][0]):.1e}, MCSE {exact[2][1]:.1e} and {full[2][1]:.1e}"
    )
    print(
        f"  large-sample simulation: cross-products {cross[0]:.2f} / {cross[1]:.2f}, estimate() per batch "
        f"{fitted[0]:.2f} / {fitted[1]:.2f}; figures moved <= {change:.1e} (their MCSE up to {mcse:.1e})"
    )


if __name__ == "__main__":
    main()
