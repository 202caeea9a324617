"""The ``workbench`` command: a thin layer over the library.

Commands: ``check``, ``presets``, ``run``, ``plan``, ``serve``. A user mistake prints one line on stderr and
exits 2; Ctrl-C ends a run with a message and exit code 130.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import warnings
from pathlib import Path

from workbench import __version__
from workbench.errors import Cancelled, ScenarioError, WorkbenchError

__all__ = ["main", "build_parser"]

EXIT_OK = 0
EXIT_USER_ERROR = 2
EXIT_CANCELLED = 130


def _scenario(args):
    from workbench.graph.defaults import load_preset, load_scenario
    from workbench.scenario.presets import DEFAULT_PRESET

    if args.file and args.preset:
        raise ScenarioError("give a scenario FILE or --preset NAME, not both", where="command line")
    if args.file:
        path = Path(args.file)
        if path.is_dir():
            raise ScenarioError("is a folder, not a scenario file", where=str(path))
        return load_scenario(path)
    return load_preset(args.preset or DEFAULT_PRESET)


def _check_outputs(args) -> None:
    """Refuse output paths that cannot be written, before any work is done."""
    for option in ("json", "csv", "html"):
        target = getattr(args, option, None)
        if not target or (option == "json" and target == "-"):
            continue
        path = Path(target)
        folder = path.parent if str(path.parent) else Path(".")
        if path.is_dir():
            raise ScenarioError(f"'{target}' is a folder; give a file name", where=f"--{option}")
        if not folder.is_dir():
            raise ScenarioError(f"cannot write '{target}': no such folder '{folder}'", where=f"--{option}")
        if not os.access(folder, os.W_OK):
            raise ScenarioError(f"cannot write '{target}': the folder is not writable", where=f"--{option}")


def _emit_json(text: str, target: str) -> None:
    if target == "-":
        sys.stdout.write(text + "\n")
        return
    from workbench.scenario.write import write_text_atomically

    write_text_atomically(target, text + "\n")
    print(f"wrote {target}", file=sys.stderr)


def _deliver(output, args, **report_parts) -> int:
    """Write a result as JSON, CSV and a standalone HTML report where asked, and the readable table unless
    JSON goes to stdout."""
    if args.html:
        from workbench.report.html import write_report

        write_report(args.html, **report_parts)
        print(f"wrote {args.html}", file=sys.stderr)
    if args.json:
        _emit_json(output.to_json(), args.json)
    if args.csv:
        output.to_csv(args.csv)
        print(f"wrote {args.csv}", file=sys.stderr)
    if args.json != "-":
        print(output.to_text())
    return EXIT_OK


def _cmd_presets(args) -> int:
    from workbench.scenario.presets import DEFAULT_PRESET, list_presets

    presets = list_presets()
    width = max(len(name) for name in presets)
    for name, title in presets.items():
        mark = "  (default)" if name == DEFAULT_PRESET else ""
        print(f"{name:<{width}}  {title}{mark}")
    return EXIT_OK


def _cmd_check(args) -> int:
    from workbench.analysis.check import check

    report = check(_scenario(args))
    if args.json:
        print(json.dumps(report.to_dict(), indent=2))
    else:
        print(report.to_text())
    return EXIT_OK


def _cmd_run(args) -> int:
    from workbench.analysis.simulate import simulate
    from workbench.cli.progress import ProgressBar

    scenario = _scenario(args)
    _check_outputs(args)
    bar = ProgressBar("simulating")
    try:
        result = simulate(
            scenario,
            n=args.n,
            replicates=args.replicates,
            seed=args.seed,
            alpha=args.alpha,
            engine=args.engine,
            progress=bar,
        )
    finally:
        bar.close()
    return _deliver(result, args, scenario=scenario, result=result)


def _sizes(text: str) -> list[int]:
    try:
        sizes = [int(part) for part in text.split(",")]
    except ValueError:
        raise ScenarioError(
            f"must be whole numbers separated by commas, got '{text}'", where="--sizes"
        ) from None
    if not sizes or min(sizes) < 1:
        raise ScenarioError(f"must be positive whole numbers, got '{text}'", where="--sizes")
    return sizes


def _cmd_plan(args) -> int:
    from workbench.analysis.plan import plan
    from workbench.cli.progress import ProgressBar

    scenario = _scenario(args)
    sizes = _sizes(args.sizes) if args.sizes else None
    _check_outputs(args)
    bar = ProgressBar("planning")
    try:
        result = plan(
            scenario,
            sample_sizes=sizes,
            replicates=args.replicates,
            target_power=args.target_power,
            target_halfwidth=args.target_halfwidth,
            seed=args.seed,
            progress=bar,
        )
    finally:
        bar.close()
    return _deliver(result, args, scenario=scenario, plan=result)


def _cmd_serve(args) -> int:
    if not 1 <= args.port <= 65535:
        raise ScenarioError(f"must be a port number from 1 to 65535, got {args.port}", where="--port")
    try:
        from workbench.app.serve import serve
    except ImportError:
        print(
            "workbench serve: the dashboard is not yet available in this version; "
            "use 'workbench check', 'workbench run' and 'workbench plan'.",
            file=sys.stderr,
        )
        return EXIT_USER_ERROR
    if args.preset:
        from workbench.scenario.presets import preset_text

        preset_text(args.preset)  # a clear error for an unknown name before the server starts
    try:
        serve(preset=args.preset, port=args.port, address=args.address, show=args.show)
    except OSError as exc:
        raise ScenarioError(
            f"cannot serve on {args.address}:{args.port}: {exc.strerror or exc} (is the port in use?)",
            where="serve",
        ) from None
    return EXIT_OK


def _add_source(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", nargs="?", help="scenario TOML file")
    parser.add_argument("--preset", metavar="NAME", help="a built-in preset (see 'workbench presets')")


def _probability(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a number, got '{text}'") from None


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line: ``workbench: error: <problem>`` and exit code 2."""

    def error(self, message: str):
        self.exit(EXIT_USER_ERROR, f"workbench: error: {message} (see '{self.prog} --help')\n")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``workbench`` command.

    Examples
    --------
    >>> build_parser().parse_args(["run", "--preset", "common_cause", "--n", "80"]).n
    80
    """
    parser = _Parser(
        prog="workbench",
        description="Simulate studies from an assumed causal graph and compare adjustment strategies.",
    )
    parser.add_argument("--version", action="version", version=f"workbench {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("check", help="analyse a scenario's graph: roles, paths, verdicts, valid sets, truth")
    _add_source(p)
    p.add_argument("--json", action="store_true", help="print JSON instead of the readable report")
    p.set_defaults(func=_cmd_check)

    p = sub.add_parser("presets", help="list the built-in presets")
    p.set_defaults(func=_cmd_presets)

    p = sub.add_parser("run", help="simulate repeated studies and score every strategy")
    _add_source(p)
    p.add_argument("--n", type=int, help="units per simulated study")
    p.add_argument("--replicates", type=int, help="number of simulated studies")
    p.add_argument("--seed", type=int, help="random seed")
    p.add_argument("--alpha", type=_probability, help="1 - confidence level, and the test level")
    p.add_argument("--engine", default="auto", help="auto (default), exact or raw")
    p.add_argument("--json", metavar="OUT", help="write JSON to OUT ('-' for stdout)")
    p.add_argument("--csv", metavar="OUT", help="write the per-strategy table as CSV")
    p.add_argument("--html", metavar="OUT", help="write a standalone HTML report (opens with no server)")
    p.set_defaults(func=_cmd_run)

    p = sub.add_parser("plan", help="power and precision against sample size; the smallest n per strategy")
    _add_source(p)
    p.add_argument("--sizes", help="comma-separated sample sizes, e.g. 100,200,400")
    p.add_argument("--target-power", type=_probability, help="power to reach (default from the scenario)")
    p.add_argument("--target-halfwidth", type=_probability, help="largest acceptable mean CI half-width")
    p.add_argument("--replicates", type=int, help="simulated studies per sample size")
    p.add_argument("--seed", type=int, help="random seed")
    p.add_argument("--json", metavar="OUT", help="write JSON to OUT ('-' for stdout)")
    p.add_argument("--csv", metavar="OUT", help="write the long table as CSV")
    p.add_argument("--html", metavar="OUT", help="write a standalone HTML report (opens with no server)")
    p.set_defaults(func=_cmd_plan)

    p = sub.add_parser("serve", help="start the dashboard in the browser")
    p.add_argument("--preset", metavar="NAME", help="preset to open (default: the default preset)")
    p.add_argument("--port", type=int, default=5006)
    p.add_argument("--address", default="127.0.0.1", help="address to bind (default: loopback only)")
    p.add_argument("--show", action=argparse.BooleanOptionalAction, default=True, help="open a browser tab")
    p.set_defaults(func=_cmd_serve)
    return parser


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    print(f"workbench: warning: {message}", file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit code.

    Examples
    --------
    >>> main(["check", "--preset", "no_such_preset"])
    2
    """
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return EXIT_USER_ERROR
    warnings.showwarning = _show_warning
    try:
        return args.func(args)
    except WorkbenchError as exc:
        if isinstance(exc, Cancelled):
            print(f"workbench: cancelled: {exc}", file=sys.stderr)
            return EXIT_CANCELLED
        print(f"workbench: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR
    except KeyboardInterrupt:
        print("\nworkbench: cancelled by the user; nothing was written", file=sys.stderr)
        return EXIT_CANCELLED
    except BrokenPipeError:
        return EXIT_OK
    except OSError as exc:  # writing an output: disk full, permissions, a vanished folder
        where = f" '{exc.filename}'" if exc.filename else ""
        print(f"workbench: error: cannot write{where}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_USER_ERROR


if __name__ == "__main__":
    sys.exit(main())
