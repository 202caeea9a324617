"""The faster parts of ``check`` on large graphs (issue 12) against outside references.

* the truth when every variable on a causal path is continuous: the sum over causal paths of the products
  of effects (Wright 1934), and the same number as the full simulated intervention;
* the large-sample batches of plain OLS strategies from cross-products: statsmodels ``OLS`` on each batch
  (estimate and classical SE) and the classical-to-HC0 SE ratio of statsmodels on all units (White 1980,
  from memory), and the per-batch fits of :func:`workbench.analysis.estimate.estimate`;
* the calibration's noise rows drawn ahead in a thread: the same numbers as drawing in line, and the
  intercepts still solve ``E[logistic(a + L)] = p`` (checked with Brent's method, Brent 1973).
"""

from __future__ import annotations

import threading

import numpy as np
import pytest

from workbench import loads_scenario
from workbench.analysis import large_sample
from workbench.engine import calibration, generate, truth

# a binary exposure and binary confounders; everything from the exposure to the outcome continuous
LINE = """
title = "Sorting belts: a new scanner"
[question]
exposure = "scanner"
outcome = "parcels"
[variables.night_shift]
type = "binary"
proportion = 0.3
[variables.old_belt]
type = "binary"
proportion = 0.45
[variables.load]
[variables.scanner]
type = "binary"
proportion = 0.4
[variables.speed]
[variables.parcels]
[[arrows]]
from = "night_shift"
to = "scanner"
effect = 0.9
[[arrows]]
from = "night_shift"
to = "parcels"
effect = -0.7
[[arrows]]
from = "old_belt"
to = "scanner"
effect = -0.6
[[arrows]]
from = "old_belt"
to = "load"
effect = 0.5
[[arrows]]
from = "load"
to = "parcels"
effect = 0.4
[[arrows]]
from = "scanner"
to = "speed"
effect = 1.5
[[arrows]]
from = "speed"
to = "parcels"
effect = 0.6
[[arrows]]
from = "scanner"
to = "parcels"
effect = 0.25
[[strategies]]
name = "unadjusted"
[[strategies]]
name = "confounders"
adjust = ["night_shift", "old_belt"]
[[strategies]]
name = "night_only"
adjust = ["night_shift"]
restrict = {old_belt = 1}
"""


def _line(**changes: str) -> str:
    text = LINE
    for old, new in changes.items():
        text = text.replace(old, new)
    return text


def test_exact_truth_is_the_path_product_sum_and_the_full_simulation():
    # Wright (1934): 0.25 + 1.5 x 0.6 = 1.15; the full 2**20-draw simulation gives the same to rounding
    sc = loads_scenario(LINE)
    q = sc.question
    assert truth.truth_draws(sc.variables, sc.arrows, q.exposure, q.outcome) == truth.EXACT_DRAWS
    t = truth.true_effect(sc)
    assert t.method == "simulated intervention" and t.draws == truth.EXACT_DRAWS
    assert t.value == pytest.approx(0.25 + 1.5 * 0.6, abs=1e-12)
    assert t.mcse < 1e-9
    full = truth.simulated_effect.__wrapped__
    keep = truth.truth_draws
    truth.truth_draws = lambda *a: truth.TRUTH_DRAWS
    try:
        value, mcse = full(sc.variables, sc.arrows, q.exposure, q.outcome, "difference")
    finally:
        truth.truth_draws = keep
    assert value == pytest.approx(t.value, abs=1e-12)
    assert mcse < 1e-9


@pytest.mark.parametrize(
    ("change", "draws"),
    [
        ({}, truth.EXACT_DRAWS),  # binary variables only off the causal paths
        ({"[variables.speed]": '[variables.speed]\ntype = "binary"\nproportion = 0.5'}, truth.TRUTH_DRAWS),
        (
            {
                "[variables.parcels]": '[variables.parcels]\ntype = "binary"\nproportion = 0.5',
                "restrict = {old_belt = 1}\n": "",  # restriction needs a continuous outcome
            },
            truth.TRUTH_DRAWS,
        ),
    ],
)
def test_full_draws_when_a_binary_variable_is_on_a_causal_path(change, draws):
    # a binary mediator or outcome makes the outcome's change depend on the draw (logistic equations are not
    # linear), so the full simulation is needed (Pearl 2009, ch. 3; common practice, no source)
    sc = loads_scenario(_line(**change))
    q = sc.question
    assert truth.truth_draws(sc.variables, sc.arrows, q.exposure, q.outcome) == draws


def test_plain_batches_match_statsmodels(monkeypatch):
    sm = pytest.importorskip("statsmodels.api")
    monkeypatch.setattr(large_sample, "LARGE_SAMPLE_BATCHES", 4)
    monkeypatch.setattr(large_sample, "LARGE_SAMPLE_BATCH_N", 3000)
    sc = loads_scenario(LINE)
    m, k = 3000, 4
    raw = generate.draw_rows(sc, m * k, 1, np.random.default_rng(11))[0].T
    plain = [s for s in sc.strategies if not s.restrict]
    got = large_sample._plain_batches(sc, raw, plain, m, k)
    names = list(sc.names)
    y = raw[names.index("parcels")]
    for s in plain:
        X = sm.add_constant(np.column_stack([raw[names.index(v)] for v in ("scanner", *s.adjust)]))
        estimates, ses, ratio = got[s.name]
        for b in range(k):
            rows = slice(b * m, (b + 1) * m)
            fit = sm.OLS(y[rows], X[rows]).fit()
            assert estimates[b] == pytest.approx(fit.params[1], rel=1e-10)
            assert ses[b] == pytest.approx(fit.bse[1], rel=1e-10)
        classical = sm.OLS(y, X).fit().bse[1]
        hc0 = sm.OLS(y, X).fit(cov_type="HC0").bse[1]
        assert ratio == pytest.approx(classical / hc0, rel=1e-10)
        assert ratio == pytest.approx(large_sample.classical_to_sandwich(X, y), rel=1e-10)


def test_cross_product_route_gives_the_per_batch_fits(monkeypatch):
    # common practice, no source: the faster route must not change a figure beyond rounding; the restricted
    # strategy goes through estimate() on each batch either way
    monkeypatch.setattr(large_sample, "LARGE_SAMPLE_BATCHES", 6)
    monkeypatch.setattr(large_sample, "LARGE_SAMPLE_BATCH_N", 1500)
    sc = loads_scenario(LINE)
    fast = large_sample.simulated_large_sample.__wrapped__(sc)
    monkeypatch.setattr(large_sample, "_plain_ols", lambda s, binary: False)
    slow = large_sample.simulated_large_sample.__wrapped__(sc)
    for name in ("unadjusted", "confounders", "night_only"):
        a, b = fast[name], slow[name]
        for field in ("estimate", "mcse", "se_factor", "emp_se_factor", "truth"):
            assert getattr(a, field) == pytest.approx(getattr(b, field), rel=1e-9, abs=1e-12)
    assert fast["unadjusted"].se_ratio is not None and fast["night_only"].se_ratio is None


def test_calibration_rows_are_the_stream_drawn_in_line():
    binary = np.array([False, True, True, False])
    got = list(calibration._calibration_rows(np.random.default_rng(5), binary, 1000))
    rng = np.random.default_rng(5)
    for j, (i, row) in enumerate(got):
        z = rng.standard_normal(1000)
        assert i == j
        assert np.array_equal(row, generate.special.ndtr(z) if binary[j] else z)


def test_calibration_rows_stop_their_thread_when_left_early():
    before = threading.active_count()
    rows = calibration._calibration_rows(np.random.default_rng(5), np.ones(12, dtype=bool), 1000)
    next(rows)
    rows.close()
    assert threading.active_count() == before


def test_intercepts_solve_the_share_equation():
    # Brent (1973) on mean(logistic(a + L)) = p over the same draws gives the intercept to 1e-12
    from scipy import optimize, special

    sc = loads_scenario(LINE)
    st = generate.graph_structure.__wrapped__(sc.variables, sc.arrows)
    names = list(sc.names)
    rng = np.random.default_rng(calibration.CALIBRATION_SEED)
    n = calibration.CALIBRATION_DRAWS
    z = rng.standard_normal((len(names), n))  # file order, one row per variable, as the calibration draws
    values = np.empty_like(z)
    for j in st.order:
        idx, eff = st.parents[j]
        linear = eff @ values[idx] if len(idx) else np.zeros(n)
        if st.binary[j]:
            p = sc.variable(names[j]).proportion
            if len(idx):
                a = optimize.brentq(
                    lambda a, s=linear, p=p: special.expit(a + s).mean() - p, -20, 20, xtol=1e-13
                )
                assert st.intercept[j] == pytest.approx(a, abs=1e-9)
            values[j] = special.ndtr(z[j]) < special.expit(st.intercept[j] + linear)
        else:
            values[j] = st.intercept[j] + linear + st.noise_sd[j] * z[j]
