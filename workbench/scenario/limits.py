"""The limits on scenario input, declared once: file size, nesting, strings, numbers and counts.

A scenario comes from a person or from a file someone sent; every limit here keeps reading and simulating it
finite and its messages short. The limits are stated for users in ``docs/scenario-format.md`` (section
"Limits"); the counts of variables, arrows and replicates and the study settings' bounds live beside the
settings in :mod:`workbench.scenario.constraints`.

Why these numbers:

- a scenario file is a few kilobytes of text; 1 MiB leaves room for a long commented file and is read with a
  bound, so a device or a pipe given as a file is refused and never read to its end;
- a scenario nests four levels deep at most (``strategies`` > a strategy > ``restrict`` > an interval); eight
  levels allow every file the format describes, and the check runs without recursion;
- every effect, baseline and noise SD is at most :data:`MAX_MAGNITUDE` = 10^6 in size, and the scale each
  variable can reach (:func:`check_scales`) stays below 10^50, so every implied variance stays below 10^100,
  and sums of squares over 10^8 units and their products in a regression stay far below the largest double
  (about 1.8e308);
- a proportion of a binary variable lies in [10^-6, 1 - 10^-6]: rarer events leave most simulated studies
  with no event at all, and the intercept that gives the proportion is found on a bounded interval.

Examples
--------
>>> check_text("Drip irrigation", "title", MAX_TITLE)
'Drip irrigation'
>>> check_text("two\\nlines", "title", MAX_TITLE)
Traceback (most recent call last):
...
workbench.errors.ScenarioError: title: must not contain control characters (a newline, a tab, ...), got 'two\\nlines'
>>> nesting_too_deep({"a": [[[[[[[[[[1]]]]]]]]]]})
'a[1][1][1][1][1][1][1][1]'
"""

from __future__ import annotations

import codecs
import math
import os
import stat
from collections.abc import Iterable

from workbench.errors import ScenarioError, shown

__all__ = [
    "MAX_FILE_BYTES",
    "MAX_DEPTH",
    "MAX_NAME",
    "MAX_STRATEGY_NAME",
    "MAX_TITLE",
    "MAX_LABEL",
    "MAX_SUMMARY",
    "MAX_MAGNITUDE",
    "MIN_NOISE_SD",
    "MIN_PROPORTION",
    "MIN_RATE",
    "MAX_RATE",
    "MAX_COUNT_MEAN",
    "MAX_VARIANCE",
    "MAX_STRATEGIES",
    "MAX_SAMPLE_SIZES",
    "MAX_STUDY_SIZE",
    "MAX_SEED",
    "check_text",
    "check_magnitude",
    "nesting_too_deep",
    "check_nesting",
    "check_text_size",
    "read_scenario_text",
    "check_scales",
]

MAX_FILE_BYTES = 1 << 20
"""Bytes in one scenario file or uploaded text (1 MiB)."""
MAX_DEPTH = 8
"""Arrays and tables nested in one another below the document."""
MAX_NAME = 32
"""Characters in a variable name."""
MAX_STRATEGY_NAME = 60
"""Characters in a strategy name (the default strategies' names, ``adjust_`` and the set, go up to 60)."""
MAX_TITLE = 200
"""Characters in the title."""
MAX_LABEL = 200
"""Characters in a variable's label."""
MAX_SUMMARY = 4000
"""Characters in the summary."""
MAX_MAGNITUDE = 1e6
"""Largest size of an effect, a baseline, a noise SD or a drawing position."""
MIN_NOISE_SD = 1e-6
"""Smallest noise SD other than 0 (0 makes a variable a deterministic function of its causes)."""
MIN_PROPORTION = 1e-6
"""A binary variable's proportion lies in [MIN_PROPORTION, 1 - MIN_PROPORTION]."""
MIN_RATE = 1e-3
"""A count's rate (its population mean) lies in [MIN_RATE, MAX_RATE]: rarer counts leave most simulated
studies without a single event."""
MAX_RATE = 1e5
"""The largest rate of a count (beyond it a count is better treated as continuous)."""
MAX_COUNT_MEAN = 1e7
"""The largest mean a count may reach given its causes: a draw beyond it fails (its replicate's fits are
counted as failed), and the calibration refuses a graph that reaches it."""
MAX_VARIANCE = 1e100
"""Bound on every implied variance (checked through the scale bound of :func:`check_scales`)."""
MAX_STRATEGIES = 50
"""Strategies in one scenario."""
MAX_SAMPLE_SIZES = 50
"""Entries of ``study.sample_sizes``."""
MAX_STUDY_SIZE = 100_000_000
"""Units in one simulated study (``n`` and each planned size)."""
MAX_SEED = 2**64 - 1
"""Largest seed."""

_NEWLINE_OK = frozenset("\n")


def check_text(value: str, place: str, limit: int, *, newlines: bool = False) -> str:
    """Refuse a string longer than ``limit`` characters or holding a control character.

    Parameters
    ----------
    value : str
    place : str
        The place named in the message.
    limit : int
        Most characters.
    newlines : bool, default False
        Whether a newline is allowed (the summary may run over several lines).

    Returns
    -------
    str
        ``value`` itself.

    Examples
    --------
    >>> check_text("a" * 33, "variables", MAX_NAME)
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: variables: at most 32 characters, got 33
    >>> check_text("one\\ntwo", "summary", MAX_SUMMARY, newlines=True)
    'one\\ntwo'
    """
    if len(value) > limit:
        raise ScenarioError(f"at most {limit:,} characters, got {len(value):,}", where=place)
    if not value.isprintable():
        allowed = _NEWLINE_OK if newlines else frozenset()
        if any(not (c.isprintable() or c in allowed) for c in value):
            raise ScenarioError(
                f"must not contain control characters (a newline, a tab, ...), got {shown(value)}",
                where=place,
            )
    return value


def check_magnitude(value: float, place: str, bound: float = MAX_MAGNITUDE, what: str = "") -> float:
    """Refuse a number larger than ``bound`` in size.

    Examples
    --------
    >>> check_magnitude(-3.5, "arrows[1].effect")
    -3.5
    >>> check_magnitude(1e300, "arrows[1].effect")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: arrows[1].effect: must lie in [-1e+06, 1e+06], got 1e+300
    """
    if not -bound <= value <= bound:
        reason = f" ({what})" if what else ""
        raise ScenarioError(f"must lie in [{-bound:g}, {bound:g}]{reason}, got {shown(value)}", where=place)
    return value


def _child_place(place: str, key: object) -> str:
    if isinstance(key, int):
        return f"{place}[{key + 1}]"
    key = str(key)
    return f"{place}.{key}" if place else key


def nesting_too_deep(data: object, limit: int = MAX_DEPTH) -> str | None:
    """The place of the first array or table nested deeper than ``limit`` levels, or None.

    Walks the document with an explicit stack (no recursion), and stops descending at the limit, so a
    document of any depth (or one that contains itself) is checked in bounded time per value.

    Examples
    --------
    >>> nesting_too_deep({"strategies": [{"restrict": {"soil": [0.0, 1.0]}}]}) is None
    True
    """
    stack: list[tuple[object, str, int]] = [(data, "", 0)]
    while stack:
        value, place, depth = stack.pop()
        if isinstance(value, dict):
            children: Iterable = value.items()
        elif isinstance(value, list | tuple):
            children = enumerate(value)
        else:
            continue
        if depth > limit:
            return place or "(top level)"
        for key, child in children:
            if isinstance(child, dict | list | tuple):
                stack.append((child, _child_place(place, key), depth + 1))
    return None


def check_nesting(data: object, source: str | None = None) -> None:
    """Refuse a document nested deeper than :data:`MAX_DEPTH` levels, naming the place."""
    place = nesting_too_deep(data)
    if place is not None:
        where = f"{source}: {place}" if source else place
        raise ScenarioError(f"arrays or tables nested deeper than {MAX_DEPTH} levels", where=where)


def check_text_size(text: str, source: str | None = None) -> None:
    """Refuse a scenario text over :data:`MAX_FILE_BYTES` bytes as UTF-8."""
    if len(text) > MAX_FILE_BYTES or (
        4 * len(text) > MAX_FILE_BYTES and len(text.encode("utf-8", "surrogatepass")) > MAX_FILE_BYTES
    ):
        raise ScenarioError(_too_large(), where=source or "scenario")


def _too_large() -> str:
    return f"is larger than 1 MiB ({MAX_FILE_BYTES:,} bytes); a scenario is a small TOML text file"


def _refuse_kind(mode: int, source: str) -> None:
    if stat.S_ISDIR(mode):
        raise ScenarioError("is a folder, not a scenario file", where=source)
    if not stat.S_ISREG(mode):
        raise ScenarioError(
            "is not a regular file (a device, a pipe or a socket); a scenario is a TOML text file",
            where=source,
        )


def _read_bounded(fd: int, limit: int) -> bytes:
    parts: list[bytes] = []
    size = 0
    while size <= limit:
        chunk = os.read(fd, limit + 1 - size)
        if not chunk:
            break
        parts.append(chunk)
        size += len(chunk)
    return b"".join(parts)


def read_scenario_text(path: str | os.PathLike) -> str:
    """The text of a scenario file, read with a bound: a regular file of at most :data:`MAX_FILE_BYTES`.

    A device, a pipe, a socket or a folder is refused from its ``stat`` before it is opened, and again from
    the open file (opened non-blocking, so a pipe with no writer cannot hang the read); at most
    ``MAX_FILE_BYTES + 1`` bytes are ever read. A UTF-8 byte order mark is dropped.

    Raises
    ------
    ScenarioError
        ``<path>: no such file``, ``<path>: is not a regular file ...``, ``<path>: is larger than 1 MiB ...``,
        ``<path>: is not UTF-8 text ...``, ``<path>: cannot read: ...``.

    Examples
    --------
    >>> read_scenario_text("/dev/zero")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: /dev/zero: is not a regular file (a device, a pipe or a socket); a scenario is a TOML text file
    """
    source = os.fspath(path)
    source = source if isinstance(source, str) else os.fsdecode(source)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        mode = os.stat(path).st_mode
        _refuse_kind(mode, source)
        fd = os.open(path, flags)
    except ScenarioError:
        raise
    except FileNotFoundError:
        raise ScenarioError("no such file", where=source) from None
    except NotADirectoryError:
        raise ScenarioError("no such file (a folder on the path is a file)", where=source) from None
    except (OSError, ValueError) as exc:
        raise ScenarioError(f"cannot read: {getattr(exc, 'strerror', None) or exc}", where=source) from None
    try:
        info = os.fstat(fd)
        _refuse_kind(info.st_mode, source)
        if info.st_size > MAX_FILE_BYTES:
            raise ScenarioError(_too_large(), where=source)
        data = _read_bounded(fd, MAX_FILE_BYTES)
    except OSError as exc:
        raise ScenarioError(f"cannot read: {exc.strerror or exc}", where=source) from None
    finally:
        os.close(fd)
    if len(data) > MAX_FILE_BYTES:
        raise ScenarioError(_too_large(), where=source)
    if data.startswith(codecs.BOM_UTF8):
        data = data[len(codecs.BOM_UTF8) :]
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise ScenarioError("is not UTF-8 text; a scenario is a TOML text file", where=source) from None


def check_scales(variables, arrows) -> None:
    """Refuse a graph whose variables can reach a scale of 10^50 or more (a variance of 10^100).

    A bound on each variable's root mean square, in the order of the graph: a continuous variable's is at
    most its ``|baseline|`` plus its ``noise_sd`` plus the sum over its arrows of ``|effect|`` times the
    cause's bound (Minkowski's inequality: the RMS of a sum is at most the sum of the RMS); a binary
    variable's is at most 1, and the log odds its arrows add are bounded the same way; a count's log mean
    is bounded the same way (``|log rate|`` plus its arrows) and its values by twice
    :data:`MAX_COUNT_MEAN`, beyond which its draws fail. The bound is an upper bound, so a graph it accepts
    has every implied variance below :data:`MAX_VARIANCE`.

    Parameters
    ----------
    variables : sequence of Variable
    arrows : sequence of Arrow
        Already checked to form no cycle.

    Raises
    ------
    ScenarioError
        ``variables.<name>: its causes can give it values near 1e+60 ...``.
    """
    limit = MAX_VARIANCE**0.5
    by_name = {v.name: v for v in variables}
    causes: dict[str, list] = {name: [] for name in by_name}
    for a in arrows:
        causes[a.target].append(a)
    bound: dict[str, float] = {}
    pending = list(by_name)
    while pending:  # Kahn-style: every variable once all its causes are bounded (acyclic, so this ends)
        waiting = []
        for name in pending:
            if any(a.source not in bound for a in causes[name]):
                waiting.append(name)
                continue
            v = by_name[name]
            pushed = sum(abs(a.effect) * bound[a.source] for a in causes[name])
            own = abs(v.baseline) + v.noise_sd if v.is_continuous else 0.0
            if v.is_count:
                own = abs(math.log(v.rate))
            if pushed + own >= limit:
                kind = {"binary": "log odds", "count": "log means"}.get(v.type, "values")
                raise ScenarioError(
                    f"its causes can give it {kind} near {pushed + own:.0e}; the effects along its paths "
                    f"must keep every variance below {MAX_VARIANCE:g}",
                    where=f"variables.{name}",
                )
            bound[name] = {"binary": 1.0, "count": 2.0 * MAX_COUNT_MEAN}.get(v.type, pushed + own)
        if len(waiting) == len(pending):
            return  # a cycle: the parser reports it
        pending = waiting
