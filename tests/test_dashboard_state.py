"""The dashboard's state classes, tested directly (no browser, no Panel).

Common practice, no source: these check the behaviour the dashboard promises (a bad edit never loses the
last valid scenario, uploads are limited and parsed only, results are cached per scenario and settings);
the numbers they compare come from the library's own closed form (Wright 1934 path rules via
:func:`workbench.analysis.check.check`).
"""

from __future__ import annotations

import time

import pytest

from workbench import load_preset
from workbench.app.dataset import SampleState
from workbench.app.runs import PlanJob, SimulationJob
from workbench.app.state import MAX_UPLOAD_BYTES, ScenarioState, Workbench
from workbench.scenario.presets import preset_text
from workbench.scenario.write import dumps_scenario


@pytest.fixture
def state():
    return ScenarioState(preset="common_cause")


def test_starts_on_the_preset_with_its_report_and_text(state):
    assert state.scenario == load_preset("common_cause")
    assert state.text == dumps_scenario(state.scenario)
    assert state.report is not None and state.report.truth == pytest.approx(0.25)
    assert state.error == ""


def test_choosing_a_preset_loads_it(state):
    state.preset = "mediator"
    assert state.scenario == load_preset("mediator")


def test_preset_loading_is_by_name_only(state):
    before = state.scenario
    assert not state.load_preset("../pyproject")
    assert state.error_section == "preset" and "not a preset name" in state.error
    assert state.scenario is before


def test_a_bad_arrow_edit_keeps_the_last_valid_scenario(state):
    before = state.scenario
    assert not state.set_arrow(0, effect="lots")
    assert state.scenario is before
    assert state.error_section == "arrows"
    assert state.error.startswith("arrows[1].effect:")


def test_an_arrow_edit_changes_the_truth(state):
    assert state.set_arrow(2, effect=0.5)
    assert state.scenario.arrows[2].effect == 0.5
    assert state.report.truth == pytest.approx(0.5)
    assert state.error == ""
    assert "effect = 0.5" in state.text


def test_a_cycle_is_refused(state):
    assert not state.add_arrow("wheat_yield", "soil_quality")
    assert "cycle" in state.error
    assert len(state.scenario.arrows) == 3


def test_broken_text_stays_in_the_editor(state):
    before = state.scenario
    typed = state.text.replace("effect = 0.6", "effect = ")
    assert not state.apply_text(typed)
    assert state.text == typed
    assert state.scenario is before
    assert state.error_section == "toml" and "TOML syntax error" in state.error


def test_valid_text_is_applied_and_kept_as_typed(state):
    typed = "# my notes\n" + state.text.replace("effect = 0.25", "effect = 0.4")
    assert state.apply_text(typed)
    assert state.report.truth == pytest.approx(0.4)
    assert state.text == typed


def test_text_is_never_read_as_a_path(state):
    assert not state.apply_text("/etc/hostname")
    assert state.error.startswith("line 1")


def test_uploads_are_limited_and_parsed(state):
    before = state.scenario
    assert not state.upload(b"x" * (MAX_UPLOAD_BYTES + 1), "big.toml")
    assert "over the limit" in state.error
    assert not state.upload(b"title = 'x'", "scenario.py")
    assert "only .toml" in state.error
    assert not state.upload(b"\xff\xfe", "latin.toml")
    assert "UTF-8" in state.error
    assert not state.upload(b"title = \n", "broken.toml")
    assert state.error.startswith("upload broken.toml:") and state.error_section == "upload"
    assert state.scenario is before
    assert state.upload(preset_text("mediator").encode(), "mine.toml")
    assert state.scenario == load_preset("mediator")


def test_renaming_a_variable_follows_every_reference(state):
    assert state.set_variable("soil_quality", "name", "soil")
    sc = state.scenario
    assert "soil" in sc.names and "soil_quality" not in sc.names
    assert ("soil", "fertiliser") in [(a.source, a.target) for a in sc.arrows]
    assert sc.strategy("adjust_soil").adjust == ("soil",)
    assert state.set_variable("fertiliser", "name", "dose")
    assert state.scenario.question.exposure == "dose"


def test_a_bad_name_is_refused(state):
    assert not state.set_variable("soil_quality", "name", "9lives")
    assert state.error_section == "variables" and "letter" in state.error


def test_removing_a_variable_removes_its_arrows_and_prunes_strategies(state):
    assert state.remove_variable("soil_quality")
    assert state.scenario.names == ["fertiliser", "wheat_yield"]
    assert state.scenario.strategy("adjust_soil").adjust == ()
    assert "removed soil_quality" in state.note
    assert not state.remove_variable("fertiliser")
    assert "exposure" in state.error


def test_making_a_variable_latent_prunes_strategies(state):
    assert state.set_variable("soil_quality", "observed", False)
    assert state.scenario.latent_names == ["soil_quality"]
    assert state.scenario.strategy("adjust_soil").adjust == ()
    assert state.report.minimal_sets == []


def test_type_change_and_proportion(state):
    assert state.set_variable("soil_quality", "type", "binary")
    assert state.scenario.variable("soil_quality").proportion == 0.5
    assert not state.set_variable("soil_quality", "proportion", 1.5)
    assert "between 0 and 1" in state.error
    assert state.set_variable("soil_quality", "proportion", 0.3)
    assert state.scenario.variable("soil_quality").proportion == 0.3
    assert not state.set_variable("soil_quality", "noise_sd", 2.0)


def test_question_change_prunes_the_new_exposure_from_strategies(state):
    assert state.set_question(exposure="soil_quality", outcome="wheat_yield")
    assert state.scenario.question.exposure == "soil_quality"
    assert state.scenario.strategy("adjust_soil").adjust == ()
    assert not state.set_question(outcome="soil_quality")
    assert state.error_section == "question"


def test_strategies_edit_and_verdicts(state):
    assert state.add_strategy("both", adjust=["soil_quality"])
    assert state.set_strategy("both", adjust=[])
    rows = {r["name"]: r for r in state.strategy_rows()}
    assert rows["both"]["valid"] is False and rows["adjust_soil"]["valid"] is True
    assert rows["both"]["reasons"]
    checked = {c.name: c for c in state.report.checks}
    assert rows["both"]["reasons"] == list(checked["both"].reasons)  # the check report's own words
    assert state.remove_strategy("both")
    assert state.remove_strategy("unadjusted")
    assert not state.remove_strategy("adjust_soil")
    assert "at least one" in state.error


def test_suggested_sets_are_added_once(state):
    assert state.remove_strategy("adjust_soil")
    assert state.add_suggested_strategies()
    added = [s for s in state.scenario.strategies if s.name not in ("unadjusted",)]
    assert [(s.name, s.adjust) for s in added] == [("minimal_1", ("soil_quality",))]
    assert state.add_suggested_strategies()
    assert len(state.scenario.strategies) == 2
    assert "already listed" in state.note


def test_selected_strategy_gives_open_and_blocked_paths(state):
    state.selected_strategy = "unadjusted"
    verdict = state.verdict()
    assert not verdict.valid
    assert "fertiliser <- soil_quality -> wheat_yield" in [p.text for p in verdict.open_paths]
    state.selected_strategy = "adjust_soil"
    assert [p.text for p in state.verdict().blocked_paths] == ["fertiliser <- soil_quality -> wheat_yield"]


def test_study_settings_are_validated(state):
    assert state.set_study(n=300, replicates=500, seed=7)
    assert (state.scenario.study.n, state.scenario.study.replicates, state.scenario.study.seed) == (
        300,
        500,
        7,
    )
    assert not state.set_study(alpha=0.9)
    assert state.error_section == "study" and state.scenario.study.alpha == 0.05


def test_simulation_job_runs_and_caches():
    sc = load_preset("common_cause").replace(
        study=load_preset("common_cause").study.__class__(replicates=300)
    )
    job = SimulationJob()
    job.start(sc, background=False)
    assert job.status == "done" and job.is_current(sc)
    first = job.result
    assert first.table.set_index("name").loc["adjust_soil", "mean"] == pytest.approx(0.25, abs=0.03)
    job.start(sc, background=False)
    assert job.result is first and job.message.startswith("simulation: the result of the run at ")


def test_a_cancelled_run_publishes_nothing():
    base = load_preset("binary_exposure")
    sc = base.replace(study=base.study.__class__(n=2000, replicates=20000))
    job = SimulationJob()
    job.start(sc)
    time.sleep(0.05)
    job.cancel()
    job.wait(60)
    assert job.status == "cancelled"
    assert job.result is None


def test_the_plan_waits_for_the_simulation_and_says_so(monkeypatch):
    """Common practice, no source: two runs started together share the CPUs and both finish late, so Run
    starts the simulation and queues the plan behind it (issue 16 item 7); the status names the wait."""
    spans = {}

    def timed(compute):
        def run(self, scenario, progress):
            start = time.monotonic()
            result = compute(self, scenario, progress)
            spans[self.label] = (start, time.monotonic())
            return result

        return run

    monkeypatch.setattr(SimulationJob, "compute", timed(SimulationJob.compute))
    monkeypatch.setattr(PlanJob, "compute", timed(PlanJob.compute))
    wb = Workbench(preset="binary_exposure", live=False)
    wb.scenario_state.set_study(replicates=400)
    assert wb.run()
    assert wb.planning.message == "sample-size plan: waits for the simulation"
    wb.simulation.wait(120)
    wb.planning.wait(300)
    assert wb.simulation.status == wb.planning.status == "done"
    assert spans["sample-size plan"][0] >= spans["simulation"][1]


def test_a_queued_plan_cancelled_while_it_waits_never_runs():
    wb = Workbench(preset="binary_exposure", live=False)
    wb.scenario_state.set_study(replicates=400)
    assert wb.run()
    wb.cancel()
    wb.simulation.wait(60)
    wb.planning.wait(60)
    assert wb.planning.status == "cancelled" and wb.planning.result is None


def test_deferred_updates_wait_for_poll():
    sc = load_preset("common_cause")
    job = SimulationJob(deferred=True)
    job.start(sc)
    job.wait(60)
    assert job.result is None
    assert job.poll()
    assert job.status == "done" and job.result is not None


def test_live_reruns_on_linear_gaussian_edits_only():
    wb = Workbench(preset="common_cause", background=False)
    wb.scenario_state.set_study(replicates=300)
    assert wb.simulation.is_current(wb.scenario)
    truth_before = wb.simulation.result.truth
    wb.scenario_state.set_arrow(2, effect=0.5)
    assert wb.simulation.is_current(wb.scenario)
    assert wb.simulation.result.truth == pytest.approx(0.5) != truth_before
    wb.scenario_state.preset = "binary_exposure"
    assert not wb.runs_live
    assert wb.simulation.result is None and wb.simulation.status == "idle"
    wb.run()
    assert wb.simulation.is_current(wb.scenario)
    wb.scenario_state.set_study(replicates=200)
    assert wb.simulation.result is not None and not wb.simulation.is_current(wb.scenario)


def test_going_back_to_a_scenario_shows_its_cached_result():
    wb = Workbench(preset="common_cause", background=False, live=False)
    wb.scenario_state.set_study(replicates=300)
    wb.run()
    first = wb.simulation.result
    wb.scenario_state.set_arrow(2, effect=0.5)
    assert not wb.simulation.is_current(wb.scenario)
    wb.scenario_state.set_arrow(2, effect=0.25)
    assert wb.simulation.result is first


def test_sample_state_draws_and_keeps_the_covariate():
    sample = SampleState()
    sc = load_preset("larger_graph")
    sample.update(sc)
    assert sample.data.shape == (sc.study.n, len(sc.names))
    sample.covariate = "distance"
    first = sample.data.copy()
    sample.draw_number += 1
    assert not sample.data.equals(first)
    sample.update(sc)
    assert sample.covariate == "distance"


def test_selection_and_restriction_are_edited_and_pruned():
    """Common practice, no source: the editor sets the optional strategy keys and never leaves a strategy
    that the scenario format refuses (a rule with no candidate, a restriction on a removed variable)."""
    state = ScenarioState(preset="selection_by_significance")
    rows = {r["name"]: r for r in state.strategy_rows()}
    assert rows["select_by_p_value"]["selection"] == "p_value"
    assert state.set_strategy("adjust_complexity", selection="change_in_estimate")
    assert state.scenario.strategy("adjust_complexity").selection == "change_in_estimate"
    assert state.set_strategy("adjust_complexity", selection="fixed")
    assert state.scenario.strategy("adjust_complexity").selection is None
    assert not state.set_strategy("unadjusted", selection="p_value")  # no candidates
    assert state.error_section == "strategies" and "candidate" in state.error
    assert state.set_strategy("adjust_complexity", restrict="team_experience = [-1, 1]")
    assert state.scenario.strategy("adjust_complexity").restrict == (("team_experience", (-1.0, 1.0)),)
    assert not state.set_strategy("adjust_complexity", restrict="team_experience = [1, -1]")
    assert "low < high" in state.error
    assert not state.set_strategy("adjust_complexity", restrict="team_experience == 3")
    assert "name = 0" in state.error
    assert state.remove_variable("team_experience")
    assert state.scenario.strategy("adjust_complexity").restrict == ()
    assert state.set_variable("complexity", "observed", False)
    assert state.scenario.strategy("select_by_p_value").selection is None
    assert state.scenario.strategy("select_by_p_value").adjust == ()


def test_a_hidden_result_tab_catches_up_when_shown():
    """Common practice, no source: a result that arrives while its tab is hidden is drawn when the tab is
    shown (the bug: the Estimates tab kept an earlier preset's figures after switching presets)."""
    pytest.importorskip("panel")
    from workbench.app.app import App

    wb = Workbench(preset="common_cause", background=False)
    app = App(workbench=wb)
    estimates = app.result_views[1]
    app.tabs.active = 1
    app.tabs.active = 4
    wb.scenario_state.preset = "larger_graph"
    assert "refresh" in estimates.waiting
    app.tabs.active = 1
    shown = " ".join(str(getattr(o, "object", "")) for o in estimates.body.objects)
    assert "wb-sim-truth'>0.5<" in shown and "adjust_confounders" in shown


def test_study_inputs_follow_the_scenario_and_are_checked_by_the_one_rule(state):
    """Common practice, no source: the inputs' settings objects send a change to the state, which checks it
    with ``check_setting`` (the message is the file's own); a refused value leaves the scenario as it was,
    and typing the valid value again clears the error."""
    from workbench.app.settings import PlanSettings, StudySettings
    from workbench.scenario.constraints import STUDY_SETTINGS

    study = StudySettings(state=state)
    plan = PlanSettings(state=state)
    assert StudySettings.param.replicates.softbounds == (1, STUDY_SETTINGS["replicates"].high)
    assert (study.n, study.seed) == (state.scenario.study.n, state.scenario.study.seed)
    study.replicates = 0
    assert state.error == "study.replicates: must be an integer from 1 to 1,000,000, got 0"
    assert state.error_section == "study" and state.scenario.study.replicates == 2000
    study.replicates = 2000
    assert state.error == ""
    plan.target_power = 1.0
    assert state.error == "study.target_power: must be a number in (0, 1), got 1.0"
    assert state.error_section == "plan"
    state.preset = "mediator"
    assert plan.target_power == state.scenario.study.target_power
    assert study.seed == load_preset("mediator").study.seed


# --- issue 10: uploads, refused field values, the session's own status, the cost before Run -----------------


def test_each_kind_of_bad_upload_has_its_own_message(state):
    """Common practice, no source: an empty, binary, non-UTF-8, oversized or refused-in-the-browser file
    each says what is wrong with it, naming the file; the scenario in effect stays."""
    before = state.scenario
    cases = {
        b"": "the file is empty",
        b"  \n": "the file is empty",
        b"title = 'x'\x00\x01": "a binary file, not TOML text",
        b"\xff\xfe\x00t": "a binary file, not TOML text",
        "titre = 'é'".encode("latin-1"): "not UTF-8 text",
        b"#" * (MAX_UPLOAD_BYTES + 1): f"{MAX_UPLOAD_BYTES + 1:,} bytes is over the limit",
    }
    for content, expected in cases.items():
        assert not state.upload(content, "mine.toml")
        assert state.error.startswith("upload mine.toml: ") and expected in state.error, state.error
        assert "\n" not in state.error
        assert state.scenario is before
    assert not state.refuse_upload("huge.toml", 3 * 2**20)
    assert state.error == f"upload huge.toml: 3,145,728 bytes is over the limit of {MAX_UPLOAD_BYTES:,}"


def test_the_same_bytes_under_a_new_name_say_so_and_clear_the_old_message(state):
    text = preset_text("mediator").encode()
    assert state.upload(text, "first.toml")
    assert not state.upload(b"", "broken.toml")
    assert state.upload(text, "second.toml")
    assert state.error == ""
    assert state.note == "upload second.toml: the same scenario as the one in effect"


def test_a_refused_study_value_blocks_run_until_it_is_corrected():
    """Common practice, no source: a value the check refuses is never silently replaced by the old one."""
    from workbench.app.settings import StudySettings

    wb = Workbench(preset="common_cause", live=False, background=False)
    study = StudySettings(state=wb.scenario_state)
    study.n = -5
    assert wb.scenario.study.n == load_preset("common_cause").study.n
    assert wb.scenario_state.invalid_messages() == ["study.n: must be an integer of at least 1, got -5"]
    assert not wb.run()
    assert wb.notice.startswith("Not run: study.n: must be an integer of at least 1, got -5")
    assert wb.simulation.status == "idle"
    wb.scenario_state.set_arrow(0, effect=0.7)  # another valid edit resets the field, and says so
    assert study.n == wb.scenario.study.n and wb.scenario_state.invalid == {}
    assert "study.n shows 200 again (-5 was not applied)" in wb.scenario_state.note
    study.n = -5
    study.n = 300
    assert wb.scenario_state.invalid == {} and wb.notice == ""
    assert wb.run() and wb.simulation.result.n == 300


def test_plan_sizes_in_another_order_are_not_a_refused_value():
    from workbench.app.settings import PlanSettings

    state = ScenarioState(preset="common_cause")
    plan = PlanSettings(state=state)
    plan.sample_sizes = "800, 400,200 100 50"  # the preset's sizes, reordered
    assert state.invalid == {}
    plan.sample_sizes = "100, x"
    assert state.invalid_messages() == ["study.sample_sizes: 'x' is not a whole number"]


def test_the_cost_is_shown_before_run_and_a_run_over_the_budget_needs_a_second_press():
    """The estimate is :func:`workbench.analysis.budget.estimate_cost`'s (common practice, no source: a
    10^6 x 10^5 raw-engine run takes hours on any machine)."""
    wb = Workbench(preset="binary_outcome", live=False, background=False)
    assert wb.cost.startswith("Run: simulation about ") and not wb.over_budget
    assert wb.scenario_state.set_study(n=10**6, replicates=10**5)
    assert wb.over_budget
    assert not wb.run() and "Press Run again" in wb.notice
    assert wb.simulation.status == "idle" and wb.planning.status == "idle"
    assert wb.scenario_state.set_study(n=200, replicates=200)
    assert not wb.over_budget


def test_a_result_shown_again_says_it_was_computed_in_this_session():
    wb = Workbench(preset="common_cause", live=True, background=False)
    wb.scenario_state.preset = "mediator"
    wb.scenario_state.preset = "common_cause"
    assert wb.simulation.message.startswith("simulation: the result of the run at ")
    assert "this session" in wb.simulation.message
    fresh = Workbench(preset="common_cause", live=False, background=False)
    assert fresh.simulation.message == ""  # nothing run in a new session: nothing claimed


def test_the_sidebar_shows_the_whole_title_under_the_preset_picker():
    """The closed select cuts long titles, so the full title wraps under it and follows the scenario
    (common practice, no source)."""
    from workbench.app.sidebar import Sidebar

    bench = Workbench(preset="lpm_misspecified")
    sidebar = Sidebar(workbench=bench)
    assert "a valid set in a misspecified linear probability model" in sidebar.title.object
    bench.scenario_state.load_preset("mediator")
    assert load_preset("mediator").title in sidebar.title.object


def test_a_standardized_arrow_edit_switches_the_target_and_says_so(state):
    """Typing a standardized size for one arrow switches every arrow into that variable; the other arrows
    keep their standardized sizes b * sd(cause) / sd(target) (Wright 1934), and the note says what changed."""
    state.load_preset("common_cause")
    assert state.set_arrow(1, standardized=0.3)
    assert "now use standardized effects" in state.note
    assert [a.standardized for a in state.scenario.arrows][1:] == [0.3, pytest.approx(0.239247, abs=1e-6)]
    assert state.set_arrow(2, effect=0.1)  # back to raw sizes, converted
    assert all(a.standardized is None for a in state.scenario.arrows)
    assert state.set_arrow(1, standardized=0.9)
    assert not state.set_arrow(2, standardized=0.9)  # R^2 = b' R b = 0.81 + 0.81 + 2(0.81)(0.5145) > 1
    assert "must be below 1" in state.error and state.scenario.arrows[2].standardized != 0.9


def test_strategy_options_se_interactions_and_poisson(state):
    """The strategies editor's option line: se and interactions reach the file, the parser's rules stay in
    force (interactions need the classical SE; Zou 2004's modified Poisson is the robust default), and a
    model change returns se to that model's default (common practice, no source)."""
    from workbench.app.strategies_editor import StrategiesEditor

    state.load_preset("common_cause")
    assert state.set_strategy("adjust_soil", se="hc3")
    assert state.scenario.strategy("adjust_soil").se == "hc3"
    assert not state.set_strategy("adjust_soil", interactions=["soil_quality"])
    assert "classical SE only" in state.error
    assert state.set_strategy("adjust_soil", se="") and state.set_strategy(
        "adjust_soil", interactions=["soil_quality"]
    )
    assert state.scenario.strategy("adjust_soil").interactions == ("soil_quality",)
    assert state.set_strategy("adjust_soil", adjust=[])  # the interaction goes with its covariate
    assert state.scenario.strategy("adjust_soil").interactions == ()
    state.load_preset("binary_outcome")
    assert state.set_strategy("logit_adjust_fragility", model="poisson")
    assert state.scenario.strategy("logit_adjust_fragility").model == "poisson"
    editor = StrategiesEditor(state=state)
    rows = {row["name"]: editor._options(row) for row in state.strategy_rows()}
    assert len(rows["logit_adjust_fragility"]) == 1  # robust or classical
    assert rows["logit_unadjusted"] == []  # logit has one SE: nothing to choose


def test_r_squared_in_the_variables_table_sets_noise_sd(state):
    """Typing R^2 for a variable sets r_squared and drops noise_sd, so that 1 - noise^2 / Var = R^2
    (closed form from the implied covariance: Var(wheat_yield) from its causes is 0.485 in common_cause,
    so noise_sd = sqrt(0.485) at R^2 = 0.5; Bollen 1989, ch. 2); typing a noise SD drops r_squared again."""
    state.load_preset("common_cause")
    assert state.set_variable("wheat_yield", "r_squared", 0.5)
    assert state.scenario.variable("wheat_yield").noise_sd == pytest.approx(0.485**0.5, abs=1e-9)
    assert "follows from R^2" in state.note
    assert state.set_variable("wheat_yield", "noise_sd", 1.0)
    assert state.scenario.variable("wheat_yield").r_squared is None
    assert not state.set_variable("soil_quality", "r_squared", 0.5)
    assert "no causes" in state.error
