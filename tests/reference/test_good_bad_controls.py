"""Good, neutral and bad controls: every numbered model of Cinelli, Forney & Pearl (2022), "A Crash Course in
Good and Bad Controls", Sociological Methods & Research, that the scenario format can express.

The graphs, model numbers and the paper's labels are reproduced from memory; each graph is written out in
full, so a check does not depend on the numbering. For each model the test asserts the paper's label for
adjusting for Z alone, the role(s) the workbench assigns to Z, and, independently of the workbench's own
algebra, the large-sample consequence in a linear-Gaussian version of the graph: the population regression
computed here from the implied covariance Sigma = (I - B)^-T (I - B)^-1 (unit noises; Bollen K.A. (1989),
Structural Equations with Latent Variables, ch. 4; Wright S. (1934), Ann. Math. Stat. 5:161-215). A good
control removes or reduces the bias, a bad one creates or enlarges it, a neutral one leaves it unchanged;
the precision direction of models 8, 9, 13 and 14 is the paper's (from memory).

Model 18 (a descendant of the outcome when the exposure has no effect) is left out: without an arrow from
the exposure to the outcome every set is trivially valid, and the paper's point there concerns testing a
null effect, which a graph alone cannot show.
"""

from __future__ import annotations

import numpy as np
import pytest

import workbench as wb
from workbench.analysis.check import check
from workbench.graph import find_roles
from workbench.graph.controls import consequence, consequences

# model: (arrows, latent variables, the paper's label for Z, the roles we assign to Z, precision direction)
MODELS = {
    1: ([("z", "x"), ("z", "y"), ("x", "y")], (), "good", ["confounder"], None),
    2: ([("u", "z"), ("z", "x"), ("u", "y"), ("x", "y")], ("u",), "good", ["back_door_link"], None),
    3: ([("u", "x"), ("u", "z"), ("z", "y"), ("x", "y")], ("u",), "good", ["back_door_link"], None),
    4: ([("z", "x"), ("z", "m"), ("x", "m"), ("m", "y")], (), "good", ["confounder"], None),
    5: (
        [("u", "x"), ("u", "z"), ("z", "m"), ("x", "m"), ("m", "y")],
        ("u",),
        "good",
        ["back_door_link"],
        None,
    ),
    6: (
        [("u", "z"), ("z", "x"), ("u", "m"), ("x", "m"), ("m", "y")],
        ("u",),
        "good",
        ["back_door_link"],
        None,
    ),
    7: (
        [("u1", "x"), ("u1", "z"), ("u2", "z"), ("u2", "y"), ("x", "y")],
        ("u1", "u2"),
        "bad",
        ["pre_exposure_collider"],
        None,
    ),
    8: ([("z", "y"), ("x", "y")], (), "neutral", ["outcome_cause"], "gain"),
    9: ([("z", "x"), ("x", "y")], (), "neutral", ["instrument"], "loss"),
    10: ([("z", "x"), ("u", "x"), ("u", "y"), ("x", "y")], ("u",), "bad", ["instrument"], None),
    11: ([("x", "z"), ("z", "y")], (), "bad", ["mediator"], None),
    12: ([("x", "m"), ("m", "y"), ("m", "z")], (), "bad", ["mediator_descendant"], None),
    13: ([("x", "m"), ("z", "m"), ("m", "y")], (), "neutral", ["outcome_cause"], "gain"),
    14: ([("x", "z"), ("x", "y")], (), "neutral", ["exposure_descendant"], "loss"),
    15: ([("x", "z"), ("u", "z"), ("u", "y"), ("x", "y")], ("u",), "bad", ["collider_on_path"], None),
    16: ([("x", "z"), ("y", "z"), ("x", "y")], (), "bad", ["common_effect"], None),
    17: ([("x", "y"), ("y", "z")], (), "bad", ["outcome_descendant"], None),
}

# effects of 0.7 on every arrow, large enough to make every bias clearly non-zero
EFFECT = 0.7


def make(arrows, latent=(), target="total"):
    """A linear-Gaussian scenario with unit noises and every effect EFFECT."""
    names: list[str] = []
    for a, b in arrows:
        for n in (a, b):
            if n not in names:
                names.append(n)
    text = f'title = "model"\n[question]\nexposure = "x"\noutcome = "y"\ntarget = "{target}"\n'
    for n in names:
        text += f"[variables.{n}]\n" + ("observed = false\n" if n in latent else "")
    for a, b in arrows:
        text += f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = {EFFECT}\n'
    return wb.loads_scenario(text)


def population_ols(arrows, adjust):
    """Independent large-sample OLS of y on x and ``adjust``: the coefficient of x and its SE factor,
    from Sigma = (I - B)^-T (I - B)^-1 (unit noises), written here without the workbench's algebra."""
    names = sorted({n for pair in arrows for n in pair})
    k = len(names)
    B = np.zeros((k, k))
    for a, b in arrows:
        B[names.index(a), names.index(b)] = EFFECT
    inv = np.linalg.inv(np.eye(k) - B)
    sigma = inv.T @ inv
    cols = [names.index(v) for v in ["x", *adjust]]
    y = names.index("y")
    sxx = sigma[np.ix_(cols, cols)]
    beta = np.linalg.solve(sxx, sigma[cols, y])
    resid = sigma[y, y] - sigma[cols, y] @ beta
    return beta[0], float(np.sqrt(resid * np.linalg.inv(sxx)[0, 0]))


def truth(arrows):
    """The total effect of x on y by path tracing (Wright 1934): the sum over directed paths of EFFECT^len."""
    import networkx as nx

    G = nx.DiGraph(arrows)
    if "x" not in G or "y" not in G:
        return 0.0
    return sum(EFFECT ** (len(p) - 1) for p in nx.all_simple_paths(G, "x", "y"))


@pytest.mark.parametrize("model", list(MODELS))
def test_label_and_roles_of_z(model):
    """Cinelli, Forney & Pearl (2022), model by model (from memory): the label of adjusting for Z alone and
    the role(s) we give Z."""
    arrows, latent, label, roles, _ = MODELS[model]
    sc = make(arrows, latent)
    assert consequence(sc, "z").label == label, model
    assert [r for r, _ in find_roles(sc)["z"]] == roles, model


@pytest.mark.parametrize("model", list(MODELS))
def test_label_matches_the_large_sample_bias(model):
    """The label agrees with the independent large-sample algebra: good reduces |bias|, bad creates or
    enlarges it, neutral leaves it unchanged (Bollen 1989 ch. 4; Wright 1934)."""
    arrows, _, label, _, _ = MODELS[model]
    t = truth(arrows)
    before = abs(population_ols(arrows, [])[0] - t)
    after = abs(population_ols(arrows, ["z"])[0] - t)
    if label == "good":
        assert after < before - 1e-6 and after == pytest.approx(0.0, abs=1e-12)
    elif label == "bad":
        assert after > before + 1e-6
    else:
        assert after == pytest.approx(before, abs=1e-12)


@pytest.mark.parametrize("model", [m for m, spec in MODELS.items() if spec[4]])
def test_neutral_controls_precision(model):
    """Models 8 and 13 gain precision, 9 and 14 lose it (Cinelli, Forney & Pearl 2022, from memory); the
    SE ratio the workbench reports is the independent large-sample ratio."""
    arrows, latent, _, _, direction = MODELS[model]
    ratio = consequence(make(arrows, latent), "z").se_ratio
    expected = population_ols(arrows, ["z"])[1] / population_ols(arrows, [])[1]
    assert ratio == pytest.approx(expected, rel=1e-9)
    assert (ratio < 1) if direction == "gain" else (ratio > 1)


def test_the_issue_examples_of_wrong_roles():
    """The graphs the old roles got wrong (common practice, no source; Cinelli et al. 2022 models 2 and 3
    from memory): a cause of X on an open back-door path is not an instrument, a cause of Y on one is not a
    mere outcome cause; adjusting for either removes the bias."""
    for model in (2, 3):
        arrows, latent, *_ = MODELS[model]
        sc = make(arrows, latent)
        roles = [r for r, _ in find_roles(sc)["z"]]
        assert "instrument" not in roles and "outcome_cause" not in roles
        assert "removes the bias" in consequence(sc, "z").why


def test_butterfly_z_is_both_confounder_and_collider():
    """The butterfly graph (Z a collider of U1 and U2 and a common cause of X and Y; from memory, Cinelli et
    al. 2022 discuss it beside model 7): Z has two roles, and adjusting for it alone blocks one path and
    opens another, so it is bad alone and good on top of a parent of Z."""
    arrows = [("u1", "z"), ("u2", "z"), ("u1", "x"), ("u2", "y"), ("z", "x"), ("z", "y"), ("x", "y")]
    sc = make(arrows)
    roles = [r for r, _ in find_roles(sc)["z"]]
    assert roles == ["confounder", "pre_exposure_collider"]
    assert consequence(sc, "z").label == "bad"
    assert consequence(sc, "z", ("u1",)).label == "good"


def test_direct_effect_roles_are_judged_against_that_target():
    """Single-door criterion (Pearl 2009, Thm 5.3.1): for the direct effect of X on Y a mediator must be
    adjusted for, so adjusting for it is good, while for the total effect it is bad."""
    arrows = [("x", "m"), ("m", "y"), ("x", "y")]
    total, direct = make(arrows), make(arrows, target="direct")
    assert consequence(total, "m").label == "bad"
    assert consequence(direct, "m").label == "good"
    assert "needed" in find_roles(direct)["m"][0][1]


def test_every_candidate_of_a_preset_is_judged_alone_and_with_the_optimal_set():
    """Common practice, no source: check() reports both consequences for every observed covariate, and the
    two_exposures preset shows heating as a good control that is not a common cause."""
    report = check(wb.load_preset("two_exposures"))
    heating = report.adjust_consequences["heating"]
    assert heating["alone"].label == "good" and heating["with_optimal"].label == "good"
    assert report.roles["heating"][0][0] == "back_door_link"
    assert set(consequences(report.scenario)) == {"heating"}


# ---------------------------------------------------------------------------------------------------------
# Valid set versus right model: the two examples of the issue, against independent numerical integration
# ---------------------------------------------------------------------------------------------------------
def _expect(f):
    """E[f(C)] for C ~ N(0, 1) by adaptive quadrature (scipy.integrate.quad)."""
    from scipy import integrate, stats

    return integrate.quad(lambda c: f(c) * stats.norm.pdf(c), -12, 12, limit=200)[0]


def test_linear_probability_model_with_a_confounder_is_misspecified():
    """C ~ N(0, 1), P(A=1 | C) = expit(a + 1.5 C), P(Y=1 | A, C) = expit(b + A + 2 C), with the intercepts
    set so that P(A=1) = 0.4 and P(Y=1) = 0.3 (these reproduce the issue's figures). The population LPM of Y
    on A and C solves the normal equations E[w w'] beta = E[w Y], w = (1, A, C), each moment an integral
    over C (scipy.integrate.quad): 0.1903; the marginal risk difference E[expit(b + 1 + 2C) - expit(b + 2C)]
    is 0.1296 (the LPM converges to a variance-weighted average of conditional differences, not to the
    marginal one; Angrist J.D., Pischke J.-S. (2009), Mostly Harmless Econometrics, sec. 3.3, from memory)."""
    from scipy import optimize, special

    ex = special.expit
    a = optimize.brentq(lambda a: _expect(lambda c: ex(a + 1.5 * c)) - 0.4, -6, 6)

    def p_y(b, c, x):
        return ex(b + x + 2 * c)

    def share_y(b):
        return _expect(lambda c: ex(a + 1.5 * c) * p_y(b, c, 1) + (1 - ex(a + 1.5 * c)) * p_y(b, c, 0))

    b = optimize.brentq(lambda b: share_y(b) - 0.3, -6, 6)
    pa = lambda c: ex(a + 1.5 * c)  # noqa: E731
    moments = np.array(
        [
            [1.0, _expect(pa), 0.0],
            [_expect(pa), _expect(pa), _expect(lambda c: c * pa(c))],
            [0.0, _expect(lambda c: c * pa(c)), 1.0],
        ]
    )
    cross = np.array(
        [
            0.3,
            _expect(lambda c: pa(c) * p_y(b, c, 1)),
            _expect(lambda c: c * (pa(c) * p_y(b, c, 1) + (1 - pa(c)) * p_y(b, c, 0))),
        ]
    )
    lpm = np.linalg.solve(moments, cross)[1]
    risk_difference = _expect(lambda c: p_y(b, c, 1) - p_y(b, c, 0))
    assert lpm == pytest.approx(0.190, abs=5e-4) and risk_difference == pytest.approx(0.130, abs=5e-4)

    row = next(c for c in check(wb.load_preset("lpm_misspecified")).checks if c.name == "lpm_adjust_wear")
    assert row.set_valid and row.model_ok is False and "misspecified" in row.model_reason
    assert abs(row.large_sample_estimate - lpm) < 3 * row.large_sample_mcse
    assert abs(row.strategy_truth - risk_difference) < 3 * row.large_sample_bias_mcse
    standardised = next(c for c in check(wb.load_preset("lpm_misspecified")).checks if c.model == "logit")
    assert standardised.model_ok is True
    assert abs(standardised.large_sample_estimate - risk_difference) < 3 * standardised.large_sample_mcse


BINARY_MEDIATOR = """title = "Binary mediator"
[question]
exposure = "x"
outcome = "y"
[variables.x]
noise_sd = 1.0
[variables.m]
type = "binary"
proportion = 0.5
[variables.y]
noise_sd = 1.0
[[arrows]]
from = "x"
to = "m"
effect = 2.0
[[arrows]]
from = "m"
to = "y"
effect = 3.0
[[strategies]]
name = "unadjusted"
adjust = []
[[strategies]]
name = "adjust_m"
adjust = ["m"]
"""


def test_ols_slope_with_a_binary_mediator_is_the_average_derivative():
    """X ~ N(0, 1), P(M=1 | X) = expit(2X) (P(M=1) = 0.5 by symmetry), Y = 3M + e. By Stein's lemma the
    population OLS slope is cov(Y, X) = 3 E[d/dx expit(2X)] = 6 E[p(1-p)] = 0.9086, the average derivative;
    the unit-shift effect E[Y(X+1)] - E[Y(X)] = 3 E[expit(2X + 2) - expit(2X)] = 0.8256 (both integrals by
    scipy.integrate.quad; Stein C. (1981), Ann. Stat. 9:1135-1151, from memory). The classical SE factor
    sqrt(E[e^2]) / sd(X) over the sandwich one sqrt(E[X^2 e^2]) / var(X) is 1.172, with
    E[e^2 | X] = 9 p(1-p) + 1 + (3p - a - bX)^2 (White 1980, from memory): the classical SE is 17% too large
    in large samples. (The issue's 22% compared with a finite-sample empirical SE; this is the limit.)"""
    from scipy import special

    p = lambda x: special.expit(2 * x)  # noqa: E731
    slope = 3 * _expect(lambda x: 2 * p(x) * (1 - p(x)))
    shift = 3 * _expect(lambda x: special.expit(2 * x + 2) - p(x))
    intercept = 3 * _expect(p)
    conditional = lambda x: 9 * p(x) * (1 - p(x)) + 1 + (3 * p(x) - intercept - slope * x) ** 2  # noqa: E731
    ratio = np.sqrt(_expect(conditional)) / np.sqrt(_expect(lambda x: x * x * conditional(x)))
    assert slope == pytest.approx(0.909, abs=5e-4) and shift == pytest.approx(0.826, abs=5e-4)

    rows = {c.name: c for c in check(wb.loads_scenario(BINARY_MEDIATOR)).checks}
    row = rows["unadjusted"]
    assert row.set_valid and row.model_ok is False
    assert abs(row.large_sample_estimate - slope) < 3 * row.large_sample_mcse
    assert abs(row.strategy_truth - shift) < 3 * row.large_sample_bias_mcse
    assert row.large_sample_se_ratio == pytest.approx(ratio, abs=0.02)
    assert any("17% too large" in line for line in row.details())
    assert not rows["adjust_m"].set_valid and rows["adjust_m"].model_ok is None


def test_check_json_carries_both_verdicts_and_the_consequences():
    """The interface of the issue (project contract, no outside source): per strategy set_valid, model_ok,
    large_sample_estimate, large_sample_bias (and _mcse where simulated); per variable roles (a list),
    adjust_alone and adjust_with_optimal with a label and why."""
    d = check(wb.load_preset("lpm_misspecified")).to_dict()
    for s in d["strategies"]:
        for key in ("valid", "set_valid", "model_ok", "large_sample_estimate", "large_sample_bias"):
            assert key in s
        assert "large_sample_bias_mcse" in s and s["valid"] == s["set_valid"]
    assert d["roles"]["machine_wear"] == ["confounder"]
    assert d["adjust_alone"]["machine_wear"]["label"] == "good"
    assert "blocks" in d["adjust_with_optimal"]["machine_wear"]["why"]


def test_every_role_has_a_colour_a_marker_and_a_legend_line():
    """Common practice, no source: every role of the classification, the exposure, the outcome and
    "other" has a style, and no two share both colour and marker (so no role relies on colour alone)."""
    from workbench.graph.roles import ROLES
    from workbench.report.style import ROLE_STYLE

    assert set(ROLES) | {"exposure", "outcome", "other"} <= set(ROLE_STYLE)
    pairs = [(colour, marker) for _, colour, marker in ROLE_STYLE.values()]
    assert len(set(pairs)) == len(pairs)
    assert all(text for text, _, _ in ROLE_STYLE.values())


def test_the_graph_legend_shows_every_role_present():
    """Common practice, no source: in the drawing of the m_bias and blocking_a_back_door presets every role
    a variable holds appears in the legend (primary roles as nodes, further ones as badges)."""
    from workbench.report.graph_drawing import graph_figure
    from workbench.report.style import ROLE_STYLE

    for name in ("m_bias", "two_exposures", "blocking_a_back_door", "lpm_misspecified"):
        sc = wb.load_preset(name)
        roles = find_roles(sc)
        labels = [item.label.value for item in graph_figure(sc, roles).legend[0].items]
        for found in roles.values():
            for role, _ in found:
                assert any(label.startswith(ROLE_STYLE[role][0]) for label in labels), (name, role)
