"""``workbench sensitivity``: how an unmeasured confounder of given strengths would move an estimate.

The command reads the scenario, checks ``--n``, ``--grid``, ``--replicates`` and the output paths before any
work, calls :func:`workbench.analysis.sensitivity.sensitivity` and hands the result to
:func:`workbench.cli.outputs.deliver` (``--json OUT|-``, ``--csv OUT|-`` for the grid, ``--html OUT`` for the
standalone report with its sensitivity section).
"""

from __future__ import annotations

import argparse

from workbench.errors import UsageError

__all__ = ["add_parser", "sensitivity"]


def add_parser(sub, add_source, whole) -> argparse.ArgumentParser:
    """Register ``workbench sensitivity`` on the subparsers ``sub`` (``add_source`` adds FILE and --preset,
    ``whole`` converts a whole-number option)."""
    p = sub.add_parser(
        "sensitivity",
        help="how strong an unmeasured confounder would have to be to explain the effect away",
        description=(
            "Add a latent confounder U with strengths on the exposure and on the outcome, expressed as partial "
            "R^2 (Cinelli & Hazlett 2020), and show the strategy's large-sample bias over a grid of the two, the "
            "robustness value at the planned n, the observed covariates as benchmarks and, for a binary "
            "outcome, the E-value. The graph is an assumption: the grid is not evidence that no confounder "
            "exists."
        ),
    )
    add_source(p)
    p.add_argument("--strategy", metavar="S", help="the strategy to examine (default: the first valid one)")
    p.add_argument("--n", type=whole, help="planned sample size (default: the scenario's)")
    p.add_argument("--grid", type=whole, metavar="K", help="grid points per strength (2 to 101)")
    p.add_argument(
        "--simulate",
        action="store_true",
        help="also simulate coverage and power at n at every grid point (linear-Gaussian graphs)",
    )
    p.add_argument("--replicates", type=whole, help="simulated studies per grid point with --simulate")
    p.add_argument("--seed", type=whole, help="random seed of --simulate (default: the scenario's)")
    p.add_argument("--json", metavar="OUT", help="write JSON to OUT ('-' for stdout)")
    p.add_argument("--csv", metavar="OUT", help="write the grid as CSV to OUT ('-' for stdout)")
    p.add_argument("--html", metavar="OUT", help="write a standalone HTML report to OUT")
    p.set_defaults(func=sensitivity)
    return p


def sensitivity(args) -> int:
    """Run ``workbench sensitivity`` (see :func:`add_parser`)."""
    from workbench.analysis.sensitivity import MAX_SIMULATED_GRID
    from workbench.analysis.sensitivity import sensitivity as run_sensitivity
    from workbench.cli.commands import scenario_argument
    from workbench.cli.outputs import check_outputs, deliver
    from workbench.cli.progress import ProgressBar
    from workbench.scenario.constraints import check_setting

    scenario = scenario_argument(args)
    n = None if args.n is None else check_setting("n", args.n, where="--n", error=UsageError)
    if args.grid is not None and not 2 <= args.grid <= 101:
        raise UsageError(f"must be from 2 to 101 points per strength, got {args.grid}", where="--grid")
    if args.simulate and args.grid is not None and args.grid > MAX_SIMULATED_GRID:
        raise UsageError(
            f"at most {MAX_SIMULATED_GRID} points per strength with --simulate (one simulation each), "
            f"got {args.grid}",
            where="--grid",
        )
    replicates = args.replicates
    if replicates is not None:
        if not args.simulate:
            raise UsageError("applies only with --simulate", where="--replicates")
        replicates = check_setting("replicates", replicates, where="--replicates", error=UsageError)
    if args.strategy is not None:
        try:
            scenario.strategy(args.strategy)
        except KeyError as exc:
            raise UsageError(exc.args[0] if exc.args else str(exc), where="--strategy") from None
    check_outputs(args)
    bar = ProgressBar("simulating the grid") if args.simulate else None
    try:
        result = run_sensitivity(
            scenario,
            strategy=args.strategy,
            grid=args.grid,
            n=n,
            simulate=args.simulate,
            replicates=replicates,
            seed=args.seed,
            progress=bar,
        )
    finally:
        if bar is not None:
            bar.close()
    return deliver(result, args, scenario=scenario, sensitivity=result)
