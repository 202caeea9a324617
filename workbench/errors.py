"""The exceptions the workbench raises.

Every error a user can cause is a :class:`WorkbenchError`. Its message is one line that names the place
(a file, a TOML key such as ``arrows[3].to``, a command-line option) and the problem, so that the command
line can print it without a traceback.
"""

from __future__ import annotations

__all__ = ["WorkbenchError", "ScenarioError", "SimulationError", "Cancelled"]


class WorkbenchError(Exception):
    """Root of every error the workbench raises on purpose.

    Parameters
    ----------
    message : str
        One line naming the place and the problem.
    """


class ScenarioError(WorkbenchError, ValueError):
    """A scenario file or object is invalid.

    Parameters
    ----------
    message : str
        The problem, in one line.
    where : str, optional
        The place: a TOML key path such as ``arrows[3].to`` or ``line 4, column 7``.

    Examples
    --------
    >>> str(ScenarioError("unknown variable 'rainfal'", where="arrows[3].to"))
    "arrows[3].to: unknown variable 'rainfal'"
    """

    def __init__(self, message: str, where: str | None = None):
        self.where = where
        self.problem = message
        super().__init__(f"{where}: {message}" if where else message)


class SimulationError(WorkbenchError, ValueError):
    """A simulation or plan cannot run with the settings given (checked before any work)."""


class Cancelled(WorkbenchError):
    """A long run was cancelled by the user (Ctrl-C on the command line, Cancel in the dashboard)."""
