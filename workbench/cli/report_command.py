"""``workbench report``: the one-page stakeholder summary and the full HTML report of a scenario, from one
simulation and one sample-size plan with the scenario's own settings."""

from __future__ import annotations

import argparse
import sys

__all__ = ["add_parser", "report"]


def add_parser(sub, add_source) -> argparse.ArgumentParser:
    """Register ``workbench report`` on the subparsers ``sub`` (``add_source`` adds FILE and --preset)."""
    p = sub.add_parser(
        "report",
        help="write the one-page stakeholder summary and/or the full HTML report",
        description=(
            "Simulate the scenario and plan its sample size with its own settings, then write a one-page "
            "summary for stakeholders (--summary: the question, the graph, one headline per strategy, the "
            "sample size needed and the assumptions; prints on one A4 page) and/or the full report (--html)."
        ),
    )
    add_source(p)
    p.add_argument("--summary", metavar="OUT", help="write the one-page summary (HTML) to OUT")
    p.add_argument("--html", metavar="OUT", help="write the full standalone HTML report to OUT")
    p.add_argument("--no-plan", action="store_true", help="skip the sample-size plan (faster)")
    p.add_argument("--allow-long", action="store_true", help="run even over the time or memory budget")
    p.set_defaults(func=report)
    return p


def report(args) -> int:
    """``workbench report``: check the outputs, simulate, plan, write the pages."""
    from workbench.analysis.plan import plan as plan_study
    from workbench.analysis.simulate import simulate
    from workbench.cli.commands import scenario_argument
    from workbench.cli.outputs import check_file_output
    from workbench.cli.progress import ProgressBar
    from workbench.errors import UsageError
    from workbench.report.html import build_report
    from workbench.report.summary import build_summary
    from workbench.scenario.write import write_text_atomically

    if not args.summary and not args.html:
        raise UsageError("give --summary OUT, --html OUT or both", where="report")
    scenario = scenario_argument(args)
    targets = {}
    for option in ("summary", "html"):
        if vars(args)[option]:
            real = check_file_output(option, vars(args)[option], args.file)
            if real in targets.values():
                raise UsageError("--summary and --html name the same file", where=f"--{option}")
            targets[option] = real
    bar = ProgressBar("simulating")
    try:
        result = simulate(scenario, seed=scenario.study.seed, progress=bar)
    finally:
        bar.close()
    planned = None
    if not args.no_plan:
        bar = ProgressBar("planning")
        try:
            planned = plan_study(scenario, seed=scenario.study.seed, progress=bar)
        finally:
            bar.close()
    texts = {
        "summary": lambda: build_summary(scenario, result, plan=planned),
        "html": lambda: build_report(scenario, result=result, plan=planned),
    }
    for option in targets:
        try:
            write_text_atomically(vars(args)[option], texts[option]())
        except OSError as exc:
            raise UsageError(
                f"cannot write {vars(args)[option]!r}: {exc.strerror or exc}", where=f"--{option}"
            ) from None
        print(f"wrote {vars(args)[option]}", file=sys.stderr)
    return 0
