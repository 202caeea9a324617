"""Plain-language stories per strategy.

The verdicts the stories repeat are facts of the trade: adjusting for a common cause removes confounding
bias, adjusting for a mediator blocks part of a total effect, and with a latent confounder no observed set
is valid (Pearl J. (2009). Causality, 2nd ed., Def. 3.3.1; Cinelli C., Forney A., Pearl J. (2022). A Crash
Course in Good and Bad Controls. Sociological Methods & Research). The numbers quoted must be those of the
run (checked against the result's own table).
"""

from __future__ import annotations

import pytest

from workbench import load_preset
from workbench.analysis.check import check
from workbench.analysis.simulate import simulate
from workbench.formatting.numbers import with_mcse
from workbench.report.explain import ASSUMPTION_NOTE, explain


@pytest.fixture(scope="module")
def common_cause():
    sc = load_preset("common_cause")
    return check(sc), simulate(sc, replicates=400, seed=3)


def test_without_a_run_the_stories_use_the_graph_and_the_closed_form(common_cause):
    report, _ = common_cause
    unadjusted, adjusted = explain(report)
    assert not unadjusted.valid and adjusted.valid
    assert "path fertiliser <- soil_quality -> wheat_yield (left open) carries" in unadjusted.text()
    assert "(blocked by adjusting for soil_quality)" in adjusted.text()
    assert "bias +0.221" in unadjusted.text()
    assert adjusted.recommendation.startswith("Recommended")


def test_with_a_run_the_stories_quote_its_numbers(common_cause):
    report, result = common_cause
    rows = result.table.set_index("name")
    unadjusted, adjusted = explain(report, result)
    bias = with_mcse(rows.loc["unadjusted", "bias"], rows.loc["unadjusted", "bias_mcse"])
    assert f"off by {bias} on average" in unadjusted.text()
    assert f"{rows.loc['unadjusted', 'coverage']:.1%}" in unadjusted.text()
    assert f"{rows.loc['adjust_soil', 'coverage']:.1%}" in adjusted.text()
    assert "they should in 95%" in unadjusted.text()
    assert unadjusted.recommendation.startswith("Not recommended")


def test_a_mediator_story_says_it_cuts_the_effect():
    story = explain(check(load_preset("mediator")))[1]
    assert not story.valid
    assert "cuts part of the effect itself" in story.text()


def test_no_valid_set_is_said_plainly():
    stories = explain(check(load_preset("latent_confounder")))
    assert all(not s.valid for s in stories)
    assert all("no strategy here is valid" in s.recommendation for s in stories)


def test_the_less_precise_valid_strategy_names_the_better_one():
    stories = {s.name: s for s in explain(check(load_preset("larger_graph")))}
    assert stories["adjust_optimal"].recommendation.startswith("Recommended")
    assert (
        "adjust_optimal estimates the same effect more precisely"
        in stories["adjust_confounders"].recommendation
    )


def test_html_is_escaped_and_the_assumption_is_stated(common_cause):
    report, _ = common_cause
    html = explain(report)[0].html()
    assert "&lt;-" in html and "<-" not in html
    assert "assumption" in ASSUMPTION_NOTE


def test_a_conditional_odds_ratio_is_not_recommended_for_a_marginal_question():
    """Non-collapsibility: with no confounding, the adjusted (conditional) odds ratio still differs from
    the marginal one (Greenland S., Robins J.M., Pearl J. (1999). Confounding and collapsibility in causal
    inference. Statistical Science 14(1):29-46), so the valid set does not rescue the wrong estimand."""
    sc = load_preset("binary_outcome")
    stories = {s.name: s for s in explain(check(sc), simulate(sc, replicates=500, seed=5))}
    conditional = stories["logit_adjust_fragility"]
    assert conditional.valid
    assert conditional.recommendation.startswith("Not recommended for this question")
    assert "non-collapsibility" in conditional.text()
    assert stories["standardized_adjust_fragility"].recommendation.startswith("Recommended")


def test_a_set_chosen_by_significance_is_judged_by_how_often_it_was_valid():
    """Selecting confounders by their p-value drops a real confounder in many small studies, so the chosen
    set is often invalid and coverage falls (Mickey R.M., Greenland S. (1989). The impact of confounder
    selection criteria on effect estimation. American Journal of Epidemiology 129(1):125-137; Maldonado G.,
    Greenland S. (1993). Simulation study of confounder-selection strategies. American Journal of
    Epidemiology 138(11):923-936). The share quoted must be the run's own."""
    sc = load_preset("selection_by_significance")
    result = simulate(sc, replicates=400, seed=11)
    rows = result.table.set_index("name")
    before = {s.name: s for s in explain(check(sc))}
    assert before["select_by_p_value"].recommendation.startswith("Depends on the data")
    stories = {s.name: s for s in explain(check(sc), result)}
    share = rows.loc["select_by_p_value", "selected_valid_share"]
    assert share < 0.95
    story = stories["select_by_p_value"]
    assert f"in {share:.0%} of the simulated studies the chosen set was valid" in story.text()
    assert story.recommendation.startswith("Not recommended")
    assert story.valid and story.usable is False  # drawn as a warning, not as a valid strategy
    assert before["select_by_p_value"].usable is None
    assert not stories["adjust_complexity"].recommendation.startswith("Not recommended")


def test_a_restricted_analysis_says_which_units_it_keeps():
    """Restricting to one level of a confounder removes its confounding, like adjusting for it (Rothman
    K.J., Greenland S., Lash T.L. (2008). Modern Epidemiology, 3rd ed., ch. 15); the story names the
    restriction and quotes the run's mean number of units kept."""
    from workbench.app.state import ScenarioState

    state = ScenarioState(preset="binary_exposure")
    assert state.set_strategy("unadjusted", restrict="night_shift = 0")
    sc = state.scenario
    result = simulate(sc, replicates=300, seed=2)
    kept = result.table.set_index("name").loc["unadjusted", "mean_retained_n"]
    story = explain(check(sc), result)[0]
    assert story.valid
    assert "only units with night_shift = 0" in story.title
    assert f"On average {kept:.0f} of the {sc.study.n:,} units were kept." in story.text()


def test_paths_closed_at_a_collider_and_opened_by_adjusting_for_it():
    """d-separation (Pearl 2009, Def. 1.2.3): a path with a collider is closed unless the collider (or a
    consequence of it) is adjusted for; the stories say which, instead of calling it blocked."""
    unadjusted, adjusted = explain(check(load_preset("common_effect")))
    assert "padding -> complaints <- breakage (closed at the collider complaints)" in unadjusted.text()
    assert "It blocks" not in unadjusted.text()
    assert "(opened by adjusting for the collider complaints)" in adjusted.text()


def test_a_comparison_names_both_strategies():
    """Common practice, no source: "X's SE is R% larger than Y's", with R the ratio of the large-sample SE
    factors of the two strategies (closed form, Henckel et al. 2022 for which is smaller)."""
    report = check(load_preset("larger_graph"))
    stories = {s.name: s for s in explain(report)}
    se = {c.name: c.large_sample_se_factor for c in report.checks}
    share = 100 * (se["adjust_confounders"] / se["adjust_optimal"] - 1)
    assert (
        f"adjust_confounders's standard error is {share:.0f}% larger than adjust_optimal's"
        in stories["adjust_confounders"].recommendation
    )


def test_estimates_of_the_wrong_sign_are_said_and_counted():
    """Gelman & Carlin (2014), type S errors: a strategy whose estimates point the wrong way is said so,
    and the share of studies with a significant estimate of the wrong sign is counted from the run's own
    replicates."""
    import numpy as np

    sc = load_preset("common_effect")  # adjusting for the collider turns -0.2 into about -0.28; flip it
    sc = wb_with_effect(sc, ("padding", "breakage"), 0.05)
    report, result = check(sc), simulate(sc, replicates=300, seed=5)
    story = {s.name: s for s in explain(report, result)}["adjust_complaints"]
    row = result.table.set_index("name").loc["adjust_complaints"]
    assert row["mean"] < 0 < row["truth"]
    assert "had the wrong sign on average" in story.text()
    j = list(result.arrays.strategies).index("adjust_complaints")
    est, p = result.arrays.estimate[:, j], result.arrays.p_value[:, j]
    wrong = float(np.mean((p < result.alpha) & (est < 0)))
    assert f"of the wrong sign in {wrong:.0%}" in story.text()


def wb_with_effect(sc, arrow, effect):
    """The scenario with one arrow's effect changed."""
    arrows = tuple(
        a if (a.source, a.target) != arrow else type(a)(a.source, a.target, effect) for a in sc.arrows
    )
    return sc.replace(arrows=arrows)


def test_a_valid_set_with_a_misspecified_model_is_not_recommended():
    """A linear probability model with a continuous confounder is misspecified for the marginal risk
    difference (the LPM converges to a variance-weighted average of conditional differences; Angrist &
    Pischke 2009, sec. 3.3, from memory), while the standardised logistic model estimates it."""
    stories = {s.name: s for s in explain(check(load_preset("lpm_misspecified")))}
    lpm = stories["lpm_adjust_wear"]
    assert lpm.valid and "misspecified" in lpm.text()
    assert lpm.recommendation.startswith("Not recommended")
    assert stories["standardised_adjust_wear"].recommendation.startswith("Recommended")
