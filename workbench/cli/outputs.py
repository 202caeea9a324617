"""Where the command line's results go: output paths checked before any work, then JSON, CSV, a standalone
HTML report and the readable table.

Every output path (``--json``, ``--csv``, ``--html``) is checked before the scenario is simulated
(:func:`check_outputs`), so a run never fails after its work with some files written and others not:

- ``-`` is standard output, for any of the three; at most one output may go there, and the readable table
  is then not printed;
- the folder must exist and be writable, the name must fit the file system (``NAME_MAX`` and ``PATH_MAX``);
- a path that exists must be a regular file the user may write: a folder, a device (``/dev/full``), a FIFO
  or a socket is refused;
- a symbolic link is written through: its target is replaced, the link stays (the checks above apply to the
  target; a dangling link's target is created);
- no output may be the scenario file read, and no two outputs the same file (compared after following links,
  and by device and inode for hard links).

Every file is written atomically (:func:`workbench.scenario.write.write_text_atomically`), after all the
outputs' text is ready, and the files come before standard output: an interrupted run or a closed pipe never
leaves a half-written file, and never skips a file. A closed standard output (``| head -c1``, ``| true``)
ends the command with :data:`~workbench.cli.EXIT_BROKEN_PIPE` (141, as a shell reports a program ended by
``SIGPIPE``) and one line on stderr. Messages name the option (``--csv: ...``), never a temporary file.
"""

from __future__ import annotations

import os
import stat
import sys

from workbench.errors import UsageError, shown

__all__ = ["check_outputs", "check_file_output", "deliver", "write_json", "STDOUT"]

STDOUT = "-"
"""The output name that means standard output."""

_OPTIONS = ("json", "csv", "html")


def _limit(folder: str, name: str, fallback: int) -> int:
    try:
        return os.pathconf(folder, name)
    except (OSError, ValueError):
        return fallback


def _resolved(target: str) -> str:
    """The file a write to ``target`` replaces: symbolic links followed (a dangling one to its target)."""
    return os.path.realpath(target)


def _check_one(option: str, target: str) -> str:
    """Check one output path; returns the file it will replace (links followed)."""
    where = f"--{option}"
    if not target.strip():
        raise UsageError("give a file name, or '-' for standard output", where=where)
    if "\0" in target:
        raise UsageError(f"the file name {shown(target, 60)} contains a NUL character", where=where)
    real = _resolved(target)
    folder = os.path.dirname(real) or "."
    name = os.path.basename(real)
    if os.path.isdir(real) or not name:
        raise UsageError(f"{shown(target, 80)} is a folder; give a file name", where=where)
    if not os.path.isdir(folder):
        given = os.path.dirname(target) or "."
        shown_folder = given if os.path.abspath(given) == folder else folder
        raise UsageError(
            f"cannot write {shown(target, 80)}: no such folder {shown(shown_folder, 60)}", where=where
        )
    if len(os.fsencode(name)) > _limit(folder, "PC_NAME_MAX", 255):
        raise UsageError(
            f"the file name is too long ({len(os.fsencode(name))} bytes; this file system allows "
            f"{_limit(folder, 'PC_NAME_MAX', 255)})",
            where=where,
        )
    if len(os.fsencode(real)) >= _limit(folder, "PC_PATH_MAX", 4096):
        raise UsageError(f"the path is too long ({len(os.fsencode(real))} bytes)", where=where)
    if not os.access(folder, os.W_OK | os.X_OK):
        raise UsageError(f"cannot write {shown(target, 80)}: the folder is not writable", where=where)
    try:
        info = os.stat(real)
    except FileNotFoundError:
        return real
    except OSError as exc:
        raise UsageError(f"cannot write {shown(target, 80)}: {exc.strerror}", where=where) from None
    if not stat.S_ISREG(info.st_mode):
        raise UsageError(
            f"{shown(target, 80)} exists and is not a regular file (a device, FIFO or socket); "
            "give a file name, or '-' for standard output",
            where=where,
        )
    if not os.access(real, os.W_OK):
        raise UsageError(f"cannot write {shown(target, 80)}: the file is read-only", where=where)
    return real


def check_file_output(option: str, target: str, source: str | None = None) -> str:
    """Check the file an option ``--<option>`` names (no standard output), as :func:`check_outputs` does;
    returns the file it will replace. ``source`` is the scenario file read, never overwritten.

    Examples
    --------
    >>> check_file_output("summary", "no/such/dir/s.html")
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --summary: cannot write 'no/such/dir/s.html': no such folder 'no/such/dir'
    """
    if target == STDOUT:
        raise UsageError("give a file name: this output cannot go to standard output", where=f"--{option}")
    real = _check_one(option, target)
    if source and _same_file(real, _resolved(source)):
        raise UsageError(
            f"{shown(target, 80)} is the scenario file read; give another name", where=f"--{option}"
        )
    return real


def _same_file(a: str, b: str) -> bool:
    if a == b:
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def check_outputs(args) -> None:
    """Refuse output paths that cannot or must not be written, before any work is done.

    Raises
    ------
    UsageError
        ``--json: cannot write 'x/y.json': no such folder 'x'`` and the like (see the module notes).

    Examples
    --------
    >>> import argparse
    >>> check_outputs(argparse.Namespace(json="-", csv=None, html=None))
    >>> check_outputs(argparse.Namespace(json=None, csv="no/such/dir/t.csv", html=None))
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --csv: cannot write 'no/such/dir/t.csv': no such folder 'no/such/dir'
    >>> check_outputs(argparse.Namespace(json="-", csv="-", html=None))
    Traceback (most recent call last):
    ...
    workbench.errors.UsageError: --csv: standard output ('-') is already taken by --json
    """
    given = [(option, vars(args).get(option)) for option in _OPTIONS if vars(args).get(option) is not None]
    source = vars(args).get("file")
    seen: list[tuple[str, str]] = []
    to_stdout = None
    for option, target in given:
        if target == STDOUT:
            if to_stdout:
                raise UsageError(
                    f"standard output ('-') is already taken by --{to_stdout}", where=f"--{option}"
                )
            if sys.stdout is None:
                raise UsageError("standard output is closed", where=f"--{option}")
            to_stdout = option
            continue
        real = _check_one(option, target)
        if source and _same_file(real, _resolved(source)):
            raise UsageError(
                f"{shown(target, 80)} is the scenario file read; give another name", where=f"--{option}"
            )
        for other, other_real in seen:
            if _same_file(real, other_real):
                raise UsageError(f"{shown(target, 80)} is the same file as --{other}", where=f"--{option}")
        seen.append((option, real))


def _texts(output, args, report_parts) -> dict[str, str]:
    """Every asked output's full text, built before anything is written."""
    texts = {}
    if args.html:
        from workbench.report.html import build_report

        texts["html"] = build_report(**report_parts)
    if args.json:
        texts["json"] = output.to_json() + "\n"
    if args.csv:
        texts["csv"] = output.to_csv(None)
    return texts


def write_json(text: str, args) -> int:
    """Write ``text`` to the file ``--json`` names (checked by :func:`check_outputs`), atomically, and say so
    on stderr; what ``check --json OUT`` does. Returns exit code 0.

    Raises
    ------
    UsageError
        The file could not be written (``--json: cannot write 'out.json': No space left on device``).
    """
    from workbench.scenario.write import write_text_atomically

    try:
        write_text_atomically(args.json, text)
    except OSError as exc:
        raise UsageError(
            f"cannot write {shown(args.json, 80)}: {exc.strerror or exc}", where="--json"
        ) from None
    print(f"wrote {args.json}", file=sys.stderr)
    return 0


def deliver(output, args, **report_parts) -> int:
    """Write a result (``SimulationResult`` or ``PlanResult``) as JSON, CSV and a standalone HTML report
    where asked, and print its readable table unless an output goes to stdout. Returns exit code 0.

    Raises
    ------
    UsageError
        A file could not be written (``--csv: cannot write 'out.csv': No space left on device``); the files
        written before it stay, each complete.
    BrokenPipeError
        Standard output was closed by its reader (after every file was written).
    """
    from workbench.scenario.write import write_text_atomically

    texts = _texts(output, args, report_parts)
    stdout_text = None
    for option, text in texts.items():
        target = vars(args)[option]
        if target == STDOUT:
            stdout_text = text
            continue
        try:
            write_text_atomically(target, text)
        except OSError as exc:
            raise UsageError(
                f"cannot write {shown(target, 80)}: {exc.strerror or exc}", where=f"--{option}"
            ) from None
        print(f"wrote {target}", file=sys.stderr)
    if stdout_text is None:
        stdout_text = output.as_text() + "\n"
    sys.stdout.write(stdout_text)
    sys.stdout.flush()
    return 0
