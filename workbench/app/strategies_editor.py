"""The strategies editor under the graph: one row per strategy (name, adjustment set, model,
standardisation, how the set is chosen, restriction, remove), each with its verdict and reasons below it,
and the buttons that add a strategy or the minimal and optimal valid sets.
"""

from __future__ import annotations

import panel as pn
import param

from workbench.app.state import ScenarioState
from workbench.app.widgets import MAIN_WIDTH, NOTE_STYLE, ErrorBox
from workbench.formatting.markup import text_html
from workbench.scenario.edit import restriction_toml

__all__ = ["StrategiesEditor", "SELECTION_CHOICES", "verdict_badge", "valid_sets_html"]

#: The editor's choices of how the adjustment set is chosen (label -> value).
SELECTION_CHOICES = {
    "fixed set": "fixed",
    "keep if significant (p < alpha)": "p_value",
    "keep if change > 10%": "change_in_estimate",
}


def verdict_badge(valid: bool | None) -> str:
    """'valid' in green, 'invalid' in red, '' when unknown.

    Examples
    --------
    >>> verdict_badge(None), "invalid" in verdict_badge(False)
    ('', True)
    """
    if valid is None:
        return ""
    return "<b style='color:#00603F'>valid</b>" if valid else "<b style='color:#A33C00'>invalid</b>"


def valid_sets_html(report) -> str:
    """The minimal valid sets and the optimal valid set of a check report, in one line.

    Examples
    --------
    >>> from workbench import check, load_preset
    >>> print(valid_sets_html(check(load_preset("common_cause"))))
    <b>Minimal valid sets:</b> {soil_quality} &nbsp; <b>Optimal valid set:</b> {soil_quality} <span ...
    """
    minimal = "; ".join("{" + ", ".join(m) + "}" for m in report.minimal_sets) or "none"
    optimal = "{" + ", ".join(report.optimal_set) + "}" if report.optimal_set is not None else "none"
    return (
        f"<b>Minimal valid sets:</b> {text_html(minimal)} &nbsp; <b>Optimal valid set:</b> "
        f"{text_html(optimal)} <span style='color:#777'>({text_html(report.optimal_note)})</span>"
    )


class StrategiesEditor(pn.viewable.Viewer):
    """Strategies: name, adjustment set, model; each with its verdict and reasons; add, remove, suggest."""

    state = param.ClassSelector(class_=ScenarioState)

    def __init__(self, **params):
        super().__init__(**params)
        self.rows = pn.Column(margin=0, css_classes=["wb-strategies"])
        self.add = pn.widgets.Button(label="Add strategy", width=140, css_classes=["wb-add-strategy"])
        self.add.on_click(lambda e: self.state.add_strategy())
        self.suggest = pn.widgets.Button(
            label="Add the minimal and optimal valid sets",
            width=300,
            color="success",
            css_classes=["wb-suggest"],
        )
        self.suggest.on_click(lambda e: self.state.add_suggested_strategies())
        self.sets = pn.pane.HTML("", styles=NOTE_STYLE)
        self._signature = None
        self.state.param.watch(self._refresh, ["scenario", "report"])
        self._refresh()

    def _current_signature(self) -> tuple:
        """What the rows show: they are rebuilt only when it changes (rebuilding loses the focus)."""
        state = self.state
        report = state.report
        return (
            repr(state.strategy_rows()),
            tuple(state.adjustable),
            state.scenario.outcome.is_binary,
            repr(report.minimal_sets if report else None),
            repr(report.optimal_set if report else None),
        )

    def _refresh(self, *_):
        signature = self._current_signature()
        if signature == self._signature:
            return
        self._signature = signature
        self.rows.objects = [self._row(row) for row in self.state.strategy_rows()]
        if self.state.report is not None:
            self.sets.object = valid_sets_html(self.state.report)

    def _row(self, row: dict) -> pn.Column:
        """One strategy: its controls in a row, its verdict and reasons below."""
        reasons = text_html("; ".join(row["reasons"]))
        verdict = pn.pane.HTML(
            f"<div style='font-size:12px;line-height:1.35;color:#333'>{verdict_badge(row['valid'])} {reasons}</div>",
            sizing_mode="stretch_width",
            margin=(0, 10, 4, 12),
            css_classes=["wb-strategy-verdict"],
        )
        return pn.Column(
            pn.Row(*self._controls(row), margin=0),
            verdict,
            styles={"border-bottom": "1px solid #e3e3e3"},
            margin=(2, 0),
            width=MAIN_WIDTH - 40,
        )

    def _controls(self, row: dict) -> list:
        """The inputs of one strategy, each sending its change to the state."""
        state, name = self.state, row["name"]
        binary = state.scenario.outcome.is_binary
        title = pn.widgets.TextInput(value=name, width=150, css_classes=["wb-strategy-name"])
        title.param.watch(lambda e: e.new != name and state.set_strategy(name, new_name=e.new), "value")
        options = state.adjustable
        adjust = pn.widgets.MultiChoice(
            value=[v for v in row["adjust"] if v in options],
            options=options,
            width=250,
            placeholder="candidates to choose from" if row["selection"] else "adjust for nothing",
            css_classes=["wb-strategy-adjust"],
        )
        adjust.param.watch(lambda e: state.set_strategy(name, adjust=e.new), "value")
        model = pn.widgets.Select(
            value=row["model"], options=["ols", "logit"] if binary else ["ols"], width=70
        )
        model.param.watch(lambda e: state.set_strategy(name, model=e.new), "value")
        standardize = pn.widgets.Checkbox(
            label="standardise", value=row["standardize"], disabled=row["model"] != "logit", width=95
        )
        standardize.param.watch(lambda e: state.set_strategy(name, standardize=e.new), "value")
        rule = pn.widgets.Select(
            value=row["selection"] or "fixed",
            options=SELECTION_CHOICES,
            width=175,
            disabled=binary or row["model"] != "ols",
            css_classes=["wb-strategy-selection"],
        )
        rule.param.watch(lambda e: state.set_strategy(name, selection=e.new), "value")
        restrict = pn.widgets.TextInput(
            value=restriction_toml(row["restrict"]),
            placeholder="keep only: e.g. shift = 0",
            width=165,
            css_classes=["wb-strategy-restrict"],
        )
        restrict.param.watch(lambda e: e.new != e.old and state.set_strategy(name, restrict=e.new), "value")
        remove = pn.widgets.Button(label="Remove", width=75, color="light")
        remove.on_click(lambda e: state.remove_strategy(name))
        return [title, adjust, model, standardize, rule, restrict, remove]

    def __panel__(self):
        parts = [
            "name",
            "adjustment set",
            "model",
            "how the set is chosen",
            "analyse only units with (restriction)",
        ]
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
