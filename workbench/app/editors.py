"""The scenario editors under the graph: the variables table, the arrows table with an effect-size slider,
and the scenario's TOML text. (The strategies editor is :mod:`workbench.app.strategies_editor`.)

Each editor turns a user's edit into one call of a :class:`~workbench.app.state.ScenarioState` method and
shows that section's error next to itself; the tables are rewritten from the scenario in effect after every
valid change.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import panel as pn
import param
from bokeh.models.widgets.tables import NumberFormatter

from workbench.app.state import ScenarioState
from workbench.app.widgets import MAIN_WIDTH, NOTE_STYLE, ErrorBox
from workbench.report.graph_drawing import ROLE_STYLE, primary_role
from workbench.scenario.elicit import standardized_effects

__all__ = ["VariablesEditor", "ArrowsEditor", "TomlEditor", "as_number"]


def as_number(value):
    """A table cell's value as a float when it reads as one, else as given (the parser names the problem).

    Examples
    --------
    >>> as_number("0.5"), as_number("lots")
    (0.5, 'lots')
    """
    try:
        return float(value)
    except (TypeError, ValueError):
        return value


class VariablesEditor(pn.viewable.Viewer):
    """An editable table of the variables: add, delete, rename, change type, noise, proportion, observed (a
    count's rate and the noise law are in the inspector, :mod:`workbench.app.inspector`)."""

    state = param.ClassSelector(class_=ScenarioState)

    _COLUMNS = [
        "name",
        "role",
        "type",
        "noise_sd",
        "r_squared",
        "baseline",
        "proportion",
        "observed",
        "label",
    ]
    _NUMBERS = ("noise_sd", "r_squared", "baseline", "proportion")

    def __init__(self, **params):
        super().__init__(**params)
        self.table = pn.widgets.Tabulator(
            self._frame(),
            show_index=False,
            layout="fit_columns",
            selectable=False,
            editors={
                "name": {"type": "input"},
                "role": None,
                "type": {"type": "list", "values": ["continuous", "binary", "count"]},
                "noise_sd": {"type": "number", "step": 0.1},
                "r_squared": {"type": "number", "step": 0.05, "min": 0, "max": 1},
                "baseline": {"type": "number", "step": 0.1},
                "proportion": {"type": "number", "step": 0.05, "min": 0, "max": 1},
                "observed": None,  # one click toggles it (see _clicked); an editor would need three
                "label": {"type": "input"},
            },
            formatters={
                "observed": {"type": "tickCross"},
                "label": {"type": "textarea"},
                "name": {"type": "textarea"},
                "role": {"type": "textarea"},
                **{
                    key: NumberFormatter(format="0.[0000]", nan_format="-", null_format="-")
                    for key in self._NUMBERS
                },
            },
            titles={"noise_sd": "noise SD", "r_squared": "R^2", "observed": "observed (click)"},
            buttons={"remove": "<span title='delete this variable'>✕</span>"},
            # Fixed columns that fit MAIN_WIDTH - 40 whatever the names; long names and labels wrap.
            widths={
                "name": 140,
                "role": 85,
                "type": 80,
                "noise_sd": 72,
                "r_squared": 62,
                "baseline": 92,
                "proportion": 106,
                "observed": 98,
                "label": 125,
                "remove": 30,
            },
            configuration={"columnDefaults": {"headerWordWrap": True}},
            css_classes=["wb-variables"],
            max_height=300,
            width=MAIN_WIDTH - 40,
        )
        self.table.on_edit(self._edited)
        self.table.on_click(self._clicked)
        self.new_name = pn.widgets.TextInput(
            placeholder="new variable name", width=200, css_classes=["wb-new-variable"]
        )
        self.new_type = pn.widgets.Select(options=["continuous", "binary", "count"], width=120)
        self.add = pn.widgets.Button(label="Add variable", width=120, css_classes=["wb-add-variable"])
        self.add.on_click(self._add)
        self.state.param.watch(self._refresh, ["scenario", "report"])

    def _frame(self) -> pd.DataFrame:
        sc = self.state.scenario
        report = self.state.report
        roles = report.roles if report else {}
        implied = report.implied.r_squared if report is not None and report.implied is not None else {}
        rows = [
            {
                "name": v.name,
                "role": ROLE_STYLE[primary_role(sc, v.name, roles)][0],
                "type": v.type,
                "noise_sd": v.noise_sd if v.is_continuous else None,
                "r_squared": v.r_squared if v.r_squared is not None else implied.get(v.name),
                "baseline": v.baseline if v.is_continuous else None,
                "proportion": v.proportion,
                "observed": v.observed,
                "label": v.label or "",
            }
            for v in sc.variables
        ]
        return pd.DataFrame(rows, columns=self._COLUMNS)

    def _refresh(self, *_):
        frame = self._frame()
        if not frame.equals(self.table.value):
            self.table.value = frame

    def _edited(self, event):
        variables = self.state.scenario.variables
        if event.row >= len(variables):
            return
        value = as_number(event.value) if event.column in self._NUMBERS else event.value
        self.state.set_variable(variables[event.row].name, event.column, value)

    def _clicked(self, event):
        variables = self.state.scenario.variables
        if event.row is None or event.row >= len(variables):
            return
        variable = variables[event.row]
        if event.column == "remove":
            self.state.remove_variable(variable.name)
        elif event.column == "observed":
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
    """An editable table of the arrows (cause, effect, size) with add and delete, and an effect slider."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.table = pn.widgets.Tabulator(
            self._frame(),
            show_index=False,
            layout="fit_data_table",
            selectable=False,
            editors=self._editors(),
            titles={
                "from": "from (cause)",
                "to": "to (effect)",
                "effect": "effect size",
                "standardized": "standardized (SD per SD)",
            },
            formatters={
                "standardized": NumberFormatter(format="0.[000]", nan_format="-", null_format="-"),
            },
            buttons={"remove": "<span title='delete this arrow'>✕</span>"},
            css_classes=["wb-arrows"],
            max_height=300,
            width=550,
        )
        self.table.on_edit(self._edited)
        self.table.on_click(self._clicked)
        names = self.state.scenario.names
        self.new_from = pn.widgets.Select(options=names, width=130, css_classes=["wb-new-from"])
        self.new_to = pn.widgets.Select(
            options=names, value=names[-1] if names else None, width=130, css_classes=["wb-new-to"]
        )
        self.new_effect = pn.widgets.FloatInput(value=0.5, step=0.1, width=80)
        self.add = pn.widgets.Button(label="Add arrow", width=100, css_classes=["wb-add-arrow"])
        self.add.on_click(
            lambda e: self.state.add_arrow(self.new_from.value, self.new_to.value, self.new_effect.value)
        )
        self.slider_arrow = pn.widgets.Select(label="Arrow", width=260, css_classes=["wb-slider-arrow"])
        self.slider = pn.widgets.FloatSlider(
            label="Effect size",
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
            "standardized": {"type": "number", "step": 0.05},
        }

    def _frame(self) -> pd.DataFrame:
        scenario = self.state.scenario
        arrows = scenario.arrows
        standardized = standardized_effects(scenario.variables, arrows)
        return pd.DataFrame(
            {
                "from": [a.source for a in arrows],
                "to": [a.target for a in arrows],
                "effect": [a.effect for a in arrows],
                "standardized": [np.nan if b is None else b for b in standardized],
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
        arrow = arrows[index]
        standardized = arrow.standardized is not None
        effect = arrow.standardized if standardized else arrow.effect
        reach = 1.0 if standardized else max(2.0, 2 * abs(effect))
        label = "Standardized effect (SD per SD)" if standardized else "Effect size"
        self.slider.param.update(start=-reach, end=reach, value=effect, label=label, disabled=False)

    def _slid(self, event):
        index = self.slider_arrow.value
        if index is not None and event.new is not None and index < len(self.state.scenario.arrows):
            key = "standardized" if self.state.scenario.arrows[index].standardized is not None else "effect"
            self.state.set_arrow(index, **{key: round(float(event.new), 6)})

    def _edited(self, event):
        key = {"from": "source", "to": "target", "effect": "effect", "standardized": "standardized"}.get(
            event.column
        )
        if key is not None:
            value = as_number(event.value) if key in ("effect", "standardized") else event.value
            self.state.set_arrow(event.row, **{key: value})

    def _clicked(self, event):
        if event.column == "remove":
            self.state.remove_arrow(event.row)

    def __panel__(self):
        help_text = pn.pane.Markdown(
            "Each arrow is a direct causal effect: the change in the effect variable per unit of the cause "
            "(mean scale for a continuous variable, log-odds scale for a binary one). Edit a cell and press "
            "Enter; the graph, roles, verdicts and truth update at once. *standardized* is the same effect in "
            "SDs of the effect per SD of the cause: type one there to give the sizes into that variable that "
            "way (its noise SD then follows; `standardized_effect` in the file).",
            width=340,
            styles=NOTE_STYLE,
        )
        slider_text = pn.pane.Markdown(
            "**Try an effect size**: pick an arrow and drag the slider. On a linear-Gaussian graph "
            "the simulation re-runs when you let go.",
            width=340,
            styles=NOTE_STYLE,
        )
        return pn.Row(
            pn.Column(
                self.table,
                pn.Row(self.new_from, self.new_to, self.new_effect, self.add),
                ErrorBox(state=self.state, sections=["arrows"]),
                margin=0,
            ),
            pn.Column(help_text, slider_text, self.slider_arrow, self.slider, margin=0),
        )


class TomlEditor(pn.viewable.Viewer):
    """The scenario as TOML text, editable and kept in sync with the other editors."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.editor = pn.widgets.TextAreaInput(
            value=self.state.text,
            height=420,
            width=560,
            css_classes=["wb-toml"],
            stylesheets=[":host textarea {font-family: monospace; font-size: 12px;}"],
        )
        self.apply = pn.widgets.Button(
            label="Apply text", color="primary", width=140, css_classes=["wb-apply-toml"]
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
            width=320,
            styles=NOTE_STYLE,
        )
        return pn.Row(
            pn.Column(self.editor, self.apply, ErrorBox(state=self.state, sections=["toml"]), margin=0),
            help_text,
        )
