"""The dashboard's state: plain ``param.Parameterized`` classes with no Panel import.

- :class:`ScenarioState`: the scenario being edited. Every edit is applied to a copy of the scenario's
  TOML tables (the editing rules that follow a name everywhere are :mod:`workbench.scenario.edit`) and
  validated at once by :func:`workbench.scenario_from_dict`. A valid edit becomes the scenario in effect; an
  invalid one leaves the last valid scenario in effect and records the one-line error and the section it
  came from, so the view can show it next to the field. The TOML text the user typed is never overwritten
  by a failed edit.
- :class:`Workbench` ties the scenario to the background runs of :mod:`workbench.app.runs` and the
  one-dataset view of :mod:`workbench.app.dataset`: when the scenario changes, a linear-Gaussian scenario is
  re-run at once with the exact engine (it is fast); other scenarios wait for :meth:`Workbench.run`.

The study settings the inputs bind to are in :mod:`workbench.app.settings`.

Examples
--------
>>> wb = Workbench(preset="common_cause", live=False)
>>> wb.scenario_state.scenario.question.exposure
'fertiliser'
>>> wb.scenario_state.set_arrow(0, effect="lots")
False
>>> wb.scenario_state.error
"arrows[1].effect: must be a number, got a string 'lots'"
>>> wb.scenario_state.scenario.arrows[0].effect
0.6
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import Any

import param

from workbench.analysis import budget
from workbench.analysis.check import check
from workbench.app import edits
from workbench.app.dataset import SampleState
from workbench.app.edits import check_study_values, strategy_table_change
from workbench.app.graph_edits import GraphEdits
from workbench.app.runs import BackgroundJob, PlanJob, SimulationJob
from workbench.errors import ScenarioError, WorkbenchError
from workbench.graph import judge
from workbench.graph.defaults import load_preset, loads_scenario, scenario_from_dict
from workbench.scenario import edit
from workbench.scenario.model import Scenario
from workbench.scenario.presets import DEFAULT_PRESET, list_presets
from workbench.scenario.write import dumps_scenario, scenario_to_dict

__all__ = ["MAX_UPLOAD_BYTES", "ScenarioState", "Workbench", "check_study_values"]

#: Largest scenario file or text accepted, in bytes.
MAX_UPLOAD_BYTES = 256 * 1024


def _too_large(size: int) -> str:
    """The message of an upload over :data:`MAX_UPLOAD_BYTES`."""
    return f"{size:,} bytes is over the limit of {MAX_UPLOAD_BYTES:,}"


class ScenarioState(GraphEdits, param.Parameterized):
    """The scenario being edited, with live validation.

    Parameters
    ----------
    preset : str
        Name of the built-in preset to start from (loading is by name only).
    scenario : Scenario, optional
        A scenario to start from instead.

    Examples
    --------
    >>> state = ScenarioState(preset="common_cause")
    >>> state.add_variable("1bad")
    False
    >>> state.error_section, state.scenario.names
    ('variables', ['soil_quality', 'fertiliser', 'wheat_yield'])
    >>> state.add_variable("rainfall")
    True
    >>> state.error
    ''
    """

    preset = param.Selector(default=DEFAULT_PRESET, objects=list(list_presets()), doc="Built-in preset.")
    scenario = param.ClassSelector(class_=Scenario, doc="The scenario in effect: always the last valid one.")
    text = param.String(default="", doc="The TOML editor's text; a failed edit leaves what the user typed.")
    error = param.String(default="", doc="One-line message of the last failed edit, '' when none.")
    error_section = param.String(default="", doc="Where the failed edit came from (variables, arrows, ...).")
    note = param.String(default="", doc="A remark about the last edit (an automatic adjustment, a warning).")
    selected_strategy = param.String(default="", doc="Strategy whose paths the graph highlights.")
    report = param.Parameter(default=None, doc="The CheckReport of the scenario in effect, or None.")
    report_error = param.String(default="", doc="Why the check report is missing, '' when present.")
    revision = param.Integer(default=0, doc="Counts valid changes of the scenario.")
    source = param.String(default="preset", doc="Where the scenario in effect came from (the last section).")
    invalid = param.Dict(
        default={},
        doc="Fields whose typed value was refused and is not in effect: section -> {field: message}.",
    )
    can_undo = param.Boolean(default=False, doc="Whether there is a change to undo.")
    can_redo = param.Boolean(default=False, doc="Whether there is an undone change to redo.")

    SECTIONS = ("preset", "upload", "toml", "variables", "arrows", "question", "strategies", "study", "plan")
    SECTIONS += ("canvas", "inspector", "undo", "redo")
    """Where an edit can come from (the ``section`` of errors and notes)."""
    HISTORY = 20
    """How many changes :meth:`undo` can take back."""

    def __init__(self, preset: str | None = None, scenario: Scenario | None = None, **params):
        if preset is not None:
            params["preset"] = preset
        super().__init__(**params)
        self._undo: list[Scenario] = []  # the scenarios before the last changes, oldest first
        self._redo: list[Scenario] = []
        self._commit(scenario if scenario is not None else load_preset(self.preset), "preset")

    # --- internals -------------------------------------------------------------------------------------
    def _commit(self, scenario: Scenario, section: str, note: str = "") -> None:
        if self.scenario is not None and scenario == self.scenario:
            with param.parameterized.batch_call_watchers(self):
                self.error, self.error_section, self.note, self.source = "", "", note, section
            return
        report, report_error = None, ""
        try:
            report = check(scenario)
        except WorkbenchError as exc:
            report_error = str(exc)
        names = {s.name for s in scenario.strategies}
        if self.scenario is not None and section not in ("undo", "redo"):
            self._undo, self._redo = [*self._undo, self.scenario][-self.HISTORY :], []
        with param.parameterized.batch_call_watchers(self):
            self.can_undo, self.can_redo = bool(self._undo), bool(self._redo)
            self.error, self.error_section, self.note = "", "", note
            self.report, self.report_error = report, report_error
            self.selected_strategy = self.selected_strategy if self.selected_strategy in names else ""
            self.text = dumps_scenario(scenario)
            self.source = section
            self.scenario = scenario
            self.revision += 1

    def _fail(self, exc: Exception, section: str) -> bool:
        with param.parameterized.batch_call_watchers(self):
            self.error, self.error_section, self.note = str(exc), section, ""
        return False

    def _edit(self, section: str, change: Callable[[dict], edit.Edited | None]) -> bool:
        """Apply ``change`` to a copy of the scenario's TOML tables, validate, and commit or record the
        error. ``change`` returns an :class:`~workbench.scenario.edit.Edited`, or None after editing the
        copy in place."""
        data = scenario_to_dict(self.scenario, include_default_strategies=True)
        if section == "canvas":
            edits.pin_layout(data, self.scenario)  # the drawing the user edits stays as drawn
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                edited = change(data) or edit.Edited(data)
                edits.keep_layout(edited.data, self.scenario)
                scenario = scenario_from_dict(edited.data)
        except ScenarioError as exc:
            return self._fail(exc, section)
        warned = "; ".join(str(w.message) for w in caught)
        self._commit(scenario, section, "; ".join(t for t in (edited.note, warned) if t))
        return True

    def undo(self) -> bool:
        """Go back to the scenario before the last change (at most :attr:`HISTORY` changes back).

        >>> state = ScenarioState(preset="common_cause")
        >>> state.add_variable("rain"), state.undo(), state.redo(), state.redo(), state.scenario.names[-1]
        (True, True, True, False, 'rain')
        """
        return self._step(self._undo, self._redo, "undo")

    def redo(self) -> bool:
        """Make the last undone change again (until a new change is made)."""
        return self._step(self._redo, self._undo, "redo")

    def _step(self, back: list[Scenario], forth: list[Scenario], section: str) -> bool:
        if not back:
            return False
        forth[:] = [*forth, self.scenario][-self.HISTORY :]
        self._commit(back.pop(), section)
        return True

    def set_invalid(self, section: str, messages: dict[str, str]) -> None:
        """Record the fields of ``section`` that hold a refused value (``{}``: none), for the error box
        beside them and for :meth:`Workbench.run`, which refuses to run while any is recorded.

        Examples
        --------
        >>> state = ScenarioState()
        >>> state.set_invalid("study", {"n": "study.n: must be an integer of at least 1, got -5"})
        >>> state.invalid_messages()
        ['study.n: must be an integer of at least 1, got -5']
        >>> state.set_invalid("study", {})
        >>> state.invalid
        {}
        """
        invalid = {k: v for k, v in self.invalid.items() if k != section}
        if messages:
            invalid[section] = dict(messages)
        if invalid != self.invalid:
            self.invalid = invalid

    def invalid_messages(self, sections=None) -> list[str]:
        """The messages of the refused field values (of ``sections``, default all)."""
        return [
            message
            for section, fields in self.invalid.items()
            if sections is None or section in sections
            for message in fields.values()
        ]

    # --- whole scenarios -------------------------------------------------------------------------------
    @param.depends("preset", watch=True)
    def _load_selected_preset(self) -> None:
        self.load_preset(self.preset)

    def load_preset(self, name: str) -> bool:
        """Load a built-in preset by name (never a path)."""
        try:
            scenario = load_preset(name)
        except ScenarioError as exc:
            return self._fail(exc, "preset")
        self._commit(scenario, "preset")
        return True

    def apply_text(self, text: str) -> bool:
        """Use TOML text typed in the editor. On an error the text stays as typed and the error is shown."""
        self.text = text
        if len(text.encode("utf-8")) > MAX_UPLOAD_BYTES:
            limit = f"the text is over the limit of {MAX_UPLOAD_BYTES:,} bytes"
            return self._fail(ScenarioError(limit, where="scenario text"), "toml")
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                scenario = loads_scenario(text)
        except ScenarioError as exc:
            return self._fail(exc, "toml")
        self._commit(scenario, "toml", "; ".join(str(w.message) for w in caught))
        self.text = text  # keep the user's own layout and comments while it says the same scenario
        return True

    def upload(self, content: bytes | None, filename: str | None) -> bool:
        """Open an uploaded scenario: TOML only, at most 256 KiB, parsed and never executed.

        Each way an upload can fail has its own one-line message naming the file; an upload that holds the
        scenario already in effect says so (a note), so no earlier file's message is left standing.

        Examples
        --------
        >>> state = ScenarioState()
        >>> state.upload(b"title = \\n", "broken.toml")
        False
        >>> state.error
        'upload broken.toml: line 1, column 9: TOML syntax error: Invalid value'
        >>> state.upload(b"", "empty.toml"), state.error
        (False, 'upload empty.toml: the file is empty')
        """
        label = f"upload {filename}" if filename else "upload"
        try:
            text = self._uploaded_text(content, filename, label)
        except ScenarioError as exc:
            return self._fail(exc, "upload")
        try:
            scenario = loads_scenario(text)
        except ScenarioError as exc:
            return self._fail(ScenarioError(str(exc), where=label), "upload")
        same = scenario == self.scenario
        self._commit(scenario, "upload", f"{label}: the same scenario as the one in effect" if same else "")
        return True

    def refuse_upload(self, filename: str | None, size: int) -> bool:
        """Record an upload the browser refused to send (over its own limit): the same message as a file
        over :data:`MAX_UPLOAD_BYTES` that arrived.

        Examples
        --------
        >>> state = ScenarioState()
        >>> state.refuse_upload("big.toml", 3 * 1024 * 1024), state.error
        (False, 'upload big.toml: 3,145,728 bytes is over the limit of 262,144')
        """
        label = f"upload {filename}" if filename else "upload"
        return self._fail(ScenarioError(_too_large(size), where=label), "upload")

    @staticmethod
    def _uploaded_text(content: bytes | None, filename: str | None, label: str) -> str:
        """The text of an upload, or a ScenarioError saying why it cannot be opened."""
        if content is None:
            raise ScenarioError("no file received", where=label)
        if not (filename or "").lower().endswith(".toml"):
            raise ScenarioError("only .toml scenario files can be opened", where=label)
        if len(content) > MAX_UPLOAD_BYTES:
            raise ScenarioError(_too_large(len(content)), where=label)
        if not content.strip():
            raise ScenarioError("the file is empty", where=label)
        if b"\x00" in content:
            raise ScenarioError("a binary file, not TOML text", where=label)
        try:
            return content.decode("utf-8")
        except UnicodeDecodeError:
            raise ScenarioError("not UTF-8 text (a binary file or another encoding)", where=label) from None

    def download_text(self) -> str:
        """The scenario in effect as TOML text, for saving."""
        return dumps_scenario(self.scenario)

    # --- question and study ----------------------------------------------------------------------------
    def set_question(self, **fields: Any) -> bool:
        """Change the exposure, outcome, target or scale (the new exposure and outcome leave the strategies)."""
        return self._edit("question", lambda data: edit.set_question(data, **fields))

    def set_study(self, section: str = "study", **fields: Any) -> bool:
        """Change study settings: n, replicates, seed, alpha, sample_sizes, target_power, target_halfwidth
        (``None`` removes the optional target half-width), each checked by
        :func:`~workbench.scenario.constraints.check_setting`. ``section`` names where the edit came from.

        Examples
        --------
        >>> state = ScenarioState()
        >>> state.set_study(n=0)
        False
        >>> state.error
        'study.n: must be an integer of at least 1, got 0'
        """

        def change(data):
            for key, value in check_study_values(fields).items():
                if value is None:
                    data["study"].pop(key, None)
                else:
                    data["study"][key] = value

        return self._edit(section, change)

    def set_sample_sizes(self, text: str, section: str = "plan") -> bool:
        """Set the planned sample sizes from text such as ``"100, 200, 400"``.

        Examples
        --------
        >>> state = ScenarioState()
        >>> state.set_sample_sizes("100, 2OO")
        False
        >>> state.error
        "study.sample_sizes: '2OO' is not a whole number"
        >>> state.set_sample_sizes("400 100, 200")
        True
        >>> state.scenario.study.sample_sizes
        (100, 200, 400)
        """
        words = text.replace(",", " ").split()
        for word in words:
            if not word.isdigit():
                return self._fail(
                    ScenarioError(f"'{word}' is not a whole number", where="study.sample_sizes"), section
                )
        return self.set_study(section=section, sample_sizes=[int(word) for word in words])

    # --- strategies ------------------------------------------------------------------------------------
    def add_strategy(self, name: str | None = None, adjust=(), model: str = "ols") -> bool:
        """Add a strategy (a fresh name is chosen when none is given)."""

        def change(data):
            taken = {s["name"] for s in data["strategies"]}
            chosen = (name or "").strip()
            if not chosen:
                i = len(taken) + 1
                while f"strategy_{i}" in taken:
                    i += 1
                chosen = f"strategy_{i}"
            data["strategies"].append({"name": chosen, "adjust": list(adjust), "model": model})

        return self._edit("strategies", change)

    def remove_strategy(self, name: str) -> bool:
        """Remove a strategy (at least one must remain)."""

        def change(data):
            kept = [s for s in data["strategies"] if s["name"] != name]
            if len(kept) == len(data["strategies"]):
                raise ScenarioError(f"no strategy '{name}'", where="strategies")
            if not kept:
                raise ScenarioError("at least one strategy must remain", where="strategies")
            data["strategies"] = kept

        return self._edit("strategies", change)

    def set_strategy(
        self,
        name: str,
        *,
        adjust=None,
        model: str | None = None,
        standardize: bool | None = None,
        new_name: str | None = None,
        selection: str | None = None,
        restrict: dict | str | None = None,
        se: str | None = None,
        interactions=None,
        flexible=None,
    ) -> bool:
        """Change a strategy's adjustment set, model, standardisation, name, selection rule, restriction,
        standard error (``se``: ``""`` for the model's default), interaction terms or spline covariates
        (``flexible``; ``[]`` for none).

        ``selection`` is ``"fixed"`` (or ``""``) for a fixed set, ``"p_value"`` or ``"change_in_estimate"``
        (``adjust`` then lists the candidates); ``restrict`` is a table such as ``{"shift": 0}`` or text in
        the same form as the file (``shift = 0, distance = [10, 50]``), ``{}`` or ``""`` for none.

        Examples
        --------
        >>> state = ScenarioState(preset="common_cause")
        >>> state.set_strategy("adjust_soil", restrict="soil_quality = [")
        False
        >>> state.error_section
        'strategies'
        """
        changes = {
            "adjust": adjust,
            "model": model,
            "standardize": standardize,
            "new_name": new_name,
            "selection": selection,
            "restrict": restrict,
            "se": se,
            "interactions": interactions,
            "flexible": flexible,
        }

        def change(data):
            for table in data["strategies"]:
                if table["name"] == name:
                    return strategy_table_change(table, name, changes)
            raise ScenarioError(f"no strategy '{name}'", where="strategies")

        ok = self._edit("strategies", change)
        if ok and new_name is not None and self.selected_strategy == "":
            self.selected_strategy = new_name.strip()
        return ok

    def add_suggested_strategies(self) -> bool:
        """Add every minimal valid adjustment set and the optimal valid set not already present."""
        if self.report is None:
            return self._fail(ScenarioError(self.report_error, where="strategies"), "strategies")
        suggestions = [(f"minimal_{i}", found) for i, found in enumerate(self.report.minimal_sets, 1)]
        if self.report.optimal_set is not None:
            suggestions.append(("optimal", self.report.optimal_set))
        binary = self.scenario.outcome.is_binary

        def change(data):
            edited = edit.add_adjustment_sets(
                data, suggestions, model="logit" if binary else "ols", standardize=binary
            )
            return edited._replace(note=edited.note or "the minimal and optimal sets are already listed")

        return self._edit("strategies", change)

    # --- derived ---------------------------------------------------------------------------------------
    @property
    def adjustable(self) -> list[str]:
        """Observed variables other than the exposure and the outcome, in file order."""
        q = self.scenario.question
        return [n for n in self.scenario.observed_names if n not in (q.exposure, q.outcome)]

    def verdict(self, strategy: str | None = None):
        """The adjustment verdict of a strategy (default: the selected one), or None."""
        name = strategy or self.selected_strategy
        if not name or name not in {s.name for s in self.scenario.strategies}:
            return None
        try:
            return judge(self.scenario, self.scenario.strategy(name).adjust)
        except WorkbenchError:
            return None

    def strategy_rows(self) -> list[dict]:
        """One dict per strategy: name, adjust, model, standardize, selection, restrict, match, se,
        interactions, flexible, valid, reasons (the last two from the check report; None and [] without one)."""
        checked = {c.name: c for c in self.report.checks} if self.report is not None else {}
        return [
            {
                "name": s.name,
                "adjust": list(s.adjust),
                "model": s.model,
                "standardize": s.standardize,
                "selection": s.selection,
                "restrict": dict(s.restrict),
                "match": list(s.match),
                "se": s.se,
                "interactions": list(s.interactions),
                "flexible": list(s.flexible),
                "valid": checked[s.name].valid if s.name in checked else None,
                "reasons": list(checked[s.name].reasons) if s.name in checked else [],
            }
            for s in self.scenario.strategies
        ]


class Workbench(param.Parameterized):
    """The whole dashboard state: the scenario, the simulation, the plan and the one-dataset view.

    Parameters
    ----------
    preset : str, optional
        Built-in preset to start from.
    live : bool
        Re-run a linear-Gaussian scenario at once after every valid change.
    background : bool
        Run computations in a worker thread (False runs them in the caller, for tests).
    deferred : bool
        Queue the worker threads' updates until :meth:`poll` (see :class:`~workbench.app.runs.BackgroundJob`).
    """

    live = param.Boolean(default=True, doc="Re-run linear-Gaussian scenarios at once on every change.")
    background = param.Boolean(default=True)
    scenario_state = param.ClassSelector(class_=ScenarioState)
    simulation = param.ClassSelector(class_=SimulationJob)
    planning = param.ClassSelector(class_=PlanJob)
    sample = param.ClassSelector(class_=SampleState)
    notice = param.String(default="", doc="Why the last Run was refused, '' when it was not.")
    cost = param.String(default="", doc="The estimated time and memory of Run (the simulation and the plan).")
    over_budget = param.Boolean(default=False, doc="Whether that estimate is over the budget.")

    def __init__(self, preset: str | None = None, deferred: bool = False, **params):
        super().__init__(**params)
        self._confirmed = ""
        self.scenario_state = ScenarioState(preset=preset or DEFAULT_PRESET)
        self.simulation = SimulationJob(deferred=deferred)
        self.planning = PlanJob(deferred=deferred)
        self.sample = SampleState()
        self.scenario_state.param.watch(self._scenario_changed, "scenario")
        self.scenario_state.param.watch(self._fields_checked, "invalid")
        self._scenario_changed()

    def _fields_checked(self, *_events) -> None:
        if not self.scenario_state.invalid:
            self.notice = ""

    def _estimate(self) -> None:
        """Estimate what Run will cost (:func:`workbench.analysis.budget.estimate_cost`) for the scenario in
        effect, and whether it is over the budget of :func:`~workbench.analysis.budget.check_budget`."""
        try:
            costs = [budget.estimate_cost(self.scenario, verb=verb) for verb in ("run", "plan")]
        except WorkbenchError as exc:
            self.param.update(cost=f"Cost not estimated: {exc}", over_budget=False)
            return
        over = False
        for cost in costs:
            try:
                budget.check_budget(cost)
            except WorkbenchError:
                over = True
        run, plan = costs
        text = f"Run: simulation {run.text} ({run.engine} engine), sample-size plan {plan.text}"
        self.param.update(cost=text, over_budget=over)
        self._confirmed = ""

    @property
    def scenario(self) -> Scenario:
        """The scenario in effect."""
        return self.scenario_state.scenario

    @property
    def runs_live(self) -> bool:
        """Whether the current scenario re-runs on every change (linear-Gaussian with live on)."""
        return self.live and self.scenario.is_linear_gaussian

    def _scenario_changed(self, *_events) -> None:
        scenario = self.scenario
        self.sample.update(scenario)
        self._estimate()
        replaced = self.scenario_state.source in ("preset", "upload")
        for job in (self.simulation, self.planning):
            if self.runs_live and not self.over_budget:
                job.start(scenario, background=self.background, after=self._ahead(job))
            elif job.show_cached(scenario):
                continue
            elif replaced:
                job.clear()  # a different scenario: the old results would only confuse
            elif job.status == "running":
                job.cancel()

    def run(self) -> bool:
        """Start the simulation and the sample-size plan for the scenario in effect.

        Refused (returns False, with :attr:`notice` saying why) while a settings field holds a value that
        was refused: the run would otherwise use the earlier value without saying so.

        Examples
        --------
        >>> wb = Workbench(preset="common_cause", live=False, background=False)
        >>> wb.scenario_state.set_invalid("study", {"n": "study.n: must be an integer of at least 1, got -5"})
        >>> wb.run(), wb.notice
        (False, 'Not run: study.n: must be an integer of at least 1, got -5 (correct the field first)')
        """
        refused = self.scenario_state.invalid_messages()
        if refused:
            self.notice = f"Not run: {refused[0]} (correct the field first)"
            return False
        key = BackgroundJob.key(self.scenario)
        if self.over_budget and self._confirmed != key:
            self._confirmed = key  # the next Run of this very scenario starts it
            self.notice = (
                f"Not run yet: {self.cost}; over the budget of {budget.format_duration(budget.MAX_SECONDS)} "
                f"or {budget.format_bytes(budget.MAX_BYTES)}. "
                "Press Run again to start it anyway, or lower n or the replicates."
            )
            return False
        self.notice = ""
        for job in (self.simulation, self.planning):
            job.start(self.scenario, background=self.background, after=self._ahead(job))
        return True

    def _ahead(self, job: BackgroundJob) -> BackgroundJob | None:
        """The job that ``job`` waits for: the plan runs after the simulation, whose results show first."""
        return self.simulation if job is self.planning else None

    def cancel(self) -> None:
        """Cancel the running computations."""
        self.simulation.cancel()
        self.planning.cancel()

    def poll(self) -> None:
        """Apply the progress and results the worker threads handed over (see
        :meth:`~workbench.app.runs.BackgroundJob.poll`)."""
        self.simulation.poll()
        self.planning.poll()
