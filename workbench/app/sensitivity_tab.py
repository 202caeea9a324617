"""The Sensitivity tab: how strong an unmeasured confounder would have to be, for a strategy the user picks.

The tab calls :func:`workbench.analysis.sensitivity.sensitivity` on the scenario in effect (closed form for
linear-Gaussian graphs, the cached large simulation otherwise) and shows its findings, the contour plot of the
adjusted estimate with the zero line and the benchmarks (:func:`workbench.report.sensitivity_figures.sensitivity_figure`)
and the benchmarks table. It redraws only while shown (:class:`~workbench.app.widgets.TabView`).
"""

from __future__ import annotations

import panel as pn

from workbench.app.widgets import MAIN_WIDTH, NOTE_STYLE, TabView, html_pane, placeholder
from workbench.errors import WorkbenchError
from workbench.formatting.markup import text_html

__all__ = ["SensitivityView", "sensitivity_summary_html"]


def sensitivity_summary_html(result) -> str:
    """The findings of a sensitivity analysis as escaped HTML, one line each.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.sensitivity import sensitivity
    >>> "Robustness value" in sensitivity_summary_html(sensitivity(load_preset("common_cause"), grid=3))
    True
    """
    lines = "".join(f"<li>{text_html(line)}</li>" for line in result.summary_lines())
    return f"<ul style='font-size:13px;line-height:1.45;max-width:1000px'>{lines}</ul>"


class SensitivityView(TabView):
    """The strategy picker, the findings, the contour plot and the benchmarks."""

    def __init__(self, **params):
        super().__init__(**params)
        self.strategy = pn.widgets.Select(label="Strategy", width=260, css_classes=["wb-sens-strategy"])
        self.strategy.param.watch(lambda *_: self.when_shown(self.refresh), "value")
        self.body = pn.Column(margin=0, css_classes=["wb-sensitivity"])
        self.result = None
        self.workbench.scenario_state.param.watch(lambda *_: self.when_shown(self._new_scenario), "scenario")
        self.when_shown(self._new_scenario)

    def _new_scenario(self):
        """Offer the strategies of the scenario in effect (keeping the choice when it still exists)."""
        names = [s.name for s in self.workbench.scenario.strategies]
        keep = self.strategy.value if self.strategy.value in names else None
        if keep is None and names:
            from workbench.analysis.sensitivity import default_strategy

            keep = default_strategy(self.workbench.scenario, self.workbench.scenario_state.report)
        changed = self.strategy.value != keep
        self.strategy.param.update(options=names, value=keep)  # together: no redraw for a passing value
        if not changed:
            self.refresh()

    def refresh(self):
        """Compute the analysis for the chosen strategy and redraw."""
        from workbench.analysis.sensitivity import sensitivity
        from workbench.report.sensitivity_figures import sensitivity_figure

        try:
            self.result = sensitivity(self.workbench.scenario, strategy=self.strategy.value or None)
        except WorkbenchError as exc:
            self.result = None
            self.body.objects = [placeholder(f"No sensitivity analysis for this strategy: {exc}")]
            return
        table = "".join(
            part.spec.as_html(part.records)
            for part in self.result.parts()
            if getattr(part, "title", "").startswith("Benchmarks")
        )
        self.body.objects = [
            html_pane(sensitivity_summary_html(self.result), css_classes=["wb-sens-summary"]),
            pn.pane.Bokeh(sensitivity_figure(self.result, width=680), css_classes=["wb-sens-figure"]),
            html_pane(table or "<p>The strategy adjusts for no covariate: no benchmarks.</p>"),
        ]

    def __panel__(self):
        note = pn.pane.Markdown(
            "A latent confounder U with a partial R2 with the exposure (x axis) and with the outcome (y axis), "
            "as Cinelli & Hazlett (2020) express it; the dashed line is where U would explain the effect "
            "away. The graph is an assumption: the grid is not evidence that no confounder exists.",
            styles=NOTE_STYLE,
            width=MAIN_WIDTH - 40,
        )
        return pn.Column(note, self.strategy, self.body, margin=0)
