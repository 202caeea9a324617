"""The inspector under the graph: the variable or arrow selected on the canvas, with the keys the tables do not show.

A variable's type (continuous, binary, count), a count's ``rate``, a binary variable's ``proportion``, a
continuous variable's noise law (``noise``, ``noise_df``) and heteroskedastic spread (``spread_with``, typed as
``distance = 0.5, load = 0.2``); an arrow's ``form`` (linear, square, step), a step's ``at`` and its effect
modification (``varies_with``, typed as ``skill = 0.3``). Each input sends one change to
:class:`~workbench.app.state.ScenarioState` (:meth:`~workbench.app.graph_edits.GraphEdits.set_variable`,
:meth:`~workbench.app.graph_edits.GraphEdits.set_arrow_shape`), so it is validated by the file's parser,
undoable, and refused with the parser's one-line message in the inspector's error box. The keys are
described in docs/scenario-format.md.

Examples
--------
>>> from workbench.app.state import ScenarioState
>>> state = ScenarioState(preset="common_cause")
>>> inspector = Inspector(state=state)
>>> inspector.pick.value = "variable:soil_quality"
>>> inspector.var_type.value = "count"
>>> state.scenario.variable("soil_quality").rate, inspector.rate.visible
(1.0, True)
"""

from __future__ import annotations

import panel as pn
import param

from workbench.app.state import ScenarioState
from workbench.app.widgets import NOTE_STYLE, ErrorBox

__all__ = ["Inspector", "coefficients_text"]

_SECTION = "inspector"


def coefficients_text(pairs) -> str:
    """``spread_with`` or ``varies_with`` pairs as the inspector shows them (the inside of a TOML inline table).

    Examples
    --------
    >>> coefficients_text((("distance", 0.5), ("load", -0.2)))
    'distance = 0.5, load = -0.2'
    """
    return ", ".join(f"{name} = {value:g}" for name, value in pairs)


class Inspector(pn.viewable.Viewer):
    """The selected variable or arrow and its richer-model keys; follows the canvas selection when given."""

    state = param.ClassSelector(class_=ScenarioState)
    canvas = param.Parameter(default=None, doc="The CanvasEditor whose selection the inspector follows.")

    def __init__(self, **params):
        super().__init__(**params)
        self._refreshing = False
        self.pick = pn.widgets.Select(label="Variable or arrow", width=260, css_classes=["wb-inspect-pick"])
        self.var_type = pn.widgets.Select(
            label="Type",
            options=["continuous", "binary", "count"],
            width=130,
            css_classes=["wb-inspect-type"],
        )
        self.rate = pn.widgets.FloatInput(
            label="Rate (mean count)", step=0.5, width=130, css_classes=["wb-inspect-rate"]
        )
        self.proportion = pn.widgets.FloatInput(
            label="Proportion", step=0.05, width=130, css_classes=["wb-inspect-proportion"]
        )
        self.noise = pn.widgets.Select(
            label="Noise",
            options=["normal", "heavy_tailed", "skewed"],
            width=130,
            css_classes=["wb-inspect-noise"],
        )
        self.noise_df = pn.widgets.FloatInput(
            label="Noise df (t)", step=1.0, width=110, css_classes=["wb-inspect-noise-df"]
        )
        self.spread = pn.widgets.TextInput(
            label="Noise spreads with",
            placeholder="e.g. distance = 0.5",
            width=260,
            css_classes=["wb-inspect-spread"],
        )
        self.form = pn.widgets.Select(
            label="Form", options=["linear", "square", "step"], width=130, css_classes=["wb-inspect-form"]
        )
        self.at = pn.widgets.FloatInput(label="Step at", step=0.1, width=110, css_classes=["wb-inspect-at"])
        self.varies = pn.widgets.TextInput(
            label="Effect varies with",
            placeholder="e.g. skill = 0.3",
            width=260,
            css_classes=["wb-inspect-varies"],
        )
        self._variable_inputs = {
            self.var_type: "type",
            self.rate: "rate",
            self.proportion: "proportion",
            self.noise: "noise",
            self.noise_df: "noise_df",
            self.spread: "spread_with",
        }
        self._arrow_inputs = {self.form: "form", self.at: "at", self.varies: "varies_with"}
        for widget, field in self._variable_inputs.items():
            widget.param.watch(lambda e, field=field: self._variable_edited(field, e.new), "value")
        for widget, field in self._arrow_inputs.items():
            widget.param.watch(lambda e, field=field: self._arrow_edited(field, e.new), "value")
        self.pick.param.watch(lambda _e: self._show(), "value")
        self.state.param.watch(lambda _e: self._refresh(), "scenario")
        if self.canvas is not None:
            self.canvas.param.watch(self._canvas_selected, ["selected_node", "selected_arrow"])
        self._refresh()

    # --- what is picked ----------------------------------------------------------------------------------
    def _options(self) -> dict[str, str]:
        sc = self.state.scenario
        options = {f"variable {v.name}": f"variable:{v.name}" for v in sc.variables}
        options |= {f"arrow {a.source} -> {a.target}": f"arrow:{i}" for i, a in enumerate(sc.arrows)}
        return options

    def _picked(self):
        """``("variable", Variable)``, ``("arrow", index, Arrow)`` or None."""
        value = self.pick.value or ""
        kind, _, key = value.partition(":")
        sc = self.state.scenario
        if kind == "variable" and key in sc.names:
            return ("variable", sc.variable(key))
        if kind == "arrow" and key.isdigit() and int(key) < len(sc.arrows):
            return ("arrow", int(key), sc.arrows[int(key)])
        return None

    def _canvas_selected(self, *_events) -> None:
        node, arrow = self.canvas.selected_node, tuple(self.canvas.selected_arrow or ())
        if node:
            self.pick.value = f"variable:{node}"
        elif arrow:
            pairs = [(a.source, a.target) for a in self.state.scenario.arrows]
            if arrow in pairs:
                self.pick.value = f"arrow:{pairs.index(arrow)}"

    def _refresh(self) -> None:
        options = self._options()
        if options != self.pick.options:
            keep = self.pick.value
            self._refreshing = True
            try:
                self.pick.options = options
                values = list(options.values())
                self.pick.value = keep if keep in values else (values[0] if values else None)
            finally:
                self._refreshing = False
        self._show()

    def _show(self) -> None:
        """Set the inputs to the picked item and show only those that apply to it."""
        picked = self._picked()
        self._refreshing = True
        try:
            for widget in (*self._variable_inputs, *self._arrow_inputs):
                widget.visible = False
            if picked is None:
                return
            if picked[0] == "variable":
                self._show_variable(picked[1])
            else:
                self._show_arrow(picked[2])
        finally:
            self._refreshing = False

    def _show_variable(self, v) -> None:
        self.var_type.param.update(value=v.type, visible=True)
        if v.is_count:
            self.rate.param.update(value=v.rate, visible=True)
        elif v.is_binary:
            self.proportion.param.update(value=v.proportion, visible=True)
        else:
            self.noise.param.update(value=v.noise, visible=True)
            self.noise_df.param.update(value=v.noise_df, visible=v.noise == "heavy_tailed")
            self.spread.param.update(value=coefficients_text(v.spread_with), visible=True)

    def _show_arrow(self, a) -> None:
        self.form.param.update(value=a.form, visible=True)
        self.at.param.update(value=a.at, visible=a.form == "step")
        self.varies.param.update(value=coefficients_text(a.varies_with), visible=True)

    # --- edits ---------------------------------------------------------------------------------------------
    def _variable_edited(self, field: str, value) -> None:
        picked = self._picked()
        if self._refreshing or picked is None or picked[0] != "variable":
            return
        if field in ("rate", "proportion") and value is None:
            return  # an emptied number box: nothing to apply yet
        if not self.state.set_variable(picked[1].name, field, value, section=_SECTION):
            self._show()  # the inputs show the scenario in effect; the error box says why

    def _arrow_edited(self, field: str, value) -> None:
        picked = self._picked()
        if self._refreshing or picked is None or picked[0] != "arrow":
            return
        if not self.state.set_arrow_shape(picked[1], field, value, section=_SECTION):
            self._show()

    def __panel__(self):
        help_text = pn.pane.Markdown(
            "Pick a variable or an arrow here or on the graph. A **count** is Poisson with the given mean "
            "(its arrows act on the log scale). **Noise** other than normal, and noise that **spreads with** "
            "a cause (`name = 0.5`: the SD times exp(0.5) per SD of it), apply to continuous variables. An "
            "arrow's **form** makes its cause enter squared or as a step (1 above *at*); **varies with** "
            "makes its effect depend on a modifier (`name = 0.3`). Each change can be undone.",
            width=340,
            styles=NOTE_STYLE,
        )
        inputs = pn.Column(
            self.pick,
            pn.Row(self.var_type, self.rate, self.proportion, margin=0),
            pn.Row(self.noise, self.noise_df, margin=0),
            self.spread,
            pn.Row(self.form, self.at, margin=0),
            self.varies,
            ErrorBox(state=self.state, sections=[_SECTION]),
            margin=0,
            css_classes=["wb-inspector"],
        )
        return pn.Row(inputs, help_text)
