"""The ``workbench`` command: a thin layer over the library.

Commands: ``check``, ``presets``, ``run``, ``plan``, ``serve`` (:mod:`workbench.cli.commands`), parsed by
:mod:`workbench.cli.parser`; results are written by :mod:`workbench.cli.outputs`. A user mistake prints one
line on stderr and exits 2; Ctrl-C at any moment exits 130 with one line and writes nothing; standard
output closed by its reader (``| head -c1``) exits 141 with one line, after every file output is written.

This module imports nothing heavy: each command imports the part of the library it needs when it runs, so
``workbench --help`` starts in a fraction of a second.
"""

from __future__ import annotations

import sys

__all__ = ["main", "EXIT_OK", "EXIT_USER_ERROR", "EXIT_CANCELLED", "EXIT_BROKEN_PIPE"]

EXIT_OK = 0
EXIT_USER_ERROR = 2
EXIT_CANCELLED = 130
EXIT_BROKEN_PIPE = 141
"""Standard output was closed by its reader (``| head -c1``): 128 + SIGPIPE, as a shell reports a program
ended by that signal. Every file output was written before standard output, so none is missing."""


def _stdout_closed() -> int:
    """After a broken pipe: one line on stderr, and standard output pointed at the null device so that the
    interpreter's final flush does not complain again."""
    import os

    print("workbench: error: standard output: closed by the reading end of the pipe", file=sys.stderr)
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (AttributeError, OSError, ValueError):  # not a real file (a test's capture), or already closed
        pass
    return EXIT_BROKEN_PIPE


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    print(f"workbench: warning: {message}", file=sys.stderr)


def _run(argv: list[str] | None) -> int:
    import warnings

    from workbench.cli.parser import build_parser
    from workbench.errors import Cancelled, WorkbenchError

    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as done:  # --help, --version, or an option error already printed in one line
        return int(done.code or 0)
    if not args.command:
        parser.print_help()
        return EXIT_USER_ERROR
    warnings.showwarning = _show_warning
    from workbench.engine.threads import blas_threads

    try:
        with blas_threads():  # the whole command: batched small fits run fastest on one BLAS thread
            return args.func(args)
    except Cancelled as exc:
        print(f"workbench: cancelled: {exc}", file=sys.stderr)
        return EXIT_CANCELLED
    except WorkbenchError as exc:
        print(f"workbench: error: {exc}", file=sys.stderr)
        return EXIT_USER_ERROR
    except BrokenPipeError:
        return _stdout_closed()
    except OSError as exc:  # writing an output: disk full, permissions, a vanished folder
        where = f" '{exc.filename}'" if exc.filename else ""
        print(f"workbench: error: cannot write{where}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_USER_ERROR


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit code.

    Ctrl-C is caught around everything, the imports of the command included, so it ends with exit code 130
    and one line whenever it comes.

    Examples
    --------
    >>> main(["check", "--preset", "no_such_preset"])
    2
    """
    try:
        return _run(argv)
    except KeyboardInterrupt:
        print("\nworkbench: cancelled by the user; nothing was written", file=sys.stderr)
        return EXIT_CANCELLED


if __name__ == "__main__":
    sys.exit(main())
