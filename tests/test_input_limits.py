"""Hostile scenario input: every reproducer of the hardening issue gets one located line and exit code 2.

Each case goes through the command line in-process (``workbench.cli.main(["check", path])``) and checks the
contract of the README and ``docs/scenario-format.md`` ("Limits"): exit code 2, exactly one line on stderr,
starting ``workbench: error: <file>: <place>: ``, at most 200 characters of message, no traceback, and no
raw control character. Sources are named beside the checks.
"""

from __future__ import annotations

import math
import os
import signal
import stat
import sys

import pytest

from workbench import loads_scenario
from workbench.cli import main
from workbench.errors import MAX_MESSAGE, ScenarioError, WorkbenchError, shown
from workbench.scenario.limits import MAX_FILE_BYTES, MAX_VARIANCE, read_scenario_text
from workbench.scenario.presets import list_presets, read_preset

PREFIX = "workbench: error: "

GOOD = """title = "Kiln temperature and tile strength"
[question]
exposure = "temperature"
outcome = "strength"
[variables.clay]
[variables.temperature]
[variables.strength]
[[arrows]]
from = "clay"
to = "temperature"
effect = 0.5
[[arrows]]
from = "clay"
to = "strength"
effect = 0.4
[[arrows]]
from = "temperature"
to = "strength"
effect = 0.3
[study]
n = 100
replicates = 50
"""


def _edit(old: str, new: str) -> str:
    assert old in GOOD
    return GOOD.replace(old, new, 1)


@pytest.fixture(autouse=True)
def _in_tmp_path(tmp_path, monkeypatch):
    """Run in the test's folder, so that messages name a short relative file (``sc.toml``)."""
    monkeypatch.chdir(tmp_path)


def _check(tmp_path, capsys, text: str | bytes) -> str:
    """Run ``check`` on the text; assert exit 2 and one clean line; return the message after the file."""
    path = tmp_path / "sc.toml"
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return _check_path("sc.toml", capsys)


def _check_path(path: str, capsys) -> str:
    code = main(["check", path])
    captured = capsys.readouterr()
    assert code == 2, captured
    lines = captured.err.splitlines()
    assert len(lines) == 1, captured.err  # one line (README: "one line naming the place")
    line = lines[0]
    assert "Traceback" not in captured.err
    assert line.startswith(PREFIX + path + ": ")
    assert len(line) - len(PREFIX) <= MAX_MESSAGE
    assert line.isprintable()  # no raw newline, tab, NUL or other control character
    return line[len(PREFIX) + len(path) + 2 :]


# --- nesting -------------------------------------------------------------------------------------------


@pytest.mark.parametrize("depth", [20, 500, 5000])
def test_deeply_nested_arrays_are_refused(tmp_path, capsys, depth):
    """The issue's reproducer: arrays nested 500 deep raised RecursionError inside tomllib."""
    text = _edit("[[arrows]]", "[variables.clay.extra]\n") + "junk = " + "[" * depth + "]" * depth + "\n"
    message = _check(tmp_path, capsys, text)
    assert "nested" in message and "8 levels" in message


def test_deeply_nested_inline_tables_are_refused(tmp_path, capsys):
    text = GOOD + "[strategies_x]\n" + "a = " + "{b = " * 600 + "1" + "}" * 600 + "\n"
    assert "nested" in _check(tmp_path, capsys, text)


def test_nesting_is_located(tmp_path, capsys):
    """Shallow enough for tomllib, too deep for a scenario: the message names the key path."""
    text = 'summary = [[[[[[[[[["x"]]]]]]]]]]\n' + GOOD
    assert _check(tmp_path, capsys, text).startswith("summary[1]")


# --- numbers -------------------------------------------------------------------------------------------


def test_noise_sd_that_would_overflow_the_variance(tmp_path, capsys):
    """1.35e154 squared exceeds the largest double, about 1.80e308 (IEEE 754 binary64)."""
    assert math.isinf(1.35e154 * 1.35e154) and sys.float_info.max < 1.8e308
    message = _check(tmp_path, capsys, _edit("[variables.clay]", "[variables.clay]\nnoise_sd = 1.35e154"))
    assert message.startswith("variables.clay.noise_sd: must be 0 or lie in [1e-06, 1e+06]")


@pytest.mark.parametrize("value", ["1e300", "1.7e308", "-1e300", "1000001.0"])
def test_huge_effects_are_refused(tmp_path, capsys, value):
    """The issue: an effect of 1e300 gave 'estimate nan' and LAPACK text on stdout."""
    message = _check(tmp_path, capsys, _edit("effect = 0.3", f"effect = {value}"))
    assert message.startswith("arrows[3].effect: must lie in [-1e+06, 1e+06]")


def test_effects_that_compound_along_a_chain_are_refused(tmp_path, capsys):
    """Each effect is within bounds, but 10^6 per arrow along a chain of ten variables gives a scale of
    10^54 at its end, a variance of 10^108 > 10^100 (variance of a linear combination, common practice)."""
    names = [f"v{i}" for i in range(10)]
    text = 'title = "Chain of relays"\n[question]\nexposure = "v0"\noutcome = "v9"\n'
    text += "".join(f"[variables.{n}]\n" for n in names)
    text += "".join(
        f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = 1e6\n'
        for a, b in zip(names, names[1:], strict=False)
    )
    message = _check(tmp_path, capsys, text)
    assert message.startswith("variables.v") and f"{MAX_VARIANCE:g}" in message


def test_a_long_chain_within_the_bound_is_accepted():
    """The variance bound refuses only what it must: effects of 10 along five arrows (scale 10^5) load."""
    names = [f"v{i}" for i in range(6)]
    text = 'title = "Chain"\n[question]\nexposure = "v0"\noutcome = "v5"\n'
    text += "".join(f"[variables.{n}]\n" for n in names)
    text += "".join(
        f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = 10\n' for a, b in zip(names, names[1:], strict=False)
    )
    assert len(loads_scenario(text).arrows) == 5


@pytest.mark.parametrize("value", ["5e-324", "1e-7", "0.9999999"])
def test_extreme_proportions_are_refused(tmp_path, capsys, value):
    """The issue: proportion 5e-324 (the smallest subnormal double) broke the intercept calibration."""
    text = _edit("[variables.clay]", f'[variables.clay]\ntype = "binary"\nproportion = {value}')
    assert _check(tmp_path, capsys, text).startswith(
        "variables.clay.proportion: must lie in [1e-06, 0.999999]"
    )


def test_proportion_at_the_bound_is_accepted():
    text = _edit("[variables.clay]", '[variables.clay]\ntype = "binary"\nproportion = 1e-6')
    assert loads_scenario(text).variable("clay").proportion == 1e-6


@pytest.mark.parametrize(
    ("line", "place"),
    [
        ("n = 100000000000000000000000", "study.n: must be at most 100,000,000"),
        ("n = " + "9" * 5000, "TOML value error: a number has too many digits"),
        ("seed = 340282366920938463463374607431768211456", "study.seed: must be at most"),
        ("sample_sizes = [100, 100000000000000000000000]", "study.sample_sizes[2]: must be at most"),
        ("target_halfwidth = " + "9" * 400, "study.target_halfwidth:"),
    ],
)
def test_huge_integers_get_a_message_not_an_overflow(tmp_path, capsys, line, place):
    """The issue: a huge n raised OverflowError. Python refuses int() of more than 4,300 digits
    (docs.python.org, 'Integer string conversion length limitation'), which tomllib raises as ValueError."""
    text = _edit("n = 100", line) if line.startswith("n =") else _edit("n = 100", "n = 100\n" + line)
    assert _check(tmp_path, capsys, text).startswith(place)


def test_an_integer_effect_beyond_the_largest_double(tmp_path, capsys):
    """float(10**400) raises OverflowError (Python's int-to-float conversion)."""
    message = _check(tmp_path, capsys, _edit("effect = 0.3", "effect = 1" + "0" * 400))
    assert message.startswith("arrows[3].effect: must be a finite number")


@pytest.mark.parametrize("value", ["nan", "inf", "-inf"])
def test_non_finite_baselines_are_refused(tmp_path, capsys, value):
    """TOML 1.0 allows nan and inf as floats (toml.io, 'Float')."""
    message = _check(tmp_path, capsys, _edit("[variables.clay]", f"[variables.clay]\nbaseline = {value}"))
    assert message.startswith("variables.clay.baseline: must be a finite number")


# --- control characters and names ----------------------------------------------------------------------


def test_a_newline_in_a_table_key_is_not_a_name(tmp_path, capsys):
    """`[variables."a\\n"]` was accepted: in Python's re, `$` also matches before a final newline (re docs,
    'Regular Expression Syntax'); names are checked with fullmatch and \\Z."""
    message = _check(tmp_path, capsys, GOOD + '[variables."a\\n"]\n')
    assert message.startswith("variables: 'a\\n' is not valid: a variable name must be a letter")


@pytest.mark.parametrize(
    ("old", "new", "place"),
    [
        ('title = "Kiln temperature and tile strength"', 'title = "Kiln\\ntiles"', "title: must not contain"),
        ("[variables.clay]", '[variables.clay]\nlabel = "clay\\tshare"', "variables.clay.label: must not"),
        ("[variables.clay]", '[variables.clay]\nlabel = "nul\\u0000"', "variables.clay.label: must not"),
        ("[variables.clay]", '[variables.clay]\ntype = "binary\\n"', "variables.clay.type: must not"),
        ('exposure = "temperature"', 'exposure = "temperature\\n"', "question.exposure: must not"),
    ],
)
def test_control_characters_in_values_are_refused(tmp_path, capsys, old, new, place):
    """TOML basic strings carry \\n, \\t and \\u0000 as escapes (toml.io, 'String'); none may reach a message or
    a page raw."""
    assert _check(tmp_path, capsys, _edit(old, new)).startswith(place)


def test_a_newline_in_an_unknown_key_is_escaped(tmp_path, capsys):
    message = _check(tmp_path, capsys, _edit("[study]", '[study]\n"rep\\nlicates" = 5'))
    assert message.startswith("study: unknown key 'rep\\nlicates'")


@pytest.mark.parametrize(
    ("text", "place"),
    [
        ('"" = 1\n' + GOOD, "top level: unknown key ''"),
        (_edit("[variables.clay]", '[variables.clay]\n"" = 1'), "variables.clay: unknown key ''"),
        (_edit("[study]", '[study]\n"" = 1'), "study: unknown key ''"),
    ],
)
def test_an_empty_key_names_its_table(tmp_path, capsys, text, place):
    """The issue: `unknown key ''` named no place."""
    assert _check(tmp_path, capsys, text).startswith(place)


@pytest.mark.parametrize(
    "name", ["<img src=x onerror=alert(1)>", "with space", "1st", "tab\\there", "a" * 61, "x\\n"]
)
def test_strategy_names_are_identifiers(tmp_path, capsys, name):
    """Strategy names follow the variable-name rule (letters, digits, '_'), so no name carries markup."""
    message = _check(tmp_path, capsys, GOOD + f'[[strategies]]\nname = "{name}"\n')
    assert message.startswith("strategies[1].name: ")
    assert "letter, then letters, digits or '_'" in message or "control characters" in message


@pytest.mark.parametrize(
    ("old", "new", "place"),
    [
        ("[variables.clay]", "[variables." + "c" * 33 + "]", "variables.ccccc"),
        ('title = "Kiln temperature and tile strength"', 'title = "' + "t" * 201 + '"', "title: at most 200"),
        (
            "[variables.clay]",
            '[variables.clay]\nlabel = "' + "l" * 201 + '"',
            "variables.clay.label: at most 200",
        ),
        ("[question]", 'summary = "' + "s" * 4001 + '"\n[question]', "summary: at most 4,000 characters"),
    ],
)
def test_string_lengths(tmp_path, capsys, old, new, place):
    assert _check(tmp_path, capsys, _edit(old, new)).startswith(place)


def test_a_long_multiline_summary_within_the_limit_is_accepted():
    summary = "Tiles fired hotter are stronger.\\n" * 100
    assert (
        loads_scenario(_edit("[question]", f'summary = "{summary}"\n[question]')).summary.count("\n") == 100
    )


def test_a_huge_unknown_key_gives_a_short_message(tmp_path, capsys):
    message = _check(tmp_path, capsys, _edit("[study]", '[study]\n"' + "k\\n" * 5000 + '" = 1'))
    assert message.startswith("study: unknown key 'k\\nk\\n") and "\u2026" in message


# --- files ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("device", ["/dev/zero", "/dev/urandom", "/dev/null"])
def test_devices_are_refused_without_reading(capsys, device):
    """The issue: check /dev/zero raised MemoryError, /dev/urandom never ended."""
    if not os.path.exists(device):
        pytest.fail(f"{device} is missing on this system")
    assert _check_path(device, capsys).startswith("is not a regular file")


@pytest.fixture
def alarm():
    """Fail instead of hanging if a read blocks (POSIX alarm)."""

    def ring(signum, frame):
        raise AssertionError("reading the scenario blocked")

    previous = signal.signal(signal.SIGALRM, ring)
    signal.alarm(10)
    yield
    signal.alarm(0)
    signal.signal(signal.SIGALRM, previous)


def test_a_fifo_is_refused_without_blocking(tmp_path, capsys, alarm):
    """Opening a FIFO for reading blocks until a writer opens it, unless O_NONBLOCK (POSIX open(2));
    the reader refuses it from its stat before opening it."""
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    assert _check_path("pipe.toml", capsys).startswith("is not a regular file")


def test_a_folder_is_refused(tmp_path, capsys):
    os.mkdir("folder.toml")
    assert _check_path("folder.toml", capsys) == "is a folder, not a scenario file"


def test_a_file_over_one_mebibyte_is_refused(tmp_path, capsys):
    text = GOOD + "#" * MAX_FILE_BYTES + "\n"
    assert _check(tmp_path, capsys, text).startswith("is larger than 1 MiB")


def test_text_over_one_mebibyte_is_refused_by_the_text_reader():
    with pytest.raises(ScenarioError, match="larger than 1 MiB"):
        loads_scenario(GOOD + "#" * MAX_FILE_BYTES)


def test_binary_bytes_are_not_utf8(tmp_path, capsys):
    assert "not UTF-8" in _check(tmp_path, capsys, b"\xff\xfe\x00title = 3")


def test_a_byte_order_mark_is_read():
    """A UTF-8 byte order mark (EF BB BF, Unicode standard section 23.8) is dropped before parsing."""
    import tempfile

    with tempfile.NamedTemporaryFile("wb", suffix=".toml", delete=False) as handle:
        handle.write(b"\xef\xbb\xbf" + GOOD.encode())
    try:
        assert read_scenario_text(handle.name) == GOOD
    finally:
        os.unlink(handle.name)


# --- the message contract ------------------------------------------------------------------------------


def test_every_error_is_one_clipped_printable_line():
    """WorkbenchError escapes control characters and clips; shown() quotes repr-style (common practice)."""
    err = WorkbenchError("bad value " + shown("x\n" * 100), where="variables.a\nb")
    assert str(err).isprintable() and len(str(err)) <= MAX_MESSAGE
    assert err.where == "variables.a\\nb"


def test_every_preset_satisfies_the_limits():
    """The limits are chosen so that every built-in scenario loads (no limit refuses a preset)."""
    for name in list_presets():
        assert read_preset(name).title
