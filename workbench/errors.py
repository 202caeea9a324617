"""The exceptions the workbench raises.

Every error a user can cause is a :class:`WorkbenchError`. Its message is one line that names the place
(a file, a TOML key such as ``arrows[3].to``, a command-line option) and the problem, so that the command
line can print it without a traceback. The kinds:

- :class:`ScenarioError`: the scenario file or object (a key, a value, the graph);
- :class:`UsageError`: how the tools are called (command-line options and arguments, ports, output paths);
- :class:`DataError`: a data frame given to :func:`workbench.estimate`;
- :class:`SimulationError`: settings a simulation or plan cannot run with (checked before any work);
- :class:`UnknownNameError`: a lookup by name that found nothing (``Scenario.variable('fertilizer')``);
- :class:`Cancelled`: the user stopped a long run.

Programmer mistakes (a wrong type passed to an internal function) stay ``TypeError`` / ``ValueError``.
"""

from __future__ import annotations

import difflib

__all__ = [
    "WorkbenchError",
    "ScenarioError",
    "UsageError",
    "DataError",
    "SimulationError",
    "UnknownNameError",
    "Cancelled",
    "suggestion",
]


def suggestion(word: object, choices) -> str:
    """`` (did you mean 'x'?)`` for the closest of ``choices``, or ``''`` when none is close.

    Examples
    --------
    >>> suggestion("rainfal", ["rainfall", "yield"])
    " (did you mean 'rainfall'?)"
    >>> suggestion("zzz", ["rainfall"])
    ''
    """
    close = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


class WorkbenchError(Exception):
    """Root of every error the workbench raises on purpose.

    Parameters
    ----------
    message : str
        One line naming the place and the problem.
    where : str, optional
        The place, put in front of the message: a TOML key path such as ``arrows[3].to``, an option such as
        ``--replicates``, ``line 4, column 7``.

    Examples
    --------
    >>> str(WorkbenchError("must be positive", where="--n"))
    '--n: must be positive'
    """

    def __init__(self, message: str, where: str | None = None):
        self.where = where
        self.problem = message
        super().__init__(f"{where}: {message}" if where else message)


class ScenarioError(WorkbenchError, ValueError):
    """A scenario file or object is invalid.

    Examples
    --------
    >>> str(ScenarioError("unknown variable 'rainfal'", where="arrows[3].to"))
    "arrows[3].to: unknown variable 'rainfal'"
    """


class UsageError(WorkbenchError, ValueError):
    """A command-line option or argument, a port or an output path is wrong.

    Examples
    --------
    >>> str(UsageError("must be a port number from 1 to 65535, got 0", where="--port"))
    '--port: must be a port number from 1 to 65535, got 0'
    """


class DataError(WorkbenchError, ValueError):
    """A data frame given to :func:`workbench.estimate` does not fit the scenario (a missing column, missing
    values, a non-binary binary column).

    Examples
    --------
    >>> str(DataError("missing column 'rainfall'", where="data"))
    "data: missing column 'rainfall'"
    """


class SimulationError(WorkbenchError, ValueError):
    """A simulation or plan cannot run with the settings given (checked before any work)."""


class UnknownNameError(WorkbenchError, KeyError):
    """A lookup by name found nothing; the message suggests the closest name.

    Examples
    --------
    >>> err = UnknownNameError("variable", "fertilizer", ["fertiliser", "yield"])
    >>> str(err)
    "unknown variable 'fertilizer' (did you mean 'fertiliser'?)"
    >>> isinstance(err, KeyError)
    True
    """

    def __init__(self, kind: str, name: object, choices=()):
        self.kind = kind
        self.name = name
        super().__init__(f"unknown {kind} '{name}'{suggestion(name, choices)}")

    def __str__(self) -> str:  # KeyError would quote the message
        return self.problem


class Cancelled(WorkbenchError):
    """A long run was cancelled by the user (Ctrl-C on the command line, Cancel in the dashboard)."""
