"""Graph analysis checked against published definitions, worked examples and networkx as a reference."""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import workbench as wb
from workbench import graph
from workbench.analysis.check import check
from workbench.graph import linear


def make(arrows, exposure="x", outcome="y", latent=(), target="total", effects=None, strategies=None):
    """A small all-continuous scenario from (from, to) pairs."""
    names: list[str] = []
    for a, b in arrows:
        for n in (a, b):
            if n not in names:
                names.append(n)
    for n in (exposure, outcome):
        if n not in names:
            names.append(n)
    text = f'title = "t"\n[question]\nexposure = "{exposure}"\noutcome = "{outcome}"\ntarget = "{target}"\n'
    for n in names:
        text += f"[variables.{n}]\n" + ("observed = false\n" if n in latent else "")
    for i, (a, b) in enumerate(arrows):
        effect = 0.5 if effects is None else float(effects[i])
        text += f'[[arrows]]\nfrom = "{a}"\nto = "{b}"\neffect = {effect!r}\n'
    for name, adjust in (strategies or {}).items():
        text += f'[[strategies]]\nname = "{name}"\nadjust = {list(adjust)!r}\n'.replace("'", '"')
    return wb.loads_scenario(text)


# ---------------------------------------------------------------------------------------------------------
# Path tracing and covariance algebra
# ---------------------------------------------------------------------------------------------------------
def test_path_tracing_total_effect_and_covariance_by_hand():
    """Wright (1934), Ann. Math. Stat. 5:161-215; Bollen (1989), ch. 4. Worked by hand for
    x = e1, m = 2x + e2, y = 3m + 0.5x + e3 (unit noises): total effect 2*3 + 0.5 = 6.5;
    Var(m) = 4 + 1 = 5; Cov(x, y) = 6.5; Cov(m, y) = 3*5 + 0.5*2 = 16;
    Var(y) = 9*5 + 0.25 + 2*3*0.5*Cov(x, m) + 1 = 45 + 0.25 + 6 + 1 = 52.25."""
    sc = make([("x", "m"), ("m", "y"), ("x", "y")], effects=[2.0, 3.0, 0.5])
    names = sc.names
    i = {n: names.index(n) for n in names}
    T = linear.total_effects(sc)
    assert T[i["x"], i["y"]] == pytest.approx(6.5)
    S = linear.implied_covariance(sc)
    assert S[i["x"], i["x"]] == pytest.approx(1.0)
    assert S[i["x"], i["m"]] == pytest.approx(2.0)
    assert S[i["m"], i["m"]] == pytest.approx(5.0)
    assert S[i["x"], i["y"]] == pytest.approx(6.5)
    assert S[i["m"], i["y"]] == pytest.approx(16.0)
    assert S[i["y"], i["y"]] == pytest.approx(52.25)


def test_path_tracing_matches_sum_over_enumerated_directed_paths():
    """Wright (1934): the total effect is the sum over directed paths of the products of path coefficients;
    checked against an explicit enumeration with networkx.all_simple_paths."""
    rng = np.random.default_rng(7)
    arrows = [("a", "b"), ("a", "c"), ("b", "c"), ("b", "d"), ("c", "d"), ("a", "d")]
    effects = list(rng.normal(size=len(arrows)).round(3))
    sc = make(arrows, exposure="a", outcome="d", effects=effects)
    G = graph.build_graph(sc)
    by_path = sum(
        np.prod([G.edges[u, v]["effect"] for u, v in itertools.pairwise(p)])
        for p in nx.all_simple_paths(G, "a", "d")
    )
    T = linear.total_effects(sc)
    assert T[sc.names.index("a"), sc.names.index("d")] == pytest.approx(by_path)


def test_omitted_variable_bias_formula():
    """Wooldridge, Introductory Econometrics, sec. 3.3: the short regression's slope converges to
    beta_x + beta_c * cov(x, c) / var(x)."""
    sc = wb.load_preset("common_cause")
    S = linear.implied_covariance(sc)
    n = sc.names
    ix, ic = n.index("fertiliser"), n.index("soil_quality")
    beta_x, beta_c = 0.25, 0.5
    expected = beta_x + beta_c * S[ix, ic] / S[ix, ix]
    report = check(sc)
    unadjusted = next(s for s in report.strategies if s["adjust"] == [])
    assert unadjusted["large_sample_estimate"] == pytest.approx(expected, abs=1e-12)
    assert expected == pytest.approx(0.25 + 0.5 * 0.6 / 1.36)


# ---------------------------------------------------------------------------------------------------------
# Good and bad controls
# ---------------------------------------------------------------------------------------------------------
# Cinelli, Forney & Pearl (2022), "A Crash Course in Good and Bad Controls", Sociological Methods & Research.
# The model numbers and verdicts below are reproduced from memory; each graph is written out so the check
# does not depend on the numbering.
CONTROLS = {
    "model 1: common cause (good)": ([("z", "x"), ("z", "y"), ("x", "y")], (), True, False),
    "model 2: cause of x on the back-door path (good)": (
        [("u", "z"), ("z", "x"), ("u", "y"), ("x", "y")],
        ("u",),
        True,
        False,
    ),
    "model 3: cause of y on the back-door path (good)": (
        [("u", "x"), ("u", "z"), ("z", "y"), ("x", "y")],
        ("u",),
        True,
        False,
    ),
    "model 7: M-bias pre-exposure collider (bad)": (
        [("u1", "x"), ("u1", "z"), ("u2", "z"), ("u2", "y"), ("x", "y")],
        ("u1", "u2"),
        False,
        True,
    ),
    "model 8: outcome cause (neutral, better precision)": ([("z", "y"), ("x", "y")], (), True, True),
    "model 9: instrument (neutral, worse precision)": ([("z", "x"), ("x", "y")], (), True, True),
    "model 11: mediator (bad)": ([("x", "z"), ("z", "y")], (), False, True),
    "model 12: descendant of a mediator (bad)": ([("x", "m"), ("m", "y"), ("m", "z")], (), False, True),
    "model 14: child of x off the causal path (neutral)": ([("x", "z"), ("x", "y")], (), True, True),
    "model 16: common effect of x and y (bad)": ([("x", "z"), ("y", "z"), ("x", "y")], (), False, True),
    "model 17: descendant of the outcome (bad)": ([("x", "y"), ("y", "z")], (), False, True),
}


@pytest.mark.parametrize("case", list(CONTROLS))
def test_good_and_bad_controls(case):
    """Cinelli, Forney & Pearl (2022), verdicts from memory: adjusting for z is valid (good or neutral) or
    not (bad), and the unadjusted model is valid exactly when no back-door path is open."""
    arrows, latent, z_valid, unadjusted_valid = CONTROLS[case]
    sc = make(arrows, latent=latent)
    assert graph.judge(sc, ["z"]).valid is z_valid
    assert graph.judge(sc, []).valid is unadjusted_valid


def test_precision_notes_instrument_and_outcome_cause():
    """Cinelli, Forney & Pearl (2022), models 8 and 9 (from memory): an outcome cause improves precision,
    an instrument harms it."""
    instrument = make([("z", "x"), ("x", "y")])
    outcome_cause = make([("z", "y"), ("x", "y")])
    assert "widen the SE" in graph.judge(instrument, ["z"]).notes[0]
    assert "narrow the SE" in graph.judge(outcome_cause, ["z"]).notes[0]
    assert [r for r, _ in graph.find_roles(instrument)["z"]] == ["instrument"]
    assert [r for r, _ in graph.find_roles(outcome_cause)["z"]] == ["outcome_cause"]


def test_bias_amplification_verdicts():
    """Pearl (2010), 'On a class of bias-amplifying variables'; Cinelli et al. (2022) model 10 (from memory):
    with a latent confounder no set is valid, and in large samples adjusting for the instrument makes the
    bias larger, not smaller."""
    sc = make(
        [("z", "x"), ("u", "x"), ("u", "y"), ("x", "y")],
        latent=("u",),
        effects=[1.0, 0.7, 0.7, 0.3],
        strategies={"unadjusted": [], "adjust_z": ["z"]},
    )
    report = check(sc)
    rows = {s["name"]: s for s in report.strategies}
    assert not rows["unadjusted"]["valid"] and not rows["adjust_z"]["valid"]
    assert abs(rows["adjust_z"]["large_sample_bias"]) > abs(rows["unadjusted"]["large_sample_bias"]) > 0
    assert rows["adjust_z"]["large_sample_se_factor"] > rows["unadjusted"]["large_sample_se_factor"]
    assert report.minimal_sets == []


def test_reason_texts_name_the_paths():
    """Common practice, no source: the reasons name the path a stakeholder can follow."""
    sc = make([("r", "x"), ("r", "y"), ("x", "m"), ("m", "y"), ("x", "c"), ("y", "c")])
    assert "leaves the non-causal path x <- r -> y open" in graph.judge(sc, []).reasons
    assert "blocks part of the effect (x -> m -> y)" in graph.judge(sc, ["r", "m"]).reasons[0]
    assert any("opens x -> c <- y" in r for r in graph.judge(sc, ["r", "c"]).reasons)


# ---------------------------------------------------------------------------------------------------------
# d-separation against networkx, on random DAGs
# ---------------------------------------------------------------------------------------------------------
@st.composite
def small_dags(draw):
    k = draw(st.integers(3, 7))
    names = [f"v{i}" for i in range(k)]
    pairs = [(names[i], names[j]) for i in range(k) for j in range(i + 1, k)]
    chosen = draw(st.lists(st.sampled_from(pairs), unique=True, min_size=1, max_size=len(pairs)))
    x, y = draw(st.sampled_from(pairs))
    present = sorted({n for arrow in chosen for n in arrow} - {x, y})
    z = draw(st.lists(st.sampled_from(present), unique=True)) if present else []
    return chosen, x, y, z


@settings(max_examples=150, deadline=None)
@given(small_dags())
def test_open_paths_agree_with_networkx_d_separation(case):
    """networkx.is_d_separator as an independent reference: x and y are d-separated given z exactly when
    every path between them is blocked (Pearl 2009, Def. 1.2.3)."""
    arrows, x, y, z = case
    sc = make(arrows, exposure=x, outcome=y)
    G = graph.build_graph(sc)
    paths = graph.list_paths(sc)
    any_open = any(graph.is_path_open(G, p, z) for p in paths)
    assert any_open is not nx.is_d_separator(G, {x}, {y}, set(z))


@settings(max_examples=60, deadline=None)
@given(small_dags(), st.integers(0, 2**32 - 1))
def test_valid_sets_recover_the_truth_in_linear_models(case, seed):
    """Shpitser, VanderWeele & Robins (2010); Perkovic et al. (2018): with generic (random) effects in a
    linear-Gaussian model, the population regression coefficient equals the total effect exactly for the
    sets the adjustment criterion accepts, and differs for the sets it rejects."""
    arrows, x, y, _ = case
    rng = np.random.default_rng(seed)
    effects = list(rng.uniform(0.3, 1.0, size=len(arrows)) * rng.choice([-1, 1], size=len(arrows)))
    sc = make(arrows, exposure=x, outcome=y, effects=effects)
    sigma = linear.implied_covariance(sc)
    truth = linear.total_effects(sc)[sc.names.index(x), sc.names.index(y)]
    others = [n for n in sc.names if n not in (x, y)]
    for size in range(len(others) + 1):
        for z in itertools.combinations(others, size):
            fit = linear.population_regression(sigma, sc.names, y, [x, *z])
            unbiased = bool(abs(fit.coefficients[x] - truth) < 1e-9)
            assert graph.judge(sc, z).valid is unbiased, (z, fit.coefficients[x], truth)


@settings(max_examples=40, deadline=None)
@given(small_dags(), st.integers(0, 2**32 - 1))
def test_optimal_set_has_the_smallest_large_sample_variance(case, seed):
    """Henckel, Perkovic & Maathuis (2022), JRSSB 84(2), asymptotic optimality of O(X, Y): among valid
    adjustment sets, O has the smallest asymptotic variance of the exposure's coefficient."""
    arrows, x, y, _ = case
    rng = np.random.default_rng(seed)
    effects = list(rng.uniform(0.3, 1.0, size=len(arrows)) * rng.choice([-1, 1], size=len(arrows)))
    sc = make(arrows, exposure=x, outcome=y, effects=effects)
    optimal, _, _ = graph.optimal_set(sc)
    if optimal is None:
        return
    sigma = linear.implied_covariance(sc)
    best = linear.population_regression(sigma, sc.names, y, [x, *optimal]).se_factor
    others = [n for n in sc.names if n not in (x, y)]
    for size in range(len(others) + 1):
        for z in itertools.combinations(others, size):
            if graph.judge(sc, z).valid:
                se = linear.population_regression(sigma, sc.names, y, [x, *z]).se_factor
                assert best <= se + 1e-9


@settings(max_examples=40, deadline=None)
@given(small_dags(), st.integers(0, 2**32 - 1))
def test_single_door_sets_recover_the_direct_effect(case, seed):
    """Pearl (2009), Causality, Thm 5.3.1 (single-door criterion): in a linear model the coefficient of x
    given a set that satisfies the criterion equals the path coefficient of x -> y."""
    arrows, x, y, _ = case
    rng = np.random.default_rng(seed)
    effects = list(rng.uniform(0.3, 1.0, size=len(arrows)) * rng.choice([-1, 1], size=len(arrows)))
    sc = make(arrows, exposure=x, outcome=y, effects=effects, target="direct")
    sigma = linear.implied_covariance(sc)
    direct = dict(zip(arrows, effects, strict=True)).get((x, y), 0.0)
    others = [n for n in sc.names if n not in (x, y)]
    for size in range(len(others) + 1):
        for z in itertools.combinations(others, size):
            if graph.judge(sc, z).valid:
                fit = linear.population_regression(sigma, sc.names, y, [x, *z])
                assert fit.coefficients[x] == pytest.approx(direct, abs=1e-9)


def test_minimal_sets_are_valid_minimal_and_complete():
    """Perkovic et al. (2018): every listed set is valid, no proper subset of it is valid, and every valid
    set contains one of them (checked by brute force on a graph with two back-door routes)."""
    sc = make([("a", "x"), ("a", "b"), ("b", "y"), ("c", "x"), ("c", "y"), ("x", "y"), ("d", "y")])
    sets = graph.minimal_sets(sc)
    others = [n for n in sc.names if n not in ("x", "y")]
    valid = [
        set(z)
        for k in range(len(others) + 1)
        for z in itertools.combinations(others, k)
        if graph.judge(sc, z).valid
    ]
    for m in sets:
        assert set(m) in valid
        assert not any(v < set(m) for v in valid)
    assert all(any(set(m) <= v for m in sets) for v in valid)
    assert sorted(map(sorted, sets)) == [["a", "c"], ["b", "c"]]


@settings(max_examples=80, deadline=None)
@given(small_dags(), st.sampled_from(["total", "direct"]))
def test_minimal_set_search_agrees_with_networkx_on_random_graphs(case, target):
    """networkx.is_d_separator (through judge) as the reference for the fast moral-graph search: every set
    listed is valid and inclusion-minimal, and every valid set contains one (Perkovic et al. 2018 for the
    total effect; Pearl 2009, Thm 5.3.1, for the direct effect)."""
    arrows, x, y, _ = case
    sc = make(arrows, exposure=x, outcome=y, target=target)
    sets = graph.minimal_sets(sc)
    others = [n for n in sc.names if n not in (x, y)]
    valid = [
        set(z)
        for k in range(len(others) + 1)
        for z in itertools.combinations(others, k)
        if graph.judge(sc, z).valid
    ]
    for m in sets:
        assert set(m) in valid
        assert not any(v < set(m) for v in valid)
    assert all(any(set(m) <= v for m in sets) for v in valid)
