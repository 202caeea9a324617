"""Sweeps on Dask: the grid, its checks, identical tables at any worker count, resume and the CLI's exit codes.

The reference for every cell is the library's own :func:`workbench.simulate` on that cell's scenario with
the same seed (the sweep promises exactly its numbers: common random numbers).
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pytest

import workbench as wb
from workbench.analysis.sweep import MEASURES
from workbench.analysis.sweep_params import build_cells, check_vary, parse_values
from workbench.analysis.sweep_result import read_table
from workbench.cli import main
from workbench.errors import ScenarioError, UsageError

SCENARIO = """title = "Sweep test: irrigation and yield"
[question]
exposure = "x"
outcome = "y"
[variables.c]
noise_sd = 1.0
[variables.x]
noise_sd = 1.0
[variables.y]
noise_sd = 1.0
[[arrows]]
from = "c"
to = "x"
effect = 0.5
[[arrows]]
from = "c"
to = "y"
effect = 0.5
[[arrows]]
from = "x"
to = "y"
effect = 0.3
[[strategies]]
name = "none"
adjust = []
[[strategies]]
name = "with_c"
adjust = ["c"]
[study]
n = 100
replicates = 200
seed = 7
"""

VARY = {"study.n": [40, 80, 160], "arrows.c->x.effect": "0:0.9:4"}


@pytest.fixture(scope="module")
def scenario():
    return wb.loads_scenario(SCENARIO)


@pytest.fixture(scope="module")
def scenario_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("sweep") / "scenario.toml"
    path.write_text(SCENARIO)
    return str(path)


@pytest.fixture(scope="module")
def two_runs(scenario):
    one = wb.sweep(scenario, vary=VARY, replicates=100, seed=11, workers=1)
    two = wb.sweep(scenario, vary=VARY, replicates=100, seed=11, workers=2, cells_per_task=1)
    return one, two


def test_one_and_two_workers_give_identical_tables(two_runs):
    """A 3 x 4 grid on LocalClusters of 1 and 2 workers, with different task sizes: the same table."""
    one, two = two_runs
    assert one.cells == 12 and one.table["cell"].nunique() == 12
    pd.testing.assert_frame_equal(one.table, two.table)
    assert {"study.n", "arrows.c->x.effect"} <= set(one.table.columns)


def test_each_cell_equals_simulate_on_that_cell(scenario, two_runs):
    """Reference: the library's own simulate() on each cell's scenario with the sweep's seed."""
    one, _ = two_runs
    for cell in build_cells(scenario, VARY, replicates=100):
        expected = wb.simulate(cell.scenario, seed=11).table
        rows = one.table[one.table["cell"] == cell.index]
        assert set(rows["study.n"]) == {cell.values["study.n"]}
        for _, strategy in expected.iterrows():
            got = rows[rows["strategy"] == strategy["name"]].set_index("measure")
            for m in MEASURES:
                np.testing.assert_array_equal(got.loc[m, "value"], float(strategy[m]))
            np.testing.assert_array_equal(got.loc["bias", "mcse"], float(strategy["bias_mcse"]))


def test_cells_change_with_the_parameters(two_runs):
    """Fact of the trade (omitted-variable bias, Wooldridge sec. 3.3): the unadjusted bias grows with the
    confounder's effect on the exposure, and is zero when that effect is zero (within 4 MCSE)."""
    one, _ = two_runs
    rows = one.table[(one.table["strategy"] == "none") & (one.table["measure"] == "bias")]
    rows = rows[rows["study.n"] == 160].sort_values("arrows.c->x.effect")
    assert np.all(np.diff(rows["value"].to_numpy()) > 0)
    first = rows.iloc[0]
    assert abs(first["value"]) < 4 * first["mcse"]


def test_wide_and_json_and_html(two_runs):
    one, _ = two_runs
    wide = one.wide()
    assert len(wide) == 12 * 2 and "bias_mcse" in wide.columns
    assert '"rows"' in one.to_json() and "<table>" in one._repr_html_()


def test_ranges_and_lists_parse():
    """numpy.linspace semantics for start:stop:count (both ends included)."""
    assert parse_values("arrows.c->x.effect", "0:1:3") == (0.0, 0.5, 1.0)
    assert parse_values("study.n", [50, 80]) == (50, 80)
    with pytest.raises(UsageError, match="whole numbers"):
        parse_values("study.n", "50.5,80")
    with pytest.raises(UsageError, match="start:stop:count"):
        parse_values("study.n", "50:80")


def test_unknown_parameter_suggests(scenario):
    with pytest.raises(
        UsageError,
        match=r"unknown parameter 'variables\.x\.noise' \(did you mean 'variables\.x\.noise_sd'\?\)",
    ):
        check_vary(scenario, {"variables.x.noise": [1.0]})


def test_bad_cell_names_the_cell_and_key(scenario):
    with pytest.raises(ScenarioError, match=r"^cell 1 \(variables\.c\.noise_sd=-1\): variables\.c\.noise_sd"):
        build_cells(scenario, {"variables.c.noise_sd": [1.0, -1.0]})
    with pytest.raises(ScenarioError, match=r"^cell 0 \(study\.n=2\): study\.n: .*at least 5"):
        build_cells(scenario, {"study.n": [2, 100]})


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--vary", "study.nn=50,80"], "did you mean 'study.n'"),
        (["--vary", "variables.c.noise_sd=1,-2"], "cell 1"),
        (["--vary", "study.n=50", "--scheduler", "tcp://127.0.0.1:{port}"], "cannot reach the scheduler"),
        (["--vary", "study.n=50", "--out", "/no/such/folder/out.parquet"], "no such folder"),
        (["--vary", "study.n=50", "--out", "{tmp}/out.txt"], ".parquet, .csv or .json"),
    ],
)
def test_cli_bad_input_exits_2(scenario_file, tmp_path, capsys, extra, message):
    args = ["sweep", scenario_file, "--replicates", "20"]
    extra = [e.format(port=_free_port(), tmp=tmp_path) for e in extra]
    if "--out" not in extra:
        extra += ["--out", str(tmp_path / "out.csv")]
    assert main(args + extra) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err and err.count("\n") == 1
    assert not (tmp_path / "out.csv").exists()


def test_cli_parquet_and_resume(scenario_file, tmp_path, capsys):
    out = str(tmp_path / "res.parquet")
    base = ["sweep", scenario_file, "--replicates", "30", "--workers", "1", "--out", out]
    assert main(base + ["--vary", "study.n=50,80"]) == 0
    first, meta = read_table(out)
    assert meta["seed"] == 7 and first["cell"].nunique() == 2
    assert main(base + ["--vary", "study.n=50,80,120", "--resume"]) == 0
    assert "2 resumed" in capsys.readouterr().err
    both, _ = read_table(out)
    fresh = wb.sweep(wb.load_scenario(scenario_file), {"study.n": [50, 80, 120]}, replicates=30, workers=1)
    pd.testing.assert_frame_equal(both, fresh.table, check_dtype=False)
    assert main(base + ["--vary", "study.n=60", "--resume"]) == 2


def test_cli_ctrl_c_leaves_a_valid_partial_file(scenario_file, tmp_path):
    """SIGINT during a long sweep: exit 130 and a readable file holding whole cells."""
    out = tmp_path / "part.parquet"
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "workbench.cli",
            "sweep",
            scenario_file,
            "--vary",
            "arrows.c->x.effect=0:1:200",
            "--replicates",
            "2000",
            "--workers",
            "1",
            "--cells-per-task",
            "1",
            "--out",
            str(out),
        ],
        stderr=subprocess.PIPE,
        text=True,
    )
    deadline = time.monotonic() + 120
    while not out.exists() and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.2)
    assert out.exists(), "no partial output appeared"
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    rows, _ = read_table(out)
    counts = rows.groupby("cell").size()
    assert 0 < len(counts) < 200 and (counts == counts.iloc[0]).all()
    assert "--resume" in err and "Traceback" not in err


def test_html_report(scenario_file, tmp_path):
    out, html = tmp_path / "r.csv", tmp_path / "r.html"
    code = main(
        [
            "sweep",
            scenario_file,
            "--vary",
            "study.n=50,80",
            "--vary",
            "arrows.c->x.effect=0,0.5",
            "--replicates",
            "20",
            "--workers",
            "1",
            "--out",
            str(out),
            "--html",
            str(html),
        ]
    )
    assert code == 0 and "<html" in html.read_text().lower() and os.path.getsize(out) > 0


def test_dashboard_sweep_view_runs_and_draws():
    """The Sweep tab's computation (run here in the calling thread) and its figure."""
    from workbench.app.state import Workbench
    from workbench.app.sweep_tab import SweepView

    view = SweepView(workbench=Workbench(preset="common_cause"))
    view.first.value = "study.n"
    view.second.value = "arrows.soil_quality->fertiliser.effect"
    view.first_values.value, view.second_values.value = "100,200", "0:0.6:3"
    view.replicates.value = 50
    view.compute(workers=1)
    assert view.error is None and view.result.cells == 6
    view.poll()
    assert [type(o).__name__ for o in view.body.objects] == ["Bokeh", "HTML"]
    view.first_values.value = "1,2"
    view.compute(workers=1)
    assert view.result is None and view.error.startswith("cell 0 (study.n=1")
