"""The three parts of `check` on the 40-variable graph of ``check_scale.py`` (issue 12), CPU time of each
against its previous method, measured in one run with one BLAS thread. A script, not a test:

    python benchmarks/check_scale_parts.py [--variables 40] [--binary 20]

* calibration of the binary intercepts (``graph_structure``): safeguarded Newton steps against Brent's method
  alone (the fallback, forced by making the Newton solver give up);
* the simulated intervention (``simulated_effect``): ancestors of the outcome, then the exposure's
  descendants, against every variable in both worlds;
* the large-sample simulation (``simulated_large_sample``), timed as it is now.

It prints the CPU seconds (``time.process_time``) and the largest change of a calibrated intercept and of
the simulated effect between the two methods.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from check_scale import scenario_text  # noqa: E402

from workbench.analysis import large_sample  # noqa: E402
from workbench.engine import generate, truth  # noqa: E402
from workbench.engine.threads import blas_threads  # noqa: E402
from workbench.graph.defaults import with_default_strategies  # noqa: E402
from workbench.scenario.parse import parse_scenario_text  # noqa: E402


def _cpu(fn):
    start = time.process_time()
    out = fn()
    return time.process_time() - start, out


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--variables", type=int, default=40)
    parser.add_argument("--binary", type=int, default=20)
    args = parser.parse_args(argv)
    sc = with_default_strategies(parse_scenario_text(scenario_text(args.variables, args.binary)))
    q = sc.question
    with blas_threads():
        newton_s, new = _cpu(lambda: generate.graph_structure.__wrapped__(sc.variables, sc.arrows))
        keep = generate._newton_root
        generate._newton_root = lambda *a: None
        try:
            brent_s, old = _cpu(lambda: generate.graph_structure.__wrapped__(sc.variables, sc.arrows))
        finally:
            generate._newton_root = keep
        moved = float(abs(new.intercept - old.intercept).max())
        generate.graph_structure(sc.variables, sc.arrows)  # calibrated once, outside the timings below
        effect = truth.simulated_effect.__wrapped__
        part_s, part = _cpu(lambda: effect(sc.variables, sc.arrows, q.exposure, q.outcome, "difference"))
        keep_orders = truth._world_orders
        truth._world_orders = lambda st, x, y: (st.order, st.order)
        try:
            full_s, full = _cpu(lambda: effect(sc.variables, sc.arrows, q.exposure, q.outcome, "difference"))
        finally:
            truth._world_orders = keep_orders
        large_s, _ = _cpu(lambda: large_sample.simulated_large_sample.__wrapped__(sc))
    print(f"{args.variables} variables ({args.binary} binary), CPU seconds, one BLAS thread:")
    print(f"  calibration: Newton {newton_s:.2f} s, Brent {brent_s:.2f} s; intercepts moved <= {moved:.1e}")
    print(
        f"  simulated effect: ancestors/descendants {part_s:.2f} s, all variables twice {full_s:.2f} s; "
        f"effect moved {abs(part[0] - full[0]):.1e}, MCSE moved {abs(part[1] - full[1]):.1e}"
    )
    print(f"  large-sample simulation: {large_s:.2f} s")


if __name__ == "__main__":
    main()
