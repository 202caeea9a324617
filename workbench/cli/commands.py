"""The commands of ``workbench``: each reads its scenario, checks its options, calls one library function
and hands the result to :mod:`workbench.cli.outputs`. Each imports the part of the library it needs when it
runs, never at start-up.

Options that set study values are checked against the same constraints as the scenario file's ``[study]``
table (:func:`workbench.scenario.constraints.check_setting`), with the option as the place:
``--replicates: must be an integer from 1 to 1,000,000, got 0``. A command run without ``--seed`` uses the
scenario's seed, so the same file gives the same numbers.

``run`` and ``plan`` then check the output paths (:func:`workbench.cli.outputs.check_outputs`) and estimate
their time and memory (:mod:`workbench.analysis.budget`); over the budget (10 minutes or 2 GiB) they stop
with the estimate in one line unless ``--allow-long`` is given. All of this happens before any work.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

from workbench.cli import EXIT_OK
from workbench.cli.outputs import STDOUT, check_outputs, deliver, write_json
from workbench.errors import UsageError

__all__ = ["check", "presets", "run", "plan", "serve"]

_STUDY_OPTIONS = {
    "n": "--n",
    "replicates": "--replicates",
    "seed": "--seed",
    "alpha": "--alpha",
    "target_power": "--target-power",
    "target_halfwidth": "--target-halfwidth",
}


def _scenario(args):
    """The scenario named on the command line: a file or a preset (the default preset when neither)."""
    from workbench.graph.defaults import load_preset, load_scenario
    from workbench.scenario.presets import DEFAULT_PRESET

    if args.file and args.preset:
        raise UsageError("give a scenario FILE or --preset NAME, not both", where="command line")
    if args.file:
        path = Path(args.file)
        if path.is_dir():
            raise UsageError("is a folder, not a scenario file", where=str(path))
        return load_scenario(path)
    return load_preset(args.preset or DEFAULT_PRESET)


scenario_argument = _scenario
"""The scenario named on the command line, for commands in other modules (``cli.sensitivity_command``)."""


def _study_options(args) -> dict:
    """The study options given, checked against the study constraints (absent ones are left out)."""
    from workbench.scenario.constraints import check_setting

    values = {}
    for name, option in _STUDY_OPTIONS.items():
        value = vars(args).get(name)
        if value is not None:
            values[name] = check_setting(name, value, where=option, error=UsageError)
    return values


def _sizes(text: str) -> list[int]:
    """``--sizes 100,200,400`` as checked integers."""
    from workbench.scenario.constraints import check_setting

    try:
        sizes = [int(part) for part in text.split(",")]
    except ValueError:
        raise UsageError(
            f"must be whole numbers separated by commas, got '{text}'", where="--sizes"
        ) from None
    return [check_setting("sample_size", size, where="--sizes", error=UsageError) for size in sizes]


def _within_budget(args, scenario, verb: str, **settings) -> None:
    """Estimate the run's time and memory before any work (:func:`workbench.analysis.budget.estimate_cost`)
    and stop over the budget unless ``--allow-long``; a long accepted run says its estimate on stderr."""
    import sys

    from workbench.analysis import budget

    if verb == "run":
        settings["engine"] = args.engine
    cost = budget.estimate_cost(scenario, verb=verb, **settings)
    if not args.allow_long:
        budget.check_budget(
            cost, max_seconds=budget.MAX_SECONDS, max_bytes=budget.MAX_BYTES, where="--allow-long"
        )
    if cost.seconds >= 60:
        print(f"workbench: {verb} estimated at {cost.text} ({cost.engine} engine)", file=sys.stderr)


def presets(args) -> int:
    """``workbench presets``: the built-in scenarios, one per line, with their titles."""
    from workbench.scenario.presets import DEFAULT_PRESET, list_presets

    names = list_presets()
    width = max(len(name) for name in names)
    for name, title in names.items():
        mark = "  (default)" if name == DEFAULT_PRESET else ""
        print(f"{name:<{width}}  {title}{mark}")
    return EXIT_OK


def check(args) -> int:
    """``workbench check``: the graph analysis and large-sample figures, as text or JSON."""
    from workbench.analysis.check import check as check_scenario

    scenario = _scenario(args)
    if args.json not in (None, STDOUT):  # --json OUT: checked before the work, written atomically
        check_outputs(args)
    report = check_scenario(scenario)
    if args.json in (None, STDOUT):
        print(json.dumps(report.to_dict(), indent=2) if args.json else report.as_text())
        return EXIT_OK
    return write_json(json.dumps(report.to_dict(), indent=2) + "\n", args)


def run(args) -> int:
    """``workbench run``: simulate repeated studies and score every strategy."""
    from workbench.analysis.simulate import simulate
    from workbench.cli.progress import ProgressBar

    scenario = _scenario(args)
    options = _study_options(args)
    check_outputs(args)
    _within_budget(args, scenario, "run", n=options.get("n"), replicates=options.get("replicates"))
    options.setdefault("seed", scenario.study.seed)
    bar = ProgressBar("simulating")
    try:
        result = simulate(scenario, engine=args.engine, progress=bar, **options)
    finally:
        bar.close()
    return deliver(result, args, scenario=scenario, result=result)


def plan(args) -> int:
    """``workbench plan``: power and precision against n; the smallest n per strategy."""
    from workbench.analysis.plan import plan as plan_study
    from workbench.cli.progress import ProgressBar

    scenario = _scenario(args)
    options = _study_options(args)
    sizes = _sizes(args.sizes) if args.sizes else None
    check_outputs(args)
    _within_budget(args, scenario, "plan", replicates=options.get("replicates"), sizes=sizes)
    options.setdefault("seed", scenario.study.seed)
    bar = ProgressBar("planning")
    try:
        result = plan_study(scenario, sample_sizes=sizes, progress=bar, **options)
    finally:
        bar.close()
    return deliver(result, args, scenario=scenario, plan=result)


def serve(args) -> int:
    """``workbench serve``: the dashboard on ``--address:--port`` (loopback by default)."""
    if not 1 <= args.port <= 65535:
        raise UsageError(f"must be a port number from 1 to 65535, got {args.port}", where="--port")
    if args.preset:
        from workbench.scenario.presets import preset_text

        preset_text(args.preset)  # a clear error for an unknown name before the server starts
    from workbench.app.serve import serve as serve_dashboard

    try:
        serve_dashboard(
            preset=args.preset,
            port=args.port,
            address=args.address,
            show=args.show,
            allow_host=getattr(args, "allow_host", ()),
        )
    except OSError as exc:
        raise UsageError(
            f"cannot serve on {args.address}:{args.port}: {exc.strerror or exc} (is the port in use?)",
            where="serve",
        ) from None
    except KeyboardInterrupt:  # Ctrl-C is how the dashboard is stopped: a line, and 130 as every Ctrl-C
        from workbench.app.serve import EXIT_STOPPED

        print("\nworkbench: dashboard stopped", file=sys.stderr)
        return EXIT_STOPPED
    return EXIT_OK
