"""Property-based fuzzing of the command line: hostile scenario files never end in a traceback.

Mutated presets (keys and values replaced, deleted or inserted with hostile values: huge, tiny, NaN and
infinite numbers, huge integers, long strings, control characters, markup, wrong types, deep nesting) and
random small graphs, written as TOML (sometimes with random bytes spliced in), go through the command line
in-process: ``main(["check", path])`` and, for a share of them, ``main(["run", path, "--replicates", "20",
"--json", "-"])``. The properties (the README's promise on errors; the contract in docs/scenario-format.md,
"Limits"):

- the exit code is 0 or 2, and no exception escapes ``main``;
- nothing prints a traceback, and nothing reaches the process's stdout below Python (LAPACK's text);
- on exit 2, stderr has exactly one error line, ``workbench: error: <place>: <problem>``, of at most 200
  characters of message, printable (no raw control character);
- on exit 0 with ``--json -``, stdout is valid JSON.

The number of examples is ``WORKBENCH_FUZZ_EXAMPLES`` (default 2,000, what CI runs); hypothesis keeps no
example database (``database=None``), so nothing is written into the repository. Property-based testing as
in Claessen & Hughes (2000), "QuickCheck", ICFP; the mutation of valid seeds is common fuzzing practice.
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import math
import os
import sys
import tempfile
import tomllib

import pytest
from hypothesis import HealthCheck, given, note, settings
from hypothesis import strategies as st

from workbench.cli import main
from workbench.errors import MAX_MESSAGE
from workbench.scenario.presets import list_presets, preset_text

EXAMPLES = int(os.environ.get("WORKBENCH_FUZZ_EXAMPLES", 2000))
PREFIX = "workbench: error: "
PRESETS = {name: tomllib.loads(preset_text(name)) for name in list_presets()}

# --- writing any document as TOML (every table inline, so any shape can be written) ---------------------


def _toml_string(text: str) -> str:
    out = []
    for c in text:
        if c in '"\\':
            out.append("\\" + c)
        elif ord(c) < 0x20 or ord(c) == 0x7F:
            out.append(f"\\u{ord(c):04x}")
        else:
            out.append(c)
    return '"' + "".join(out) + '"'


def _toml_value(value) -> str:
    """TOML 1.0 (toml.io): inline tables and arrays, basic strings with escapes, nan and inf floats."""
    if isinstance(value, Nested):
        return "[" * value.depth + "]" * value.depth
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_toml_string(k)} = {_toml_value(v)}" for k, v in value.items()) + "}"
    raise TypeError(type(value))


def to_toml(doc: dict) -> str:
    return "".join(f"{_toml_string(key)} = {_toml_value(value)}\n" for key, value in doc.items())


def test_the_writer_round_trips():
    """The test's own writer against tomllib (the standard library's TOML 1.0 reader)."""
    for doc in PRESETS.values():
        assert tomllib.loads(to_toml(doc)) == doc
    odd = {"a\n": ["\x00\x7f", {"": -0.5}], "b": [[[]]]}
    assert tomllib.loads(to_toml(odd)) == odd


# --- hostile values ------------------------------------------------------------------------------------

KNOWN_WORDS = [
    "continuous",
    "binary",
    "ols",
    "logit",
    "p_value",
    "change_in_estimate",
    "total",
    "direct",
    "difference",
    "log_odds_ratio",
    "count",
    "poisson",
    "log_risk_ratio",
    "log_rate_ratio",
]
KEYS = [
    "title", "summary", "question", "variables", "arrows", "strategies", "study", "exposure", "outcome",
    "target", "scale", "also", "type", "noise_sd", "baseline", "proportion", "rate", "observed", "label", "position",
    "from", "to", "effect", "name", "adjust", "model", "standardize", "selection", "restrict", "match", "n",
    "replicates", "seed", "alpha", "sample_sizes", "target_power", "target_halfwidth",
]  # fmt: skip
HOSTILE_TEXT = [
    "",
    " ",
    "a\n",
    "\n",
    "\t",
    "\x00",
    "x\r\n",
    "<script>alert(1)</script>",
    "</b>",
    "\u202e",
    "é",
]

numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(
        [0.0, -0.0, 5e-324, 1e-300, 1e-7, 1e-6, 0.5, 0.999999, 0.9999999, 1.0, 1e6, 1e6 + 1, 1.35e154, 1e300]
        + [1.7e308, -1e308, 2.5, -1.0]
    ),
    st.integers(-3, 3),
    st.integers(),
    st.sampled_from([2**63, 2**64, 10**23, 10**8, 10**8 + 1, 1_000_001, 10**400, -(2**63)]),
)
texts = st.one_of(
    st.text(max_size=12),
    st.sampled_from(KNOWN_WORDS + KEYS + HOSTILE_TEXT),
    st.integers(30, 6000).map(lambda k: "x" * k),
    st.lists(st.sampled_from(HOSTILE_TEXT + ["a", "b"]), max_size=6).map("".join),
)
scalars = st.one_of(numbers, texts, st.booleans())


class Nested:
    """Arrays nested ``depth`` deep, written as brackets (so the test's own writer never recurses)."""

    def __init__(self, depth: int):
        self.depth = depth

    def __repr__(self) -> str:
        return f"Nested({self.depth})"


hostile = st.one_of(
    scalars,
    st.lists(scalars, max_size=4),
    st.dictionaries(st.one_of(st.sampled_from(KEYS), texts), scalars, max_size=3),
    st.integers(2, 700).map(Nested),
)


# --- documents: random small graphs and mutated presets ------------------------------------------------


@st.composite
def small_graphs(draw) -> dict:
    k = draw(st.integers(2, 6))
    names = [f"v{i}" for i in range(k)]
    variables = {}
    for name in names:
        table: dict = {}
        if draw(st.booleans()):
            table = {"type": "binary", "proportion": draw(st.floats(0.05, 0.95))}
        elif draw(st.integers(0, 3)) == 0:
            table = {"type": "count", "rate": draw(st.floats(0.05, 20.0))}
        elif draw(st.booleans()):
            table["noise_sd"] = draw(st.floats(0.1, 3.0))
        variables[name] = table
    arrows = [
        {"from": names[i], "to": names[j], "effect": draw(st.floats(-2.0, 2.0))}
        for i in range(k)
        for j in range(i + 1, k)
        if draw(st.booleans())
    ]
    exposure, outcome = draw(st.lists(st.sampled_from(names), min_size=2, max_size=2, unique=True))
    doc = {
        "title": "Random workshop graph",
        "question": {"exposure": exposure, "outcome": outcome},
        "variables": variables,
        "arrows": arrows,
        "study": {"n": draw(st.integers(20, 400)), "replicates": 50},
    }
    if draw(st.booleans()):
        others = [n for n in names if n not in (exposure, outcome)]
        doc["strategies"] = [
            {
                "name": f"s{i}",
                "adjust": draw(st.lists(st.sampled_from(others), unique=True)) if others else [],
            }
            for i in range(draw(st.integers(1, 3)))
        ]
    return doc


def _slots(doc) -> list[tuple[object, object]]:
    """Every (container, key or index) of the document, found without recursion."""
    out: list[tuple[object, object]] = []
    stack = [doc]
    while stack:
        node = stack.pop()
        items = node.items() if isinstance(node, dict) else enumerate(node)
        for key, child in list(items):
            out.append((node, key))
            if isinstance(child, dict | list):
                stack.append(child)
    return out


def _mutate(draw, doc: dict) -> None:
    slots = _slots(doc)
    if not slots:
        doc[draw(st.sampled_from(KEYS))] = draw(hostile)
        return
    container, key = slots[draw(st.integers(0, len(slots) - 1))]
    op = draw(st.sampled_from(["replace", "replace", "delete", "insert"]))
    if op == "replace":
        container[key] = draw(hostile)
    elif op == "delete":
        del container[key]
    elif isinstance(container, dict):
        container[draw(st.one_of(st.sampled_from(KEYS), texts))] = draw(hostile)
    else:
        container.insert(key, draw(hostile))


@st.composite
def scenario_files(draw) -> bytes:
    if draw(st.integers(0, 3)) == 0:
        doc = draw(small_graphs())
    else:
        doc = copy.deepcopy(PRESETS[draw(st.sampled_from(sorted(PRESETS)))])
    for _ in range(draw(st.integers(0 if "strategies" not in doc else 1, 4))):
        _mutate(draw, doc)
    data = to_toml(doc).encode("utf-8")
    if draw(st.integers(0, 19)) == 0:  # random bytes spliced in
        at = draw(st.integers(0, len(data)))
        data = data[:at] + draw(st.binary(min_size=1, max_size=40)) + data[at:]
    return data


# --- running the command line and checking what it printed ---------------------------------------------


def _clear_caches() -> None:
    """Empty every ``functools`` cache of the package, so no figure computed here is reused elsewhere."""
    for name, module in list(sys.modules.items()):
        if name.startswith("workbench"):
            for value in list(vars(module).values()):
                if callable(getattr(value, "cache_clear", None)):
                    value.cache_clear()


@pytest.fixture(scope="module")
def fewer_draws():
    """Smaller Monte Carlo sizes for the true effect and the large-sample figures of ``check``: the
    properties here are about errors, not accuracy, and a binary scenario's truth otherwise takes seconds.
    The caches are emptied before and after, so the smaller figures never reach another test."""
    import workbench.analysis.large_sample as large_sample
    import workbench.engine.truth as truth

    _clear_caches()
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(truth, "TRUTH_DRAWS", 2**14, raising=False)
        patch.setattr(large_sample, "LARGE_SAMPLE_BATCHES", 8, raising=False)
        patch.setattr(large_sample, "LARGE_SAMPLE_BATCH_N", 500, raising=False)
        yield
    _clear_caches()


@contextlib.contextmanager
def _fd_stdout(sink):
    """Send file descriptor 1 to ``sink`` (C libraries such as LAPACK write there, below Python)."""
    saved = os.dup(1)
    os.dup2(sink.fileno(), 1)
    try:
        yield
    finally:
        os.dup2(saved, 1)
        os.close(saved)


def _run(args: list[str]) -> tuple[int, str, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with tempfile.TemporaryFile("w+b") as sink:
        with _fd_stdout(sink), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(args)
            except BaseException as exc:  # noqa: BLE001 - the property under test: nothing escapes main
                raise AssertionError(f"{type(exc).__name__} escaped main: {exc}") from exc
        sink.seek(0)
        below = sink.read().decode("utf-8", "replace")
    return code, out.getvalue(), err.getvalue(), below


def _check_output(code: int, out: str, err: str, below: str, json_out: bool) -> None:
    assert code in (0, 2), (code, err)
    assert "Traceback" not in err and "Traceback" not in out
    assert below == "", below  # e.g. LAPACK's "** On entry to DLASCL parameter number 4"
    errors = [line for line in err.splitlines() if line.startswith(PREFIX)]
    if code == 2:
        assert len(errors) == 1, err
        line = errors[0]
        message = line[len(PREFIX) :]
        assert len(message) <= MAX_MESSAGE, line
        assert line.isprintable(), line
        place, sep, problem = message.partition(": ")
        assert sep and place and problem, line  # "<place>: <problem>"
        assert err.count("\n") == len(err.splitlines()), err  # nothing but whole lines
    else:
        assert not errors, err
        if json_out:
            json.loads(out)


@settings(
    max_examples=EXAMPLES,
    deadline=None,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.large_base_example],
)
@given(data=scenario_files(), run=st.integers(0, 9))
def test_hostile_scenario_files_never_end_in_a_traceback(tmp_path_factory, fewer_draws, data, run):
    folder = tmp_path_factory.getbasetemp()
    path = str(folder / "fuzzed.toml")
    with open(path, "wb") as handle:
        handle.write(data)
    note(data.decode("utf-8", "replace")[:3000])
    code, out, err, below = _run(["check", path])
    _check_output(code, out, err, below, json_out=False)
    if run == 0 and code == 0:
        args = ["run", path, "--replicates", "20", "--n", "200", "--json", "-"]
        code, out, err, below = _run(args)
        _check_output(code, out, err, below, json_out=True)
