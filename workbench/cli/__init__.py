"""The command line: ``workbench COMMAND ...``, a thin layer over the library (see :mod:`workbench.cli.commands`)."""

from workbench.cli.commands import build_parser, main

__all__ = ["main", "build_parser"]
