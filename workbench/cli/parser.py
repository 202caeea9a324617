"""The argument parser of the ``workbench`` command.

Options name their values only; their ranges are checked after parsing against the study constraints
(:mod:`workbench.scenario.constraints`), the same table the scenario file and the dashboard use, so that
``--replicates 0`` and ``replicates = 0`` in a file get the same rule and the same message.
"""

from __future__ import annotations

import argparse
import decimal

from workbench.cli import EXIT_USER_ERROR
from workbench.errors import shown

__all__ = ["build_parser"]


_LONGEST_NUMBER = 40
"""Characters of a number option's text; a longer one is refused before it is converted."""


def _too_long(text: str, what: str) -> None:
    if len(text) > _LONGEST_NUMBER:
        raise argparse.ArgumentTypeError(f"must be {what}, got a text of {len(text):,} characters")


def _number(text: str) -> float:
    """A real number: ``0.05``, ``5e-2``; the range is checked later (``inf`` and ``nan`` then fail).

    Examples
    --------
    >>> _number("5e-2")
    0.05
    """
    _too_long(text, "a number")
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a number, got {shown(text)}") from None


def _whole(text: str) -> int:
    """A whole number, written as digits (``100000``, ``100_000``) or in exponent form when whole (``1e5``);
    the range is checked later against the study constraints, so ``1e23`` reaches them as an integer.

    Examples
    --------
    >>> _whole("2000"), _whole("1e5"), _whole("1e23") == 10**23
    (2000, 100000, True)
    >>> _whole("2.5")
    Traceback (most recent call last):
    ...
    argparse.ArgumentTypeError: must be a whole number, got '2.5'
    """
    _too_long(text, "a whole number")
    try:
        return int(text)
    except ValueError:
        pass
    try:
        value = decimal.Decimal(text.strip())
    except decimal.InvalidOperation:
        value = None
    if value is not None and value.is_finite():
        if value.adjusted() >= 1000:
            raise argparse.ArgumentTypeError(f"must be a whole number below 1e1000, got {shown(text)}")
        if value == value.to_integral_value():
            return int(value)
    raise argparse.ArgumentTypeError(f"must be a whole number, got {shown(text)}")


def _version() -> str:
    from importlib.metadata import version

    return f"workbench {version('workbench')}"


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line: ``workbench: error: <problem>`` and exit code 2."""

    def error(self, message: str):
        self.exit(EXIT_USER_ERROR, f"workbench: error: {message} (see '{self.prog} --help')\n")


class _Version(argparse.Action):
    """``--version``, reading the installed package's metadata only when asked."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        print(_version())
        parser.exit(0)


def _add_source(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", nargs="?", help="scenario TOML file")
    parser.add_argument("--preset", metavar="NAME", help="a built-in preset (see 'workbench presets')")


_OUTPUT_NOTE = (
    "Outputs (--json, --csv, --html): '-' is standard output (one output at most); files are checked "
    "before any work and written atomically once every output is ready; a symbolic link is written through "
    "to its target; a folder, device, FIFO or socket, the scenario file itself and two outputs to one file "
    "are refused. Runs estimated over 10 minutes or 2 GiB stop first unless --allow-long is given."
)


def _add_outputs(parser: argparse.ArgumentParser, table: str) -> None:
    parser.add_argument("--json", metavar="OUT", help="write JSON to OUT ('-' for stdout)")
    parser.add_argument("--csv", metavar="OUT", help=f"write {table} as CSV to OUT ('-' for stdout)")
    parser.add_argument(
        "--html", metavar="OUT", help="write a standalone HTML report to OUT (opens with no server)"
    )
    parser.add_argument(
        "--allow-long",
        action="store_true",
        help="run even when the estimated time or memory is over the budget (10 minutes, 2 GiB)",
    )


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``workbench`` command.

    Examples
    --------
    >>> build_parser().parse_args(["run", "--preset", "common_cause", "--n", "80"]).n
    80
    """
    from workbench.cli import commands

    parser = _Parser(
        prog="workbench",
        description="Simulate studies from an assumed causal graph and compare adjustment strategies.",
    )
    parser.add_argument("--version", action=_Version, help="show the version and exit")
    parser.set_defaults(command=None)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("check", help="analyse a scenario's graph: roles, paths, verdicts, valid sets, truth")
    _add_source(p)
    p.add_argument(
        "--json",
        nargs="?",
        const="-",
        metavar="OUT",
        help="write JSON to OUT instead of the readable report ('-' or nothing for stdout)",
    )
    p.set_defaults(func=commands.check)

    p = sub.add_parser("presets", help="list the built-in presets")
    p.set_defaults(func=commands.presets)

    p = sub.add_parser("run", help="simulate repeated studies and score every strategy", epilog=_OUTPUT_NOTE)
    _add_source(p)
    p.add_argument("--n", type=_whole, help="units per simulated study")
    p.add_argument("--replicates", type=_whole, help="number of simulated studies (at most 1,000,000)")
    p.add_argument("--seed", type=_whole, help="random seed (default: the scenario's)")
    p.add_argument("--alpha", type=_number, help="1 - confidence level, and the test level")
    p.add_argument("--engine", default="auto", help="auto (default), exact or raw")
    _add_outputs(p, "the per-strategy table")
    p.set_defaults(func=commands.run)

    p = sub.add_parser(
        "plan",
        help="power and precision against sample size; the smallest n per strategy",
        epilog=_OUTPUT_NOTE,
    )
    _add_source(p)
    p.add_argument("--sizes", help="comma-separated sample sizes, e.g. 100,200,400")
    p.add_argument("--target-power", type=_number, help="power to reach (default from the scenario)")
    p.add_argument("--target-halfwidth", type=_number, help="largest acceptable mean CI half-width")
    p.add_argument("--replicates", type=_whole, help="simulated studies per sample size")
    p.add_argument("--seed", type=_whole, help="random seed (default: the scenario's)")
    _add_outputs(p, "the long table")
    p.set_defaults(func=commands.plan)

    from workbench.cli import sensitivity_command

    sensitivity_command.add_parser(sub, _add_source, _whole)

    from workbench.cli import report_command

    report_command.add_parser(sub, _add_source)

    from workbench.cli import sweep_command

    sweep_command.add_parser(sub, _add_source, _whole)

    p = sub.add_parser("serve", help="start the dashboard in the browser")
    p.add_argument("--preset", metavar="NAME", help="preset to open (default: the default preset)")
    p.add_argument("--port", type=_whole, default=5006)
    p.add_argument("--address", default="127.0.0.1", help="address to bind (default: loopback only)")
    p.add_argument(
        "--allow-host",
        action="append",
        default=[],
        metavar="NAME[:PORT]",
        help="another name the page may be reached by (repeatable); requests naming other hosts are refused",
    )
    p.add_argument("--show", action=argparse.BooleanOptionalAction, default=True, help="open a browser tab")
    p.set_defaults(func=commands.serve)
    return parser
