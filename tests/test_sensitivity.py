"""Plumbing of the sensitivity analysis: the result's keys, the grid, errors, the CLI, the report section, the
dashboard tab and the path coefficients of the simulated latent confounder. The numbers themselves are
checked against the published formulas in tests/reference/test_sensitivity_reference.py."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

import workbench as wb
from workbench.analysis import sensitivity as sens
from workbench.errors import SimulationError, UnknownNameError, UsageError
from workbench.graph import linear


@pytest.fixture(scope="module")
def common_cause():
    return wb.load_preset("common_cause")


def test_result_has_the_interface(common_cause):
    res = wb.sensitivity(common_cause, strategy="adjust_soil")
    assert list(res.table.columns) == ["r2_exposure", "r2_outcome", "bias", "estimate"]
    assert len(res.table) == sens.DEFAULT_GRID**2
    assert 0 < res.robustness_value < 1
    assert set(res.benchmarks["covariate"]) == {"soil_quality"}
    assert res.e_value is None and res.risk_ratio is None
    d = json.loads(res.to_json())
    for key in ("robustness_value", "benchmarks", "e_value", "table", "strategy", "n", "assumption"):
        assert key in d
    assert set(d["table"][0]) == {"r2_exposure", "r2_outcome", "bias", "estimate"}
    assert "not evidence that none exists" in res.as_text()
    assert "<h3>Sensitivity to an unmeasured confounder" in res._repr_html_()


def test_default_strategy_is_the_first_valid_one(common_cause):
    assert wb.sensitivity(common_cause, grid=2).strategy == "adjust_soil"


def test_unadjusted_strategy_has_no_benchmarks(common_cause):
    res = wb.sensitivity(common_cause, strategy="unadjusted", grid=2)
    assert len(res.benchmarks) == 0 and "Benchmarks" not in res.as_text()


def test_grid_as_two_axes(common_cause):
    res = wb.sensitivity(common_cause, grid=([0.0, 0.1, 0.2], [0.05, 0.3]))
    assert len(res.table) == 6
    assert sorted(set(res.table.r2_outcome)) == [0.05, 0.3]


@pytest.mark.parametrize("grid", [1, 500, True, ([1.0], [0.1]), ([-0.1], [0.1]), ("a", "b"), 0.5])
def test_bad_grid_is_one_line(common_cause, grid):
    with pytest.raises(UsageError, match="grid"):
        wb.sensitivity(common_cause, grid=grid)


def test_errors(common_cause):
    with pytest.raises(UnknownNameError, match="adjust_soi"):
        wb.sensitivity(common_cause, strategy="adjust_soi")
    with pytest.raises(SimulationError, match="n"):
        wb.sensitivity(common_cause, n=0)
    with pytest.raises(UsageError, match="selects its covariates"):
        sc = wb.load_preset("selection_by_significance")
        name = next(s.name for s in sc.strategies if s.selection)
        wb.sensitivity(sc, strategy=name)
    with pytest.raises(SimulationError, match="linear-Gaussian"):
        wb.sensitivity(wb.load_preset("binary_outcome"), simulate=True, grid=2)


def test_binary_outcome_has_an_e_value():
    res = wb.sensitivity(wb.load_preset("binary_outcome"), grid=2)
    assert res.risk_ratio is not None and res.e_value == sens.e_value(res.risk_ratio)
    assert res.method == "large simulated data set"
    assert "E-value" in res.as_text()


def test_path_coefficients_give_the_asked_partial_r2(common_cause):
    """The latent U added for the simulation has the grid point's partial R^2 in the copy."""
    strategy = common_cause.strategy("adjust_soil")
    q = common_cause.question
    for r2_d, r2_y in [(0.1, 0.3), (0.4, 0.05), (0.0, 0.2)]:
        a, b = sens._path_coefficients(common_cause, strategy, "u", r2_d, r2_y, 1.0)
        copy = sens._with_u(common_cause, strategy, "u", a, b)
        sigma = linear.implied_covariance(copy)
        got_d = sens.partial_r2(sigma, copy.names, q.exposure, "u", ["soil_quality"])
        got_y = sens.partial_r2(sigma, copy.names, q.outcome, "u", [q.exposure, "soil_quality"])
        assert abs(got_d - r2_d) < 1e-8 and abs(got_y - r2_y) < 1e-8


def test_simulated_columns(common_cause):
    res = wb.sensitivity(common_cause, grid=2, simulate=True, replicates=100)
    for key in ("coverage", "coverage_mcse", "power", "power_mcse"):
        assert key in res.table.columns and res.table[key].notna().all()
    assert res.simulated and res.replicates == 100
    assert "Coverage of the truth" in res.as_text()


def _cli(*args):
    return subprocess.run(
        [sys.executable, "-m", "workbench.cli", "sensitivity", *args], capture_output=True, text=True
    )


def test_cli_json_and_errors(tmp_path):
    p = _cli("--preset", "common_cause", "--grid", "3", "--json", "-")
    assert p.returncode == 0
    d = json.loads(p.stdout)
    assert len(d["table"]) == 9 and "robustness_value" in d and "benchmarks" in d
    for args in (["--grid", "1"], ["--strategy", "nope"], ["--n", "0"], ["--replicates", "10"]):
        p = _cli("--preset", "common_cause", *args)
        assert p.returncode == 2 and "Traceback" not in p.stderr and len(p.stderr.strip().splitlines()) == 1
    out = tmp_path / "r.html"
    p = _cli("--preset", "common_cause", "--grid", "4", "--html", str(out))
    assert p.returncode == 0
    page = out.read_text()
    assert '<section id="sensitivity">' in page and "not evidence that none exists" in page


def test_figure_and_section(common_cause):
    from workbench.report.sensitivity_figures import sensitivity_figure, sensitivity_section, zero_line

    res = wb.sensitivity(common_cause, grid=5, simulate=True, replicates=50)
    for value in ("estimate", "coverage", "power", "bias"):
        assert sensitivity_figure(res, value=value).title.text
    with pytest.raises(ValueError):
        sensitivity_figure(res, value="nope")
    # the zero line is where the table's adjusted estimate is zero
    x = np.array([0.2, 0.4])
    y = zero_line(res.large_sample_estimate, res.se_factor, x)
    assert np.allclose(sens.confounder_bias(x, y, res.se_factor), abs(res.large_sample_estimate))
    assert "<script" in sensitivity_section(res)


def test_dashboard_tab_follows_the_scenario():
    from workbench.app.sensitivity_tab import SensitivityView
    from workbench.app.state import Workbench

    state = Workbench(preset="common_cause")
    view = SensitivityView(workbench=state)
    assert view.result is None and view.waiting
    view.active = True
    assert view.result.strategy == "adjust_soil"
    view.strategy.value = "unadjusted"
    assert view.result.strategy == "unadjusted"
    state.scenario_state.set_study(n=800)  # the sidebar's sample size is the planned n
    assert view.result.n == 800 and view.result.strategy == "unadjusted"
