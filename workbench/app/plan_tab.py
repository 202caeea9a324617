"""The Sample size tab: the plan's settings (bound to a :class:`~workbench.app.settings.PlanSettings`),
power against n with the smallest n per strategy, bias and empirical SE against n, and, when the question
names further effects, whether the planned study can tell them apart.
"""

from __future__ import annotations

import panel as pn

from workbench.app.settings import PlanSettings, sizes_text
from workbench.app.widgets import (
    MAIN_WIDTH,
    ErrorBox,
    JobProgress,
    TabView,
    html_pane,
)
from workbench.formatting.markup import text_markdown
from workbench.report import figures, plan_figures, tables

__all__ = ["SampleSizeView"]


class SampleSizeView(TabView):
    """Power curves, bias and empirical SE against n, the smallest n per strategy, separation figures."""

    def __init__(self, **params):
        super().__init__(**params)
        state = self.workbench.scenario_state
        self.settings = PlanSettings(state=state)
        settings = self.settings.param
        self.sizes = pn.widgets.TextInput.from_param(
            settings.sample_sizes, label="Sample sizes to simulate", width=300, css_classes=["wb-sizes"]
        )
        self.target_power = pn.widgets.FloatInput.from_param(
            settings.target_power, label="Target power", width=120, css_classes=["wb-target-power"]
        )
        self.target_halfwidth = pn.widgets.FloatInput.from_param(
            settings.target_halfwidth,
            label="Target CI half-width (optional)",
            width=210,
            css_classes=["wb-target-halfwidth"],
        )
        for field in (self.target_power, self.target_halfwidth):
            field.param.update(start=None, end=None)  # the state checks every value (see the sidebar)
        self.body = pn.Column(margin=0, css_classes=["wb-sample-size"])
        self.banner = pn.pane.HTML("", margin=(0, 5))
        self._shown = None
        self.workbench.planning.param.watch(self._changed, ["result", "status"])
        state.param.watch(self._changed, "scenario")
        self.refresh()

    def _changed(self, *_):
        self.when_shown(self.refresh)

    def refresh(self):
        """Show the plan's result (or what to do to get one)."""
        self.show_result(
            self.workbench.planning, lambda result: [*self._curves(result), *self._separation(result)]
        )

    def _waiting_text(self) -> str:
        wb = self.workbench
        job = wb.planning
        if job.status == "running":
            return "Computing the sample-size plan ..."
        failed = f"  \n{text_markdown(job.message)}" if job.status == "failed" else ""
        return (
            "Press **Run** in the sidebar to compute power and precision over the sample sizes "
            f"{sizes_text(wb.scenario.study.sample_sizes)}." + failed
        )

    @staticmethod
    def _curves(result) -> list:
        """Power against n, the smallest n per strategy, bias and empirical SE against n."""
        bias = figures.by_n_figure(
            result, "bias", title="Bias against n", y_label="bias", zero_line=True, width=530
        )
        emp_se = figures.by_n_figure(
            result, "emp_se", title="Empirical SE against n", y_label="empirical SE", width=530
        )
        return [
            pn.pane.Bokeh(
                figures.power_figure(result, target_power=result.target_power, width=MAIN_WIDTH - 40)
            ),
            html_pane(tables.smallest_n_table(result.smallest_n), css_classes=["wb-smallest-n"]),
            pn.Row(pn.pane.Bokeh(bias), pn.pane.Bokeh(emp_se)),
            pn.pane.Bokeh(
                plan_figures.precision_figure(result, width=MAIN_WIDTH - 40), css_classes=["wb-precision"]
            ),
        ]

    @staticmethod
    def _separation(result) -> list:
        """When the question names ``also`` effects: their power and correlation with the exposure's."""
        also = result.also_table
        if also is None or not len(also):
            return []
        panes = [
            pn.pane.Markdown("### Separating the effects", margin=(10, 10, 0, 10)),
            pn.Row(
                *[
                    pn.pane.Bokeh(f)
                    for f in figures.separation_figure(
                        also, result.table, width=(MAIN_WIDTH - 60) // 2, grid=False
                    )
                ],
                css_classes=["wb-separation"],
            ),
        ]
        if result.also_smallest_n is not None and len(result.also_smallest_n):
            panes.append(html_pane(tables.also_smallest_n_table(result.also_smallest_n)))
        sentence = result.all_effects_sentence()
        if sentence:
            panes.append(
                pn.pane.Markdown(text_markdown(sentence), css_classes=["wb-all-effects"], margin=(5, 10))
            )
        panes.append(pn.pane.Bokeh(plan_figures.joint_power_figure(result, width=MAIN_WIDTH - 40)))
        return panes

    def __panel__(self):
        settings = pn.Row(self.sizes, self.target_power, self.target_halfwidth, margin=(0, 0, 4, 0))
        return pn.Column(
            settings,
            ErrorBox(state=self.workbench.scenario_state, sections=["plan"]),
            JobProgress(job=self.workbench.planning, css_class="wb-plan-progress"),
            self.body,
            margin=0,
        )
