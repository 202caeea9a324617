"""The command line's options and outputs under hostile use: the reproducers of the hardening issue.

Each refusal is exit code 2 and one line on stderr naming the option, before any work (common practice, no
source: the project's rule for errors, DEVELOPERS.md; exit code 2 for a usage error is the POSIX utilities'
convention).
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys

import pytest

from workbench.cli import EXIT_BROKEN_PIPE, main

SCENARIO = """title = "Workshop lathes"
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
replicates = 100
"""


@pytest.fixture
def scenario(tmp_path):
    path = tmp_path / "sc.toml"
    path.write_text(SCENARIO)
    return path


@pytest.fixture
def no_simulation(monkeypatch):
    """Fail the test if a command starts simulating (refusals must come before any work)."""
    import workbench.analysis.plan as plan_module
    import workbench.analysis.simulate as simulate_module

    def refuse(*args, **kwargs):
        raise AssertionError("the command simulated before refusing")

    monkeypatch.setattr(simulate_module, "simulate", refuse)
    monkeypatch.setattr(plan_module, "plan", refuse)


def refused(capsys, argv, expected: str) -> str:
    """Run the command; assert exit 2 and one line on stderr containing ``expected``."""
    assert main(argv) == 2
    captured = capsys.readouterr()
    err = captured.err.strip()
    assert len(err.splitlines()) == 1, err
    assert expected in err, err
    assert "Traceback" not in err and ".tmp" not in err
    return err


def test_option_limits_match_the_file(scenario, capsys, no_simulation):
    """--n 1e23 and --replicates 2^63, 10^8 get the study constraints' one-line messages, with no
    simulation (issue reproducers; the limits are those of scenario/constraints.py)."""
    refused(capsys, ["run", str(scenario), "--n", "1e23"], "--n: must be at most 100,000,000")
    refused(capsys, ["run", str(scenario), "--replicates", str(2**63)], "--replicates: must be an integer")
    refused(capsys, ["run", str(scenario), "--replicates", "100000000"], "--replicates: must be an integer")
    refused(capsys, ["run", str(scenario), "--n", "1" * 5000], "--n: must be a whole number")
    refused(capsys, ["run", str(scenario), "--n", "2.5"], "--n: must be a whole number, got '2.5'")
    refused(capsys, ["run", str(scenario), "--alpha", "nan"], "--alpha: must be a number in (0, 0.5]")
    refused(capsys, ["plan", str(scenario), "--replicates", "1e7"], "--replicates: must be an integer")


def test_whole_numbers_in_exponent_form_are_accepted(scenario, tmp_path, capsys):
    """``--replicates 1e2`` is the whole number 100 (common practice, no source)."""
    out = tmp_path / "r.json"
    assert main(["run", str(scenario), "--replicates", "1e2", "--json", str(out)]) == 0
    assert json.loads(out.read_text())["replicates"] == 100


def test_raw_run_over_the_budget_is_refused_with_the_estimate(capsys, no_simulation):
    """A raw-engine run of n = 10^6 x 10^5 replicates (hours) stops before any work with the estimate and
    the option that accepts it (issue reproducer)."""
    err = refused(
        capsys,
        ["run", "--preset", "binary_outcome", "--n", "1000000", "--replicates", "100000"],
        "over the budget of 10 min and 2 GiB; pass --allow-long to run it anyway",
    )
    assert "estimated about " in err and (" h " in err or " days " in err)
    refused(
        capsys,
        ["plan", "--preset", "binary_outcome", "--sizes", "100000,1000000", "--replicates", "100000"],
        "plan: estimated about ",
    )


def test_allow_long_accepts_the_estimate(capsys, monkeypatch):
    """--allow-long lets a run over the budget start (here a small run with a budget of zero seconds)."""
    import workbench.analysis.budget as budget

    monkeypatch.setattr(budget, "MAX_SECONDS", 0.0)
    refused(capsys, ["run", "--preset", "common_cause", "--replicates", "100"], "--allow-long")
    assert main(["run", "--preset", "common_cause", "--replicates", "100", "--allow-long"]) == 0


def test_device_output_is_refused(scenario, capsys, no_simulation):
    """--json /dev/full is refused as not a regular file (issue reproducer: as root it replaced the device);
    the device stays a character device."""
    refused(
        capsys,
        ["run", str(scenario), "--json", "/dev/full"],
        "--json: '/dev/full' exists and is not a regular file",
    )
    refused(
        capsys, ["run", str(scenario), "--csv", "/dev/null"], "--csv: '/dev/null' exists and is not a regular"
    )
    assert os.path.exists("/dev/full") and not os.path.isfile("/dev/full")


def test_fifo_and_socket_outputs_are_refused_without_hanging(scenario, tmp_path, capsys, no_simulation):
    """A FIFO (no reader: opening it would block) and a socket are refused from their file type alone."""
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    refused(capsys, ["run", str(scenario), "--csv", str(fifo)], "--csv: ")
    assert not fifo.is_file() and fifo.exists()
    sock_path = tmp_path / "s"
    server = socket.socket(socket.AF_UNIX)
    try:
        server.bind(str(sock_path))
        refused(capsys, ["run", str(scenario), "--html", str(sock_path)], "is not a regular file")
    finally:
        server.close()


def test_symlink_is_written_through_to_its_target(scenario, tmp_path, capsys):
    """An output that is a symbolic link replaces the link's target and keeps the link (the documented
    choice); a link to a device is refused like the device."""
    target = tmp_path / "real.json"
    target.write_text("old")
    link = tmp_path / "link.json"
    link.symlink_to(target)
    assert main(["run", str(scenario), "--json", str(link)]) == 0
    assert link.is_symlink() and json.loads(target.read_text())["replicates"] == 100
    dangling = tmp_path / "dangling.csv"
    dangling.symlink_to(tmp_path / "made.csv")
    assert main(["run", str(scenario), "--csv", str(dangling)]) == 0
    assert dangling.is_symlink() and (tmp_path / "made.csv").read_text().startswith("name")
    to_device = tmp_path / "dev.json"
    to_device.symlink_to("/dev/full")
    capsys.readouterr()
    refused(capsys, ["run", str(scenario), "--json", str(to_device)], "is not a regular file")


def test_long_names_are_checked_before_the_work(scenario, tmp_path, capsys):
    """A 250-character CSV name fits NAME_MAX (255 bytes on Linux file systems) and is written, the temporary
    file's name being short; a 300-character one is refused before the simulation, with no other output
    written (issue reproducer: it failed after the run, HTML and JSON already written)."""
    name_max = os.pathconf(tmp_path, "PC_NAME_MAX")
    fits = tmp_path / ("c" * 250 + ".csv")[-min(254, name_max) :]
    assert main(["run", str(scenario), "--csv", str(fits)]) == 0
    assert fits.read_text().startswith("name")
    capsys.readouterr()
    html, out_json = tmp_path / "r.html", tmp_path / "r.json"
    too_long = tmp_path / ("c" * (name_max + 45) + ".csv")
    refused(
        capsys,
        ["run", str(scenario), "--html", str(html), "--json", str(out_json), "--csv", str(too_long)],
        "--csv: the file name is too long",
    )
    assert not html.exists() and not out_json.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([fits.name, "sc.toml"])


def test_output_equal_to_the_scenario_is_refused(scenario, tmp_path, capsys, no_simulation):
    """run sc.toml --json sc.toml is refused and the scenario is unchanged (issue reproducer), also through
    another spelling of the path, a symbolic link and a hard link."""
    before = scenario.read_bytes()
    refused(capsys, ["run", str(scenario), "--json", str(scenario)], "--json: ")
    refused(capsys, ["run", str(scenario), "--csv", str(tmp_path / "." / "sc.toml")], "is the scenario file")
    (tmp_path / "alias.toml").symlink_to(scenario)
    refused(capsys, ["run", str(scenario), "--html", str(tmp_path / "alias.toml")], "is the scenario file")
    os.link(scenario, tmp_path / "hard.toml")
    refused(capsys, ["run", str(scenario), "--json", str(tmp_path / "hard.toml")], "is the scenario file")
    assert scenario.read_bytes() == before


def test_two_outputs_to_one_file_or_two_to_stdout_are_refused(scenario, tmp_path, capsys, no_simulation):
    out = tmp_path / "same.txt"
    refused(capsys, ["run", str(scenario), "--json", str(out), "--csv", str(out)], "--csv: ")
    refused(capsys, ["run", str(scenario), "--json", "-", "--csv", "-"], "--csv: standard output ('-')")
    refused(capsys, ["run", str(scenario), "--csv", str(tmp_path)], "is a folder")
    refused(capsys, ["run", str(scenario), "--csv", str(tmp_path / "no" / "x.csv")], "no such folder")
    refused(capsys, ["run", str(scenario), "--csv", ""], "--csv: give a file name")


def test_read_only_folder_and_file_are_refused(scenario, tmp_path, capsys, no_simulation):
    if os.geteuid() == 0:
        pytest.skip("root may write anywhere")
    locked = tmp_path / "locked"
    locked.mkdir()
    kept = tmp_path / "kept.json"
    kept.write_text("keep")
    kept.chmod(0o444)
    locked.chmod(0o555)
    try:
        refused(capsys, ["run", str(scenario), "--json", str(locked / "x.json")], "not writable")
        refused(capsys, ["run", str(scenario), "--json", str(kept)], "read-only")
    finally:
        locked.chmod(0o755)
    assert kept.read_text() == "keep"


def test_csv_to_stdout_like_json(scenario, capsys):
    """--csv - writes the CSV to stdout, and only the CSV (like --json -)."""
    assert main(["run", str(scenario), "--csv", "-"]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0].startswith("name,") and "Workshop lathes" not in out
    assert main(["plan", str(scenario), "--sizes", "50,100", "--replicates", "50", "--csv", "-"]) == 0
    assert capsys.readouterr().out.splitlines()[0].count(",") > 2


def test_a_failed_write_names_the_option_and_leaves_no_temporary_file(
    scenario, tmp_path, capsys, monkeypatch
):
    """A write failing after the run (disk full, simulated) names the option, not the temporary file, and
    removes its temporary file (common practice, no source)."""
    import errno

    real_fsync = os.fsync

    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "fsync", full)
    out = tmp_path / "r.csv"
    err = refused(capsys, ["run", str(scenario), "--csv", str(out)], "--csv: cannot write")
    assert "No space left on device" in err
    monkeypatch.setattr(os, "fsync", real_fsync)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["sc.toml"]


def _command() -> list[str]:
    return [sys.executable, "-m", "workbench.cli"]


def test_broken_pipe_exits_141_after_writing_every_file(scenario, tmp_path):
    """Standard output closed by its reader before the table is printed: the CSV is written in full, the
    exit code is 141 (128 + SIGPIPE, the shell's code for a program ended by a broken pipe) and stderr has
    one line, no traceback (issue reproducer: '| true' silently skipped the CSV)."""
    out = tmp_path / "r.csv"
    process = subprocess.Popen(
        [*_command(), "run", str(scenario), "--csv", str(out)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    process.stdout.close()  # the reader is gone before the command prints anything
    err = process.stderr.read()
    process.wait(timeout=120)
    assert process.returncode == EXIT_BROKEN_PIPE, err
    assert "Traceback" not in err and "Exception ignored" not in err
    assert (
        err.strip().splitlines()[-1]
        == "workbench: error: standard output: closed by the reading end of the pipe"
    )
    assert out.read_text().startswith("name") and out.read_text().endswith("\n")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.csv", "sc.toml"]


@pytest.mark.skipif(shutil.which("bash") is None, reason="no bash")
def test_pipe_into_true_never_silently_skips_the_csv(scenario, tmp_path):
    """``workbench run ... --csv out.csv | true``: the CSV is written, and the command either succeeds or
    fails with the broken-pipe code (issue reproducer)."""
    out = tmp_path / "r.csv"
    script = f"{' '.join(_command())} run '{scenario}' --csv '{out}' | true; echo ${{PIPESTATUS[0]}}"
    done = subprocess.run(["bash", "-c", script], capture_output=True, text=True, timeout=120)
    assert done.stdout.strip() in ("0", str(EXIT_BROKEN_PIPE)), done
    assert "Traceback" not in done.stderr
    assert out.read_text().startswith("name")
