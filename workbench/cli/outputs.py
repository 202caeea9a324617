"""Where the command line's results go: output paths checked before any work, then JSON, CSV, a standalone
HTML report and the readable table.

Every file is written atomically (:func:`workbench.scenario.write.write_text_atomically`), so an interrupted
run never leaves a half-written file in place of an earlier one.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

from workbench.errors import UsageError

__all__ = ["check_outputs", "deliver"]

_OPTIONS = ("json", "csv", "html")


def check_outputs(args) -> None:
    """Refuse output paths that cannot be written, before any work is done.

    Raises
    ------
    UsageError
        ``--json: cannot write 'x/y.json': no such folder 'x'`` and the like.

    Examples
    --------
    >>> import argparse
    >>> check_outputs(argparse.Namespace(json="-", csv=None, html=None))
    >>> check_outputs(argparse.Namespace(json=None, csv="no/such/dir/t.csv", html=None))
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --csv: cannot write 'no/such/dir/t.csv': no such folder 'no/such/dir'
    """
    for option in _OPTIONS:
        target = vars(args).get(option)
        if not target or (option == "json" and target == "-"):
            continue
        path = Path(target)
        folder = path.parent if str(path.parent) else Path(".")
        if path.is_dir():
            raise UsageError(f"'{target}' is a folder; give a file name", where=f"--{option}")
        if not folder.is_dir():
            raise UsageError(f"cannot write '{target}': no such folder '{folder}'", where=f"--{option}")
        if not os.access(folder, os.W_OK):
            raise UsageError(f"cannot write '{target}': the folder is not writable", where=f"--{option}")


def _emit_json(text: str, target: str) -> None:
    if target == "-":
        sys.stdout.write(text + "\n")
        return
    from workbench.scenario.write import write_text_atomically

    write_text_atomically(target, text + "\n")
    print(f"wrote {target}", file=sys.stderr)


def deliver(output, args, **report_parts) -> int:
    """Write a result (``CheckReport``, ``SimulationResult`` or ``PlanResult``) as JSON, CSV and a standalone
    HTML report where asked, and print its readable table unless JSON goes to stdout. Returns exit code 0."""
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
        print(output.as_text())
    return 0
