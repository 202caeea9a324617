"""Non-normal and heteroskedastic noise (``noise``, ``noise_df``, ``spread_with``) against published moments,
statsmodels and the HC3 literature.

Sources: Student t moments (variance df / (df - 2), kurtosis 3 + 6 / (df - 4) for df > 4; from memory);
lognormal moments (skewness (e^{s^2} + 2) sqrt(e^{s^2} - 1); from memory); MacKinnon J.G. & White H. (1985),
J Econometrics 29:305-325 and Long J.S. & Ervin L.H. (2000), The American Statistician 54:217-224 (HC3 holds
its coverage under heteroskedasticity where the classical SE does not); statsmodels ``OLS.fit(cov_type="HC3")``
(reference library). Sampling-error bounds are 4 standard errors of the sample statistic (common practice,
no source).
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import workbench as wb
from workbench.engine.generate import draw_rows
from workbench.engine.noise import SKEWNESS
from workbench.engine.replicates import run_replicates
from workbench.engine.streams import block_seed
from workbench.engine.truth import true_effect
from workbench.errors import ScenarioError

ROWS = 10**6


def _scenario(delay: str, extra: str = "") -> wb.Scenario:
    return wb.loads_scenario(
        f"""
title = "Courier routes"
[question]
exposure = "distance"
outcome = "delay"
[variables.distance]
baseline = 2.0
noise_sd = 2.0
[variables.delay]
baseline = 10.0
noise_sd = 1.5
{delay}
[[arrows]]
from = "distance"
to = "delay"
effect = 0.0
{extra}"""
    )


def _moments(x: np.ndarray):
    y = (x - x.mean()) / x.std()
    return x.mean(), x.std(), float(np.mean(y**3)), float(np.mean(y**4)), y


@pytest.mark.parametrize("df", [12.0, 30.0])
def test_heavy_tailed_noise_has_its_sd_mean_and_t_kurtosis(df):
    """Scaled t: SD noise_sd, mean 0, kurtosis 3 + 6 / (df - 4) (Student t moments, from memory); SE of the
    sample SD sd sqrt((kurtosis - 1) / (4 n)) and of the kurtosis sd(y^4) / sqrt(n) (delta method, from
    memory)."""
    sc = _scenario(f'noise = "heavy_tailed"\nnoise_df = {df}')
    noise = wb.draw(sc, ROWS, seed=5)["delay"].to_numpy() - 10.0
    mean, sd, _, kurt, y = _moments(noise)
    expected_kurt = 3 + 6 / (df - 4)
    assert abs(mean) < 4 * 1.5 / np.sqrt(ROWS)
    assert abs(sd - 1.5) < 4 * 1.5 * np.sqrt((expected_kurt - 1) / (4 * ROWS))
    assert abs(kurt - expected_kurt) < 4 * np.std(y**4) / np.sqrt(ROWS)
    assert kurt > 3.1  # heavier tails than the normal's 3


def test_skewed_noise_has_its_sd_mean_and_lognormal_skewness():
    """Standardised lognormal (s = 0.5): SD noise_sd, mean 0, skewness (e^{s^2} + 2) sqrt(e^{s^2} - 1) =
    1.7502 (lognormal moments, from memory); SE of the sample skewness sd(y^3) / sqrt(n) (delta method)."""
    assert SKEWNESS == pytest.approx((np.exp(0.25) + 2) * np.sqrt(np.exp(0.25) - 1), rel=1e-12)
    assert SKEWNESS == pytest.approx(1.7502, abs=1e-4)
    sc = _scenario('noise = "skewed"')
    noise = wb.draw(sc, ROWS, seed=6)["delay"].to_numpy() - 10.0
    mean, sd, skew, kurt, y = _moments(noise)
    assert abs(mean) < 4 * 1.5 / np.sqrt(ROWS)
    assert abs(sd - 1.5) < 4 * 1.5 * np.sqrt((kurt - 1) / (4 * ROWS))
    assert abs(skew - SKEWNESS) < 4 * np.std(y**3) / np.sqrt(ROWS)


def test_spread_with_gives_the_conditional_variance_in_bins_of_z():
    """Var(noise | z) = noise_sd^2 exp(2 c z), z = (distance - 2) / 2 (closed-form moments of a root
    variable): in each decile bin of z the mean of noise^2 equals the bin's mean of noise_sd^2 exp(2 c z)
    within 4 SEs (definition of the key; common practice, no source)."""
    c = 0.5
    sc = _scenario("spread_with = { distance = 0.5 }")
    data = wb.draw(sc, ROWS, seed=7)
    z = (data["distance"].to_numpy() - 2.0) / 2.0
    noise = data["delay"].to_numpy() - 10.0
    edges = np.quantile(z, np.linspace(0, 1, 11))
    which = np.clip(np.searchsorted(edges, z, side="right") - 1, 0, 9)
    ratios = []
    for b in range(10):
        e2 = noise[which == b] ** 2
        expected = float(np.mean(1.5**2 * np.exp(2 * c * z[which == b])))
        assert abs(e2.mean() - expected) < 4 * e2.std() / np.sqrt(len(e2)), b
        ratios.append(e2.mean())
    assert ratios[-1] > 5 * ratios[0]  # the spread grows with distance


def test_same_seed_same_numbers_whatever_the_chunk_size_with_noise():
    """The noise is a fixed function of the engine's normal streams, so chunking does not move any estimate
    (project rule of engine/streams.py; no outside source)."""
    sc = _scenario('noise = "heavy_tailed"\nspread_with = { distance = 0.3 }')
    runs = [run_replicates(sc, 60, 90, seed=3, engine="raw", chunk_size=c) for c in (7, 90)]
    np.testing.assert_array_equal(runs[0].estimate, runs[1].estimate)
    np.testing.assert_array_equal(runs[0].se, runs[1].se)


def test_noise_leaves_the_truth_and_sends_the_scenario_to_the_raw_engine():
    """Additive mean-zero noise leaves the average effect at the sum over causal paths (Wright 1934), so the
    truth stays in closed form; the scenario is not linear-Gaussian."""
    sc = wb.load_preset("heteroskedastic_noise")
    assert not sc.is_linear_gaussian
    assert wb.simulate(sc, replicates=20, seed=1).engine == "raw"
    truth = true_effect(sc)
    assert truth.value == pytest.approx(0.6, abs=1e-12) and truth.method == "closed form"


def test_hc3_holds_coverage_where_the_classical_se_under_covers():
    """MacKinnon & White 1985; Long & Ervin 2000: on the preset at its n (2,000 replicates), the classical
    SE's coverage is below 95% by more than 3 MCSE and HC3's within 3 MCSE of 95% (MCSE sqrt(0.95 x 0.05 /
    R), binomial)."""
    sc = wb.load_preset("heteroskedastic_noise")
    st = sc.study
    arrays = run_replicates(sc, st.n, st.replicates, seed=st.seed, engine="raw", alpha=0.05)
    names = [s.name for s in sc.strategies]
    covered = (arrays.ci_low <= 0.6) & (0.6 <= arrays.ci_high)
    mcse = np.sqrt(0.95 * 0.05 / st.replicates)
    classical = covered[:, names.index("adjusted_classical_se")].mean()
    hc3 = covered[:, names.index("adjusted_hc3_se")].mean()
    assert classical < 0.95 - 3 * mcse, classical
    assert abs(hc3 - 0.95) <= 3 * mcse, hc3


def test_per_replicate_hc3_se_matches_statsmodels():
    """statsmodels OLS(...).fit(cov_type="HC3") on each of a few replicates' rows: estimate and SE to 1e-8
    (the first block's stream gives the replicates' rows in order, as in test_ols_reference.py)."""
    sc = wb.load_preset("heteroskedastic_noise")
    R, n = 4, sc.study.n
    arrays = run_replicates(sc, n, R, seed=11, engine="raw", alpha=0.05)
    rows = draw_rows(sc, n, R, np.random.default_rng(block_seed(11, 0)))
    names = [s.name for s in sc.strategies]
    for r in range(R):
        df = pd.DataFrame(np.array(rows[r]), columns=sc.names)
        exog = sm.add_constant(df[["distance", "sparseness"]])
        for name, cov in (("adjusted_hc3_se", "HC3"), ("adjusted_classical_se", "nonrobust")):
            fit = sm.OLS(df["delay"], exog).fit(cov_type=cov)
            s = names.index(name)
            np.testing.assert_allclose(arrays.estimate[r, s], fit.params["distance"], rtol=1e-8)
            np.testing.assert_allclose(arrays.se[r, s], fit.bse["distance"], rtol=1e-8)


def test_round_trip_is_exact():
    """dumps_scenario then loads_scenario gives an equal scenario (project rule, no source)."""
    sc = _scenario('noise = "heavy_tailed"\nnoise_df = 7.5\nspread_with = { distance = -0.25 }')
    assert wb.loads_scenario(wb.dumps_scenario(sc)) == sc
    assert sc.variable("delay").spread_with == (("distance", -0.25),)


BAD = [
    ('noise = "cauchy"', "variables.delay.noise:"),
    ("noise_df = 4", 'variables.delay.noise_df: applies to noise = "heavy_tailed" only'),
    ('noise = "heavy_tailed"\nnoise_df = 2', "variables.delay.noise_df: must be > 2"),
    ('noise = "heavy_tailed"\nnoise_df = nan', "variables.delay.noise_df:"),
    ("spread_with = { speed = 0.5 }", "variables.delay.spread_with.speed: unknown variable"),
    ("spread_with = { delay = 0.5 }", "variables.delay.spread_with.delay: 'delay' is the variable itself"),
    ("spread_with = { distance = inf }", "variables.delay.spread_with.distance: must be a finite number"),
    ("spread_with = { distance = 4.0 }", "variables.delay.spread_with.distance: must lie in"),
]


@pytest.mark.parametrize(("keys", "message"), BAD)
def test_bad_noise_keys_give_one_located_line(keys, message):
    """Each bad input is refused with its place (project rule, no source)."""
    with pytest.raises(ScenarioError) as err:
        _scenario(keys)
    assert str(err.value).startswith(message) and "\n" not in str(err.value)


def test_graph_rules_are_located():
    """Binary variable, a covariate that descends from the variable (cycle), one that is no direct cause
    (project rules, no source); a binary variable below skewed noise is accepted and calibrated."""
    binary = '[variables.late]\ntype = "binary"\nproportion = 0.2\nnoise = "skewed"\n'
    with pytest.raises(ScenarioError, match=r"^variables\.late\.noise: applies to continuous variables only"):
        _scenario("", binary)
    tip = '[variables.tip]\n[[arrows]]\nfrom = "delay"\nto = "tip"\neffect = 1.0\n'
    with pytest.raises(
        ScenarioError, match=r"^variables\.delay\.spread_with\.tip: 'tip' descends from 'delay'"
    ):
        _scenario("spread_with = { tip = 0.5 }", tip)
    other = "[variables.weather]\n"
    with pytest.raises(
        ScenarioError, match=r"^variables\.delay\.spread_with\.weather: 'weather' must also be"
    ):
        _scenario("spread_with = { weather = 0.5 }", other)
    # a binary variable below skewed noise is calibrated from the full equations: its share of 1s is its
    # proportion (the definition of proportion, docs/scenario-format.md; binomial error of 400,000 draws)
    below = '[variables.late]\ntype = "binary"\nproportion = 0.2\n[[arrows]]\nfrom = "delay"\nto = "late"\neffect = 1.0\n'
    sc = _scenario('noise = "skewed"', below)
    assert abs(wb.draw(sc, 400_000, seed=2)["late"].mean() - 0.2) < 0.003


def test_cli_check_gives_one_located_line(tmp_path):
    """`workbench check FILE` on a bad file: one located line on stderr, no traceback (project rule)."""
    path = tmp_path / "bad.toml"
    path.write_text(
        'title = "t"\n[question]\nexposure = "a"\noutcome = "b"\n[variables.a]\n[variables.b]\n'
        'noise = "heavy_tailed"\nnoise_df = 1.5\n[[arrows]]\nfrom = "a"\nto = "b"\neffect = 1.0\n'
    )
    done = subprocess.run(
        [sys.executable, "-m", "workbench.cli", "check", str(path)], capture_output=True, text=True
    )
    assert done.returncode != 0
    lines = [line for line in done.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and "variables.b.noise_df: must be > 2" in lines[0], done.stderr
    assert "Traceback" not in done.stderr


def test_rename_and_remove_follow_spread_with():
    """Editing a scenario follows a name into spread_with (issue 13 item 2; project rule, no source)."""
    from workbench.scenario.edit import remove_variable, rename_variable

    weather = '[variables.weather]\n[[arrows]]\nfrom = "weather"\nto = "delay"\neffect = 0.0\n'
    data = wb.scenario_to_dict(_scenario("spread_with = { weather = 0.5 }", weather))
    renamed = rename_variable(data, "weather", "rain").data
    assert renamed["variables"]["delay"]["spread_with"] == {"rain": 0.5}
    assert wb.scenario_from_dict(renamed).variable("delay").spread_with == (("rain", 0.5),)
    removed = remove_variable(data, "weather")
    assert "spread_with" not in removed.data["variables"]["delay"]
    assert "no longer spreads with weather" in removed.note
    assert wb.scenario_from_dict(removed.data).variable("delay").spread_with == ()
