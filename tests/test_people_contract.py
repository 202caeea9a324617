"""The contract of the outputs people read and the files they keep: saved scenarios laid out as the presets,
the change in estimate and relative bias, the strategy editor's names and options, ``check --json OUT`` and
``serve``'s address check and Ctrl-C."""

from __future__ import annotations

import difflib
import json
import shutil
import signal
import socket
import subprocess
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import workbench as wb
from workbench.cli import main
from workbench.engine.metrics import performance
from workbench.errors import UsageError
from workbench.report.tables import change_in_estimate, signals_table
from workbench.scenario.write import dumps_scenario

PRESETS = sorted(Path(wb.__file__).resolve().parent.parent.joinpath("presets").glob("*.toml"))


# --- saved scenarios -----------------------------------------------------------------------------------------
def _removed_lines(original: str, saved: str) -> list[str]:
    diff = difflib.unified_diff(original.splitlines(), saved.splitlines(), lineterm="", n=0)
    return [line[1:] for line in diff if line.startswith("-") and not line.startswith("---")]


@pytest.mark.parametrize("path", PRESETS, ids=lambda p: p.stem)
def test_a_saved_preset_keeps_the_preset_layout(path):
    """Saving a preset read from its file changes no line of it but a hand-wrapped long text: the diff only
    adds the defaults the file left implicit (``type``, ``observed``, ``model``, ...). Arrows stay
    ``[[arrows]]`` tables (common practice, no source: a line diff shows what changed)."""
    original = path.read_text(encoding="utf-8")
    saved = dumps_scenario(wb.load_scenario(path))
    assert "[[arrows]]" in saved and "arrows = [" not in saved
    assert saved.count("[[arrows]]") == original.count("[[arrows]]")
    lines = original.splitlines()
    start = next((i for i, line in enumerate(lines) if line.startswith('summary = """')), None)
    end = next((i for i in range(start or 0, len(lines)) if lines[i].endswith('"""')), -1)
    summary_lines = set(lines[start : end + 1]) if start is not None else set()
    for line in _removed_lines(original, saved):  # a hand-wrapped text, or an array wrapped by hand
        assert line in summary_lines or line.startswith(('adjust = ["', '          "')), line
    assert wb.loads_scenario(saved) == wb.load_scenario(path)


def test_one_edit_changes_one_line_of_the_saved_file():
    """An effect size changed in the scenario shows as one changed line between two saved files (common
    practice, no source)."""
    before = wb.load_preset("larger_graph")
    arrows = list(before.arrows)
    arrows[3] = type(arrows[3])(arrows[3].source, arrows[3].target, 2.5)
    after = before.replace(arrows=tuple(arrows))
    diff = [
        line
        for line in difflib.unified_diff(
            dumps_scenario(before).splitlines(), dumps_scenario(after).splitlines(), lineterm="", n=0
        )
        if line[:1] in "+-" and line[:3] not in ("+++", "---")
    ]
    assert diff == ["-effect = 2.0", "+effect = 2.5"]


# --- relative bias and the change in estimate -----------------------------------------------------------------
def test_relative_bias_is_relative_to_the_size_of_the_truth():
    """Relative bias = 100 x bias / |truth|: Morris, White & Crowther (2019), Table 6 give bias / theta; with
    |theta| a negative truth keeps the sign of the bias. Hand-worked: estimates -2.4, -2.6 against -2: bias
    -0.5, relative bias -25%; against +2 with estimates 2.4, 2.6: +25%."""
    est = np.array([[-2.4], [-2.6]])
    se = np.full_like(est, 0.2)
    negative = performance(est, se, est - 0.4, est + 0.4, np.full_like(est, 0.01), -2.0, 0.05)
    positive = performance(-est, se, -est - 0.4, -est + 0.4, np.full_like(est, 0.01), 2.0, 0.05)
    assert negative["bias"][0] == pytest.approx(-0.5)
    assert negative["relative_bias"][0] == pytest.approx(-25.0)
    assert positive["relative_bias"][0] == pytest.approx(25.0)
    assert negative["relative_bias_mcse"][0] == pytest.approx(positive["relative_bias_mcse"][0])


def test_change_in_estimate_matches_the_omitted_variable_formula():
    """Common cause preset: the unadjusted slope tends to 0.25 + 0.5 x 0.6 / (0.6^2 + 1) = 0.4706 and the
    adjusted one to 0.25 (omitted-variable bias, Wooldridge, Introductory Econometrics, sec. 3.3), so the
    change in estimate is 100 x (0.25 - 0.4706) / 0.4706 = -46.9%; within 5 Monte Carlo SEs of the means."""
    result = wb.simulate(wb.load_preset("common_cause"), replicates=2000, seed=11)
    changes = change_in_estimate(result.table)
    unadjusted = 0.25 + 0.5 * 0.6 / (0.36 + 1.0)
    value, kind = changes["adjust_soil"]
    assert kind == "%" and changes["unadjusted"] == (0.0, "%")
    rows = result.table.set_index("name")
    mcse = (
        100 * np.hypot(rows.loc["adjust_soil", "bias_mcse"], rows.loc["unadjusted", "bias_mcse"]) / unadjusted
    )
    assert value == pytest.approx(100 * (0.25 - unadjusted) / unadjusted, abs=5 * mcse + 1.0)


def test_change_in_estimate_near_a_zero_reference_is_given_in_units():
    """When the unadjusted average lies within one empirical SE of 0, a percentage of it means nothing: the
    column gives the difference of averages in the estimate's units (common practice, no source)."""
    table = pd.DataFrame(
        [
            {"name": "unadjusted", "reference": "unadjusted", "mean": 0.004, "emp_se": 0.1},
            {"name": "adjusted", "reference": "unadjusted", "mean": -0.296, "emp_se": 0.12},
        ]
    )
    assert change_in_estimate(table)["adjusted"] == (pytest.approx(-0.3), "units")
    html = signals_table(table)
    assert 'data-kind="units"' in html and "(units)" in html and "within one empirical SE of 0" in html
    assert "<th>change in estimate vs unadjusted (%)</th><th>" in html


# --- the strategies editor -------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", [p.stem for p in PRESETS])
def test_editor_names_are_the_command_lines_default_names(name):
    """A set's name in the dashboard is the one ``default_strategies`` gives it on the command line."""
    from workbench.app.strategies_editor import set_name
    from workbench.graph.defaults import default_strategies

    scenario = wb.load_preset(name)
    for strategy in default_strategies(scenario):
        if strategy.name.startswith("adjust_") or strategy.name == "unadjusted":
            assert set_name(strategy.adjust) == strategy.name


def test_editor_names_follow_the_set_unless_typed():
    from workbench.app.state import ScenarioState
    from workbench.app.strategies_editor import StrategiesEditor

    state = ScenarioState(preset="common_cause")
    editor = StrategiesEditor(state=state)
    assert editor.add_strategy()
    added = state.scenario.strategies[-1].name
    assert added == "unadjusted_2"
    assert editor.set_adjust(added, ["soil_quality"])
    assert state.scenario.strategies[-1].name == "adjust_soil_quality"
    assert editor.set_adjust("adjust_soil_quality", [])
    assert state.scenario.strategies[-1].name == "unadjusted_2"
    assert state.set_strategy("unadjusted_2", new_name="my_choice")
    assert editor.set_adjust("my_choice", ["soil_quality"])
    assert state.scenario.strategies[-1].name == "my_choice"


def test_suggested_sets_are_named_after_their_covariates():
    from workbench.app.state import ScenarioState
    from workbench.app.strategies_editor import StrategiesEditor

    state = ScenarioState(preset="mediator")
    editor = StrategiesEditor(state=state)
    assert state.set_strategy("adjust_skill", adjust=[])  # the mediator set is removed; suggestions add none
    state2 = ScenarioState(preset="m_bias")
    StrategiesEditor(state=state2).add_suggested()
    names = [s.name for s in state2.scenario.strategies]
    assert not any(n.startswith(("minimal_", "optimal")) for n in names)
    assert editor.state is state


def _widgets(editor):
    import panel as pn

    return [w for row in editor.rows.objects for w in row.select(pn.widgets.Widget)]


def test_options_appear_only_where_they_apply():
    """Standardisation applies to logistic models only; selection rules and the classical-or-HC3 SE choice to
    least squares on a continuous outcome only; a continuous outcome has one model, so no model choice is
    shown (common practice, no source)."""
    import panel as pn

    from workbench.app.state import ScenarioState
    from workbench.app.strategies_editor import StrategiesEditor

    continuous = StrategiesEditor(state=ScenarioState(preset="common_cause"))
    kinds = [type(w) for w in _widgets(continuous)]
    assert pn.widgets.Checkbox not in kinds
    selects = [w for w in _widgets(continuous) if isinstance(w, pn.widgets.Select)]
    assert sum("wb-strategy-selection" in (w.css_classes or []) for w in selects) == 2  # the rules
    assert sum("wb-strategy-se" in (w.css_classes or []) for w in selects) == 2  # classical or HC3 each
    assert len(selects) == 4  # no model choice
    binary = StrategiesEditor(state=ScenarioState(preset="binary_outcome"))
    boxes = [w for w in _widgets(binary) if isinstance(w, pn.widgets.Checkbox)]
    logit = [s for s in binary.state.scenario.strategies if s.model == "logit"]
    assert len(boxes) == len(logit) == 3
    assert not any("wb-strategy-selection" in (w.css_classes or []) for w in _widgets(binary))


# --- the command line ------------------------------------------------------------------------------------------
def test_check_json_to_a_file_equals_the_printed_json(tmp_path, capsys):
    target = tmp_path / "check.json"
    assert main(["check", "--preset", "mediator", "--json", str(target)]) == 0
    captured = capsys.readouterr()
    assert captured.out == "" and f"wrote {target}" in captured.err
    assert main(["check", "--preset", "mediator", "--json"]) == 0
    printed = capsys.readouterr().out
    assert json.loads(target.read_text()) == json.loads(printed)
    assert main(["check", "--preset", "mediator", "--json", "-"]) == 0
    assert json.loads(capsys.readouterr().out) == json.loads(printed)
    assert main(["check", "--preset", "mediator", "--json", str(tmp_path / "no" / "x.json")]) == 2
    assert "--json: cannot write" in capsys.readouterr().err


def test_serve_checks_its_address_before_printing_the_url(capsys):
    from workbench.app.serve import check_address

    with pytest.raises(UsageError, match="--address: 'no.such.host.invalid' is not a name or address"):
        check_address("no.such.host.invalid", 5006)
    with pytest.raises(UsageError, match="--address: 192.0.2.7 is not an address of this machine"):
        check_address("192.0.2.7", 5006)  # TEST-NET-1 (RFC 5737): never a local address
    taken = socket.socket()
    taken.bind(("127.0.0.1", 0))
    taken.listen()
    try:
        port = taken.getsockname()[1]
        assert main(["serve", "--port", str(port), "--no-show"]) == 2
        captured = capsys.readouterr()
        assert f"--port: {port} is already in use on 127.0.0.1" in captured.err
        assert "http://" not in captured.out
    finally:
        taken.close()


@pytest.mark.skipif(shutil.which("workbench") is None, reason="the package is not installed")
def test_ctrl_c_stops_the_dashboard_with_exit_130():
    """Ctrl-C (SIGINT) stops ``serve`` with one line and exit code 130 (common practice, no source: 128 +
    SIGINT is the shell's convention for an interrupted command)."""
    with socket.socket() as free:
        free.bind(("127.0.0.1", 0))
        port = free.getsockname()[1]
    process = subprocess.Popen(
        ["workbench", "serve", "--no-show", "--port", str(port)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL),
    )
    line = process.stdout.readline()  # the URL, printed once the address is known to work
    assert f"http://127.0.0.1:{port}/" in line
    time.sleep(1.0)
    process.send_signal(signal.SIGINT)
    out, err = process.communicate(timeout=60)
    assert process.returncode == 130
    assert "dashboard stopped" in err and "Traceback" not in err
