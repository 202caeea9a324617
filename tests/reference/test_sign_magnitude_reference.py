"""Type S error rate and exaggeration ratio against Gelman & Carlin's closed form, and joint power.

Source: Gelman A., Carlin J. (2014). Beyond power calculations: assessing type S (sign) and type M (magnitude)
errors. Perspectives on Psychological Science 9(6):641-651 (their retrodesign calculation: for an estimate
``~ N(D, s^2)`` and a two-sided test at 5%, power ``= P(|z| > 1.96)``, type S ``= Phi(-1.96 - D/s) / power``,
exaggeration ``= E(|estimate| | significant) / D``, here by numerical integration).
Joint power of two independent tests is the product of their powers (probability of independent events:
a fact of the trade, no source).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, stats

import workbench as wb
from workbench.engine.metrics import joint_power, sign_and_magnitude

Z = stats.norm.ppf(0.975)


def retrodesign(D: float, s: float) -> tuple[float, float, float]:
    """Power, type S rate and exaggeration ratio of an estimate ~ N(D, s^2) (Gelman & Carlin 2014)."""
    lam = D / s
    power = stats.norm.cdf(-Z - lam) + 1 - stats.norm.cdf(Z - lam)
    type_s = stats.norm.cdf(-Z - lam) / power
    density = stats.norm(D, s).pdf
    c = Z * s
    upper, _ = integrate.quad(lambda x: x * density(x), c, np.inf)
    lower, _ = integrate.quad(lambda x: -x * density(x), -np.inf, -c)
    return power, type_s, (upper + lower) / power / D


@pytest.mark.parametrize("lam", [0.5, 1.0, 2.0])
def test_normal_estimates_match_retrodesign(lam):
    """Draws from N(D, s^2) with known s and z-test p-values: within 3 MCSE of the closed form."""
    rng = np.random.default_rng(20140641)
    D, s, R = 0.3, 0.3 / lam, 200_000
    est = rng.normal(D, s, size=(R, 1))
    p = 2 * stats.norm.sf(np.abs(est / s))
    m = sign_and_magnitude(est, p, D, 0.05)
    power, type_s, exaggeration = retrodesign(D, s)
    assert abs(m["type_s"][0] - type_s) <= 3 * m["type_s_mcse"][0] + 1e-12
    assert abs(m["exaggeration"][0] - exaggeration) <= 3 * m["exaggeration_mcse"][0]


def test_published_example_lambda_one():
    """Gelman & Carlin's rule of thumb (from memory): at D/s = 1 power is about 0.17, type S about 1% and the
    exaggeration ratio about 2.5."""
    power, type_s, exaggeration = retrodesign(1.0, 1.0)
    assert power == pytest.approx(0.17, abs=0.005)
    assert type_s == pytest.approx(0.009, abs=0.002)
    assert exaggeration == pytest.approx(2.5, abs=0.1)


SCENARIO = """title = "Irrigation and harvest"
[question]
exposure = "irrigation"
outcome = "harvest"
also = ["sunshine"]
[variables.irrigation]
noise_sd = 1.0
[variables.sunshine]
noise_sd = 1.0
[variables.harvest]
noise_sd = 1.0
[[arrows]]
from = "irrigation"
to = "harvest"
effect = 0.07
[[arrows]]
from = "sunshine"
to = "harvest"
effect = 0.1
[[strategies]]
name = "both"
adjust = ["sunshine"]
[study]
n = 200
replicates = 20000
seed = 5
"""


@pytest.fixture(scope="module")
def run():
    return wb.simulate(wb.loads_scenario(SCENARIO), seed=5)


def test_linear_gaussian_run_matches_retrodesign(run):
    """A linear-Gaussian scenario at low power: the run's type S and exaggeration equal the closed form at
    D = the arrow and s = the run's empirical SE, within 3 MCSE (plus the closed form's own error from the
    empirical SE's MCSE, propagated numerically)."""
    row = run.table.iloc[0]
    s, s_mcse = row["emp_se"], row["emp_se_mcse"]
    _, type_s, exaggeration = retrodesign(0.07, s)
    _, _, exaggeration_hi = retrodesign(0.07, s + s_mcse)
    slack = abs(exaggeration_hi - exaggeration)
    assert abs(row["type_s"] - type_s) <= 3 * row["type_s_mcse"] + 0.002
    assert abs(row["exaggeration"] - exaggeration) <= 3 * (row["exaggeration_mcse"] + slack)


def test_joint_power_of_independent_effects_is_the_product(run):
    """Independent regressors: the two coefficients' tests are (nearly) independent, so the power to detect
    both is the product of the powers, within 3 MCSE."""
    a = run.arrays
    px = float(np.mean(a.p_value[:, 0] <= a.alpha))
    pw = float(np.mean(a.also_p_value[:, 0, 0] <= a.alpha))
    joint = joint_power(a.p_value, a.also_p_value, a.alpha)
    R = a.p_value.shape[0]
    mx, mw = np.sqrt(px * (1 - px) / R), np.sqrt(pw * (1 - pw) / R)
    mcse = np.sqrt(joint["power_all_mcse"][0] ** 2 + (pw * mx) ** 2 + (px * mw) ** 2)
    assert abs(joint["power_all"][0] - px * pw) <= 3 * mcse
