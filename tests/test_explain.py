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
    assert "leaves the non-causal path fertiliser <- soil_quality -> wheat_yield open" in unadjusted.text()
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
