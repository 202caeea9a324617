"""The Graph tab: the graph with its roles, the question selectors, the paths of a chosen strategy and its
verdict, and under them the scenario editors (:mod:`workbench.app.editors`, the inspector of the selected
variable or arrow :mod:`workbench.app.inspector`, :mod:`workbench.app.strategies_editor`).
"""

from __future__ import annotations

import panel as pn
import param

from workbench.app.canvas import CanvasEditor
from workbench.app.editors import ArrowsEditor, TomlEditor, VariablesEditor
from workbench.app.inspector import Inspector
from workbench.app.state import ScenarioState
from workbench.app.strategies_editor import StrategiesEditor
from workbench.app.widgets import ErrorBox
from workbench.formatting.markup import text_html
from workbench.formatting.tables import render_html
from workbench.report.explain import consequences_html
from workbench.report.graph_drawing import graph_figure
from workbench.scenario.write import dumps_tables, scenario_to_dict

__all__ = ["GraphView", "graph_tab", "verdict_html"]

_NONE = "(none)"


def verdict_html(name: str, verdict) -> str:
    """A strategy's verdict beside the graph: valid or not, the reasons, the open and the blocked paths.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.graph import judge
    >>> text = verdict_html("adjust_soil", judge(load_preset("common_cause"), ["soil_quality"]))
    >>> "valid</span>" in text and "Blocked paths" in text
    True
    """
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
    reasons = "".join(f"<li>{text_html(r)}</li>" for r in verdict.reasons + verdict.notes)
    open_paths = "".join(
        f"<li>{text_html(p.text)}{' (causal)' if p.causal else ''}</li>" for p in verdict.open_paths
    )
    blocked = "".join(f"<li>{text_html(p.text)}</li>" for p in verdict.blocked_paths)
    items = "style='padding-left:16px;margin:2px 0'"
    return (
        f"<div style='font-size:12px'><b>{text_html(name)}</b>: {badge}"
        f"<ul style='padding-left:16px;margin:4px 0'>{reasons}</ul>"
        f"<b>Open paths</b><ul {items}>{open_paths or '<li>none</li>'}</ul>"
        f"<b>Blocked paths</b><ul {items}>{blocked or '<li>none</li>'}</ul></div>"
    )


class GraphView(pn.viewable.Viewer):
    """The graph, the question selectors, and the path highlight of a chosen strategy."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.pane = pn.pane.Bokeh(css_classes=["wb-graph"], margin=(0, 5))
        self.exposure = pn.widgets.Select(label="Exposure", width=145, css_classes=["wb-exposure"])
        self.outcome = pn.widgets.Select(label="Outcome", width=145, css_classes=["wb-outcome"])
        self.target = pn.widgets.Select(
            label="Target", options=["total", "direct"], width=145, css_classes=["wb-target"]
        )
        self.scale = pn.widgets.Select(
            label="Scale", options=["difference", "log_odds_ratio"], width=145, css_classes=["wb-scale"]
        )
        selectors = {
            "exposure": self.exposure,
            "outcome": self.outcome,
            "target": self.target,
            "scale": self.scale,
        }
        for key, selector in selectors.items():
            selector.param.watch(lambda e, key=key: self._question_edited(key, e.new), "value")
        self.also = pn.widgets.MultiChoice(
            label="Also estimate the direct effects of", width=300, css_classes=["wb-also"]
        )
        self.also.param.watch(self._also_edited, "value")
        self.highlight = pn.widgets.Select(
            label="Show the paths of strategy", width=300, css_classes=["wb-highlight"]
        )
        self.highlight.param.watch(self._highlight_chosen, "value")
        self.verdict = pn.pane.HTML("", width=300, css_classes=["wb-verdict"])
        self.truth = pn.pane.HTML("", width=300, css_classes=["wb-truth"])
        self.controls = pn.pane.HTML("", width=300, css_classes=["wb-controls"])
        self.implied = pn.pane.HTML("", width=290, css_classes=["wb-implied"])
        # the implied correlations and R^2 are written when the card is opened (a shorter first page)
        self.implied_card = pn.Card(
            self.implied, title="Implied correlations and R^2", collapsed=True, width=300
        )
        self.implied_card.param.watch(lambda _e: self._show_implied(), "collapsed")
        self.canvas = CanvasEditor(state=self.state)
        self.state.param.watch(self._refresh, ["scenario", "selected_strategy", "report"])
        self._refresh()

    #: True while the selectors are rewritten from the scenario (their events are not edits then).
    _refreshing = False

    def _question_edited(self, key, value):
        if self._refreshing or value is None:
            return
        if getattr(self.state.scenario.question, key) != value:
            self.state.set_question(**{key: value})

    def _also_edited(self, event):
        """``question.also`` from the multi-choice: the scenario's tables with the new list, applied as text."""
        sc = self.state.scenario
        if self._refreshing or list(event.new or []) == list(sc.question.also):
            return
        data = scenario_to_dict(sc)
        data["question"].pop("also", None)
        if event.new:
            data["question"]["also"] = list(event.new)
        self.state.apply_text(dumps_tables(data))

    def _highlight_chosen(self, event):
        if not self._refreshing:
            self.state.selected_strategy = "" if event.new in (None, _NONE) else event.new

    def _refresh(self, *_):
        state = self.state
        report = state.report
        verdict = state.verdict()
        adjust = state.scenario.strategy(state.selected_strategy).adjust if state.selected_strategy else ()
        fig = graph_figure(
            state.scenario, report.roles if report else None, verdict, adjust=adjust, width=600, height=370
        )
        self.canvas.attach(fig, state.scenario)  # editing on the canvas (app/canvas.py)
        self.pane.object = fig
        self._show_question()
        self.truth.object = self._truth_html()
        self.verdict.object = verdict_html(state.selected_strategy, verdict)
        self.controls.object = consequences_html(report, state.selected_strategy)
        self._show_implied()

    def _show_implied(self) -> None:
        """The implied correlation matrix and each variable's R^2, while the card is open."""
        report = self.state.report
        implied = report.implied if report is not None and not self.implied_card.collapsed else None
        self.implied.object = render_html(implied.parts()) if implied is not None else ""

    def _show_question(self) -> None:
        """Set the selectors to the scenario's question and strategies."""
        sc = self.state.scenario
        q = sc.question
        self._refreshing = True
        try:
            self.exposure.options = sc.observed_names
            self.outcome.options = sc.observed_names
            self.exposure.value, self.outcome.value = q.exposure, q.outcome
            self.target.value = q.target
            scales = {"binary": ["difference", "log_odds_ratio", "log_risk_ratio"]}
            scales["count"] = ["difference", "log_rate_ratio"]
            self.scale.options = scales.get(sc.outcome.type, ["difference"])
            self.scale.value = q.scale
            self.scale.disabled = sc.outcome.is_continuous
            self.also.options = [v for v in sc.observed_names if v not in (q.exposure, q.outcome)]
            self.also.value = list(q.also)
            self.highlight.options = [_NONE] + [s.name for s in sc.strategies]
            self.highlight.value = self.state.selected_strategy or _NONE
        finally:
            self._refreshing = False

    def _truth_html(self) -> str:
        q = self.state.scenario.question
        report = self.state.report
        truth = report.truth if report is not None else None
        truth_text = f"{truth:.4g}" if truth is not None else "computed by the simulation"
        return (
            f"<div style='font-size:13px'><b>Question:</b> the {q.target} effect of <b>{text_html(q.exposure)}</b> "
            f"on <b>{text_html(q.outcome)}</b> ({q.scale.replace('_', ' ')}).<br><b>True effect under this graph:</b> "
            f"<span class='wb-truth-value'>{truth_text}</span></div>"
        )

    def __panel__(self):
        side = pn.Column(
            self.truth,
            pn.Row(self.exposure, self.outcome, margin=0),
            pn.Row(self.target, self.scale, margin=0),
            self.also,
            ErrorBox(state=self.state, sections=["question"], width=300),
            self.highlight,
            self.verdict,
            self.controls,
            self.implied_card,
            width=320,
        )
        drawing = pn.Column(self.pane, self.canvas, margin=0, sizing_mode="stretch_width", max_width=610)
        return pn.Row(drawing, side, margin=0)


def graph_tab(state: ScenarioState) -> pn.viewable.Viewable:
    """The Graph tab: the graph view above the tabs of the editors.

    In a served session the editors are built once the page has loaded (``pn.state.onload``): the graph
    shows first, and the editors' tables follow a moment later (docs/performance.md, first page load).
    Elsewhere (a notebook, a test) they are built at once.

    Examples
    --------
    >>> type(graph_tab(ScenarioState(preset="common_cause"))).__name__
    'Column'
    """
    view = GraphView(state=state)
    holder = pn.Column(margin=(6, 0), css_classes=["wb-editors"], sizing_mode="stretch_width")

    def build_editors():
        holder.objects = [
            pn.Tabs(
                ("Arrows", ArrowsEditor(state=state)),
                ("Variables", VariablesEditor(state=state)),
                ("Selected", Inspector(state=state, canvas=view.canvas)),
                ("Strategies", StrategiesEditor(state=state)),
                ("Scenario text (TOML)", TomlEditor(state=state)),
                css_classes=["wb-editor-tabs"],
                margin=0,
                dynamic=True,  # a hidden editor is neither sent nor updated: edits and uploads apply faster
            )
        ]

    doc = pn.state.curdoc
    if doc is not None and doc.session_context is not None:
        pn.state.onload(build_editors)
    else:
        build_editors()
    return pn.Column(view, holder, margin=(6, 10))
