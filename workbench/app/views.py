"""The dashboard's views: thin ``pn.viewable.Viewer`` classes over the state of
:mod:`workbench.app.state`.

Views hold no computation: they show the state, and turn user actions into calls of the state's methods.
Errors from an edit are shown next to the section the edit came from; the last valid scenario stays in
effect.
"""

from __future__ import annotations

import html
import io
import re
import tempfile
from pathlib import Path

import pandas as pd
import panel as pn
import param
from bokeh.models.widgets.tables import NumberFormatter

from workbench.app.state import (
    MAX_UPLOAD_BYTES,
    ScenarioState,
    Workbench,
    library_has,
    restrict_text,
    strategy_fields,
)
from workbench.report import figures, tables
from workbench.scenario.model import Scenario

__all__ = [
    "ErrorBox",
    "Sidebar",
    "GraphView",
    "VariablesEditor",
    "ArrowsEditor",
    "StrategiesEditor",
    "TomlEditor",
    "EstimatesView",
    "SampleSizeView",
    "ExplainView",
    "ExportView",
    "JobProgress",
    "library_status",
]

_SIDEBAR_WIDTH = 290
_MAIN_WIDTH = 1090
_NOTE_STYLE = {"color": "#444", "font-size": "13px"}
_TABLE_STYLE = f"<style>{tables.TABLE_CSS}</style>"
#: The primary button colours, for download buttons (see ExportView).
_PRIMARY_BUTTON_CSS = """
:host .bk-btn, :host .bk-btn a { background-color: #0072b5 !important; border-color: #0072b5 !important;
  color: #ffffff !important; }
:host .bk-btn:hover, :host .bk-btn:hover a { background-color: #005f96 !important; }
:host .bk-btn[disabled] { opacity: 0.55; }
"""
#: The strategy editor's choices of how the adjustment set is chosen (value -> label).
_SELECTION_CHOICES = (
    ("fixed set", "fixed"),
    ("keep if significant (p < alpha)", "p_value"),
    ("keep if change > 10%", "change_in_estimate"),
)


def _widget(cls, text: str | None = None, **params):
    """A widget titled ``text``, written for old and new Panel alike: newer Panel calls the title ``label``
    (older ``name``) and a button's style ``color`` (older ``button_type``)."""
    if "button_type" in params and "color" in cls.param:
        params["color"] = params.pop("button_type")
    if text is not None:
        params["label" if "label" in cls.param else "name"] = text
    return cls(**params)


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "_", text.lower()).strip("_")[:40] or "scenario"


def _html(body: str, **kwargs) -> pn.pane.HTML:
    return pn.pane.HTML(_TABLE_STYLE + body, **kwargs)


def _placeholder(text: str, css_class: str = "wb-placeholder") -> pn.pane.Markdown:
    return pn.pane.Markdown(
        text, css_classes=[css_class], styles={"color": "#555", "font-size": "14px"}, width=_MAIN_WIDTH - 40
    )


class ErrorBox(pn.viewable.Viewer):
    """The error of the last failed edit, shown when it came from one of ``sections``; notes shown too."""

    state = param.ClassSelector(class_=ScenarioState)
    sections = param.List(default=[])
    width = param.Integer(default=540, allow_None=True, doc="Width in pixels; None fills the container.")

    def __init__(self, **params):
        super().__init__(**params)
        size = {"width": self.width} if self.width else {"sizing_mode": "stretch_width"}
        self._error = pn.pane.Alert(
            "",
            alert_type="danger",
            visible=False,
            css_classes=["wb-error", "wb-error-" + "-".join(self.sections)],
            margin=(4, 5),
            **size,
        )
        self._note = pn.pane.Markdown(
            "",
            visible=False,
            styles={"color": "#555", "font-size": "12px"},
            margin=(0, 5),
            css_classes=["wb-note", "wb-note-" + "-".join(self.sections)],
            **size,
        )
        self.state.param.watch(self._update, ["error", "error_section", "note", "source"])
        self._update()

    def _update(self, *_):
        mine = self.state.error and self.state.error_section in self.sections
        self._error.object = f"**Not applied:** {self.state.error}" if mine else ""
        self._error.visible = bool(mine)
        # a note belongs next to the edit that caused it (one place, not every box on the page)
        noted = self.state.source in self.sections
        self._note.object = self.state.note
        self._note.visible = bool(self.state.note) and not mine and noted

    def __panel__(self):
        return pn.Column(self._error, self._note, margin=0)


# ------------------------------------------------------------------------------------------------------
# Sidebar
# ------------------------------------------------------------------------------------------------------
class Sidebar(pn.viewable.Viewer):
    """Preset picker, open and save, study settings, and the Run and Cancel buttons with progress."""

    workbench = param.ClassSelector(class_=Workbench)

    def __init__(self, **params):
        super().__init__(**params)
        wb = self.workbench
        state = wb.scenario_state
        from workbench.scenario.presets import list_presets

        presets = list_presets()
        self.preset = _widget(
            pn.widgets.Select,
            "Preset",
            options={f"{t} ({n})": n for n, t in presets.items()},
            value=state.preset,
            css_classes=["wb-preset"],
            width=_SIDEBAR_WIDTH - 20,
        )
        self._presets = {f"{t} ({n})": n for n, t in presets.items()}
        self.preset.param.watch(self._preset_chosen, "value")
        state.param.watch(self._source_changed, "source")
        self.upload = pn.widgets.FileInput(
            accept=".toml", multiple=False, css_classes=["wb-upload"], width=_SIDEBAR_WIDTH - 20
        )
        self.upload.param.watch(self._uploaded, "value")
        self.download = _widget(
            pn.widgets.FileDownload,
            callback=self._toml_file,
            filename="scenario.toml",
            label="Save scenario (TOML)",
            embed=False,
            button_type="default",
            css_classes=["wb-save"],
            width=_SIDEBAR_WIDTH - 20,
        )
        st = state.scenario.study
        self.n = _widget(
            pn.widgets.IntInput,
            "Sample size n",
            value=st.n,
            start=3,
            step=50,
            width=125,
            css_classes=["wb-n"],
        )
        self.replicates = _widget(
            pn.widgets.IntInput,
            "Replicates",
            value=st.replicates,
            start=1,
            step=500,
            width=125,
            css_classes=["wb-replicates"],
        )
        self.seed = _widget(
            pn.widgets.IntInput, "Seed", value=st.seed, start=0, width=125, css_classes=["wb-seed"]
        )
        self.alpha = _widget(
            pn.widgets.FloatInput,
            "Alpha",
            value=st.alpha,
            start=0.001,
            end=0.5,
            step=0.01,
            width=125,
            css_classes=["wb-alpha"],
        )
        for widget in (self.n, self.replicates, self.seed, self.alpha):
            widget.param.watch(self._study_edited, "value")
        self.live = _widget(
            pn.widgets.Checkbox,
            "Re-run at once on every change (linear-Gaussian graphs)",
            value=wb.live,
            css_classes=["wb-live"],
        )
        self.live.param.watch(lambda e: setattr(wb, "live", e.new), "value")
        self.run = _widget(pn.widgets.Button, "Run", button_type="primary", width=130, css_classes=["wb-run"])
        self.cancel = _widget(
            pn.widgets.Button,
            "Cancel",
            button_type="default",
            width=130,
            disabled=True,
            css_classes=["wb-cancel"],
        )
        self.run.on_click(lambda e: wb.run())
        self.cancel.on_click(lambda e: wb.cancel())
        self.progress = pn.indicators.Progress(
            value=0,
            max=100,
            width=_SIDEBAR_WIDTH - 20,
            height=14,
            bar_color="primary",
            css_classes=["wb-progress"],
        )
        self.status = pn.pane.Markdown(
            "", css_classes=["wb-status"], styles={"font-size": "12px"}, width=_SIDEBAR_WIDTH - 20
        )
        state.param.watch(self._scenario_changed, "scenario")
        for job in (wb.simulation, wb.planning):
            job.param.watch(self._job_changed, ["status", "progress", "message"])
        self._job_changed()

    _syncing = False

    def _preset_chosen(self, event):
        if not event.new or self._syncing:
            return  # the "(opened file)" entry, or the list being rewritten
        state = self.workbench.scenario_state
        if state.preset != event.new:
            state.preset = event.new
        else:  # the same preset again, after a file was opened: load it anew
            state.load_preset(event.new)

    def _source_changed(self, *_):
        """After a file is opened the preset list says so; choosing any preset (even the one shown before)
        then loads it."""
        state = self.workbench.scenario_state
        self._syncing = True
        try:
            if state.source == "upload":
                self.preset.param.update(options={"(the opened file)": "", **self._presets}, value="")
            elif state.source == "preset" and "" in self.preset.options.values():
                self.preset.param.update(options=dict(self._presets), value=state.preset)
        finally:
            self._syncing = False

    def _uploaded(self, event):
        if event.new is None:
            return
        self.workbench.scenario_state.upload(event.new, self.upload.filename)

    def _toml_file(self):
        state = self.workbench.scenario_state
        self.download.filename = f"{_slug(state.scenario.title)}.toml"
        return io.StringIO(state.download_text())

    def _study_edited(self, _event):
        st = self.workbench.scenario.study
        values = {
            "n": self.n.value,
            "replicates": self.replicates.value,
            "seed": self.seed.value,
            "alpha": self.alpha.value,
        }
        changed = {k: v for k, v in values.items() if v is not None and v != getattr(st, k)}
        if changed:
            self.workbench.scenario_state.set_study(**changed)

    def _scenario_changed(self, *_):
        st = self.workbench.scenario.study
        self.n.value, self.replicates.value, self.seed.value, self.alpha.value = (
            st.n,
            st.replicates,
            st.seed,
            st.alpha,
        )

    def _job_changed(self, *_):
        sim, plan = self.workbench.simulation, self.workbench.planning
        running = [job for job in (sim, plan) if job.status == "running"]
        self.cancel.disabled = not running
        self.run.disabled = bool(running) and not self.workbench.runs_live
        shown = running[0] if running else sim
        self.progress.value = int(
            round(100 * (shown.progress if running else (1.0 if sim.status == "done" else 0.0)))
        )
        lines = []
        for job in (sim, plan):
            if job.message:
                lines.append(f"{job.message}")
        if not sim.available:
            lines.append("The simulation engine is not installed yet.")
        self.status.object = "  \n".join(lines)

    def __panel__(self):
        state = self.workbench.scenario_state
        head = pn.pane.HTML(
            "<div style='font-size:20px;font-weight:700;color:#111'>workbench</div>"
            "<div style='font-size:12px;color:#555'>adjustment strategies, simulated</div>",
            margin=(6, 10),
        )
        return pn.Column(
            head,
            self.preset,
            pn.pane.Markdown(
                f"**Open a scenario file** (TOML, at most {MAX_UPLOAD_BYTES // 1024} KiB)",
                margin=(6, 10, 0, 10),
                styles={"font-size": "12px"},
            ),
            self.upload,
            ErrorBox(state=state, sections=["upload", "preset"], width=None),
            self.download,
            pn.pane.Markdown("**Study settings**", margin=(10, 10, 0, 10)),
            pn.Row(self.n, self.replicates, margin=0),
            pn.Row(self.seed, self.alpha, margin=0),
            ErrorBox(state=state, sections=["study"], width=None),
            self.live,
            pn.Row(self.run, self.cancel, margin=(8, 0)),
            self.progress,
            self.status,
            width=_SIDEBAR_WIDTH,
            styles={"background": "#f3f4f6", "border-right": "1px solid #ddd", "min-height": "100vh"},
            css_classes=["wb-sidebar"],
        )


# ------------------------------------------------------------------------------------------------------
# Graph and scenario editing
# ------------------------------------------------------------------------------------------------------
class GraphView(pn.viewable.Viewer):
    """The graph, the question selectors, and the path highlight of a chosen strategy."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.pane = pn.pane.Bokeh(css_classes=["wb-graph"], margin=(0, 5))
        self.exposure = _widget(pn.widgets.Select, "Exposure", width=145, css_classes=["wb-exposure"])
        self.outcome = _widget(pn.widgets.Select, "Outcome", width=145, css_classes=["wb-outcome"])
        self.target = _widget(
            pn.widgets.Select, "Target", options=["total", "direct"], width=145, css_classes=["wb-target"]
        )
        self.scale = _widget(
            pn.widgets.Select,
            "Scale",
            options=["difference", "log_odds_ratio"],
            width=145,
            css_classes=["wb-scale"],
        )
        for key in ("exposure", "outcome", "target", "scale"):
            getattr(self, key).param.watch(lambda e, key=key: self._question_edited(key, e.new), "value")
        self.highlight = _widget(
            pn.widgets.Select, "Show the paths of strategy", width=300, css_classes=["wb-highlight"]
        )
        self.highlight.param.watch(self._highlight_chosen, "value")
        self.verdict = pn.pane.HTML("", width=300, css_classes=["wb-verdict"])
        self.truth = pn.pane.HTML("", width=300, css_classes=["wb-truth"])
        self.state.param.watch(self._refresh, ["scenario", "selected_strategy", "report"])
        self._refresh()

    def _question_edited(self, key, value):
        if self._syncing or value is None:
            return
        if getattr(self.state.scenario.question, key) != value:
            self.state.set_question(**{key: value})

    def _highlight_chosen(self, event):
        if not self._syncing:
            self.state.selected_strategy = "" if event.new in (None, "(none)") else event.new

    _syncing = False

    def _refresh(self, *_):
        state = self.state
        sc: Scenario = state.scenario
        report = state.report
        verdict = state.verdict()
        adjust = sc.strategy(state.selected_strategy).adjust if state.selected_strategy else ()
        self.pane.object = figures.graph_figure(
            sc, report.roles if report else None, verdict, adjust=adjust, width=700, height=370
        )
        self._syncing = True
        try:
            q = sc.question
            self.exposure.options = sc.observed_names
            self.outcome.options = sc.observed_names
            self.exposure.value, self.outcome.value = q.exposure, q.outcome
            self.target.value = q.target
            self.scale.value = q.scale
            self.scale.disabled = not sc.outcome.is_binary
            self.highlight.options = ["(none)"] + [s.name for s in sc.strategies]
            self.highlight.value = state.selected_strategy or "(none)"
        finally:
            self._syncing = False
        truth = report.truth if report is not None else None
        truth_text = f"{truth:.4g}" if truth is not None else "computed by the simulation"
        self.truth.object = (
            f"<div style='font-size:13px'><b>Question:</b> the {q.target} effect of <b>{q.exposure}</b> on "
            f"<b>{q.outcome}</b> ({q.scale.replace('_', ' ')}).<br><b>True effect under this graph:</b> "
            f"<span class='wb-truth-value'>{truth_text}</span></div>"
        )
        self.verdict.object = self._verdict_html(verdict)

    def _verdict_html(self, verdict) -> str:
        name = self.state.selected_strategy
        if verdict is None:
            return (
                "<div style='font-size:12px;color:#555'>Choose a strategy to see which paths between "
                "exposure and outcome it leaves open (thick, dashed) and which it blocks (faded).</div>"
            )
        badge = (
            "<span style='color:#00603F;font-weight:700'>valid</span>"
            if verdict.valid
            else "<span style='color:#A33C00;font-weight:700'>invalid</span>"
        )
        reasons = "".join(f"<li>{r}</li>" for r in verdict.reasons + verdict.notes)
        open_p = "".join(f"<li>{p.text}{' (causal)' if p.causal else ''}</li>" for p in verdict.open_paths)
        blocked = "".join(f"<li>{p.text}</li>" for p in verdict.blocked_paths)
        return (
            f"<div style='font-size:12px'><b>{name}</b>: {badge}<ul style='padding-left:16px;margin:4px 0'>"
            f"{reasons}</ul><b>Open paths</b><ul style='padding-left:16px;margin:2px 0'>{open_p or '<li>none</li>'}"
            f"</ul><b>Blocked paths</b><ul style='padding-left:16px;margin:2px 0'>"
            f"{blocked or '<li>none</li>'}</ul></div>"
        )

    def __panel__(self):
        side = pn.Column(
            self.truth,
            pn.Row(self.exposure, self.outcome, margin=0),
            pn.Row(self.target, self.scale, margin=0),
            ErrorBox(state=self.state, sections=["question"], width=300),
            self.highlight,
            self.verdict,
            width=320,
        )
        return pn.Row(self.pane, side, margin=0)


class VariablesEditor(pn.viewable.Viewer):
    """An editable table of the variables: add, delete, rename, change type, noise, proportion, observed."""

    state = param.ClassSelector(class_=ScenarioState)

    _COLUMNS = ["name", "role", "type", "noise_sd", "baseline", "proportion", "observed", "label"]

    def __init__(self, **params):
        super().__init__(**params)
        self.table = pn.widgets.Tabulator(
            self._frame(),
            show_index=False,
            layout="fit_data_table",
            selectable=False,
            editors={
                "name": {"type": "input"},
                "role": None,
                "type": {"type": "list", "values": ["continuous", "binary"]},
                "noise_sd": {"type": "number", "step": 0.1},
                "baseline": {"type": "number", "step": 0.1},
                "proportion": {"type": "number", "step": 0.05, "min": 0, "max": 1},
                "observed": None,  # one click toggles it (see _clicked); an editor would need three
                "label": {"type": "input"},
            },
            formatters={
                "observed": {"type": "tickCross"},
                **{
                    key: NumberFormatter(format="0.[0000]", nan_format="-", null_format="-")
                    for key in ("noise_sd", "baseline", "proportion")
                },
            },
            titles={"noise_sd": "noise SD", "observed": "observed (click)"},
            buttons={"remove": "<span title='delete this variable'>✕</span>"},
            css_classes=["wb-variables"],
            max_height=300,
            width=_MAIN_WIDTH - 40,
        )
        self.table.on_edit(self._edited)
        self.table.on_click(self._clicked)
        self.new_name = pn.widgets.TextInput(
            placeholder="new variable name", width=200, css_classes=["wb-new-variable"]
        )
        self.new_type = pn.widgets.Select(options=["continuous", "binary"], width=120)
        self.add = _widget(pn.widgets.Button, "Add variable", width=120, css_classes=["wb-add-variable"])
        self.add.on_click(self._add)
        self.state.param.watch(self._refresh, ["scenario", "report"])

    def _frame(self) -> pd.DataFrame:
        sc = self.state.scenario
        report = self.state.report
        roles = report.roles if report else {}
        rows = []
        for v in sc.variables:
            role = figures.primary_role(sc, v.name, roles)
            rows.append(
                {
                    "name": v.name,
                    "role": figures.ROLE_STYLE[role][0],
                    "type": v.type,
                    "noise_sd": v.noise_sd if not v.is_binary else None,
                    "baseline": v.baseline if not v.is_binary else None,
                    "proportion": v.proportion,
                    "observed": v.observed,
                    "label": v.label or "",
                }
            )
        return pd.DataFrame(rows, columns=self._COLUMNS)

    def _refresh(self, *_):
        frame = self._frame()
        if not frame.equals(self.table.value):
            self.table.value = frame

    def _edited(self, event):
        name = (
            self.state.scenario.variables[event.row].name
            if event.row < len(self.state.scenario.variables)
            else None
        )
        if name is None:
            return
        value = event.value
        if event.column in ("noise_sd", "baseline", "proportion"):
            try:
                value = float(value)
            except (TypeError, ValueError):
                pass
        self.state.set_variable(name, event.column, value)

    def _clicked(self, event):
        variables = self.state.scenario.variables
        if event.row is None or event.row >= len(variables):
            return
        if event.column == "remove":
            self.state.remove_variable(variables[event.row].name)
        elif event.column == "observed":
            variable = variables[event.row]
            self.state.set_variable(variable.name, "observed", not variable.observed)

    def _add(self, _event):
        if self.state.add_variable(self.new_name.value, self.new_type.value):
            self.new_name.value = ""

    def __panel__(self):
        return pn.Column(
            self.table,
            pn.Row(self.new_name, self.new_type, self.add),
            ErrorBox(state=self.state, sections=["variables"]),
            margin=0,
            css_classes=["wb-variables-box"],
        )


class ArrowsEditor(pn.viewable.Viewer):
    """An editable table of the arrows (cause, effect, size) with add and delete."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.table = pn.widgets.Tabulator(
            self._frame(),
            show_index=False,
            layout="fit_data_table",
            selectable=False,
            editors=self._editors(),
            titles={"from": "from (cause)", "to": "to (effect)", "effect": "effect size"},
            buttons={"remove": "<span title='delete this arrow'>✕</span>"},
            css_classes=["wb-arrows"],
            max_height=300,
            width=560,
        )
        self.table.on_edit(self._edited)
        self.table.on_click(self._clicked)
        names = self.state.scenario.names
        self.new_from = pn.widgets.Select(options=names, width=150, css_classes=["wb-new-from"])
        self.new_to = pn.widgets.Select(
            options=names, value=names[-1] if names else None, width=150, css_classes=["wb-new-to"]
        )
        self.new_effect = pn.widgets.FloatInput(value=0.5, step=0.1, width=90)
        self.add = _widget(pn.widgets.Button, "Add arrow", width=110, css_classes=["wb-add-arrow"])
        self.add.on_click(
            lambda e: self.state.add_arrow(self.new_from.value, self.new_to.value, self.new_effect.value)
        )
        self.slider_arrow = _widget(pn.widgets.Select, "Arrow", width=260, css_classes=["wb-slider-arrow"])
        self.slider = _widget(
            pn.widgets.FloatSlider,
            "Effect size",
            start=-2.0,
            end=2.0,
            step=0.05,
            value=0.0,
            width=300,
            css_classes=["wb-effect-slider"],
        )
        self.slider_arrow.param.watch(lambda e: self._sync_slider(), "value")
        self.slider.param.watch(self._slid, "value_throttled")
        self.state.param.watch(self._refresh, "scenario")
        self._refresh()

    def _editors(self):
        names = self.state.scenario.names
        return {
            "from": {"type": "list", "values": names},
            "to": {"type": "list", "values": names},
            "effect": {"type": "number", "step": 0.05},
        }

    def _frame(self) -> pd.DataFrame:
        arrows = self.state.scenario.arrows
        return pd.DataFrame(
            {
                "from": [a.source for a in arrows],
                "to": [a.target for a in arrows],
                "effect": [a.effect for a in arrows],
            }
        )

    def _refresh(self, *_):
        names = self.state.scenario.names
        if names != self.new_from.options:
            self.table.editors = self._editors()
            self.new_from.options = names
            self.new_to.param.update(options=names, value=names[-1] if names else None)
        frame = self._frame()
        if not frame.equals(self.table.value):
            self.table.value = frame
        arrows = self.state.scenario.arrows
        options = {f"{a.source} -> {a.target}": i for i, a in enumerate(arrows)}
        if options != self.slider_arrow.options:
            keep = self.slider_arrow.value
            self.slider_arrow.options = options
            self.slider_arrow.value = keep if keep in options.values() else (0 if arrows else None)
        self._sync_slider()

    def _sync_slider(self):
        index = self.slider_arrow.value
        arrows = self.state.scenario.arrows
        if index is None or index >= len(arrows):
            self.slider.disabled = True
            return
        effect = arrows[index].effect
        reach = max(2.0, 2 * abs(effect))
        self.slider.param.update(start=-reach, end=reach, value=effect, disabled=False)

    def _slid(self, event):
        index = self.slider_arrow.value
        if index is not None and event.new is not None:
            self.state.set_arrow(index, effect=round(float(event.new), 6))

    def _edited(self, event):
        key = {"from": "source", "to": "target", "effect": "effect"}.get(event.column)
        if key is None:
            return
        value = event.value
        if key == "effect":
            try:
                value = float(value)
            except (TypeError, ValueError):
                pass
        self.state.set_arrow(event.row, **{key: value})

    def _clicked(self, event):
        if event.column == "remove":
            self.state.remove_arrow(event.row)

    def __panel__(self):
        help_text = pn.pane.Markdown(
            "Each arrow is a direct causal effect: the change in the effect variable per unit of the cause "
            "(mean scale for a continuous variable, log-odds scale for a binary one). Edit a cell and press "
            "Enter; the graph, roles, verdicts and truth update at once.",
            width=440,
            styles=_NOTE_STYLE,
        )
        return pn.Row(
            pn.Column(
                self.table,
                pn.Row(self.new_from, self.new_to, self.new_effect, self.add),
                ErrorBox(state=self.state, sections=["arrows"]),
                margin=0,
            ),
            pn.Column(
                help_text,
                pn.pane.Markdown(
                    "**Try an effect size**: pick an arrow and drag the slider. On a linear-Gaussian graph "
                    "the simulation re-runs when you let go.",
                    width=440,
                    styles=_NOTE_STYLE,
                ),
                self.slider_arrow,
                self.slider,
                margin=0,
            ),
        )


class StrategiesEditor(pn.viewable.Viewer):
    """Strategies: name, adjustment set, model; each with its verdict and reasons; add, remove, suggest."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.rows = pn.Column(margin=0, css_classes=["wb-strategies"])
        self.add = _widget(pn.widgets.Button, "Add strategy", width=140, css_classes=["wb-add-strategy"])
        self.add.on_click(lambda e: self.state.add_strategy())
        self.suggest = _widget(
            pn.widgets.Button,
            "Add the minimal and optimal valid sets",
            width=300,
            button_type="success",
            css_classes=["wb-suggest"],
        )
        self.suggest.on_click(lambda e: self.state.add_suggested_strategies())
        self.sets = pn.pane.HTML("", styles=_NOTE_STYLE)
        self.state.param.watch(self._refresh, ["scenario", "report"])
        self._refresh()

    _signature = None

    def _refresh(self, *_):
        state = self.state
        sc = state.scenario
        binary = sc.outcome.is_binary
        fields = strategy_fields()
        signature = (
            repr(state.strategy_rows()),
            tuple(state.adjustable),
            binary,
            repr(state.report.minimal_sets if state.report else None),
            repr(state.report.optimal_set if state.report else None),
        )
        if signature == self._signature:
            return
        self._signature = signature
        widgets = []
        for row in state.strategy_rows():
            name = row["name"]
            title = pn.widgets.TextInput(value=name, width=150, css_classes=["wb-strategy-name"])
            title.param.watch(
                lambda e, name=name: e.new != name and state.set_strategy(name, new_name=e.new), "value"
            )
            options = state.adjustable
            selected = row.get("selection")
            adjust = pn.widgets.MultiChoice(
                value=[v for v in row["adjust"] if v in options],
                options=options,
                width=250,
                placeholder="candidates to choose from" if selected else "adjust for nothing",
                css_classes=["wb-strategy-adjust"],
            )
            adjust.param.watch(lambda e, name=name: state.set_strategy(name, adjust=e.new), "value")
            model = pn.widgets.Select(
                value=row["model"], options=["ols", "logit"] if binary else ["ols"], width=70
            )
            model.param.watch(lambda e, name=name: state.set_strategy(name, model=e.new), "value")
            standardize = _widget(
                pn.widgets.Checkbox,
                "standardise",
                value=row["standardize"],
                disabled=row["model"] != "logit",
                width=95,
            )
            standardize.param.watch(lambda e, name=name: state.set_strategy(name, standardize=e.new), "value")
            controls = [title, adjust, model, standardize]
            if "selection" in fields:
                rule = pn.widgets.Select(
                    value=selected or "fixed",
                    options=dict(_SELECTION_CHOICES),
                    width=175,
                    disabled=binary or row["model"] != "ols",
                    css_classes=["wb-strategy-selection"],
                )
                rule.param.watch(lambda e, name=name: state.set_strategy(name, selection=e.new), "value")
                controls.append(rule)
            if "restrict" in fields:
                restrict = pn.widgets.TextInput(
                    value=restrict_text(row.get("restrict")),
                    placeholder="keep only: e.g. shift = 0",
                    width=165,
                    css_classes=["wb-strategy-restrict"],
                )
                restrict.param.watch(
                    lambda e, name=name: e.new != e.old and state.set_strategy(name, restrict=e.new), "value"
                )
                controls.append(restrict)
            remove = _widget(pn.widgets.Button, "Remove", width=75, button_type="light")
            remove.on_click(lambda e, name=name: state.remove_strategy(name))
            controls.append(remove)
            valid = row["valid"]
            badge = (
                "<b style='color:#00603F'>valid</b>"
                if valid
                else "<b style='color:#A33C00'>invalid</b>"
                if valid is not None
                else ""
            )
            reasons = html.escape("; ".join(row["reasons"]))
            verdict = pn.pane.HTML(
                f"<div style='font-size:12px;line-height:1.35;color:#333'>{badge} {reasons}</div>",
                sizing_mode="stretch_width",
                margin=(0, 10, 4, 12),
                css_classes=["wb-strategy-verdict"],
            )
            widgets.append(
                pn.Column(
                    pn.Row(*controls, margin=0),
                    verdict,
                    styles={"border-bottom": "1px solid #e3e3e3"},
                    margin=(2, 0),
                    width=_MAIN_WIDTH - 40,
                )
            )
        self.rows.objects = widgets
        report = state.report
        if report is not None:
            minimal = "; ".join("{" + ", ".join(m) + "}" for m in report.minimal_sets) or "none"
            optimal = "{" + ", ".join(report.optimal_set) + "}" if report.optimal_set is not None else "none"
            self.sets.object = (
                f"<b>Minimal valid sets:</b> {minimal} &nbsp; <b>Optimal valid set:</b> "
                f"{optimal} <span style='color:#777'>({report.optimal_note})</span>"
            )

    def __panel__(self):
        fields = strategy_fields()
        parts = ["name", "adjustment set", "model"]
        if "selection" in fields:
            parts.append("how the set is chosen")
        if "restrict" in fields:
            parts.append("analyse only units with (restriction)")
        header = pn.pane.HTML(
            "<div style='font-size:12px;color:#444'>"
            + " &nbsp;&middot;&nbsp; ".join(parts)
            + "; below each: its verdict and the reasons</div>"
        )
        return pn.Column(
            header,
            self.rows,
            pn.Row(self.add, self.suggest),
            self.sets,
            ErrorBox(state=self.state, sections=["strategies"]),
            margin=0,
        )


class TomlEditor(pn.viewable.Viewer):
    """The scenario as TOML text, editable and kept in sync with the other editors."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.editor = pn.widgets.TextAreaInput(
            value=self.state.text,
            height=420,
            width=640,
            css_classes=["wb-toml"],
            stylesheets=[":host textarea {font-family: monospace; font-size: 12px;}"],
        )
        self.apply = _widget(
            pn.widgets.Button, "Apply text", button_type="primary", width=140, css_classes=["wb-apply-toml"]
        )
        self.apply.on_click(lambda e: self.state.apply_text(self.editor.value_input or self.editor.value))
        self.state.param.watch(self._refresh, "text")

    def _refresh(self, *_):
        if self.editor.value != self.state.text:
            self.editor.value = self.state.text

    def __panel__(self):
        help_text = pn.pane.Markdown(
            "The same scenario as a TOML file. Edit and press **Apply text**: the text is parsed and checked; "
            "if it has a mistake the error is shown, your text stays here, and the last valid scenario stays "
            "in effect. Edits in the tables rewrite this text.",
            width=380,
            styles=_NOTE_STYLE,
        )
        return pn.Row(
            pn.Column(self.editor, self.apply, ErrorBox(state=self.state, sections=["toml"]), margin=0),
            help_text,
        )


# ------------------------------------------------------------------------------------------------------
# Results
# ------------------------------------------------------------------------------------------------------
def _result_header(wb: Workbench, job, result) -> str:
    """A banner when the result shown belongs to an earlier version of the scenario."""
    if job.status == "running":
        return (
            "<div class='wb-running' style='background:#e8f1fb;padding:4px 8px;margin-bottom:4px'>"
            "Updating for the current scenario ...</div>"
        )
    stale = (
        ""
        if job.is_current(wb.scenario)
        else (
            "<div class='wb-stale' style='background:#fff3cd;padding:4px 8px;margin-bottom:4px'>These results "
            "belong to an earlier version of the scenario. Press <b>Run</b> to update them.</div>"
        )
    )
    return stale


class JobProgress(pn.viewable.Viewer):
    """A job's progress bar and message, shown inside a result tab while the job runs (so a long run, such
    as a sample-size plan with a binary outcome, is visible where its results will appear)."""

    job = param.Parameter(doc="The BackgroundJob to follow.")
    css_class = param.String(default="wb-job-progress")

    def __init__(self, **params):
        super().__init__(**params)
        self._bar = pn.indicators.Progress(value=0, max=100, width=420, height=14, bar_color="primary")
        self._text = pn.pane.HTML("", margin=(0, 8), styles={"font-size": "13px", "color": "#333"})
        self._box = pn.Row(
            self._text,
            self._bar,
            visible=False,
            css_classes=[self.css_class],
            styles={"background": "#e8f1fb", "border-radius": "4px", "padding": "2px 6px"},
            margin=(2, 5, 6, 5),
        )
        self.job.param.watch(self._update, ["status", "progress", "message"])
        self._update()

    def _update(self, *_):
        job = self.job
        running = job.status == "running"
        self._box.visible = running
        if running:
            self._bar.value = int(round(100 * job.progress))
            self._text.object = (
                f"<b>{html.escape(job.label.capitalize())} running</b> "
                f"({html.escape(job.message.split(': ', 1)[-1])}); Cancel is in the sidebar."
            )

    def __panel__(self):
        return self._box


class _TabView(pn.viewable.Viewer):
    """A view that rebuilds its figures only while its tab is shown; changes made while hidden wait."""

    workbench = param.ClassSelector(class_=Workbench)
    active = param.Boolean(default=False, doc="Whether the view's tab is shown.")

    def __init__(self, **params):
        super().__init__(**params)
        self._waiting: dict[str, object] = {}

    def _when_shown(self, update) -> None:
        if self.active:
            update()
        else:
            self._waiting[update.__name__] = update

    @param.depends("active", watch=True)
    def _catch_up(self) -> None:
        if not self.active or not self._waiting:
            return
        doc = pn.state.curdoc
        if doc is not None and doc.session_context is not None:
            # Rebuild on the next tick, not inside the browser's tab-change event: Bokeh does not send a
            # layout's new children back to the browser while it is handling that event, so the tab would
            # keep showing the figures of an earlier scenario.
            doc.add_next_tick_callback(self._apply_waiting)
        else:
            self._apply_waiting()

    def _apply_waiting(self) -> None:
        if self.active:
            waiting, self._waiting = self._waiting, {}
            for update in waiting.values():
                update()


class EstimatesView(_TabView):
    """Distributions of estimates and SEs, ranked intervals, the performance table and the signals."""

    def __init__(self, **params):
        super().__init__(**params)
        self.body = pn.Column(margin=0, css_classes=["wb-estimates"])
        self.banner = pn.pane.HTML("", margin=(0, 5))
        self._shown = None
        self.workbench.simulation.param.watch(self._changed, ["result", "status"])
        self.workbench.scenario_state.param.watch(self._changed, "scenario")
        self._refresh()

    def _changed(self, *_):
        self._when_shown(self._refresh)

    def _refresh(self):
        wb = self.workbench
        job = wb.simulation
        result = job.result
        self.banner.object = _result_header(wb, job, result) if result is not None else ""
        if result is not None and result is self._shown:
            return
        self._shown = result
        if not job.available:
            self.body.objects = [
                _placeholder(
                    "**The simulation engine is not installed yet** (workbench.simulate). The graph, editors and "
                    "verdicts work; estimates appear here once it is."
                )
            ]
            return
        if result is None:
            text = (
                "Running the simulation ..."
                if job.status == "running"
                else "Press **Run** in the sidebar to simulate the study with the settings shown there."
                + (f"  \n{job.message}" if job.status == "failed" else "")
            )
            self.body.objects = [_placeholder(text)]
            return
        table = result.table
        alpha = float(getattr(result, "alpha", None) or wb.scenario.study.alpha)
        n = getattr(result, "n", wb.scenario.study.n)
        reps = getattr(result, "replicates", wb.scenario.study.replicates)
        truth_mcse = getattr(result, "truth_mcse", None)
        truth = f"{result.truth:.4g}" + (f" (MCSE {truth_mcse:.2g})" if truth_mcse else "")
        summary = (
            f"<div style='font-size:13px'><b>True effect:</b> <span class='wb-sim-truth'>{truth}</span> &nbsp; "
            f"<b>n</b> = {n:,} &nbsp; <b>replicates</b> = {reps:,} &nbsp; <b>seed</b> = "
            f"{getattr(result, 'seed', wb.scenario.study.seed)} &nbsp; <b>engine</b> = {result.engine}</div>"
        )
        legend = (
            "<div style='font-size:12px;color:#444'>The small &plusmn; figures are Monte Carlo standard errors (MCSE). "
            "<span style='background:#F0E442;padding:0 4px'>Flagged</span> cells: the bias exceeds 3 "
            "Monte Carlo SEs, or the coverage lies outside the nominal level &plusmn; 3 Monte Carlo SEs."
            "</div>"
        )
        signals_note = (
            "<div style='font-size:12px;color:#444;max-width:1000px'>Signals practitioners read beside the graph: "
            "the <b>change in estimate</b> relative to the unadjusted model (a common rule of thumb calls a "
            "change over 10% important) and the <b>SE ratio</b>: adjusting for a confounder moves the estimate "
            "while the SE barely changes; a large rise of the SE with little change in the estimate signals "
            "collinearity (a strong cause of the exposure), not confounding. Neither signal can tell a "
            "confounder from a mediator or a common effect: only the graph can.</div>"
        )
        self.body.objects = [
            self.banner,
            _html(summary),
            _html(tables.performance_table(table, alpha=alpha) + legend, css_classes=["wb-performance"]),
            *[
                pn.Row(pn.pane.Bokeh(a), pn.pane.Bokeh(b))
                for a, b in zip(
                    figures.estimates_figure(result, width=530),
                    figures.se_figure(result, width=530),
                    strict=True,
                )
            ],
            pn.pane.Markdown(
                "**Confidence intervals of the first 100 replicates**, ranked by estimate: grey "
                "intervals cover the truth (dashed), vermillion ones miss it.",
                styles=_NOTE_STYLE,
            ),
            pn.GridBox(
                *[
                    pn.pane.Bokeh(f)
                    for f in figures.interval_figure(result, width=_MAIN_WIDTH - 30, grid=False)
                ],
                ncols=4,
            ),
            _html(tables.signals_table(table) + signals_note, css_classes=["wb-signals"]),
        ]

    def __panel__(self):
        return pn.Column(
            JobProgress(job=self.workbench.simulation, css_class="wb-simulation-progress"),
            self.body,
            margin=0,
        )


class SampleSizeView(_TabView):
    """Power curves, bias and empirical SE against n, the smallest n per strategy, separation figures."""

    def __init__(self, **params):
        super().__init__(**params)
        state = self.workbench.scenario_state
        self.sizes = _widget(
            pn.widgets.TextInput, "Sample sizes to simulate", width=300, css_classes=["wb-sizes"]
        )
        self.target_power = _widget(
            pn.widgets.FloatInput,
            "Target power",
            start=0.05,
            end=0.99,
            step=0.05,
            width=120,
            css_classes=["wb-target-power"],
        )
        self.target_halfwidth = _widget(
            pn.widgets.FloatInput,
            "Target CI half-width (optional)",
            start=0.0,
            step=0.01,
            width=210,
            css_classes=["wb-target-halfwidth"],
        )
        self.sizes.param.watch(lambda e: self._setting("sizes", e.new), "value")
        self.target_power.param.watch(lambda e: self._setting("target_power", e.new), "value")
        self.target_halfwidth.param.watch(lambda e: self._setting("target_halfwidth", e.new), "value")
        self._syncing = False
        state.param.watch(self._sync_settings, "scenario")
        self._sync_settings()
        self.body = pn.Column(margin=0, css_classes=["wb-sample-size"])
        self.banner = pn.pane.HTML("", margin=(0, 5))
        self._shown = None
        self.workbench.planning.param.watch(self._changed, ["result", "status"])
        state.param.watch(self._changed, "scenario")
        self._refresh()

    def _sync_settings(self, *_):
        st = self.workbench.scenario.study
        self._syncing = True
        try:
            self.sizes.value = ", ".join(str(n) for n in st.sample_sizes)
            self.target_power.value = st.target_power
            self.target_halfwidth.value = st.target_halfwidth
        finally:
            self._syncing = False

    def _setting(self, key, value):
        if self._syncing:
            return
        state = self.workbench.scenario_state
        st = state.scenario.study
        if key == "sizes" and value != ", ".join(str(n) for n in st.sample_sizes):
            state.set_sample_sizes(value or "", section="plan")
        elif key == "target_power" and value is not None and value != st.target_power:
            state.set_study(section="plan", target_power=value)
        elif key == "target_halfwidth" and (value or None) != st.target_halfwidth:
            state.set_study(section="plan", target_halfwidth=value or None)

    def _changed(self, *_):
        self._when_shown(self._refresh)

    def _refresh(self):
        wb = self.workbench
        job = wb.planning
        result = job.result
        self.banner.object = _result_header(wb, job, result) if result is not None else ""
        if result is not None and result is self._shown:
            return
        self._shown = result
        if not job.available:
            self.body.objects = [
                _placeholder(
                    "**The sample-size planner is not installed yet** (workbench.plan). Power curves appear here "
                    "once it is."
                )
            ]
            return
        if result is None:
            text = (
                "Computing the sample-size plan ..."
                if job.status == "running"
                else "Press **Run** in the sidebar to compute power and precision over the sample sizes "
                f"{', '.join(str(s) for s in wb.scenario.study.sample_sizes)}."
                + (f"  \n{job.message}" if job.status == "failed" else "")
            )
            self.body.objects = [_placeholder(text)]
            return
        target = float(getattr(result, "target_power", None) or wb.scenario.study.target_power)
        objects = [
            self.banner,
            pn.pane.Bokeh(figures.power_figure(result, target_power=target, width=_MAIN_WIDTH - 40)),
            _html(tables.smallest_n_table(result.smallest_n), css_classes=["wb-smallest-n"]),
            pn.Row(
                pn.pane.Bokeh(
                    figures.by_n_figure(
                        result, "bias", title="Bias against n", y_label="bias", zero_line=True, width=530
                    )
                ),
                pn.pane.Bokeh(
                    figures.by_n_figure(
                        result, "emp_se", title="Empirical SE against n", y_label="empirical SE", width=530
                    )
                ),
            ),
        ]
        also = getattr(result, "also_table", None)
        if also is not None and len(also):
            objects.append(pn.pane.Markdown("### Separating the effects", margin=(10, 10, 0, 10)))
            objects.append(
                pn.Row(
                    *[
                        pn.pane.Bokeh(f)
                        for f in figures.separation_figure(also, result.table, width=530, grid=False)
                    ],
                    css_classes=["wb-separation"],
                )
            )
            also_n = getattr(result, "also_smallest_n", None)
            if also_n is not None and len(also_n):
                objects.append(_html(tables.also_smallest_n_table(also_n)))
        self.body.objects = objects

    def __panel__(self):
        settings = pn.Row(self.sizes, self.target_power, self.target_halfwidth, margin=(0, 0, 4, 0))
        return pn.Column(
            settings,
            ErrorBox(state=self.workbench.scenario_state, sections=["plan"]),
            JobProgress(job=self.workbench.planning, css_class="wb-plan-progress"),
            self.body,
            margin=0,
        )


class ExplainView(_TabView):
    """Plain-language stories per strategy and the one-dataset view."""

    def __init__(self, **params):
        super().__init__(**params)
        wb = self.workbench
        self.stories = pn.Column(margin=0, css_classes=["wb-stories"])
        self.covariate = _widget(pn.widgets.Select, "Colour by", width=200, css_classes=["wb-covariate"])
        self.covariate.param.watch(self._covariate_chosen, "value")
        self.redraw = _widget(pn.widgets.Button, "Draw another dataset", width=180)
        self.redraw.on_click(lambda e: setattr(wb.sample, "draw_number", wb.sample.draw_number + 1))
        self.plots = pn.Row(margin=0, css_classes=["wb-explain-plots"])
        self.caption = pn.pane.Markdown("", styles=_NOTE_STYLE, css_classes=["wb-dataset-caption"])
        wb.simulation.param.watch(lambda *_: self._when_shown(self._refresh_stories), ["result"])
        wb.scenario_state.param.watch(lambda *_: self._when_shown(self._refresh_stories), ["report"])
        wb.sample.param.watch(lambda *_: self._when_shown(self._refresh_plots), ["data", "covariate"])
        # drawn when the tab is first shown: the first page load does not wait for these figures
        self._when_shown(self._refresh_stories)
        self._when_shown(self._refresh_plots)

    def _covariate_chosen(self, event):
        if event.new is not None and event.new != self.workbench.sample.covariate:
            self.workbench.sample.covariate = event.new

    def _refresh_stories(self):
        from workbench.report.explain import explain

        wb = self.workbench
        report = wb.scenario_state.report
        result = wb.simulation.result if wb.simulation.is_current(wb.scenario) else None
        if report is None:
            self.stories.objects = [_placeholder(wb.scenario_state.report_error or "No graph analysis.")]
            return
        stories = explain(report, result)
        cards = []
        for story in stories:
            colour = {True: "#00603F", False: "#A33C00"}.get(story.usable, "#999999")
            cards.append(
                pn.pane.HTML(
                    f"<div style='border-left:4px solid {colour};padding:4px 12px;margin:4px 0;font-size:13px;"
                    f"line-height:1.45;max-width:1000px'><div style='font-weight:700;font-size:14px'>"
                    f"{story.title}</div>{story.html()}</div>",
                    sizing_mode="stretch_width",
                    css_classes=["wb-story"],
                )
            )
        if result is None:
            cards.append(
                _placeholder(
                    "The stories use the graph alone until a simulation of this scenario "
                    "has run; then they quote its bias and coverage."
                )
            )
        self.stories.objects = cards

    def _refresh_plots(self):
        wb = self.workbench
        sample = wb.sample
        self.covariate.options = list(sample.param.covariate.objects)
        self.covariate.value = sample.covariate
        data = sample.data
        if data is None:
            self.plots.objects = [_placeholder(sample.message or "No dataset drawn.")]
            return
        q = wb.scenario.question
        objects = [
            pn.pane.Bokeh(figures.dataset_scatter(data, q.exposure, q.outcome, sample.covariate, width=570))
        ]
        if sample.covariate:
            objects.append(
                pn.pane.Bokeh(figures.dataset_groups(data, q.exposure, sample.covariate, width=470))
            )
        self.plots.objects = objects
        latent = ", ".join(data.attrs.get("latent", [])) or "none"
        colour = f", coloured by {sample.covariate}" if sample.covariate else ""
        self.caption.object = (
            f"One dataset of n = {len(data):,} drawn from the scenario: {q.outcome} against "
            f"{q.exposure}{colour}. Latent variables (simulated, never seen in practice): "
            f"{latent}."
        )

    def __panel__(self):
        from workbench.report.explain import ASSUMPTION_NOTE

        note = pn.pane.Alert(
            ASSUMPTION_NOTE, alert_type="info", css_classes=["wb-assumption"], width=_MAIN_WIDTH - 40
        )
        return pn.Column(
            note,
            pn.pane.Markdown("### What each strategy does", margin=(0, 10)),
            self.stories,
            pn.pane.Markdown("### One simulated dataset", margin=(10, 10, 0, 10)),
            pn.Row(self.covariate, pn.Column(pn.Spacer(height=18), self.redraw, margin=0)),
            self.caption,
            self.plots,
            margin=0,
        )


class ExportView(pn.viewable.Viewer):
    """Downloads: the standalone HTML report, results as CSV, the scenario as TOML."""

    workbench = param.ClassSelector(class_=Workbench)

    def __init__(self, **params):
        super().__init__(**params)
        self.report = _widget(
            pn.widgets.FileDownload,
            callback=self._report,
            filename="workbench_report.html",
            label="Download the HTML report",
            button_type="primary",
            embed=False,
            width=320,
            css_classes=["wb-export-html"],
            # Panel 1.9 renders a FileDownload with the default colour whatever its button_type: paint the
            # main action in the primary colour ourselves
            stylesheets=[_PRIMARY_BUTTON_CSS],
        )
        self.performance = _widget(
            pn.widgets.FileDownload,
            callback=self._performance,
            filename="performance.csv",
            label="Performance table (CSV)",
            embed=False,
            width=320,
            css_classes=["wb-export-csv"],
        )
        self.estimates = _widget(
            pn.widgets.FileDownload,
            callback=self._estimates,
            filename="estimates.csv",
            label="Every replicate's estimates (CSV)",
            embed=False,
            width=320,
        )
        self.plan = _widget(
            pn.widgets.FileDownload,
            callback=self._plan,
            filename="sample_size.csv",
            label="Sample-size table (CSV)",
            embed=False,
            width=320,
        )
        self.status = pn.pane.Markdown("", styles=_NOTE_STYLE, width=760)
        for job in (self.workbench.simulation, self.workbench.planning):
            job.param.watch(self._refresh, ["result"])
        self.workbench.scenario_state.param.watch(self._refresh, "scenario")
        self._refresh()

    def _refresh(self, *_):
        wb = self.workbench
        simulation, planning = self._current(wb.simulation), self._current(wb.planning)
        self.performance.disabled = simulation is None
        self.estimates.disabled = simulation is None
        self.plan.disabled = planning is None
        st = wb.scenario.study
        lines = [
            "**The report will hold:** the graph, the roles and verdicts, the stories and the scenario text"
        ]
        if simulation is not None:
            lines.append(
                f"the simulation (n = {simulation.n:,}, {simulation.replicates:,} replicates, seed "
                f"{simulation.seed})"
            )
        else:
            lines.append("no simulation of the current scenario yet (press **Run**)")
        if planning is not None:
            lines.append(f"the sample-size plan ({', '.join(str(n) for n in st.sample_sizes)})")
        else:
            lines.append("no sample-size plan of the current scenario yet")
        if wb.sample.data is not None:
            lines.append("one simulated dataset")
        self.status.object = "; ".join(lines) + "."

    def _current(self, job):
        return job.result if job.is_current(self.workbench.scenario) else None

    def _report(self):
        from workbench.report.html import build_report

        wb = self.workbench
        text = build_report(
            wb.scenario,
            report=wb.scenario_state.report,
            result=self._current(wb.simulation),
            plan=self._current(wb.planning),
            dataset=wb.sample.data,
            covariate=wb.sample.covariate,
        )
        self.report.filename = f"{_slug(wb.scenario.title)}_report.html"
        return io.StringIO(text)

    @staticmethod
    def _csv(result) -> io.StringIO:
        """The result's own CSV (``to_csv``, as the command line writes it), for download."""
        if result is None:
            return io.StringIO("")
        with tempfile.TemporaryDirectory() as folder:
            path = Path(folder) / "result.csv"
            result.to_csv(path)
            return io.StringIO(path.read_text(encoding="utf-8"))

    def _performance(self):
        return self._csv(self._current(self.workbench.simulation))

    def _estimates(self):
        result = self._current(self.workbench.simulation)
        return io.StringIO("" if result is None else result.estimates.to_csv(index=False))

    def _plan(self):
        return self._csv(self._current(self.workbench.planning))

    def __panel__(self):
        text = pn.pane.Markdown(
            "The **HTML report** is one file that opens in any browser with no server and no network: the "
            "graph, the verdicts, the tables, the figures, the explanations, the scenario text, the settings, "
            "the seed and the version. The CSV files hold the numbers behind the tables.",
            width=700,
            styles=_NOTE_STYLE,
        )
        return pn.Column(text, self.status, self.report, self.performance, self.estimates, self.plan)


def library_status() -> str:
    """Which optional parts of the library are not installed yet ('' when all are; for the page header).

    Examples
    --------
    >>> library_status()
    ''
    """
    parts = [m for m in ("simulate", "plan", "generate") if not library_has(m)]
    return "" if not parts else "Not installed yet: " + ", ".join(f"workbench.{m}" for m in parts)
