"""The command line: exit codes, one-line errors, JSON shapes."""

from __future__ import annotations

import json
import shutil
import subprocess

import pytest

from workbench.cli import main
from workbench.scenario.presets import list_presets

GOOD = """title = "Workshop lathes"
[question]
exposure = "training"
outcome = "output"
[variables.skill]
[variables.training]
[variables.output]
[[arrows]]
from = "skill"
to = "training"
effect = 0.5
[[arrows]]
from = "skill"
to = "output"
effect = 0.5
[[arrows]]
from = "training"
to = "output"
effect = 0.3
[study]
n = 100
replicates = 200
"""

BROKEN = {
    "toml syntax": (GOOD.replace('title = "Workshop lathes"', "title = "), "line 1, column"),
    "unknown key": (GOOD.replace("[study]", "[study]\nreplicats = 5"), "study.replicats: unknown key"),
    "wrong type": (GOOD.replace("effect = 0.3", 'effect = "big"'), "arrows[3].effect: must be a number"),
    "unknown variable": (GOOD.replace('to = "training"', 'to = "trainin"'), "did you mean 'training'"),
    "cycle": (GOOD + '[[arrows]]\nfrom = "output"\nto = "skill"\neffect = 0.1\n', "cycle: "),
    "self arrow": (GOOD + '[[arrows]]\nfrom = "skill"\nto = "skill"\neffect = 0.1\n', "to itself"),
    "duplicate arrow": (
        GOOD + '[[arrows]]\nfrom = "skill"\nto = "output"\neffect = 0.1\n',
        "duplicate arrow",
    ),
    "exposure is outcome": (GOOD.replace('outcome = "output"', 'outcome = "training"'), "question.outcome"),
    "missing exposure": (GOOD.replace('exposure = "training"\n', ""), "question.exposure: missing"),
    "adjust exposure": (GOOD + '[[strategies]]\nname = "a"\nadjust = ["training"]\n', "is the exposure"),
    "adjust outcome": (GOOD + '[[strategies]]\nname = "a"\nadjust = ["output"]\n', "is the outcome"),
    "adjust latent": (
        GOOD.replace("[variables.skill]", "[variables.skill]\nobserved = false")
        + '[[strategies]]\nname = "a"\nadjust = ["skill"]\n',
        "is latent",
    ),
    "adjust unknown": (GOOD + '[[strategies]]\nname = "a"\nadjust = ["skil"]\n', "unknown variable 'skil'"),
    "proportion": (
        GOOD.replace("[variables.skill]", '[variables.skill]\ntype = "binary"\nproportion = 1.5'),
        "variables.skill.proportion",
    ),
    "negative noise": (
        GOOD.replace("[variables.skill]", "[variables.skill]\nnoise_sd = -1"),
        "variables.skill.noise_sd: must be >= 0",
    ),
    "log odds on continuous": (
        GOOD.replace('outcome = "output"', 'outcome = "output"\nscale = "log_odds_ratio"'),
        "question.scale",
    ),
    "direct on binary": (
        GOOD.replace('outcome = "output"', 'outcome = "output"\ntarget = "direct"').replace(
            "[variables.output]", '[variables.output]\ntype = "binary"\nproportion = 0.3'
        ),
        "question.target",
    ),
    "too many variables": (
        'title = "t"\n[question]\nexposure = "v0"\noutcome = "v1"\n'
        + "".join(f"[variables.v{i}]\n" for i in range(41)),
        "at most 40 variables",
    ),
    "too many arrows": (
        'title = "t"\n[question]\nexposure = "v0"\noutcome = "v1"\n'
        + "".join(f"[variables.v{i}]\n" for i in range(30))
        + "".join(
            f'[[arrows]]\nfrom = "v{i}"\nto = "v{j}"\neffect = 0.1\n'
            for i in range(30)
            for j in range(i + 1, 30)
        )[: 10**6],
        "at most 200 arrows",
    ),
    "n too small": (
        GOOD.replace("n = 100", "n = 3") + '[[strategies]]\nname = "a"\nadjust = ["skill"]\n',
        "study.n: n = 3 is too small",
    ),
    "replicates zero": (GOOD.replace("replicates = 200", "replicates = 0"), "study.replicates"),
    "alpha": (GOOD.replace("[study]", "[study]\nalpha = 0.7"), "study.alpha"),
}


@pytest.fixture
def scenario_file(tmp_path):
    def write(text: str):
        path = tmp_path / "scenario.toml"
        path.write_text(text)
        return str(path)

    return write


def test_check_json_shape(scenario_file, capsys):
    """The JSON keys of the interface contract (issue: foundation, section 5)."""
    assert main(["check", scenario_file(GOOD), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    for key in (
        "title",
        "exposure",
        "outcome",
        "target",
        "roles",
        "strategies",
        "minimal_sets",
        "optimal_set",
        "truth",
    ):
        assert key in data
    assert data["truth"] == pytest.approx(0.3)
    assert data["minimal_sets"] == [["skill"]]
    for row in data["strategies"]:
        assert {"name", "adjust", "valid", "reasons", "large_sample_estimate", "large_sample_bias"} <= set(
            row
        )


@pytest.mark.parametrize("case", list(BROKEN))
def test_broken_files_exit_2_with_one_line(case, scenario_file, capsys):
    """Every broken-file case prints one line naming the place and exits 2, with no traceback."""
    text, expected = BROKEN[case]
    assert main(["check", scenario_file(text)]) == 2
    captured = capsys.readouterr()
    message = captured.err.strip()
    assert "\n" not in message and "Traceback" not in message
    assert expected in message
    assert "scenario.toml" in message


def test_missing_file_and_unknown_preset(capsys):
    assert main(["check", "/nonexistent/where.toml"]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main(["check", "--preset", "no_such_preset"]) == 2
    assert "common_cause" in capsys.readouterr().err


@pytest.mark.parametrize("name", list(list_presets()))
def test_check_every_preset(name, capsys):
    assert main(["check", "--preset", name]) == 0
    out = capsys.readouterr().out
    assert "Strategies" in out and "assumptions" in out


def test_presets_lists_titles(capsys):
    assert main(["presets"]) == 0
    out = capsys.readouterr().out
    assert "common_cause" in out and "(default)" in out


@pytest.mark.skipif(shutil.which("workbench") is None, reason="the package is not installed")
def test_installed_command_from_another_directory(tmp_path):
    """After 'pip install .', presets are found from any directory (package data)."""
    done = subprocess.run(
        ["workbench", "check", "--preset", "common_cause", "--json"],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["exposure"] == "fertiliser"


def test_run_writes_json_csv_and_html(scenario_file, tmp_path, capsys):
    """run --json/--csv/--html write their files; JSON to stdout is JSON only."""
    path = scenario_file(GOOD)
    out_json, out_csv, out_html = tmp_path / "r.json", tmp_path / "r.csv", tmp_path / "r.html"
    code = main(
        [
            "run",
            path,
            "--replicates",
            "100",
            "--json",
            str(out_json),
            "--csv",
            str(out_csv),
            "--html",
            str(out_html),
        ]
    )
    assert code == 0
    assert json.loads(out_json.read_text())["replicates"] == 100
    assert out_csv.read_text().splitlines()[0].startswith("name")
    assert "<html" in out_html.read_text().lower()
    capsys.readouterr()
    assert main(["run", path, "--replicates", "100", "--json", "-"]) == 0
    assert json.loads(capsys.readouterr().out)["n"] == 100


def test_run_rejects_bad_settings_in_one_line(scenario_file, capsys):
    path = scenario_file(GOOD)
    for args, expected in (
        (["--engine", "fast"], "engine"),
        (["--replicates", "0"], "--replicates: must be an integer from 1 to 1,000,000, got 0"),
        (["--replicates", str(10**8)], "--replicates: must be an integer from 1 to 1,000,000"),
        (["--replicates", str(2**63)], "--replicates: must be an integer from 1 to 1,000,000"),
        (["--replicates", "many"], "must be a whole number, got 'many'"),
        (["--alpha", "0.7"], "--alpha: must be a number in (0, 0.5], got 0.7"),
        (["--seed", "-1"], "--seed: must be an integer of at least 0, got -1"),
        (["--n", "3"], "n"),
    ):
        assert main(["run", path, *args]) == 2
        err = capsys.readouterr().err.strip()
        assert "\n" not in err and expected in err


def test_plan_options_share_the_file_constraints(scenario_file, capsys):
    """The plan's options are checked by the same study constraints as the file (one rule, one message)."""
    path = scenario_file(GOOD)
    for args, expected in (
        (["--target-power", "1.5"], "--target-power: must be a number in (0, 1), got 1.5"),
        (["--target-halfwidth", "-1"], "--target-halfwidth: must be a number greater than 0, got -1.0"),
        (["--sizes", "100,0"], "--sizes: must be an integer of at least 1, got 0"),
        (["--sizes", "100,x"], "--sizes: must be whole numbers separated by commas, got '100,x'"),
        (["--replicates", "2000000"], "--replicates: must be an integer from 1 to 1,000,000"),
    ):
        assert main(["plan", path, *args]) == 2
        err = capsys.readouterr().err.strip()
        assert "\n" not in err and expected in err, err


def test_without_seed_the_file_seed_is_used(scenario_file, tmp_path):
    """A run without --seed uses the scenario's seed: the same file gives the same JSON
    (common practice, no source)."""
    path = scenario_file(GOOD)
    first, second = tmp_path / "a.json", tmp_path / "b.json"
    assert main(["run", path, "--replicates", "50", "--json", str(first)]) == 0
    assert main(["run", path, "--replicates", "50", "--seed", "20261201", "--json", str(second)]) == 0
    assert first.read_bytes() == second.read_bytes()


def test_version_and_bad_port(capsys):
    assert main(["--version"]) == 0
    assert capsys.readouterr().out.startswith("workbench ")
    assert main(["serve", "--port", "0", "--no-show"]) == 2
    assert "--port: must be a port number from 1 to 65535, got 0" in capsys.readouterr().err


def _interrupted_run(after: float):
    """A long ``workbench run`` sent SIGINT ``after`` seconds from its start: (process, stdout, stderr)."""
    import signal
    import time

    process = subprocess.Popen(
        ["workbench", "run", "--preset", "binary_outcome", "--replicates", "500000", "--allow-long"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL),
    )
    time.sleep(after)
    process.send_signal(signal.SIGINT)
    return process, *process.communicate(timeout=120)


@pytest.mark.skipif(shutil.which("workbench") is None, reason="the package is not installed")
def test_ctrl_c_ends_a_long_run_cleanly():
    """Ctrl-C (SIGINT) ends a run with a one-line message and exit code 130, no traceback."""
    process, out, err = _interrupted_run(4.0)
    assert process.returncode == 130
    assert "cancelled" in err and "Traceback" not in err
    assert out == ""


@pytest.mark.skipif(shutil.which("workbench") is None, reason="the package is not installed")
@pytest.mark.parametrize("delay", [0.15, 0.3, 0.5, 0.8, 1.2])
def test_ctrl_c_during_start_up_exits_130_with_one_line(delay):
    """Ctrl-C while the command is still importing the library also ends with exit 130 and one line
    (common practice, no source: 128 + SIGINT is the shell's convention for an interrupted command)."""
    process, out, err = _interrupted_run(delay)
    for _ in range(3):  # on a loaded machine the signal may land before Python itself has started
        if "init_import_site" not in err:  # (CPython's own start-up, before any of the package's code)
            break
        delay *= 2
        process, out, err = _interrupted_run(delay)
    assert process.returncode == 130, err
    # the only other line allowed is the cost estimate that --allow-long prints before the work starts
    lines = [line.split("\r")[-1] for line in err.strip().splitlines() if line.split("\r")[-1].strip()]
    assert "Traceback" not in err and lines[-1].startswith("workbench: cancelled"), err
    assert all(line.startswith("workbench: run estimated at about") for line in lines[:-1]), err
    assert out == ""
