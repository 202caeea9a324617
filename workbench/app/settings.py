"""The study settings as small ``param`` objects the dashboard's inputs bind to (plain ``param``, no Panel).

A view makes its inputs with ``pn.widgets.IntInput.from_param(settings.param.n)``: the widget and the
parameter then follow each other, and the widget's ``start``/``end`` come from the parameter's soft bounds,
which are those of :data:`workbench.scenario.constraints.STUDY_SETTINGS`. The settings object follows a
:class:`~workbench.app.state.ScenarioState` both ways: a valid scenario writes its values into the
parameters, and a parameter the user changed is sent to the state as an edit, which checks it with
:func:`~workbench.scenario.constraints.check_setting` (one rule for the file, the command line and the page).
A value the state refuses stays where it was typed, with the error shown; the last valid scenario stays in
effect. Since a parameter only notifies when its value changes, and a value equal to the scenario's is
never sent, the two never loop.

Examples
--------
>>> from workbench.app.state import ScenarioState
>>> state = ScenarioState(preset="common_cause")
>>> study = StudySettings(state=state)
>>> study.replicates = 300
>>> state.scenario.study.replicates
300
>>> study.alpha = 0.9
>>> state.error, state.scenario.study.alpha
('study.alpha: must be a number in (0, 0.5], got 0.9', 0.05)
>>> StudySettings.param.n.softbounds
(1, None)
"""

from __future__ import annotations

import param

from workbench.app.state import ScenarioState
from workbench.scenario.constraints import STUDY_SETTINGS

__all__ = ["StudySettings", "PlanSettings", "sizes_text"]


def _bounds(name: str) -> tuple:
    """The soft bounds of a setting's parameter, from :data:`STUDY_SETTINGS`."""
    setting = STUDY_SETTINGS[name]
    return (setting.low, setting.high)


def _doc(name: str) -> str:
    setting = STUDY_SETTINGS[name]
    return f"{setting.meaning.capitalize()}: {setting.rule}."


def sizes_text(sizes) -> str:
    """Sample sizes as the text the plan's input shows.

    Examples
    --------
    >>> sizes_text((100, 200, 400))
    '100, 200, 400'
    """
    return ", ".join(str(n) for n in sizes)


class _BoundSettings(param.Parameterized):
    """Parameters that mirror fields of ``state.scenario.study`` (see the module docstring)."""

    state = param.ClassSelector(class_=ScenarioState, doc="The scenario the settings belong to.")

    #: Where an edit of these settings is shown (the error box of that section).
    section = "study"
    #: The parameters that mirror study fields.
    fields: tuple[str, ...] = ()

    def __init__(self, **params):
        super().__init__(**params)
        self._follow_scenario()
        self.state.param.watch(self._follow_scenario, "scenario")
        self.param.watch(self._edited, list(self.fields))

    def study_values(self) -> dict:
        """The scenario's values of :attr:`fields`, as the parameters hold them."""
        study = self.state.scenario.study
        return {name: getattr(study, name) for name in self.fields}

    def _follow_scenario(self, *_events) -> None:
        values = self.study_values()
        refused = self.state.invalid.get(self.section, {})
        reset = [
            f"{self.section}.{k} shows {values[k]} again ({getattr(self, k)!r} was not applied)"
            for k in refused
        ]
        self.param.update(**values)
        self._record_invalid({})
        if reset:  # say that a refused value was replaced, so it does not vanish unseen
            self.state.note = "; ".join([t for t in (self.state.note,) if t] + reset)

    def _edited(self, *events) -> None:
        current = self.study_values()
        changed = {e.name: e.new for e in events if not self.same(e.name, e.new, current[e.name])}
        refused = {}
        if changed or self.state.error_section == self.section:
            # with nothing changed, this clears the error of a value typed before
            if not self.send(changed):
                refused = {name: self.state.error for name in changed}
        self._record_invalid(refused)

    def same(self, name: str, typed, value) -> bool:
        """Whether the typed value of ``name`` says the same as the scenario's ``value``."""
        return typed == value

    def _record_invalid(self, refused: dict[str, str]) -> None:
        """Tell the state which fields still hold a value that is not in effect, with their messages
        (a field refused earlier keeps its message until it is corrected or the scenario resets it)."""
        current = self.study_values()
        before = self.state.invalid.get(self.section, {})
        messages = {}
        for name in self.fields:
            if self.same(name, getattr(self, name), current[name]):
                continue
            messages[name] = (
                refused.get(name)
                or before.get(name)
                or (f"{self.section}.{name}: the value typed is not in effect")
            )
        self.state.set_invalid(self.section, messages)

    def send(self, changed: dict) -> bool:
        """Send changed values to the state (as :meth:`ScenarioState.set_study`)."""
        return self.state.set_study(section=self.section, **changed)


class StudySettings(_BoundSettings):
    """The sidebar's study settings: n, replicates, seed and alpha."""

    n = param.Integer(default=500, allow_None=True, softbounds=_bounds("n"), step=50, doc=_doc("n"))
    replicates = param.Integer(
        default=2000, allow_None=True, softbounds=_bounds("replicates"), step=500, doc=_doc("replicates")
    )
    seed = param.Integer(default=0, allow_None=True, softbounds=_bounds("seed"), doc=_doc("seed"))
    alpha = param.Number(
        default=0.05, allow_None=True, softbounds=_bounds("alpha"), step=0.01, doc=_doc("alpha")
    )

    section = "study"
    fields = ("n", "replicates", "seed", "alpha")


class PlanSettings(_BoundSettings):
    """The sample-size tab's settings: the sizes to simulate, the target power and CI half-width.

    Examples
    --------
    >>> from workbench.app.state import ScenarioState
    >>> state = ScenarioState(preset="common_cause")
    >>> plan = PlanSettings(state=state)
    >>> plan.sample_sizes = "400 100, 200"
    >>> state.scenario.study.sample_sizes, plan.sample_sizes
    ((100, 200, 400), '100, 200, 400')
    >>> plan.target_halfwidth = 0.1
    >>> state.scenario.study.target_halfwidth
    0.1
    """

    sample_sizes = param.String(
        default="", allow_None=True, doc="Sample sizes to simulate, e.g. 100, 200, 400."
    )
    target_power = param.Number(
        default=0.8, allow_None=True, softbounds=_bounds("target_power"), step=0.05, doc=_doc("target_power")
    )
    target_halfwidth = param.Number(
        default=None,
        allow_None=True,
        softbounds=_bounds("target_halfwidth"),
        step=0.01,
        doc=_doc("target_halfwidth") + " Empty or 0: no target.",
    )

    section = "plan"
    fields = ("sample_sizes", "target_power", "target_halfwidth")

    def study_values(self) -> dict:
        """The scenario's plan settings; the sizes as text (see :func:`sizes_text`)."""
        study = self.state.scenario.study
        return {
            "sample_sizes": sizes_text(study.sample_sizes),
            "target_power": study.target_power,
            "target_halfwidth": study.target_halfwidth,
        }

    def same(self, name: str, typed, value) -> bool:
        """Sizes say the same in any order and spacing; a half-width of 0 or none says no target.

        Examples
        --------
        >>> from workbench.app.state import ScenarioState
        >>> plan = PlanSettings(state=ScenarioState(preset="common_cause"))
        >>> plan.same("sample_sizes", "400,100 200", "100, 200, 400"), plan.same("target_halfwidth", 0, None)
        (True, True)
        """
        if name == "sample_sizes":
            words = (typed or "").replace(",", " ").split()
            if all(word.isdigit() for word in words):
                return sizes_text(sorted(int(word) for word in words)) == value
            return False
        if name == "target_halfwidth":
            return (typed or None) == value
        return typed == value

    def send(self, changed: dict) -> bool:
        """Send changed values to the state: the sizes as text, a half-width of 0 as none."""
        changed = dict(changed)
        if "target_halfwidth" in changed:
            changed["target_halfwidth"] = changed["target_halfwidth"] or None
        sizes = changed.pop("sample_sizes", None)
        if sizes is not None and not self.state.set_sample_sizes(sizes, section=self.section):
            return False
        if changed or sizes is None:
            return self.state.set_study(section=self.section, **changed)
        return True
