"""Writing scenarios: TOML-ready tables, TOML text, and files written atomically (temporary file and rename).

Examples
--------
>>> from workbench import load_preset
>>> from workbench import load_scenario, loads_scenario
>>> sc = load_preset("common_cause")
>>> loads_scenario(dumps_scenario(sc)) == sc
True
"""

from __future__ import annotations

import errno
import os
import re
import stat
import tempfile
from pathlib import Path
from typing import Any

import tomli_w

from workbench.scenario.model import Scenario

__all__ = ["scenario_to_dict", "dumps_scenario", "dumps_tables", "write_text_atomically", "save_scenario"]


# --------------------------------------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------------------------------------
def scenario_to_dict(scenario: Scenario, *, include_default_strategies: bool = True) -> dict:
    """The scenario as TOML-ready nested dicts (keys as in the file). Default values are written out too,
    so the file says everything it assumes.

    Examples
    --------
    >>> from workbench import load_preset
    >>> scenario_to_dict(load_preset("common_cause"))["arrows"][0]
    {'from': 'soil_quality', 'to': 'fertiliser', 'effect': 0.6}
    """
    q = scenario.question
    out: dict[str, Any] = {"title": scenario.title}
    if scenario.summary is not None:
        out["summary"] = scenario.summary
    question: dict[str, Any] = {
        "exposure": q.exposure,
        "outcome": q.outcome,
        "target": q.target,
        "scale": q.scale,
    }
    if q.also:
        question["also"] = list(q.also)
    out["question"] = question
    variables: dict[str, Any] = {}
    standardized_targets = {a.target for a in scenario.arrows if a.standardized is not None}
    for v in scenario.variables:
        table: dict[str, Any] = {} if v.label is None else {"label": v.label}
        table["type"] = v.type
        if v.is_binary:
            table["proportion"] = v.proportion
        elif v.is_count:
            table["rate"] = v.rate
        elif v.r_squared is not None:
            table["r_squared"] = v.r_squared
            table["baseline"] = v.baseline
        else:
            if v.name not in standardized_targets:  # standardized arrows set noise_sd (scenario/elicit.py)
                table["noise_sd"] = v.noise_sd
            table["baseline"] = v.baseline
        if v.noise != "normal":
            table["noise"] = v.noise
        if v.noise_df is not None:
            table["noise_df"] = v.noise_df
        if v.spread_with:
            table["spread_with"] = dict(v.spread_with)
        table["observed"] = v.observed
        if v.position is not None:
            table["position"] = list(v.position)
        variables[v.name] = table
    out["variables"] = variables
    out["arrows"] = [
        {"from": a.source, "to": a.target}
        | ({"effect": a.effect} if a.standardized is None else {"standardized_effect": a.standardized})
        | ({"varies_with": dict(a.varies_with)} if a.varies_with else {})
        | ({"form": a.form} if a.form != "linear" else {})
        | ({"at": a.at} if a.at is not None else {})
        for a in scenario.arrows
    ]
    if include_default_strategies or scenario.strategies_given:
        strategies = []
        for s in scenario.strategies:
            table = {"name": s.name, "adjust": list(s.adjust), "model": s.model}
            if s.standardize:
                table["standardize"] = True
            if s.selection is not None:
                table["selection"] = s.selection
            if s.restrict:
                table["restrict"] = {
                    name: list(value) if isinstance(value, tuple) else value for name, value in s.restrict
                }
            if s.match:
                table["match"] = list(s.match)
            if s.se is not None:
                table["se"] = s.se
            if s.interactions:
                table["interactions"] = list(s.interactions)
            if s.flexible:
                table["flexible"] = list(s.flexible)
            strategies.append(table)
        out["strategies"] = strategies
    st = scenario.study
    study: dict[str, Any] = {
        "n": st.n,
        "replicates": st.replicates,
        "seed": st.seed,
        "alpha": st.alpha,
        "sample_sizes": list(st.sample_sizes),
        "target_power": st.target_power,
    }
    if st.target_halfwidth is not None:
        study["target_halfwidth"] = st.target_halfwidth
    out["study"] = study
    return out


def dumps_scenario(scenario: Scenario, *, include_default_strategies: bool = True) -> str:
    """The scenario as TOML text that :func:`load_scenario` reads back to an equal scenario.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench import load_scenario, loads_scenario
    >>> sc = load_preset("common_cause")
    >>> loads_scenario(dumps_scenario(sc)) == sc
    True
    """
    return dumps_tables(scenario_to_dict(scenario, include_default_strategies=include_default_strategies))


#: The longest line of a long string in the written file, its key and closing backslash included (as in the
#: presets).
TEXT_WIDTH = 113


def _string(text: str) -> str:
    """A TOML basic string (tomli_w escapes exactly what the format asks)."""
    return tomli_w.dumps({"k": text})[4:-1]


def _long_string(text: str, key: str) -> str:
    """A long string as a multi-line basic string whose lines end in a backslash (the line break and the
    next line's leading spaces are then not part of the value), so an edit shows as a change of a line."""
    import textwrap

    lead = len(key) + 6  # key = """
    if lead + len(text) <= TEXT_WIDTH or any(c in text for c in '\\"\n\t') or "  " in text:
        return _string(text)
    words = textwrap.wrap(
        text, width=TEXT_WIDTH - 2, initial_indent=" " * lead, break_long_words=False, break_on_hyphens=False
    )
    words[0] = words[0][lead:]
    if " ".join(words) != text:
        return _string(text)
    return '"""' + " \\\n".join(words) + '"""'


def _value(value: Any) -> str:
    """One TOML value on one line: arrays and tables inline."""
    if isinstance(value, dict):
        inner = ", ".join(f"{_key(k)} = {_value(v)}" for k, v in value.items())
        return "{ " + inner + " }" if inner else "{}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    if isinstance(value, str):
        return _string(value)
    return tomli_w.dumps({"k": value})[4:-1]


def _key(key: str) -> str:
    """A bare key when it may be one, else a quoted key."""
    return key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else _string(key)


def _pairs(table: dict) -> list[str]:
    return [
        f"{_key(k)} = {_long_string(v, _key(k)) if isinstance(v, str) else _value(v)}"
        for k, v in table.items()
        if not isinstance(v, dict) or k in ("restrict", "varies_with", "spread_with")
    ]


def dumps_tables(data: dict) -> str:
    """Scenario tables (:func:`scenario_to_dict`) as TOML text laid out as the presets and the docs are:
    top-level keys, ``[question]``, one ``[variables.name]`` table per variable, one ``[[arrows]]`` and one
    ``[[strategies]]`` table per entry, ``[study]``; arrays and restrictions inline, long text wrapped.

    One value sits on one line, so a line diff of two saved files shows exactly what changed.

    Examples
    --------
    >>> print(dumps_tables({"title": "t", "arrows": [{"from": "a", "to": "b", "effect": 0.5}],
    ...                     "study": {"sample_sizes": [50, 100]}}))
    title = "t"
    <BLANKLINE>
    [[arrows]]
    from = "a"
    to = "b"
    effect = 0.5
    <BLANKLINE>
    [study]
    sample_sizes = [50, 100]
    <BLANKLINE>
    """
    blocks = [_pairs({k: v for k, v in data.items() if not isinstance(v, (dict, list))})]
    for key, value in data.items():
        if key == "variables":
            blocks += [[f"[variables.{_key(name)}]", *_pairs(table)] for name, table in value.items()]
        elif isinstance(value, dict):
            blocks.append([f"[{_key(key)}]", *_pairs(value)])
        elif isinstance(value, list):
            blocks += [[f"[[{_key(key)}]]", *_pairs(table)] for table in value]
    return "\n\n".join("\n".join(block) for block in blocks if block) + "\n"


def write_text_atomically(path: str | os.PathLike, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder and a rename, so a crash never
    leaves a half-written file in place of the user's.

    A symbolic link is written through: the file it points to is replaced and the link stays. A path that
    exists and is not a regular file (a folder, a device, a FIFO, a socket) is never replaced: ``OSError``.
    The temporary file (a short name beginning with a dot, beside the target) is flushed to disk before the
    rename and removed on any failure; an existing file keeps its permissions.

    Raises
    ------
    OSError
        The folder is missing or not writable, the disk is full, or the path is not a regular file
        (``strerror`` says which; ``filename`` is the path given, never the temporary file).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> write_text_atomically(folder / "a.txt", "one")
    >>> (folder / "link.txt").symlink_to(folder / "a.txt")
    >>> write_text_atomically(folder / "link.txt", "two")
    >>> (folder / "a.txt").read_text(), (folder / "link.txt").is_symlink()
    ('two', True)
    >>> write_text_atomically(folder, "three")
    Traceback (most recent call last):
    ...
    IsADirectoryError: [Errno 21] is a folder, not replaced: ...
    """
    given = os.fspath(path)
    target = Path(os.path.realpath(given))
    try:
        info = target.stat()
    except FileNotFoundError:
        info = None
    if info is not None and not stat.S_ISREG(info.st_mode):
        if stat.S_ISDIR(info.st_mode):
            raise IsADirectoryError(errno.EISDIR, "is a folder, not replaced", given)
        raise OSError(errno.EINVAL, "is not a regular file (a device, FIFO or socket), not replaced", given)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name[:32]}.", suffix=".tmp", dir=target.parent)
    except OSError as exc:
        raise type(exc)(exc.errno, exc.strerror, given) from None
    try:
        if info is not None:  # keep an existing file's permissions
            mode = info.st_mode & 0o777
        else:  # a new file gets the usual ones (0666 less the umask)
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        os.chmod(tmp, mode)
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, target)
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise type(exc)(exc.errno, exc.strerror, given) from None
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def save_scenario(scenario: Scenario, path: str | os.PathLike) -> None:
    """Write the scenario as TOML, atomically (temporary file and rename).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from workbench import load_scenario, loads_scenario
    >>> sc = loads_scenario('title = "t"\\n[question]\\nexposure = "a"\\noutcome = "b"\\n'
    ...                    '[variables.a]\\n[variables.b]\\n[[arrows]]\\nfrom = "a"\\nto = "b"\\neffect = 1.0\\n')
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "copy.toml"
    >>> save_scenario(sc, target)
    >>> load_scenario(target) == sc
    True
    """
    write_text_atomically(path, dumps_scenario(scenario))
