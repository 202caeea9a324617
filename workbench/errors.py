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

Whatever a message quotes, it stays one printable line: :class:`WorkbenchError` escapes control characters
(a newline shows as ``\\n``), shortens the place to :data:`MAX_PLACE` and the whole message to
:data:`MAX_MESSAGE` characters (an ellipsis marks the cut), and :func:`shown` quotes a user's value
repr-style, cut to a length.
"""

from __future__ import annotations

import difflib
import reprlib

__all__ = [
    "WorkbenchError",
    "ScenarioError",
    "UsageError",
    "DataError",
    "SimulationError",
    "UnknownNameError",
    "Cancelled",
    "suggestion",
    "shown",
    "one_line",
    "MAX_MESSAGE",
    "MAX_PLACE",
]

MAX_MESSAGE = 200
"""Characters in one error message, place included."""
MAX_PLACE = 100
"""Characters of the place in front of a message (a long file name is cut in the middle)."""
ELLIPSIS = "\u2026"

_REPR = reprlib.Repr()
_REPR.maxlevel = 2
_REPR.maxlist = _REPR.maxtuple = _REPR.maxdict = _REPR.maxset = 4
_REPR.maxstring = _REPR.maxother = _REPR.maxlong = 60


def _clip(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + ELLIPSIS


def one_line(text: object) -> str:
    """``text`` with every character that is not printable (newline, tab, NUL, other control and format
    characters) written as its Python escape, so that it prints as one line.

    Examples
    --------
    >>> one_line("a\\nb\\tc")
    'a\\\\nb\\\\tc'
    >>> print(one_line("line one\\nline two"))
    line one\\nline two
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)


def shown(value: object, limit: int = 40) -> str:
    """A user's value quoted for a message: repr-style (quotes, escapes), cut to ``limit`` characters.

    Examples
    --------
    >>> shown("rainfall")
    "'rainfall'"
    >>> shown("a\\n")
    "'a\\\\n'"
    >>> shown("x" * 100, limit=10)
    "'xxxxxxx\u2026'"
    >>> shown(1e300)
    '1e+300'
    >>> shown([[[[1]]]])
    '[[[...]]]'
    >>> shown(10**400)
    'an integer of about 401 digits'
    """
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 128:
        return f"an integer of about {int(value.bit_length() * 0.30103) + 1:,} digits"
    text = repr(value) if isinstance(value, str | int | float | bool) else _REPR.repr(value)
    text = one_line(text)
    if len(text) <= limit:
        return text
    if isinstance(value, str):
        return text[: limit - 2] + ELLIPSIS + text[0]
    return _clip(text, limit)


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

    The message is one printable line of at most :data:`MAX_MESSAGE` characters:

    >>> print(WorkbenchError("unknown key 'a\\nb'", where="study"))
    study: unknown key 'a\\nb'
    >>> len(str(WorkbenchError("x" * 500, where="title")))
    200
    """

    def __init__(self, message: str, where: str | None = None):
        if where:
            where = one_line(where)
            if len(where) > MAX_PLACE:
                half = (MAX_PLACE - 1) // 2
                where = where[:half] + ELLIPSIS + where[-(MAX_PLACE - 1 - half) :]
        self.where = where
        self.problem = _clip(one_line(message), MAX_MESSAGE)
        super().__init__(_clip(f"{where}: {self.problem}" if where else self.problem, MAX_MESSAGE))


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
        super().__init__(f"unknown {kind} {shown(name)}{suggestion(name, choices)}")

    def __str__(self) -> str:  # KeyError would quote the message
        return self.problem


class Cancelled(WorkbenchError):
    """A long run was cancelled by the user (Ctrl-C on the command line, Cancel in the dashboard)."""
