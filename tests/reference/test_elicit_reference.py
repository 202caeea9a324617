"""Elicited effect sizes (``standardized_effect``, ``r_squared``) against path-analysis algebra and OLS.

Sources: Wright S. (1934), Annals of Mathematical Statistics 5:161-215, and Bollen K.A. (1989), Structural
Equations with Latent Variables, ch. 2 (from memory): a standardized path coefficient is the raw one times
sd(cause) / sd(target); with one cause it equals the correlation; the R^2 of a target is b*' R b*.
statsmodels OLS is the outside reference for R^2 on simulated rows.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import workbench
from workbench.analysis.implied import implied_moments_of
from workbench.cli import main
from workbench.engine.generate import draw_rows
from workbench.errors import ScenarioError
from workbench.graph.linear import implied_covariance

HEAD = 'title = "Invented orchard"\n[question]\nexposure = "mulch"\noutcome = "fruit"\n'


def _arrow(source: str, target: str, key: str, value: float) -> str:
    return f'[[arrows]]\nfrom = "{source}"\nto = "{target}"\n{key} = {value}\n'


CONFOUNDED = (
    HEAD
    + "[variables.rain]\nnoise_sd = 2.0\n[variables.mulch]\nnoise_sd = 0.5\n[variables.fruit]\n"
    + _arrow("rain", "mulch", "effect", 0.3)
    + _arrow("rain", "fruit", "standardized_effect", 0.4)
    + _arrow("mulch", "fruit", "standardized_effect", 0.25)
)

R_SQUARED = (
    HEAD
    + "[variables.rain]\nnoise_sd = 2.0\n[variables.mulch]\nr_squared = 0.3\n"
    + "[variables.fruit]\nr_squared = 0.45\nbaseline = 3.0\n"
    + _arrow("rain", "mulch", "effect", 0.3)
    + _arrow("rain", "fruit", "effect", 0.8)
    + _arrow("mulch", "fruit", "effect", -0.5)
)

BINARY_ROOT = (
    HEAD
    + '[variables.shade]\ntype = "binary"\nproportion = 0.3\n[variables.mulch]\n[variables.fruit]\n'
    + _arrow("shade", "mulch", "standardized_effect", 0.5)
    + _arrow("shade", "fruit", "effect", 1.0)
    + _arrow("mulch", "fruit", "effect", 0.5)
)


def _sd(sigma: np.ndarray) -> np.ndarray:
    return np.sqrt(np.diag(sigma))


def test_single_standardized_arrow_is_the_implied_correlation():
    """One cause: the standardized path coefficient is the correlation (Wright 1934; Bollen 1989 ch. 2)."""
    text = (
        HEAD
        + "[variables.mulch]\nnoise_sd = 3.0\n[variables.fruit]\n"
        + _arrow("mulch", "fruit", "standardized_effect", -0.35)
    )
    sc = workbench.loads_scenario(text)
    sigma = implied_covariance(sc)
    assert sigma[0, 1] / np.sqrt(sigma[0, 0] * sigma[1, 1]) == pytest.approx(-0.35, abs=1e-12)
    assert sigma[1, 1] == pytest.approx(1.0, abs=1e-12)  # standardized arrows fix Var(target) = 1
    assert sc.arrows[0].effect == pytest.approx(-0.35 / 3.0, abs=1e-12)  # b = b* sd(Y) / sd(X)


def test_standardized_path_coefficients_with_correlated_causes():
    """b_raw * sd(cause) / sd(target) returns each given b*, and R^2 = b*' R b* (Bollen 1989 ch. 2)."""
    sc = workbench.loads_scenario(CONFOUNDED)
    sigma = implied_covariance(sc)
    sd = _sd(sigma)
    by_pair = {(a.source, a.target): a.effect for a in sc.arrows}
    assert by_pair["rain", "fruit"] * sd[0] / sd[2] == pytest.approx(0.4, abs=1e-12)
    assert by_pair["mulch", "fruit"] * sd[1] / sd[2] == pytest.approx(0.25, abs=1e-12)
    r = sigma[0, 1] / (sd[0] * sd[1])
    r2 = 0.4**2 + 0.25**2 + 2 * 0.4 * 0.25 * r
    assert implied_moments_of(sc).r_squared["fruit"] == pytest.approx(r2, abs=1e-12)
    # the population regression of fruit on both causes returns the raw effects (common practice)
    beta = np.linalg.solve(sigma[:2, :2], sigma[:2, 2])
    assert beta == pytest.approx([by_pair["rain", "fruit"], by_pair["mulch", "fruit"]], abs=1e-12)


def test_tracing_rule_on_the_documented_example():
    """Wright's tracing rule (Wright 1934; Bollen 1989 ch. 2, from memory): r(rain, fruit) = p_rf + p_mf r_rm,
    r(mulch, fruit) = p_mf + p_rf r_rm, R^2 = p_rf^2 + p_mf^2 + 2 p_rf p_mf r_rm (docs/scenario-format.md)."""
    text = (
        HEAD
        + "[variables.rain]\nnoise_sd = 20.0\n[variables.mulch]\nr_squared = 0.25\n[variables.fruit]\n"
        + _arrow("rain", "mulch", "effect", 0.01)
        + _arrow("rain", "fruit", "standardized_effect", 0.3)
        + _arrow("mulch", "fruit", "standardized_effect", 0.2)
    )
    moments = implied_moments_of(workbench.loads_scenario(text))
    corr = moments.correlation
    r_rm = corr[0, 1]
    assert r_rm == pytest.approx(0.5, abs=1e-12)  # sqrt(r_squared) with one cause
    assert corr[0, 2] == pytest.approx(0.3 + 0.2 * r_rm, abs=1e-12)
    assert corr[1, 2] == pytest.approx(0.2 + 0.3 * r_rm, abs=1e-12)
    assert moments.r_squared["fruit"] == pytest.approx(0.09 + 0.04 + 2 * 0.3 * 0.2 * r_rm, abs=1e-12)


def test_binary_root_cause_uses_bernoulli_sd():
    """A binary root's SD is sqrt(p(1-p)) (Bernoulli variance, common practice, no source)."""
    sc = workbench.loads_scenario(BINARY_ROOT)
    assert sc.arrows[0].effect == pytest.approx(0.5 / np.sqrt(0.3 * 0.7), abs=1e-12)
    assert sc.variable("mulch").noise_sd == pytest.approx(np.sqrt(1 - 0.25), abs=1e-12)
    rows = draw_rows(sc, 200_000, 1, np.random.default_rng(7))[0]
    corr = np.corrcoef(rows[:, 0], rows[:, 1])[0, 1]
    assert corr == pytest.approx(0.5, abs=0.01)  # sampling SD of r at n = 200,000 is about 0.002


def test_r_squared_sets_noise_sd_closed_form_and_ols():
    """r_squared sets noise_sd so that 1 - noise^2 / Var = R^2 (closed form from the implied covariance),
    and statsmodels OLS R^2 on 200,000 simulated rows agrees to 3 decimals."""
    sc = workbench.loads_scenario(R_SQUARED)
    sigma = implied_covariance(sc)
    for j, name, target in ((1, "mulch", 0.3), (2, "fruit", 0.45)):
        noise = sc.variable(name).noise_sd
        assert 1 - noise**2 / sigma[j, j] == pytest.approx(target, abs=1e-12)
    rows = draw_rows(sc, 200_000, 1, np.random.default_rng(20261203))[0]
    fit = sm.OLS(rows[:, 2], sm.add_constant(rows[:, :2])).fit()
    assert fit.rsquared == pytest.approx(0.45, abs=5e-3)  # sampling SD of R^2 here is about 0.0016
    fit = sm.OLS(rows[:, 1], sm.add_constant(rows[:, :1])).fit()
    assert fit.rsquared == pytest.approx(0.3, abs=5e-3)


@pytest.mark.parametrize("text", [CONFOUNDED, R_SQUARED, BINARY_ROOT])
def test_round_trip_keeps_the_keys(text):
    """Saving writes back the key the user gave, and reading it again gives the same scenario."""
    sc = workbench.loads_scenario(text)
    saved = workbench.dumps_scenario(sc)
    again = workbench.loads_scenario(saved)
    assert again == sc
    assert ("standardized_effect" in saved) == ("standardized_effect" in text)
    assert ("r_squared" in saved) == ("r_squared" in text)
    assert workbench.dumps_scenario(again) == saved


def test_implied_moments_match_the_matrix_algebra():
    """The recursion used for conversion equals (I - B)^-T D (I - B)^-1 (Bollen 1989 ch. 4) on a preset."""
    sc = workbench.load_preset("larger_graph")
    from workbench.scenario.elicit import implied_moments

    _, sigma, known = implied_moments(sc.variables, sc.arrows)
    assert all(known)
    assert sigma == pytest.approx(implied_covariance(sc), abs=1e-10)


BAD = {
    "both keys": (
        HEAD + "[variables.mulch]\n[variables.fruit]\n"
        '[[arrows]]\nfrom = "mulch"\nto = "fruit"\neffect = 0.2\nstandardized_effect = 0.2\n',
        "arrows[1]: give either 'effect' or 'standardized_effect'",
    ),
    "mixed kinds": (
        HEAD
        + "[variables.rain]\n[variables.mulch]\n[variables.fruit]\n"
        + _arrow("rain", "fruit", "effect", 0.2)
        + _arrow("mulch", "fruit", "standardized_effect", 0.2),
        "arrows[2]: all arrows into 'fruit' must use the same kind",
    ),
    "r_squared with noise_sd": (
        HEAD
        + "[variables.mulch]\n[variables.fruit]\nr_squared = 0.2\nnoise_sd = 1.0\n"
        + _arrow("mulch", "fruit", "effect", 0.2),
        "variables.fruit.r_squared: give either 'r_squared' or 'noise_sd'",
    ),
    "r_squared out of range": (
        HEAD
        + "[variables.mulch]\n[variables.fruit]\nr_squared = 1.0\n"
        + _arrow("mulch", "fruit", "effect", 0.2),
        "variables.fruit.r_squared: must lie strictly between 0 and 1",
    ),
    "r_squared without causes": (
        HEAD
        + "[variables.mulch]\nr_squared = 0.5\n[variables.fruit]\n"
        + _arrow("mulch", "fruit", "effect", 0.2),
        "variables.mulch.r_squared: 'mulch' has no causes",
    ),
    "noise_sd on standardized target": (
        HEAD
        + "[variables.mulch]\n[variables.fruit]\nnoise_sd = 2.0\n"
        + _arrow("mulch", "fruit", "standardized_effect", 0.2),
        "variables.fruit.noise_sd: not allowed when the arrows into 'fruit' are standardized",
    ),
    "R^2 of 1 or more": (
        HEAD
        + "[variables.rain]\n[variables.mulch]\n[variables.fruit]\n"
        + _arrow("rain", "fruit", "standardized_effect", 0.8)
        + _arrow("mulch", "fruit", "standardized_effect", 0.8),
        "arrows[2].standardized_effect: the standardized effects into 'fruit' explain R^2 = 1.28",
    ),
    "binary target": (
        HEAD
        + '[variables.mulch]\n[variables.fruit]\ntype = "binary"\nproportion = 0.4\n'
        + _arrow("mulch", "fruit", "standardized_effect", 0.2),
        "arrows[1].standardized_effect: 'fruit' is binary",
    ),
    "r_squared on binary": (
        HEAD
        + '[variables.mulch]\n[variables.fruit]\ntype = "binary"\nproportion = 0.4\nr_squared = 0.3\n'
        + _arrow("mulch", "fruit", "effect", 0.2),
        "variables.fruit.r_squared: applies to continuous variables only",
    ),
    "binary cause with causes": (
        HEAD
        + '[variables.rain]\n[variables.mulch]\ntype = "binary"\nproportion = 0.4\n[variables.fruit]\n'
        + _arrow("rain", "mulch", "effect", 0.5)
        + _arrow("mulch", "fruit", "standardized_effect", 0.3),
        "arrows[2].from: 'mulch' is binary with causes",
    ),
}


@pytest.mark.parametrize("case", list(BAD))
def test_bad_inputs_give_one_located_line(case, tmp_path, capsys):
    """Through the library and the CLI: one line naming the place, no traceback (project rule)."""
    text, expected = BAD[case]
    with pytest.raises(ScenarioError) as info:
        workbench.loads_scenario(text)
    assert expected in str(info.value) and "\n" not in str(info.value)
    path = tmp_path / "orchard.toml"
    path.write_text(text)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "Traceback" not in err
    assert expected in err and "orchard.toml" in err


def test_check_json_has_implied_keys(tmp_path, capsys):
    """`workbench check --json` gives implied_correlation and r_squared (closed form as above)."""
    import json

    path = tmp_path / "orchard.toml"
    path.write_text(CONFOUNDED)
    assert main(["check", str(path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    matrix = np.array(data["implied_correlation"]["matrix"])
    assert data["implied_correlation"]["variables"] == ["rain", "mulch", "fruit"]
    assert np.diag(matrix) == pytest.approx([1.0, 1.0, 1.0], abs=1e-12)
    assert data["r_squared"]["rain"] == 0.0  # a root: nothing explains it
    assert data["implied_note"] is None
    assert main(["check", "--preset", "binary_outcome", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["implied_correlation"] is None and "linear-Gaussian" in data["implied_note"]


def test_exposure_vif_matches_statsmodels_on_simulated_rows():
    """The exposure's VIF per strategy, 1 / (1 - R^2 of the exposure on the adjustment set) from the implied
    covariance, equals statsmodels' variance_inflation_factor on 200,000 simulated rows to 1% (statsmodels
    as reference library; the VIF definition: Fox & Monette 1992, JASA 87:178-183, from memory), and the
    two-exposures preset's 1 / (1 - 0.8^2) = 2.78 (its exposures correlate -0.80 by construction)."""
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    from workbench.graph.defaults import with_default_strategies

    sc = with_default_strategies(workbench.load_preset("two_exposures"))
    vif = implied_moments_of(sc).exposure_vif
    adjusted = next(s for s in sc.strategies if s.adjust)
    names = [v.name for v in sc.variables]
    rows = draw_rows(sc, 200_000, 1, np.random.default_rng(31))[0]
    columns = [names.index(sc.question.exposure)] + [names.index(z) for z in adjusted.adjust]
    design = sm.add_constant(rows[:, columns])
    assert vif[adjusted.name] == pytest.approx(variance_inflation_factor(design, 1), rel=0.01)
    assert vif[adjusted.name] == pytest.approx(1 / (1 - 0.8**2), rel=0.01)
    assert all(vif[s.name] == 1.0 for s in sc.strategies if not s.adjust)


def test_switching_an_arrow_to_standardized_keeps_the_other_arrows_standardized_sizes():
    """Editing one arrow's standardized effect (the dashboard's arrows table) switches every arrow into that
    target; the others keep their standardized size b * sd(cause) / sd(target) (Wright 1934), and the
    converted target has variance 1 (Bollen 1989, ch. 2). Switching back to raw keeps the converted effects."""
    from workbench.scenario.edit import set_arrow_size
    from workbench.scenario.elicit import standardized_effects

    sc = workbench.load_preset("common_cause")
    before = standardized_effects(sc.variables, sc.arrows)
    edited = workbench.scenario_from_dict(
        set_arrow_size(workbench.scenario_to_dict(sc), 1, standardized=0.3).data
    )
    after = standardized_effects(edited.variables, edited.arrows)
    assert after[1] == 0.3 and after[2] == pytest.approx(before[2], abs=1e-6)
    assert implied_covariance(edited)[2, 2] == pytest.approx(1.0, abs=1e-9)
    back = set_arrow_size(workbench.scenario_to_dict(edited), 2, effect=0.2).data
    raw = workbench.scenario_from_dict(back)
    assert [a.standardized for a in raw.arrows] == [None, None, None]
    assert raw.arrows[1].effect == pytest.approx(edited.arrows[1].effect, abs=1e-6)
    assert raw.variable("wheat_yield").noise_sd == pytest.approx(
        edited.variable("wheat_yield").noise_sd, abs=1e-6
    )
