"""Performance measures and their Monte Carlo SEs against values worked by hand from the formulas of
Morris T.P., White I.R., Crowther M.J. (2019), Using simulation studies to evaluate statistical methods,
Statistics in Medicine 38(11):2074-2102, Table 6.

The hand computation (four replicates, estimates 0.9, 1.1, 1.3, 0.7; SEs 0.2, 0.2, 0.3, 0.3):

* mean 1.0; deviations -0.1, 0.1, 0.3, -0.3, squares summing to 0.2;
* empirical SE sqrt(0.2 / 3) = 0.2581989; its MCSE 0.2581989 / sqrt(2 x 3) = 0.1054093;
* bias MCSE sqrt(0.2 / (4 x 3)) = 0.1290994;
* squared SEs 0.04, 0.04, 0.09, 0.09: mean 0.065, model SE sqrt(0.065) = 0.2549510; their sample variance
  4 x 0.025^2 / 3 = 0.00083333; model-SE MCSE sqrt(0.00083333 / (4 x 4 x 0.065)) = 0.0283069;
* relative error of the model SE 100 (sqrt(0.065 / 0.0666667) - 1) = -1.25791 %, MCSE
  100 x 0.9874209 x sqrt(0.00083333 / (16 x 0.065^2) + 1/6) = 41.7755;
* against truth 1.0: squared errors 0.01, 0.01, 0.09, 0.09, MSE 0.05, MCSE sqrt(4 x 0.04^2 / 12) = 0.0230940;
* against truth 0.8: bias 0.2, relative bias 25 %, MCSE 100 x 0.1290994 / 0.8 = 16.13743; squared errors
  0.01, 0.09, 0.25, 0.01, MSE 0.09, MCSE sqrt(0.0384 / 12) = 0.0565685, RMSE 0.3, RMSE MCSE by the delta
  method 0.0565685 / (2 x 0.3) = 0.0942809;
* intervals estimate +/- 0.25 cover 1.0 in replicates 1 and 2 only: coverage 0.5, MCSE sqrt(0.25 / 4) = 0.25;
* p-values 0.01, 0.2, 0.04, 0.06 at alpha 0.05: power 0.5, MCSE 0.25.
"""

from __future__ import annotations

import numpy as np
import pytest

from workbench.engine.metrics import performance

EST = np.array([0.9, 1.1, 1.3, 0.7])
SE = np.array([0.2, 0.2, 0.3, 0.3])
P = np.array([0.01, 0.2, 0.04, 0.06])


def measures(truth, truth_mcse=0.0, extra_failed=False):
    est, se, p = EST, SE, P
    if extra_failed:
        est, se, p = np.append(est, np.nan), np.append(se, np.nan), np.append(p, np.nan)
    return performance(
        est[:, None],
        se[:, None],
        (est - 0.25)[:, None],
        (est + 0.25)[:, None],
        p[:, None],
        truth,
        0.05,
        truth_mcse=truth_mcse,
    )


def test_table6_measures_against_hand_worked_values():
    """Morris, White & Crowther (2019), Table 6: every estimate and MCSE, worked by hand (module docstring)."""
    m = measures(1.0)
    expected = {
        "mean": 1.0,
        "bias": 0.0,
        "bias_mcse": 0.1290994,
        "emp_se": 0.2581989,
        "emp_se_mcse": 0.1054093,
        "model_se": 0.2549510,
        "model_se_mcse": 0.0283069,
        "relative_error_model_se": -1.25791,
        "relative_error_model_se_mcse": 41.7755,
        "mse": 0.05,
        "mse_mcse": 0.0230940,
        "coverage": 0.5,
        "coverage_mcse": 0.25,
        "be_coverage": 0.5,
        "be_coverage_mcse": 0.25,
        "power": 0.5,
        "power_mcse": 0.25,
    }
    for key, value in expected.items():
        assert m[key][0] == pytest.approx(value, abs=2e-6), key
    assert m["failures"][0] == 0 and m["n_ok"][0] == 4


def test_relative_bias_and_rmse_against_hand_worked_values():
    """Morris et al. (2019) Table 6 bias and MSE; relative bias and the RMSE's delta-method MCSE (from memory)."""
    m = measures(0.8)
    assert m["bias"][0] == pytest.approx(0.2)
    assert m["relative_bias"][0] == pytest.approx(25.0)
    assert m["relative_bias_mcse"][0] == pytest.approx(16.13743, abs=1e-5)
    assert m["mse"][0] == pytest.approx(0.09)
    assert m["mse_mcse"][0] == pytest.approx(0.0565685, abs=1e-7)
    assert m["rmse"][0] == pytest.approx(0.3)
    assert m["rmse_mcse"][0] == pytest.approx(0.0942809, abs=1e-7)


def test_failed_replicates_are_excluded_and_counted():
    """Morris et al. (2019), sec. 5.3 (from memory): measures over the successful replicates; failures reported."""
    m = measures(1.0, extra_failed=True)
    assert m["failures"][0] == 1 and m["n_ok"][0] == 4
    assert m["emp_se"][0] == pytest.approx(0.2581989, abs=1e-7)
    assert m["coverage"][0] == pytest.approx(0.5)


def test_truth_mcse_is_added_in_quadrature():
    """Independent errors add in variance: sqrt(0.1290994^2 + 0.1^2) = 0.1632993 (common practice, no source)."""
    assert measures(1.0, truth_mcse=0.1)["bias_mcse"][0] == pytest.approx(0.1632993, abs=1e-7)


def test_zero_truth_gives_nan_relative_bias_and_per_strategy_truths_work():
    """Morris, White & Crowther (2019), Table 6: relative bias divides by the true value, so it is undefined
    (NaN) when the truth is 0; each strategy is scored against its own truth."""
    m = performance(
        np.column_stack([EST, EST]),
        np.column_stack([SE, SE]),
        np.zeros((4, 2)),
        np.ones((4, 2)),
        np.column_stack([P, P]),
        np.array([0.0, 0.8]),
        0.05,
    )
    assert np.isnan(m["relative_bias"][0])
    assert m["relative_bias"][1] == pytest.approx(25.0)


def test_too_few_successes_give_nan_not_negative_zero():
    """Morris et al. (2019) Table 6: SD-based measures need at least two successful replicates."""
    one = performance(
        np.array([[1.0], [np.nan]]),
        np.array([[0.1], [np.nan]]),
        np.zeros((2, 1)),
        np.ones((2, 1)) * 2,
        np.zeros((2, 1)),
        1.0,
        0.05,
    )
    none = performance(
        np.full((3, 1), np.nan),
        np.full((3, 1), np.nan),
        np.zeros((3, 1)),
        np.ones((3, 1)),
        np.zeros((3, 1)),
        1.0,
        0.05,
    )
    assert one["mean"][0] == 1.0 and one["coverage"][0] == 1.0
    for m in (one, none):
        for key in ("emp_se", "emp_se_mcse", "bias_mcse", "mse_mcse", "model_se_mcse"):
            assert np.isnan(m[key][0]), key
    assert np.isnan(none["mean"][0]) and none["failures"][0] == 3 and none["n_ok"][0] == 0
