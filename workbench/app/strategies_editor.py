"""The strategies editor under the graph: one row per strategy (name, adjustment set, model,
standardisation, how the set is chosen, restriction, remove), a line of the options that apply to it
(standard error; interaction terms; covariates as splines), its verdict and reasons below, and the buttons that add a strategy or
the minimal and optimal valid sets.
"""

from __future__ import annotations

import re

import panel as pn
import param

from workbench.app.state import ScenarioState
from workbench.app.widgets import MAIN_WIDTH, NOTE_STYLE, ErrorBox
from workbench.formatting.markup import text_html
from workbench.scenario.edit import restriction_toml
from workbench.scenario.parse_strategies import SE_CHOICES

__all__ = [
    "StrategiesEditor",
    "MODEL_CHOICES",
    "SELECTION_CHOICES",
    "verdict_badge",
    "valid_sets_html",
    "set_name",
    "follows_its_set",
    "fresh_set_name",
]

#: The models the editor offers for a binary or a count outcome (a continuous one has OLS only).
MODEL_CHOICES = {"binary": ("ols", "logit", "poisson"), "count": ("ols", "poisson")}

#: The editor's choices of how the adjustment set is chosen (label -> value).
SELECTION_CHOICES = {
    "fixed set": "fixed",
    "keep if significant (p < alpha)": "p_value",
    "keep if change > 10%": "change_in_estimate",
}


#: The generic names the dashboard and the default strategies gave before names followed the set; a strategy
#: still called one of them was not named by a person, so its name follows its set too.
_GENERIC_NAME = re.compile(r"(strategy|minimal|optimal|set|all_observed)(_\d+)?")


def set_name(adjust) -> str:
    """The name of a fixed adjustment set, as the command line's default strategies are named
    (:func:`workbench.graph.defaults.default_strategies`): ``unadjusted`` or ``adjust_`` and the covariates.

    Examples
    --------
    >>> set_name([]), set_name(["order_volume"]), set_name(["site_size", "order_volume"])
    ('unadjusted', 'adjust_order_volume', 'adjust_site_size_order_volume')
    >>> set_name(["a_very_long_covariate_name", "another_long_covariate_name", "third", "fourth"])
    'adjust_a_very_long_covariate_name_and_3_more'
    """
    if not adjust:
        return "unadjusted"
    name = "adjust_" + "_".join(adjust)
    return name if len(name) <= 60 else f"adjust_{adjust[0]}_and_{len(adjust) - 1}_more"


def follows_its_set(name: str, adjust) -> bool:
    """Whether a strategy's name was chosen by the dashboard rather than a person: the name of its set (with a
    number after it when that was taken) or a generic name. Such a name follows the set when it changes.

    Examples
    --------
    >>> follows_its_set("adjust_skill", ["skill"]), follows_its_set("adjust_skill_2", ["skill"])
    (True, True)
    >>> follows_its_set("optimal", ["skill"]), follows_its_set("my_model", ["skill"])
    (True, False)
    """
    base = set_name(adjust)
    return bool(re.fullmatch(re.escape(base) + r"(_\d+)?", name) or _GENERIC_NAME.fullmatch(name))


def fresh_set_name(adjust, taken) -> str:
    """:func:`set_name`, with ``_2``, ``_3``, ... when another strategy has that name already.

    Examples
    --------
    >>> fresh_set_name(["skill"], {"unadjusted"}), fresh_set_name([], {"unadjusted", "unadjusted_2"})
    ('adjust_skill', 'unadjusted_3')
    """
    base, i = set_name(adjust), 2
    chosen = base
    while chosen in taken:
        chosen, i = f"{base}_{i}", i + 1
    return chosen


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
        self.add.on_click(lambda e: self.add_strategy())
        self.suggest = pn.widgets.Button(
            label="Add the minimal and optimal valid sets",
            width=300,
            color="success",
            css_classes=["wb-suggest"],
        )
        self.suggest.on_click(lambda e: self.add_suggested())
        self.sets = pn.pane.HTML("", styles=NOTE_STYLE, width=MAIN_WIDTH - 40)
        self._signature = None
        self.state.param.watch(self._refresh, ["scenario", "report"])
        self._refresh()

    def _taken(self, but: str | None = None) -> set[str]:
        return {s.name for s in self.state.scenario.strategies if s.name != but}

    def add_strategy(self) -> bool:
        """Add an unadjusted strategy, named as its set is (``unadjusted_2`` when that name is taken)."""
        binary = self.state.scenario.outcome.is_binary
        return self.state.add_strategy(fresh_set_name((), self._taken()), model="logit" if binary else "ols")

    def add_suggested(self) -> bool:
        """Add the minimal and optimal valid sets not yet listed, each named after its covariates."""
        before = self._taken()
        if not self.state.add_suggested_strategies():
            return False
        for s in self.state.scenario.strategies:
            if s.name not in before and follows_its_set(s.name, s.adjust):
                wanted = fresh_set_name(s.adjust, self._taken(but=s.name))
                if wanted != s.name:
                    self.state.set_strategy(s.name, new_name=wanted)
        return True

    def set_adjust(self, name: str, adjust) -> bool:
        """Change a strategy's set; a name the dashboard gave (:func:`follows_its_set`) follows the new set."""
        strategy = self.state.scenario.strategy(name)
        new_name = None
        if strategy.selection is None and follows_its_set(name, strategy.adjust):
            wanted = fresh_set_name(list(adjust), self._taken(but=name))
            new_name = wanted if wanted != name else None
        return self.state.set_strategy(name, adjust=adjust, new_name=new_name)

    def _current_signature(self) -> tuple:
        """What the rows show: they are rebuilt only when it changes (rebuilding loses the focus)."""
        state = self.state
        report = state.report
        return (
            repr(state.strategy_rows()),
            tuple(state.adjustable),
            state.scenario.outcome.type,
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
        options = self._options(row)
        return pn.Column(
            pn.Row(*self._controls(row), margin=0),
            *([pn.Row(*options, margin=(0, 0, 0, 150))] if options else []),
            verdict,
            styles={"border-bottom": "1px solid #e3e3e3"},
            margin=(2, 0),
            width=MAIN_WIDTH - 40,
        )

    def _controls(self, row: dict) -> list:
        """The inputs of one strategy, each sending its change to the state."""
        state, name = self.state, row["name"]
        kind = state.scenario.outcome.type
        title = pn.widgets.TextInput(value=name, width=140, css_classes=["wb-strategy-name"])
        title.param.watch(lambda e: e.new != name and state.set_strategy(name, new_name=e.new), "value")
        options = state.adjustable
        adjust = pn.widgets.MultiChoice(
            value=[v for v in row["adjust"] if v in options],
            options=options,
            width=230,
            placeholder="candidates to choose from" if row["selection"] else "adjust for nothing",
            css_classes=["wb-strategy-adjust"],
        )
        adjust.param.watch(lambda e: self.set_adjust(name, e.new), "value")
        controls = [title, adjust]
        if kind in MODEL_CHOICES:  # a continuous outcome has one model, so no choice is shown
            model = pn.widgets.Select(
                value=row["model"],
                options=list(MODEL_CHOICES[kind]),
                width=70,
                css_classes=["wb-strategy-model"],
            )
            model.param.watch(lambda e: state.set_strategy(name, model=e.new), "value")
            controls.append(model)
            if row["model"] == "logit":  # standardisation applies to logistic models only
                standardize = pn.widgets.Checkbox(
                    label="standardise", value=row["standardize"], width=95, css_classes=["wb-strategy-std"]
                )
                standardize.param.watch(lambda e: state.set_strategy(name, standardize=e.new), "value")
                controls.append(standardize)
            else:
                controls.append(pn.Spacer(width=95))
        else:  # selection rules apply to least squares on a continuous outcome only
            rule = pn.widgets.Select(
                value=row["selection"] or "fixed",
                options=SELECTION_CHOICES,
                width=170,
                css_classes=["wb-strategy-selection"],
            )
            rule.param.watch(lambda e: state.set_strategy(name, selection=e.new), "value")
            controls.append(rule)
        restrict = pn.widgets.TextInput(
            value=restriction_toml(row["restrict"]),
            placeholder="keep only: e.g. shift = 0",
            width=150,
            css_classes=["wb-strategy-restrict"],
        )
        restrict.param.watch(lambda e: e.new != e.old and state.set_strategy(name, restrict=e.new), "value")
        remove = pn.widgets.Button(label="Remove", width=70, color="light")
        remove.on_click(lambda e: state.remove_strategy(name))
        return [*controls, restrict, remove]

    def _options(self, row: dict) -> list:
        """The options that apply to this strategy's model and design: the standard error where there is a
        choice, and for least squares on a continuous outcome interaction terms with the exposure and the
        continuous covariates adjusted for as restricted cubic splines (``flexible``)."""
        state, name = self.state, row["name"]
        continuous = state.scenario.outcome.is_continuous
        design = row["selection"] or row["restrict"] or row["match"]
        choices = SE_CHOICES.get((row["model"], state.scenario.outcome.type), ())
        out = []
        if len(choices) > 1 and not design:
            labels = {f"SE: {c}{' (default)' if i == 0 else ''}": c for i, c in enumerate(choices)}
            se = pn.widgets.Select(
                value=row["se"] or choices[0], options=labels, width=170, css_classes=["wb-strategy-se"]
            )
            se.param.watch(lambda e: state.set_strategy(name, se=e.new), "value")
            out.append(se)
        if row["model"] == "ols" and continuous and not design and row["adjust"]:
            terms = pn.widgets.MultiChoice(
                value=[v for v in row["interactions"] if v in row["adjust"]],
                options=list(row["adjust"]),
                width=300,
                placeholder="interactions with the exposure: none",
                css_classes=["wb-strategy-interactions"],
            )
            terms.param.watch(lambda e: state.set_strategy(name, interactions=e.new), "value")
            out.append(terms)
        smooth = [v for v in row["adjust"] if state.scenario.variable(v).is_continuous]
        others = row["interactions"] or row["se"] == "hc3"  # not combined with a spline yet (the parser)
        if row["model"] == "ols" and continuous and not design and smooth and (row["flexible"] or not others):
            flexible = pn.widgets.MultiChoice(
                value=[v for v in row["flexible"] if v in smooth],
                options=smooth,
                width=260,
                placeholder="as splines (flexible): none",
                css_classes=["wb-strategy-flexible"],
            )
            flexible.param.watch(lambda e: state.set_strategy(name, flexible=e.new), "value")
            out.append(flexible)
        return out

    def _header(self) -> pn.Row:
        """The column names, each in its own cell above its inputs (the cells follow the outcome's kind)."""
        discrete = not self.state.scenario.outcome.is_continuous
        parts = [("name", 140), ("adjustment set", 230)]
        parts += (
            [("model", 70), ("logistic: standardise", 95)] if discrete else [("how the set is chosen", 170)]
        )
        parts += [("keep only units with", 150)]
        style = "font-size:12px;color:#444;line-height:1.2"
        return pn.Row(
            *[
                pn.pane.HTML(f"<div style='{style}'>{text}</div>", width=w, margin=(0, 10))
                for text, w in parts
            ],
            css_classes=["wb-strategies-head"],
            margin=0,
        )

    def __panel__(self):
        header = pn.bind(lambda _: self._header(), self.state.param.scenario)
        note = pn.pane.HTML(
            "<div style='font-size:12px;color:#666'>Below each strategy: its verdict and the reasons. A name "
            "the dashboard gave follows the adjustment set; a name you type stays.</div>"
        )
        return pn.Column(
            header,
            self.rows,
            note,
            pn.Row(self.add, self.suggest),
            self.sets,
            ErrorBox(state=self.state, sections=["strategies"]),
            margin=0,
        )
