"""Effect modification end to end: ``varies_with`` arrows, ``interactions`` strategies, the preset.

Each check names its source beside it: statsmodels OLS as the reference library for the interaction fit,
the average of unit-level marginal effects for the averaged effect (Wooldridge, Introductory
Econometrics, ch. 6, from memory), a hand-written numerical do() contrast for the truth, the Monte Carlo SE
of a proportion for coverage (Morris, White & Crowther 2019, Statistics in Medicine 38:2074-2102, Table 6).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

import workbench as wb
from workbench.analysis.interaction_table import interaction_rows
from workbench.cli import main
from workbench.engine.interactions import fit_interactions
from workbench.engine.replicates import choose_engine
from workbench.engine.truth import true_effect
from workbench.errors import ScenarioError, SimulationError

HEADER = """
title = "Invented: irrigation whose effect varies with soil depth"
[question]
exposure = "water"
outcome = "harvest"
[variables.depth]
baseline = 1.0
[variables.shade]
type = "binary"
proportion = 0.3
[variables.water]
baseline = 1.0
[variables.roots]
[variables.harvest]
baseline = 10.0
noise_sd = 2.0
[[arrows]]
from = "depth"
to = "water"
effect = 0.5
[[arrows]]
from = "water"
to = "roots"
effect = 0.5
[[arrows]]
from = "depth"
to = "harvest"
effect = 0.8
[[arrows]]
from = "shade"
to = "harvest"
effect = -1.0
[[arrows]]
from = "roots"
to = "harvest"
effect = 1.0
"""

WATER_ARROW = """
[[arrows]]
from = "water"
to = "harvest"
effect = 2.0
varies_with = { roots = 0.4, shade = -1.0 }
"""


def _scenario(arrow: str = WATER_ARROW, strategies: str = ""):
    return wb.loads_scenario(HEADER + arrow + strategies)


# --------------------------------------------------------------------------------------------------------
# The interaction fit against statsmodels and the average of the marginal effects
# --------------------------------------------------------------------------------------------------------
def _replicates(R=6, n=250, seed=3):
    """(R, 4, n) data: z (modifier), w (another covariate), x (binary exposure), y."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((R, n)) + 1.5
    w = rng.standard_normal((R, n))
    x = (rng.random((R, n)) < 1 / (1 + np.exp(-(z - 1.5)))).astype(float)
    y = (2.0 + 0.7 * (z - 1.5) - 0.3 * w) * x + z + 0.5 * w + rng.standard_normal((R, n))
    return np.stack([z, w, x, y], axis=1)


@pytest.mark.parametrize("interactions", [[0], [0, 1]])
def test_interaction_fit_equals_statsmodels_with_product_terms(interactions):
    """Per replicate, the batched fit equals statsmodels OLS of y ~ 1 + x + z + w + x (z - zbar) [+ x (w -
    wbar)] with explicit columns: coefficients and classical SEs to 1e-8 (statsmodels as the reference)."""
    data = _replicates()
    fit = fit_interactions(data, 2, [0, 1], interactions, 3)
    for r in range(data.shape[0]):
        z, w, x, y = data[r]
        covariates = [z, w]
        products = [x * (covariates[j] - covariates[j].mean()) for j in interactions]
        ref = sm.OLS(y, sm.add_constant(np.column_stack([x, z, w, *products]))).fit()
        assert fit.coef[r, 0] == pytest.approx(ref.params[1], abs=1e-8)
        assert fit.coef_se[r, 0] == pytest.approx(ref.bse[1], abs=1e-8)
        np.testing.assert_allclose(fit.coef[r, 1:], ref.params[4:], rtol=0, atol=1e-8)
        np.testing.assert_allclose(fit.coef_se[r, 1:], ref.bse[4:], rtol=0, atol=1e-8)
        np.testing.assert_allclose(fit.adjusted[r], ref.params[2:4], rtol=0, atol=1e-8)
        assert fit.df == ref.df_resid


def test_averaged_effect_is_the_average_of_the_unit_marginal_effects():
    """The reported effect equals the sample average of the unit-level marginal effects b_x + b_xz z_i of
    the *uncentred* model y ~ x * z + w (average marginal effect; Wooldridge, Introductory Econometrics,
    ch. 6, from memory), to 1e-8; and its SE is sqrt(se(b_x)^2 + b_xz^2 s_z^2 / n), the delta method with the
    sample mean of z as an estimate (Oehlert 1992, The American Statistician 46:27-29)."""
    data = _replicates(seed=11)
    fit = fit_interactions(data, 2, [0, 1], [0], 3)
    for r in range(data.shape[0]):
        z, w, x, y = data[r]
        ref = sm.OLS(y, sm.add_constant(np.column_stack([x, z, w, x * z]))).fit()
        marginal = ref.params[1] + ref.params[4] * z
        assert fit.averaged[r] == pytest.approx(marginal.mean(), abs=1e-8)
        centred = sm.OLS(y, sm.add_constant(np.column_stack([x, z, w, x * (z - z.mean())]))).fit()
        expected = math.sqrt(centred.bse[1] ** 2 + centred.params[4] ** 2 * z.var(ddof=1) / len(z))
        assert fit.averaged_se[r] == pytest.approx(expected, rel=1e-10)


def test_simulated_replicate_equals_statsmodels_on_the_same_rows():
    """Replicate 0 of a raw-engine run is the data set draw() gives with the same seed; the interaction
    strategy's estimate there equals statsmodels' exposure coefficient with the product centred at the
    sample mean (statsmodels as the reference)."""
    sc = wb.load_preset("varying_effect")
    result = wb.simulate(sc, n=300, replicates=1, seed=9)
    df = wb.draw(sc, 300, seed=9)
    x, z, y = df["training"].to_numpy(), df["skill"].to_numpy(), df["output"].to_numpy()
    ref = sm.OLS(y, sm.add_constant(np.column_stack([x, z, x * (z - z.mean())]))).fit()
    row = result.estimates.query("strategy == 'interaction_skill'").iloc[0]
    assert row["estimate"] == pytest.approx(ref.params[1], abs=1e-8)
    assert row["se"] == pytest.approx(math.sqrt(ref.bse[1] ** 2 + ref.params[3] ** 2 * z.var(ddof=1) / 300))


def test_estimate_on_one_data_set_equals_statsmodels():
    """workbench.estimate (one data set, as on real data) reports the same averaged effect and delta-method
    SE for an interaction strategy (statsmodels as the reference)."""
    sc = wb.load_preset("varying_effect")
    df = wb.draw(sc, 500, seed=2)
    x, z, y = df["training"].to_numpy(), df["skill"].to_numpy(), df["output"].to_numpy()
    ref = sm.OLS(y, sm.add_constant(np.column_stack([x, z, x * (z - z.mean())]))).fit()
    row = wb.estimate(sc, df).set_index("strategy").loc["interaction_skill"]
    assert row["estimate"] == pytest.approx(ref.params[1], abs=1e-8)
    assert row["se"] == pytest.approx(math.sqrt(ref.bse[1] ** 2 + ref.params[3] ** 2 * z.var(ddof=1) / 500))
    assert row["df"] == math.inf and row["failure"] is None


def test_interactions_on_a_linear_gaussian_graph_run_on_the_raw_engine():
    """The exact engine draws cross-products only; a strategy that needs the rows (interactions, HC3) sends
    a linear-Gaussian scenario to the raw engine, and forcing 'exact' is one line (project rule)."""
    text = HEADER.replace('type = "binary"\nproportion = 0.3\n', "") + WATER_ARROW.replace(
        "varies_with = { roots = 0.4, shade = -1.0 }\n", ""
    )
    for extra in ('interactions = ["depth"]\n', 'se = "hc3"\n'):
        sc = wb.loads_scenario(text + f'[[strategies]]\nname = "s"\nadjust = ["depth"]\n{extra}')
        assert sc.is_linear_gaussian and choose_engine(sc, 200) == "raw"
        with pytest.raises(SimulationError, match="engine: 'exact' cannot fit strategy 's'"):
            choose_engine(sc, 200, "exact")
        table = wb.simulate(sc, n=200, replicates=200, seed=1).table
        assert abs(table["bias"].iloc[0]) < 4 * table["bias_mcse"].iloc[0]  # depth is a valid set


# --------------------------------------------------------------------------------------------------------
# The truth of a varies_with scenario against a hand-written do() contrast
# --------------------------------------------------------------------------------------------------------
def test_truth_equals_a_numerical_do_contrast_on_a_million_rows():
    """The averaged total effect E[Y(X + 1)] - E[Y(X)] of a graph whose exposure arrow varies with a
    mediator (roots, a descendant of the exposure) and a binary root (shade) equals the same contrast
    computed by hand from the structural equations on 10^6 rows, within 3 combined Monte Carlo SEs (Pearl
    2009, Causality, ch. 3: the do-operator; numerical simulation as the reference). In closed form it is
    0.5 x 1.0 + 2.0 + 0.4 x 0.5 x (E[water] + 1) = 3.0 with E[water] = 1.5, since E[roots - E roots] =
    E[shade - 0.3] = 0."""
    sc = _scenario()
    truth = true_effect(sc)
    rng = np.random.default_rng(2026)
    N = 10**6
    depth = 1.0 + rng.standard_normal(N)
    shade = (rng.random(N) < 0.3).astype(float)
    water = 1.0 + 0.5 * depth + rng.standard_normal(N)
    e_roots, e_harvest = rng.standard_normal((2, N))
    mean_roots = 0.5 * (1.0 + 0.5 * 1.0)  # closed form: 0.5 E[water], E[water] = 1 + 0.5 E[depth]

    def harvest(w):
        roots = 0.5 * w + e_roots
        effect = 2.0 + 0.4 * (roots - mean_roots) - 1.0 * (shade - 0.3)
        return 10.0 + 0.8 * depth - 1.0 * shade + 1.0 * roots + effect * w + 2.0 * e_harvest

    contrast = harvest(water + 1.0) - harvest(water)
    value, mcse = contrast.mean(), contrast.std(ddof=1) / math.sqrt(N)
    assert truth.method == "simulated intervention" and truth.draws == 2**20
    assert abs(truth.value - value) < 3 * math.hypot(mcse, truth.mcse), (truth, value, mcse)
    assert abs(truth.value - 3.0) < 3 * truth.mcse + 1e-3  # the closed form above, from memory of the algebra


def test_modifier_mean_is_the_population_mean():
    """E[modifier] is the population mean: a continuous modifier's baseline propagated through linear
    arrows, a binary root's proportion (closed form), and from draws when the modifier itself descends
    from a modified arrow (checked against 10^6 hand-simulated rows, within 4 SE; common practice)."""
    from workbench.engine.generate import structure

    terms = structure(_scenario()).modified
    assert len(terms) == 1
    assert terms[0].means.tolist() == [pytest.approx(0.75, abs=1e-12), pytest.approx(0.3, abs=1e-12)]
    # roots now modified by depth on water -> roots, and roots modifies water -> harvest: from draws
    arrow = WATER_ARROW.replace("{ roots = 0.4, shade = -1.0 }", "{ roots = 0.4 }")
    text = HEADER.replace(
        'from = "water"\nto = "roots"\neffect = 0.5\n',
        'from = "water"\nto = "roots"\neffect = 0.5\n'
        'varies_with = { depth = 0.6 }\n[[arrows]]\nfrom = "depth"\nto = "roots"\neffect = 0.0\n',
    )
    sc = wb.loads_scenario(text + arrow)
    mean = structure(sc).modified[-1].means[0]
    # by hand: roots = (0.5 + 0.6 (depth - 1)) water + e, so E[roots] = 0.5 E[water] + 0.6 Cov(depth, water)
    assert mean == pytest.approx(0.5 * 1.5 + 0.6 * 0.5, abs=4 * 1.2 / 2**10)


def test_a_latent_modifier_is_allowed_and_averages_out():
    """A latent modifier (observed = false) is allowed; not a descendant of the exposure, it leaves the
    averaged effect at the arrow's effect: the truth is 2.0 + the mediator part within 3 MCSE (module
    algebra of the do() contrast, as above)."""
    text = HEADER.replace(
        'type = "binary"\nproportion = 0.3\n', 'type = "binary"\nproportion = 0.3\nobserved = false\n'
    )
    sc = wb.loads_scenario(text + WATER_ARROW.replace("{ roots = 0.4, shade = -1.0 }", "{ shade = -1.0 }"))
    assert sc.variable("shade").observed is False
    truth = true_effect(sc)
    assert abs(truth.value - 2.5) < 3 * truth.mcse + 1e-9  # 2.0 + 0.5 x 1.0 through roots


def test_varies_with_scenario_runs_on_the_raw_engine():
    """A modified arrow makes the graph not linear-Gaussian: auto picks the raw engine and 'exact' is
    refused with one line (project rule, no source)."""
    text = HEADER.replace('type = "binary"\nproportion = 0.3\n', "")
    sc = wb.loads_scenario(text + WATER_ARROW)
    assert all(not v.is_binary for v in sc.variables) and not sc.is_linear_gaussian
    assert choose_engine(sc, 200) == "raw"
    with pytest.raises(
        SimulationError, match="'exact' needs constant effects; varies_with on water -> harvest"
    ):
        choose_engine(sc, 200, "exact")
    plain = wb.loads_scenario(text + WATER_ARROW.replace("varies_with = { roots = 0.4, shade = -1.0 }\n", ""))
    assert plain.is_linear_gaussian and choose_engine(plain, 200) == "exact"


def test_round_trip_is_exact():
    """Writing and reading back gives an equal scenario and the same text (issue 2 section 2; no source)."""
    strategies = '[[strategies]]\nname = "unadjusted"\n[[strategies]]\nname = "inter"\n'
    strategies += 'adjust = ["depth", "shade"]\ninteractions = ["shade", "depth"]\n'
    sc = _scenario(strategies=strategies)
    again = wb.loads_scenario(wb.dumps_scenario(sc))
    assert again == sc and wb.dumps_scenario(again) == wb.dumps_scenario(sc)
    assert again.arrows[-1].varies_with == (("roots", 0.4), ("shade", -1.0))
    assert again.strategy("inter").interactions == ("shade", "depth")


# --------------------------------------------------------------------------------------------------------
# The preset: coverage of the averaged effect and the interaction term's power
# --------------------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def preset_run():
    """The preset at its n, 2,000 replicates (one run shared by the checks below)."""
    return wb.simulate(wb.load_preset("varying_effect"), replicates=2000, seed=20261203)


def test_preset_averaged_effect_covers_at_the_planned_n(preset_run):
    """The interaction model's 95% interval covers the truth within 3 MCSE of 95% (MCSE sqrt(0.95 x 0.05 /
    2000), Morris et al. 2019 Table 6), its bias is within 3 MCSE of 0, and the additive adjusted model is
    biased by more than 5 MCSE (with a binary exposure its regression weights the skill levels by the
    conditional variance of training, not by their share; Angrist 1998, Econometrica 66:249-288, from
    memory)."""
    table = preset_run.table.set_index("name")
    inter, additive = table.loc["interaction_skill"], table.loc["adjust_skill"]
    mcse = math.sqrt(0.95 * 0.05 / 2000)
    assert abs(inter["coverage"] - 0.95) < 3 * mcse, inter["coverage"]
    assert abs(inter["bias"]) < 3 * inter["bias_mcse"]
    assert additive["bias"] > 5 * additive["bias_mcse"]
    assert additive["coverage"] < 0.95 - 3 * mcse


def test_preset_interaction_term_power_is_lower_than_the_averaged_effect_power(preset_run):
    """The lesson's last part: at the planned n the averaged effect is detected almost always, the
    interaction term far less often (its power between 0.3 and 0.8); the term's estimate is unbiased
    against the arrow's coefficient and its t interval covers within 3 MCSE of 95% (Morris et al. 2019);
    the JSON output carries the same rows (project contract, no source)."""
    rows = interaction_rows(preset_run.scenario, preset_run.arrays)
    (row,) = rows
    assert row["term"] == "training x skill" and row["truth"] == 1.5
    assert 0.3 < row["power"] < 0.8
    averaged = preset_run.table.set_index("name").loc["interaction_skill"]
    assert averaged["power"] > 0.95
    assert abs(row["bias"]) < 3 * row["bias_mcse"]
    assert abs(row["coverage"] - 0.95) < 3 * math.sqrt(0.95 * 0.05 / 2000)
    assert preset_run.to_dict()["interactions"][0]["power"] == pytest.approx(row["power"])
    assert "Interaction terms" in preset_run.as_text()


def test_runs_without_interactions_have_no_interaction_table():
    """Outputs of scenarios without interactions are unchanged: no "interactions" key (the pinned outputs'
    contract; no source)."""
    result = wb.simulate(wb.load_preset("common_cause"), replicates=50, seed=1)
    assert "interactions" not in result.to_dict() and "Interaction terms" not in result.as_text()


# --------------------------------------------------------------------------------------------------------
# Bad inputs: one located line through loads_scenario and the command line
# --------------------------------------------------------------------------------------------------------
BAD_ARROWS = [
    ("{ rots = 0.4 }", "arrows[6].varies_with.rots: unknown variable 'rots' (did you mean 'roots'?)"),
    ("{ water = 0.4 }", "arrows[6].varies_with.water: 'water' is the arrow's source"),
    ("{ harvest = 0.4 }", "arrows[6].varies_with.harvest: 'harvest' is the arrow's target"),
    ("{ roots = inf }", "arrows[6].varies_with.roots: must be a finite number, got inf"),
    ("{ roots = nan }", "arrows[6].varies_with.roots: must be a finite number, got nan"),
    ('{ roots = "big" }', "arrows[6].varies_with.roots: must be a number, got a string 'big'"),
    ("{ roots = 1e9 }", "arrows[6].varies_with.roots: must lie in [-1e+06, 1e+06]"),
    ("[0.4]", "arrows[6].varies_with: must be a table, got an array"),
    ("{ water_x = 1 }", "arrows[6].varies_with.water_x: unknown variable 'water_x'"),
]


@pytest.mark.parametrize(("value", "message"), BAD_ARROWS)
def test_bad_varies_with_is_one_located_line(value, message):
    """Project rule (no outside source): a user mistake is one line naming its place."""
    arrow = WATER_ARROW.replace("{ roots = 0.4, shade = -1.0 }", value)
    with pytest.raises(ScenarioError) as info:
        _scenario(arrow)
    text = str(info.value)
    assert text.startswith(message) and "\n" not in text


def test_modifier_rules_of_the_graph():
    """A descendant of the target (a cycle) and a modifier that is not a direct cause of the target are
    refused with one located line (project rules, no source); a binary target is accepted."""
    extra = '[variables.sales]\n[[arrows]]\nfrom = "harvest"\nto = "sales"\neffect = 1.0\n'
    arrow = WATER_ARROW.replace("{ roots = 0.4, shade = -1.0 }", "{ sales = 0.4 }")
    with pytest.raises(
        ScenarioError, match=r"^arrows\[7\]\.varies_with\.sales: 'sales' descends from the target"
    ):
        wb.loads_scenario(HEADER.replace("[[arrows]]", extra + "[[arrows]]", 1) + arrow)
    with pytest.raises(
        ScenarioError, match=r"^arrows\[1\]\.varies_with\.shade: 'shade' must also be a direct cause"
    ):
        wb.loads_scenario(
            HEADER.replace(
                'to = "water"\neffect = 0.5\n', 'to = "water"\neffect = 0.5\nvaries_with = { shade = 1 }\n'
            )
        )
    binary_target = HEADER.replace(
        "[variables.roots]", '[variables.roots]\ntype = "binary"\nproportion = 0.5'
    )
    # a modified arrow into a binary variable acts on its log odds and is calibrated with the full equations:
    # the share of 1s is its proportion (docs/scenario-format.md; binomial error of 400,000 draws)
    sc = wb.loads_scenario(
        binary_target.replace(
            'to = "roots"\neffect = 0.5\n', 'to = "roots"\neffect = 0.5\nvaries_with = { depth = 1 }\n'
        )
        + '[[arrows]]\nfrom = "depth"\nto = "roots"\neffect = 0.0\n'
    )
    assert abs(wb.draw(sc, 400_000, seed=2)["roots"].mean() - 0.5) < 0.003


BAD_STRATEGIES = [
    (
        'adjust = ["depth"]\ninteractions = ["shade"]',
        "strategies[1].interactions[1]: 'shade' must also be in 'adjust'",
    ),
    (
        'adjust = ["depth"]\ninteractions = ["depth", "depth"]',
        "strategies[1].interactions[2]: 'depth' is listed twice",
    ),
    ('adjust = ["depth"]\ninteractions = [3]', "strategies[1].interactions[1]: must be a covariate name"),
    ('adjust = ["depth"]\ninteractions = "depth"', "strategies[1].interactions: must be an array"),
    (
        'adjust = ["depth"]\ninteractions = ["depth"]\nselection = "p_value"',
        "strategies[1].interactions: interactions cannot be combined with selection, restrict or match",
    ),
    (
        'adjust = ["depth"]\ninteractions = ["depth"]\nrestrict = { shade = 0 }',
        "strategies[1].interactions: interactions cannot be combined with selection, restrict or match",
    ),
    (
        'adjust = ["depth"]\ninteractions = ["depth"]\nse = "hc3"',
        "strategies[1].interactions: interactions use the classical SE only",
    ),
    ('adjust = ["depth"]\ninteraction = ["depth"]', "strategies[1].interaction: unknown key 'interaction'"),
]


@pytest.mark.parametrize(("body", "message"), BAD_STRATEGIES)
def test_bad_interactions_are_one_located_line(body, message):
    """Project rule (no outside source): a user mistake is one line naming its place."""
    with pytest.raises(ScenarioError) as info:
        _scenario(strategies=f'[[strategies]]\nname = "s"\n{body}\n')
    text = str(info.value)
    assert text.startswith(message) and "\n" not in text


def test_interactions_refused_for_a_binary_outcome_and_logit():
    """Interactions apply to OLS on a continuous outcome only (documented limit; no source)."""
    text = wb.dumps_scenario(wb.load_preset("binary_outcome"))
    base = wb.load_preset("binary_outcome")
    covariate = next(
        v.name
        for v in base.variables
        if v.name not in (base.question.exposure, base.question.outcome) and v.observed
    )
    for model in ("ols", "logit"):
        strategies = f'[[strategies]]\nname = "s"\nadjust = ["{covariate}"]\nmodel = "{model}"\ninteractions = ["{covariate}"]\n'
        head = text.split("[[strategies]]")[0]
        study = "[study]" + text.split("[study]")[1]
        with pytest.raises(
            ScenarioError, match=r"^strategies\[1\]\.interactions: interactions apply to model = \"ols\""
        ):
            wb.loads_scenario(head + strategies + study)


def test_command_line_prints_one_located_line(tmp_path, capsys):
    """The CLI prints the located message on one line and exits 2, never a traceback (project rule)."""
    path = tmp_path / "bad.toml"
    path.write_text(HEADER + WATER_ARROW.replace("roots = 0.4", "rots = 0.4"), encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "arrows[6].varies_with.rots: unknown variable 'rots'" in err
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    path.write_text(
        HEADER + WATER_ARROW + '[[strategies]]\nname = "s"\nadjust = ["depth"]\ninteractions = ["shade"]\n',
        encoding="utf-8",
    )
    assert main(["run", str(path), "--replicates", "10"]) == 2
    err = capsys.readouterr().err.strip()
    assert "strategies[1].interactions[1]: 'shade' must also be in 'adjust'" in err
    assert len(err.splitlines()) == 1


def test_preset_check_and_run_through_the_command_line(capsys):
    """The preset passes `workbench check` and a short `workbench run` (issue 13 item 7; no source)."""
    assert main(["check", "--preset", "varying_effect"]) == 0
    out = capsys.readouterr().out
    assert "interaction_skill" in out and "MISSPECIFIED" in out
    assert main(["run", "--preset", "varying_effect", "--replicates", "200", "--seed", "4"]) == 0
    assert "interaction_skill" in capsys.readouterr().out
