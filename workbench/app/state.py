"""The dashboard's state: plain ``param.Parameterized`` classes with no Panel import.

Three kinds of state live here, each testable without a browser and usable in a notebook:

- :class:`ScenarioState`: the scenario being edited. Every edit is applied to a copy of the scenario's
  TOML tables and validated at once by :func:`workbench.scenario.parse.scenario_from_dict`. A valid edit becomes
  the scenario in effect; an invalid one leaves the last valid scenario in effect and records the one-line
  error and the section it came from, so the view can show it next to the field. The TOML text the user
  typed is never overwritten by a failed edit.
- :class:`SimulationJob` and :class:`PlanJob`: a background run of :func:`workbench.analysis.simulate` or
  :func:`workbench.analysis.plan` with progress, cancel and a cache keyed by the scenario text (which holds the
  study settings), so going back to an earlier scenario shows its results at once.
- :class:`SampleState`: one simulated dataset for the one-dataset view.

:class:`Workbench` ties them together: when the scenario changes, a linear-Gaussian scenario is re-run at
once with the exact engine (it is fast); other scenarios wait for :meth:`Workbench.run`.

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

import threading
import time
import warnings
from collections import OrderedDict
from collections.abc import Callable
from typing import Any

import param

from workbench.errors import Cancelled, ScenarioError, WorkbenchError
from workbench.graph.defaults import loads_scenario, scenario_from_dict
from workbench.scenario.model import Scenario
from workbench.scenario.presets import DEFAULT_PRESET, list_presets, preset_text
from workbench.scenario.write import dumps_scenario, scenario_to_dict

__all__ = [
    "MAX_UPLOAD_BYTES",
    "ScenarioState",
    "BackgroundJob",
    "SimulationJob",
    "PlanJob",
    "SampleState",
    "Workbench",
    "library_has",
    "strategy_fields",
    "restrict_text",
]

MAX_UPLOAD_BYTES = 256 * 1024
_CACHE_SIZE = 24


def library_has(module: str) -> bool:
    """True when ``workbench.<module>`` can be imported (parts of the library arrive one by one).

    Examples
    --------
    >>> library_has("scenario")
    True
    """
    return True  # scaffolding of the staged build, removed with the app split


def strategy_fields() -> set[str]:
    """The fields a :class:`~workbench.scenario.parse.Strategy` has in this installation (optional keys such as
    ``selection`` and ``restrict`` arrive with newer versions of the library).

    Examples
    --------
    >>> {"name", "adjust", "model"} <= strategy_fields()
    True
    """
    import dataclasses

    from workbench.scenario.model import Strategy

    return {f.name for f in dataclasses.fields(Strategy)}


def restrict_text(restrict) -> str:
    """A strategy's restriction as the text the editor shows (``shift = 0, distance = [10, 50]``).

    Examples
    --------
    >>> restrict_text((("shift", 0), ("distance", (10.0, 50.0))))
    'shift = 0, distance = [10, 50]'
    >>> restrict_text(())
    ''
    """
    items = restrict.items() if isinstance(restrict, dict) else (restrict or ())
    parts = []
    for name, value in items:
        if isinstance(value, list | tuple):
            parts.append(f"{name} = [{value[0]:g}, {value[1]:g}]")
        else:
            parts.append(f"{name} = {value}")
    return ", ".join(parts)


def _parse_restrict_text(value, *, where: str) -> dict:
    """A restriction typed as text (``shift = 0, distance = [10, 50]``) or given as a table, as a table.
    The text is read as the inside of a TOML inline table: parsed, never evaluated."""
    if isinstance(value, dict):
        return dict(value)
    text = str(value or "").strip().strip("{}").strip()
    if not text:
        return {}
    import tomllib

    try:
        parsed = tomllib.loads(f"restrict = {{ {text} }}")["restrict"]
    except tomllib.TOMLDecodeError:
        raise ScenarioError(
            f"write the units to keep as 'name = 0' or 'name = [low, high]', got '{text}'", where=where
        ) from None
    return parsed


def _parse_text(text: str) -> Scenario:
    """Parse TOML text typed or uploaded by a user. The text is always read as text, never as a path."""
    return loads_scenario(text if "\n" in text else text + "\n")


class ScenarioState(param.Parameterized):
    """The scenario being edited, with live validation.

    Parameters
    ----------
    preset : str
        Name of the built-in preset to start from (loading is by name only).

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

    SECTIONS = ("preset", "upload", "toml", "variables", "arrows", "question", "strategies", "study")

    def __init__(self, preset: str | None = None, scenario: Scenario | None = None, **params):
        if preset is not None:
            params["preset"] = preset
        super().__init__(**params)
        if scenario is None:
            scenario = _parse_text(preset_text(self.preset))
        self._commit(scenario, "preset")

    # --- internals -------------------------------------------------------------------------------------
    def _commit(self, scenario: Scenario, section: str, note: str = "") -> None:
        if self.scenario is not None and scenario == self.scenario:
            with param.parameterized.batch_call_watchers(self):
                self.error = ""
                self.error_section = ""
                self.note = note
                self.source = section
            return
        report, report_error = None, ""
        if library_has("check"):
            try:
                from workbench.analysis.check import check

                report = check(scenario)
            except WorkbenchError as exc:
                report_error = str(exc)
        else:
            report_error = "the graph analysis is not available in this installation"
        names = {s.name for s in scenario.strategies}
        selected = self.selected_strategy if self.selected_strategy in names else ""
        with param.parameterized.batch_call_watchers(self):
            self.error = ""
            self.error_section = ""
            self.note = note
            self.report = report
            self.report_error = report_error
            self.selected_strategy = selected
            self.text = dumps_scenario(scenario)
            self.source = section
            self.scenario = scenario
            self.revision += 1

    def _fail(self, exc: Exception, section: str) -> bool:
        with param.parameterized.batch_call_watchers(self):
            self.error = str(exc)
            self.error_section = section
            self.note = ""
        return False

    def _edit(self, section: str, change: Callable[[dict], str | None]) -> bool:
        """Apply ``change`` to the scenario's TOML tables, validate, and commit or record the error."""
        data = scenario_to_dict(self.scenario, include_default_strategies=True)
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                note = change(data) or ""
                scenario = scenario_from_dict(data)
        except ScenarioError as exc:
            return self._fail(exc, section)
        warned = "; ".join(str(w.message) for w in caught)
        self._commit(scenario, section, "; ".join(t for t in (note, warned) if t))
        return True

    @staticmethod
    def _prune(data: dict, names: set[str]) -> str:
        """Remove ``names`` from every strategy's adjustment set, restriction, matching and ``question.also``
        (a selection rule left with no candidate is dropped: the strategy adjusts for nothing)."""
        removed = []
        for table in data.get("strategies", []):
            kept = [v for v in table.get("adjust", []) if v not in names]
            restrict = {k: v for k, v in (table.get("restrict") or {}).items() if k not in names}
            match = [v for v in table.get("match", []) if v not in names]
            if (
                len(kept) != len(table.get("adjust", []))
                or len(restrict) != len(table.get("restrict") or {})
                or len(match) != len(table.get("match", []))
            ):
                removed.append(table["name"])
            if "match" in table:
                if match:
                    table["match"] = match
                else:
                    del table["match"]
            table["adjust"] = kept
            if "restrict" in table:
                if restrict:
                    table["restrict"] = restrict
                else:
                    del table["restrict"]
            if not kept:
                table.pop("selection", None)
        also = data["question"].get("also")
        if also:
            data["question"]["also"] = [v for v in also if v not in names]
            if not data["question"]["also"]:
                del data["question"]["also"]
        if removed:
            return f"removed {', '.join(sorted(names))} from strategies: {', '.join(removed)}"
        return ""

    # --- whole scenarios -------------------------------------------------------------------------------
    @param.depends("preset", watch=True)
    def _load_selected_preset(self) -> None:
        self.load_preset(self.preset)

    def load_preset(self, name: str) -> bool:
        """Load a built-in preset by name (never a path)."""
        try:
            scenario = _parse_text(preset_text(name))
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
                scenario = _parse_text(text)
        except ScenarioError as exc:
            return self._fail(exc, "toml")
        self._commit(scenario, "toml", "; ".join(str(w.message) for w in caught))
        self.text = text  # keep the user's own layout and comments while it says the same scenario
        return True

    def upload(self, content: bytes | None, filename: str | None) -> bool:
        """Open an uploaded scenario: TOML only, at most 256 KiB, parsed and never executed.

        Examples
        --------
        >>> state = ScenarioState()
        >>> state.upload(b"title = ", "broken.toml")
        False
        >>> state.error
        'upload broken.toml: line 1, column 9: TOML syntax error: Invalid value'
        """
        label = f"upload {filename}" if filename else "upload"
        if content is None:
            return self._fail(ScenarioError("no file received", where=label), "upload")
        if not (filename or "").lower().endswith(".toml"):
            return self._fail(ScenarioError("only .toml scenario files can be opened", where=label), "upload")
        if len(content) > MAX_UPLOAD_BYTES:
            return self._fail(
                ScenarioError(
                    f"{len(content):,} bytes is over the limit of {MAX_UPLOAD_BYTES:,}", where=label
                ),
                "upload",
            )
        try:
            text = content.decode("utf-8")
        except UnicodeDecodeError:
            return self._fail(ScenarioError("not UTF-8 text", where=label), "upload")
        try:
            scenario = _parse_text(text)
        except ScenarioError as exc:
            return self._fail(ScenarioError(str(exc), where=label), "upload")
        self._commit(scenario, "upload")
        return True

    def download_text(self) -> str:
        """The scenario in effect as TOML text, for saving."""
        return dumps_scenario(self.scenario)

    # --- variables -------------------------------------------------------------------------------------
    def add_variable(self, name: str, type: str = "continuous") -> bool:
        """Add a variable (continuous with noise SD 1, or binary with proportion 0.5)."""
        name = (name or "").strip()

        def change(data):
            if not name:
                raise ScenarioError("type a name for the new variable", where="variables")
            if name in data["variables"]:
                raise ScenarioError(f"there is already a variable '{name}'", where=f"variables.{name}")
            table = {"type": type, "proportion": 0.5} if type == "binary" else {"type": type}
            data["variables"][name] = table

        return self._edit("variables", change)

    def remove_variable(self, name: str) -> bool:
        """Remove a variable and its arrows (not the exposure or the outcome)."""

        def change(data):
            q = data["question"]
            if name not in data["variables"]:
                raise ScenarioError(f"no variable '{name}'", where="variables")
            if name in (q["exposure"], q["outcome"]):
                role = "exposure" if name == q["exposure"] else "outcome"
                raise ScenarioError(
                    f"'{name}' is the {role}; choose another {role} first", where=f"variables.{name}"
                )
            del data["variables"][name]
            data["arrows"] = [a for a in data["arrows"] if name not in (a["from"], a["to"])]
            return self._prune(data, {name})

        return self._edit("variables", change)

    def set_variable(self, name: str, field: str, value: Any) -> bool:
        """Change one field of a variable: name, type, noise_sd, baseline, proportion, observed or label."""

        def change(data):
            if name not in data["variables"]:
                raise ScenarioError(f"no variable '{name}'", where="variables")
            table = data["variables"][name]
            q = data["question"]
            if field == "name":
                new = str(value).strip()
                if new == name:
                    return ""
                if new in data["variables"]:
                    raise ScenarioError(f"there is already a variable '{new}'", where=f"variables.{new}")
                data["variables"] = {(new if k == name else k): v for k, v in data["variables"].items()}
                for a in data["arrows"]:
                    a["from"] = new if a["from"] == name else a["from"]
                    a["to"] = new if a["to"] == name else a["to"]
                for key in ("exposure", "outcome"):
                    q[key] = new if q[key] == name else q[key]
                if "also" in q:
                    q["also"] = [new if v == name else v for v in q["also"]]
                for s in data.get("strategies", []):
                    s["adjust"] = [new if v == name else v for v in s["adjust"]]
                    if "match" in s:
                        s["match"] = [new if v == name else v for v in s["match"]]
                    if s.get("restrict"):
                        s["restrict"] = {(new if k == name else k): v for k, v in s["restrict"].items()}
                return ""
            if field == "type":
                if value == table.get("type"):
                    return ""
                keep = {k: table[k] for k in ("observed", "label", "position") if k in table}
                for s in data.get("strategies", []):
                    # a restriction's form depends on the type (a value or an interval): drop it
                    (s.get("restrict") or {}).pop(name, None)
                    if "restrict" in s and not s["restrict"]:
                        del s["restrict"]
                    if name in s.get("match", []):  # exact matching needs a binary variable
                        s["match"] = [v for v in s["match"] if v != name]
                        if not s["match"]:
                            del s["match"]
                    if value == "binary" and name == q["outcome"]:
                        s.pop("selection", None)  # selection rules apply to continuous outcomes only
                if value == "binary":
                    data["variables"][name] = {"type": "binary", "proportion": 0.5, **keep}
                    if name == q["outcome"] and q.get("target") == "direct":
                        q["target"] = "total"
                        return "the target is now the total effect (a binary outcome has no direct target)"
                    return ""
                data["variables"][name] = {"type": str(value), **keep}
                if name == q["outcome"]:
                    q["scale"] = "difference"
                    for s in data.get("strategies", []):
                        s["model"] = "ols"
                        s.pop("standardize", None)
                    return "a continuous outcome is fitted by OLS; strategies set to model = ols"
                return ""
            if field == "label":
                text = str(value or "").strip()
                if text:
                    table["label"] = text
                else:
                    table.pop("label", None)
                return ""
            if field == "observed":
                table["observed"] = bool(value)
                return "" if value else self._prune(data, {name})
            if field not in ("noise_sd", "baseline", "proportion"):
                raise ScenarioError(f"cannot edit '{field}'", where=f"variables.{name}")
            if field in ("noise_sd", "baseline") and table.get("type") == "binary":
                raise ScenarioError(
                    "a binary variable is set by its proportion", where=f"variables.{name}.{field}"
                )
            if field == "proportion" and table.get("type") != "binary":
                raise ScenarioError(
                    "only a binary variable has a proportion", where=f"variables.{name}.{field}"
                )
            table[field] = value
            return ""

        return self._edit("variables", change)

    # --- arrows ----------------------------------------------------------------------------------------
    def add_arrow(self, source: str, target: str, effect: float = 0.5) -> bool:
        """Add an arrow ``source -> target``."""

        def change(data):
            data["arrows"].append({"from": source, "to": target, "effect": effect})

        return self._edit("arrows", change)

    def remove_arrow(self, index: int) -> bool:
        """Remove the arrow at ``index`` (counted from 0)."""

        def change(data):
            if not 0 <= index < len(data["arrows"]):
                raise ScenarioError(f"no arrow number {index + 1}", where="arrows")
            del data["arrows"][index]

        return self._edit("arrows", change)

    def set_arrow(
        self, index: int, *, source: str | None = None, target: str | None = None, effect: Any = None
    ) -> bool:
        """Change the arrow at ``index`` (counted from 0): its source, target or effect."""

        def change(data):
            if not 0 <= index < len(data["arrows"]):
                raise ScenarioError(f"no arrow number {index + 1}", where="arrows")
            arrow = data["arrows"][index]
            if source is not None:
                arrow["from"] = source
            if target is not None:
                arrow["to"] = target
            if effect is not None:
                arrow["effect"] = effect

        return self._edit("arrows", change)

    # --- question and study ----------------------------------------------------------------------------
    def set_question(self, **fields: Any) -> bool:
        """Change the exposure, outcome, target or scale."""

        def change(data):
            q = data["question"]
            for key, value in fields.items():
                if key not in ("exposure", "outcome", "target", "scale"):
                    raise ScenarioError(f"cannot edit '{key}'", where="question")
                q[key] = value
            return self._prune(data, {q["exposure"], q["outcome"]})

        return self._edit("question", change)

    def set_study(self, section: str = "study", **fields: Any) -> bool:
        """Change study settings: n, replicates, seed, alpha, sample_sizes, target_power, target_halfwidth
        (``None`` removes the optional target half-width). ``section`` names where the edit came from."""

        def change(data):
            for key, value in fields.items():
                if value is None and key == "target_halfwidth":
                    data["study"].pop(key, None)
                else:
                    data["study"][key] = list(value) if isinstance(value, tuple) else value

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
        words = [w for w in text.replace(",", " ").split() if w]
        sizes = []
        for word in words:
            if not word.isdigit():
                return self._fail(
                    ScenarioError(f"'{word}' is not a whole number", where="study.sample_sizes"), section
                )
            sizes.append(int(word))
        return self.set_study(section=section, sample_sizes=sizes)

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
    ) -> bool:
        """Change a strategy's adjustment set, model, standardisation, name, selection rule or restriction.

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

        def change(data):
            for table in data["strategies"]:
                if table["name"] == name:
                    if adjust is not None:
                        table["adjust"] = list(adjust)
                    if model is not None:
                        table["model"] = model
                        if model != "logit":
                            table.pop("standardize", None)
                        else:
                            table.pop("selection", None)  # selection rules apply to OLS only
                    if standardize is not None:
                        table["standardize"] = bool(standardize)
                    if selection is not None:
                        if selection in ("", "fixed"):
                            table.pop("selection", None)
                        else:
                            table["selection"] = selection
                    if restrict is not None:
                        parsed = _parse_restrict_text(restrict, where=f"strategies.{name}.restrict")
                        if parsed:
                            table["restrict"] = parsed
                        else:
                            table.pop("restrict", None)
                    if new_name is not None:
                        table["name"] = new_name
                    return ""
            raise ScenarioError(f"no strategy '{name}'", where="strategies")

        ok = self._edit("strategies", change)
        if ok and new_name is not None and self.selected_strategy == "":
            self.selected_strategy = new_name.strip()
        return ok

    def add_suggested_strategies(self) -> bool:
        """Add every minimal valid adjustment set and the optimal valid set not already present."""
        if self.report is None:
            return self._fail(
                ScenarioError(self.report_error or "the graph analysis is not available", where="strategies"),
                "strategies",
            )
        suggestions = [(f"minimal_{i}", tuple(found)) for i, found in enumerate(self.report.minimal_sets, 1)]
        if self.report.optimal_set is not None:
            suggestions.append(("optimal", tuple(self.report.optimal_set)))
        model = "logit" if self.scenario.outcome.is_binary else "ols"
        standardize = self.scenario.outcome.is_binary

        def change(data):
            present = {
                frozenset(s["adjust"])
                for s in data["strategies"]
                if s.get("model", "ols") == model and not s.get("selection") and not s.get("restrict")
            }
            taken = {s["name"] for s in data["strategies"]}
            added = []
            for label, adjust in suggestions:
                if frozenset(adjust) in present:
                    continue
                chosen, k = label, 2
                while chosen in taken:
                    chosen, k = f"{label}_{k}", k + 1
                table = {"name": chosen, "adjust": sorted(adjust), "model": model}
                if standardize:
                    table["standardize"] = True
                data["strategies"].append(table)
                present.add(frozenset(adjust))
                taken.add(chosen)
                added.append(chosen)
            return f"added {', '.join(added)}" if added else "the minimal and optimal sets are already listed"

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
        if not name or not library_has("adjustment"):
            return None
        try:
            chosen = self.scenario.strategy(name)
        except KeyError:
            return None
        from workbench.graph.adjustment import judge

        try:
            return judge(self.scenario, chosen.adjust)
        except WorkbenchError:
            return None

    def strategy_rows(self) -> list[dict]:
        """One dict per strategy: name, adjust, model, standardize, valid, reasons (from the check report)."""
        by_name = {}
        if self.report is not None:
            by_name = {row["name"]: row for row in self.report.strategies}
        rows = []
        for s in self.scenario.strategies:
            checked = by_name.get(s.name, {})
            rows.append(
                {
                    "name": s.name,
                    "adjust": list(s.adjust),
                    "model": s.model,
                    "standardize": s.standardize,
                    "selection": getattr(s, "selection", None),
                    "restrict": dict(getattr(s, "restrict", ()) or ()),
                    "match": list(getattr(s, "match", ()) or ()),
                    "valid": checked.get("valid"),
                    "reasons": list(checked.get("reasons", [])),
                }
            )
        return rows


# ------------------------------------------------------------------------------------------------------
# Background jobs
# ------------------------------------------------------------------------------------------------------
class BackgroundJob(param.Parameterized):
    """A cancellable computation on a scenario, run in a worker thread, with progress and a result cache.

    Subclasses name the library module they need (``module``) and implement :meth:`compute`.
    With ``deferred`` set, the worker thread's progress and result are queued and applied by :meth:`poll`,
    which a user interface calls periodically on its own thread; otherwise they are applied at once.
    """

    status = param.Selector(default="idle", objects=["idle", "running", "done", "cancelled", "failed"])
    progress = param.Number(default=0.0, bounds=(0.0, 1.0))
    message = param.String(default="")
    result = param.Parameter(default=None, doc="The result for ``result_key``, or None.")
    result_key = param.String(default="", doc="Cache key of the scenario the result belongs to.")
    deferred = param.Boolean(default=False, doc="Queue updates from worker threads for :meth:`poll`.")

    module = ""
    label = "run"

    def __init__(self, **params):
        super().__init__(**params)
        self._cache: OrderedDict[str, Any] = OrderedDict()
        self._token = 0
        self._cancel = threading.Event()
        self._lock = threading.Lock()
        self._thread: threading.Thread | None = None
        self._pending: dict[str, Any] = {}

    @property
    def available(self) -> bool:
        """Whether the library function this job needs is installed."""
        return library_has(self.module)

    @staticmethod
    def key(scenario: Scenario) -> str:
        """Cache key: the scenario's TOML text, which includes the study settings and seed."""
        return dumps_scenario(scenario)

    def compute(self, scenario: Scenario, progress: Callable[[int, int], None]):  # pragma: no cover
        raise NotImplementedError

    def is_current(self, scenario: Scenario) -> bool:
        """True when the result shown belongs to ``scenario``."""
        return self.result is not None and self.result_key == self.key(scenario)

    def show_cached(self, scenario: Scenario) -> bool:
        """Show the cached result of ``scenario`` if there is one."""
        key = self.key(scenario)
        if key in self._cache:
            self._cache.move_to_end(key)
            with param.parameterized.batch_call_watchers(self):
                self.result_key = key
                self.result = self._cache[key]
                self.status = "done"
                self.progress = 1.0
                self.message = f"{self.label}: from the cache"
            return True
        return False

    def clear(self) -> None:
        """Forget the result shown (the cache stays), cancelling any running computation."""
        self.cancel()
        with param.parameterized.batch_call_watchers(self):
            self.result, self.result_key = None, ""
            self.status, self.progress, self.message = "idle", 0.0, ""

    def cancel(self) -> None:
        """Ask the running computation to stop; its result, if any, is discarded."""
        with self._lock:
            self._token += 1
            self._cancel.set()
            self._pending = {}
        if self.status == "running":
            with param.parameterized.batch_call_watchers(self):
                self.status, self.message, self.progress = "cancelled", f"{self.label} cancelled", 0.0

    def _publish(self, token: int, **values: Any) -> None:
        """Hand values to the interface: at once, or (with ``deferred``) at the next :meth:`poll`."""
        with self._lock:
            if token != self._token:
                return
            if self.deferred:
                self._pending.update(values)
                return
        with param.parameterized.batch_call_watchers(self):
            for name, value in values.items():
                setattr(self, name, value)

    def poll(self) -> bool:
        """Apply the values a worker thread handed over since the last call (the interface calls this
        periodically on its own thread). Returns whether anything changed."""
        with self._lock:
            pending, self._pending = self._pending, {}
        if not pending:
            return False
        with param.parameterized.batch_call_watchers(self):
            for name, value in pending.items():
                setattr(self, name, value)
        return True

    def start(self, scenario: Scenario, *, background: bool = True) -> None:
        """Compute for ``scenario`` (from the cache when possible). A running computation is cancelled."""
        if self.show_cached(scenario):
            with self._lock:
                self._token += 1
                self._cancel.set()
                self._pending = {}
            return
        if not self.available:
            with param.parameterized.batch_call_watchers(self):
                self.status = "idle"
                self.message = f"workbench.{self.module} is not available yet"
            return
        with self._lock:
            self._cancel.set()
            self._token += 1
            self._pending = {}
            token = self._token
            cancel = threading.Event()
            self._cancel = cancel
        key = self.key(scenario)
        with param.parameterized.batch_call_watchers(self):
            self.status = "running"
            self.progress = 0.0
            self.message = f"{self.label}: starting"
        last = [0.0]

        def progress(done: int, total: int) -> None:
            if cancel.is_set():
                raise Cancelled(f"{self.label} cancelled")
            now = time.monotonic()
            if now - last[0] > 0.15 or done >= total:
                last[0] = now
                share = min(1.0, done / total) if total else 0.0
                self._publish(token, progress=share, message=f"{self.label}: {done:,} of {total:,}")

        def work() -> None:
            started = time.monotonic()
            try:
                result = self.compute(scenario, progress)
            except Cancelled:
                self._publish(token, status="cancelled", message=f"{self.label} cancelled", progress=0.0)
                return
            except WorkbenchError as exc:
                self._publish(token, status="failed", message=str(exc), progress=0.0)
                return
            except Exception as exc:  # a bug must not freeze the page; say what happened
                self._publish(token, status="failed", message=f"{type(exc).__name__}: {exc}", progress=0.0)
                return
            if cancel.is_set():
                return
            self._cache[key] = result
            while len(self._cache) > _CACHE_SIZE:
                self._cache.popitem(last=False)
            seconds = time.monotonic() - started
            self._publish(
                token,
                result_key=key,
                result=result,
                status="done",
                progress=1.0,
                message=f"{self.label}: done in {seconds:.1f} s",
            )

        if background:
            self._thread = threading.Thread(target=work, name=f"workbench-{self.module}", daemon=True)
            self._thread.start()
        else:
            work()

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the worker thread to finish (for tests and scripts)."""
        if self._thread is not None:
            self._thread.join(timeout)


class SimulationJob(BackgroundJob):
    """Runs :func:`workbench.analysis.simulate.simulate` with the scenario's study settings."""

    module = "simulate"
    label = "simulation"

    def compute(self, scenario, progress):
        from workbench.analysis.simulate import simulate

        return simulate(scenario, progress=progress)


class PlanJob(BackgroundJob):
    """Runs :func:`workbench.analysis.plan.plan` over the scenario's sample sizes."""

    module = "plan"
    label = "sample-size plan"

    def compute(self, scenario, progress):
        from workbench.analysis.plan import plan

        return plan(scenario, progress=progress)


class SampleState(param.Parameterized):
    """One simulated dataset, drawn with the scenario's n and seed, for the one-dataset view.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sample = SampleState()
    >>> sample.update(load_preset("common_cause"))
    >>> sample.covariate
    'soil_quality'
    """

    covariate = param.Selector(
        default=None, objects=[], allow_None=True, doc="Variable that colours the points."
    )
    data = param.DataFrame(default=None, allow_None=True, doc="The dataset, or None before the first draw.")
    draw_number = param.Integer(default=0, bounds=(0, None), doc="Which dataset: 0 uses the study seed.")
    message = param.String(default="")

    def __init__(self, **params):
        super().__init__(**params)
        self._scenario: Scenario | None = None

    def update(self, scenario: Scenario) -> None:
        """Redraw for a new scenario, keeping the chosen covariate when it still exists."""
        self._scenario = scenario
        q = scenario.question
        choices = [n for n in scenario.names if n not in (q.exposure, q.outcome)]
        current = self.covariate if self.covariate in choices else (choices[0] if choices else None)
        self.param.covariate.objects = choices
        with param.parameterized.batch_call_watchers(self):
            self.covariate = current
            self._draw()

    @param.depends("draw_number", watch=True)
    def _draw(self) -> None:
        if self._scenario is None:
            return
        if not library_has("generate"):
            self.data = None
            self.message = "workbench.generate is not available yet"
            return
        from numpy.random import SeedSequence

        from workbench.engine.generate import draw

        seed = SeedSequence([self._scenario.study.seed, self.draw_number]).generate_state(1)[0]
        try:
            self.data = draw(self._scenario, self._scenario.study.n, seed=int(seed))
            self.message = ""
        except WorkbenchError as exc:
            self.data = None
            self.message = str(exc)


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
        Queue the worker threads' updates until :meth:`poll` (see :class:`BackgroundJob`).
    """

    live = param.Boolean(default=True, doc="Re-run linear-Gaussian scenarios at once on every change.")
    background = param.Boolean(default=True)
    scenario_state = param.ClassSelector(class_=ScenarioState)
    simulation = param.ClassSelector(class_=SimulationJob)
    planning = param.ClassSelector(class_=PlanJob)
    sample = param.ClassSelector(class_=SampleState)

    def __init__(self, preset: str | None = None, deferred: bool = False, **params):
        super().__init__(**params)
        self.scenario_state = ScenarioState(preset=preset or DEFAULT_PRESET)
        self.simulation = SimulationJob(deferred=deferred)
        self.planning = PlanJob(deferred=deferred)
        self.sample = SampleState()
        self.scenario_state.param.watch(self._scenario_changed, "scenario")
        self._scenario_changed()

    @property
    def scenario(self) -> Scenario:
        return self.scenario_state.scenario

    @property
    def runs_live(self) -> bool:
        """Whether the current scenario re-runs on every change (linear-Gaussian with live on)."""
        return self.live and self.scenario.is_linear_gaussian

    def _scenario_changed(self, *_events) -> None:
        scenario = self.scenario
        self.sample.update(scenario)
        replaced = self.scenario_state.source in ("preset", "upload")
        for job in (self.simulation, self.planning):
            if self.runs_live:
                job.start(scenario, background=self.background)
            elif job.show_cached(scenario):
                continue
            elif replaced:
                job.clear()  # a different scenario: the old results would only confuse
            elif job.status == "running":
                job.cancel()

    def run(self) -> None:
        """Start the simulation and the sample-size plan for the scenario in effect."""
        self.simulation.start(self.scenario, background=self.background)
        self.planning.start(self.scenario, background=self.background)

    def cancel(self) -> None:
        """Cancel the running computations."""
        self.simulation.cancel()
        self.planning.cancel()

    def poll(self) -> None:
        """Apply the progress and results the worker threads handed over (see :meth:`BackgroundJob.poll`)."""
        self.simulation.poll()
        self.planning.poll()
