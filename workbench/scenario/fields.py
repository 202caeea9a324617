"""Reading one field of a scenario table: its key, its TOML type, a choice, a variable name, a number's range.

The helpers the parser (:mod:`workbench.scenario.parse`) calls for every field. Each raises
:class:`~workbench.errors.ScenarioError` with the field's place (``variables.rainfall.noise_sd``) and quotes
the user's value with :func:`~workbench.errors.shown`, so a message is one short line whatever the file holds.

Examples
--------
>>> get_field({"effect": 0.4}, "effect", "number", "arrows[1]")
0.4
>>> get_field({"effect": "big"}, "effect", "number", "arrows[1]")
Traceback (most recent call last):
...
workbench.errors.ScenarioError: arrows[1].effect: must be a number, got a string 'big'
>>> check_keys({"": 1}, ("n",), "study")
Traceback (most recent call last):
...
workbench.errors.ScenarioError: study: unknown key ''
"""

from __future__ import annotations

import math
import re
from typing import Any

from workbench.errors import ScenarioError, shown, suggestion
from workbench.scenario.limits import MAX_LABEL, check_text

__all__ = ["check_keys", "type_name", "get_field", "choice", "known_name", "place_of"]

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]{1,40}")

_WANTED = {
    "str": "a string",
    "bool": "true or false",
    "int": "an integer",
    "number": "a number",
    "list": "an array",
    "table": "a table",
}


def place_of(where: str, key: object) -> str:
    """The place of ``key`` in the table at ``where``: ``study.n``; the table itself for a key that is not a
    short bare TOML key (empty, quoted, or holding other characters), which the message quotes instead.

    Examples
    --------
    >>> place_of("study", "n"), place_of("", "title"), place_of("study", "a b"), place_of("", "")
    ('study.n', 'title', 'study', 'top level')
    """
    if isinstance(key, str) and _BARE_KEY.fullmatch(key):
        return f"{where}.{key}" if where else key
    return where or "top level"


def check_keys(table: dict, allowed, where: str) -> None:
    """Refuse a key of ``table`` that is not in ``allowed``, suggesting the closest one."""
    for key in table:
        if key not in allowed:
            raise ScenarioError(
                f"unknown key {shown(key)}{suggestion(key, allowed)}", where=place_of(where, key)
            )


def type_name(value: Any) -> str:
    """The TOML name of a value's type: ``a string``, ``an array``, ...

    Examples
    --------
    >>> type_name(3), type_name([1])
    ('an integer', 'an array')
    """
    return {
        bool: "a boolean",
        int: "an integer",
        float: "a number",
        str: "a string",
        list: "an array",
        dict: "a table",
    }.get(type(value), type(value).__name__)


def _is_kind(value: Any, kind: str) -> bool:
    return {
        "str": isinstance(value, str),
        "bool": isinstance(value, bool),
        "int": isinstance(value, int) and not isinstance(value, bool),
        "number": isinstance(value, int | float) and not isinstance(value, bool),
        "list": isinstance(value, list),
        "table": isinstance(value, dict),
    }[kind]


def get_field(
    table: dict,
    key: str,
    kind: str,
    where: str,
    default: Any = None,
    required: bool = False,
    *,
    limit: int = MAX_LABEL,
    newlines: bool = False,
) -> Any:
    """The value of ``table[key]`` checked to be of ``kind`` (``str``, ``bool``, ``int``, ``number``,
    ``list``, ``table``), or ``default``.

    A number comes back as a finite ``float``; a string is at most ``limit`` characters and holds no control
    character (a newline only with ``newlines=True``).

    Raises
    ------
    ScenarioError
        ``<where>.<key>: missing (required)``, ``must be <kind>, got ...``, ``must be a finite number ...``.
    """
    place = f"{where}.{key}" if where else key
    if key not in table:
        if required:
            raise ScenarioError("missing (required)", where=place)
        return default
    value = table[key]
    if not _is_kind(value, kind):
        raise ScenarioError(f"must be {_WANTED[kind]}, got {type_name(value)} {shown(value)}", where=place)
    if kind == "number":
        try:
            number = float(value)
        except OverflowError:  # an integer beyond the largest double
            number = math.inf
        if not math.isfinite(number):
            raise ScenarioError(f"must be a finite number, got {shown(value)}", where=place)
        return number
    if kind == "str":
        check_text(value, place, limit, newlines=newlines)
    return value


def choice(value: str, choices, place: str) -> str:
    """Refuse a value that is not one of ``choices``.

    Examples
    --------
    >>> choice("olss", ("ols", "logit"), "strategies[1].model")
    Traceback (most recent call last):
    ...
    workbench.errors.ScenarioError: strategies[1].model: must be one of 'ols', 'logit', got 'olss' (did you mean 'ols'?)
    """
    if value not in choices:
        options = ", ".join(f"'{c}'" for c in choices)
        raise ScenarioError(
            f"must be one of {options}, got {shown(value)}{suggestion(value, choices)}", where=place
        )
    return value


def known_name(name: Any, names, place: str) -> str:
    """Refuse anything but the name of a variable in ``names``, suggesting the closest one."""
    if not isinstance(name, str):
        raise ScenarioError(
            f"must be a variable name (a string), got {type_name(name)} {shown(name)}", where=place
        )
    if name not in names:
        raise ScenarioError(f"unknown variable {shown(name)}{suggestion(name, names)}", where=place)
    return name
