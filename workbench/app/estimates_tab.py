"""The Estimates tab: the performance table with its Monte Carlo SEs and flags, the distributions of the
estimates and of the SEs, the ranked intervals of the first replicates, and the signals table.
"""

from __future__ import annotations

import panel as pn

from workbench.app.widgets import (
    MAIN_WIDTH,
    NOTE_STYLE,
    JobProgress,
    TabView,
    html_pane,
)
from workbench.formatting.markup import text_html, text_markdown
from workbench.formatting.numbers import fmt_mcse
from workbench.report import figures, tables

__all__ = ["EstimatesView", "simulation_summary_html", "FLAG_LEGEND", "SIGNALS_NOTE"]

#: What a flagged cell of the performance table means: :data:`workbench.report.tables.FLAG_NOTE`, with
#: the word "Flagged" shown in the flag's colour.
FLAG_LEGEND = (
    "<div style='font-size:12px;color:#444'>"
    + text_html(tables.FLAG_NOTE).replace(
        "Flagged", "<span style='background:#F0E442;padding:0 4px'>Flagged</span>", 1
    )
    + "</div>"
)
#: How to read the signals table.
SIGNALS_NOTE = (
    "<div style='font-size:12px;color:#444;max-width:1000px'>Signals practitioners read beside the graph: "
    "the <b>change in estimate</b> relative to the unadjusted model (a common rule of thumb calls a "
    "change over 10% important) and the <b>SE ratio</b>: adjusting for a confounder moves the estimate "
    "while the SE barely changes; a large rise of the SE with little change in the estimate signals "
    "collinearity (a strong cause of the exposure), not confounding. Neither signal can tell a "
    "confounder from a mediator or a common effect: only the graph can.</div>"
)


def simulation_summary_html(result) -> str:
    """The line above the performance table: the truth, n, replicates, seed and engine of a run.

    Examples
    --------
    >>> from workbench import load_preset, simulate
    >>> text = simulation_summary_html(simulate(load_preset("common_cause"), replicates=200, seed=3))
    >>> "wb-sim-truth'>0.25<" in text and "<b>seed</b> = 3" in text
    True
    """
    truth = f"{result.truth:.4g}" + (f" (MCSE {fmt_mcse(result.truth_mcse)})" if result.truth_mcse else "")
    return (
        f"<div style='font-size:13px'><b>True effect:</b> <span class='wb-sim-truth'>{truth}</span> &nbsp; "
        f"<b>n</b> = {result.n:,} &nbsp; <b>replicates</b> = {result.replicates:,} &nbsp; <b>seed</b> = "
        f"{result.seed} &nbsp; <b>engine</b> = {text_html(result.engine)}</div>"
    )


class EstimatesView(TabView):
    """Distributions of estimates and SEs, ranked intervals, the performance table and the signals."""

    def __init__(self, **params):
        super().__init__(**params)
        self.body = pn.Column(margin=0, css_classes=["wb-estimates"])
        self.banner = pn.pane.HTML("", margin=(0, 5))
        self._shown = None
        self.workbench.simulation.param.watch(self._changed, ["result", "status"])
        self.workbench.scenario_state.param.watch(self._changed, "scenario")
        self.refresh()

    def _changed(self, *_):
        self.when_shown(self.refresh)

    def refresh(self):
        """Show the simulation's result (or what to do to get one)."""
        self.show_result(self.workbench.simulation, self._result_panes)

    def _waiting_text(self) -> str:
        job = self.workbench.simulation
        if job.status == "running":
            return "Running the simulation ..."
        failed = f"  \n{text_markdown(job.message)}" if job.status == "failed" else ""
        return "Press **Run** in the sidebar to simulate the study with the settings shown there." + failed

    @staticmethod
    def _result_panes(result) -> list:
        """The tables and figures of one simulation result."""
        figure_rows = [
            pn.Row(pn.pane.Bokeh(a), pn.pane.Bokeh(b))
            for a, b in zip(
                figures.estimates_figure(result, width=(MAIN_WIDTH - 30) // 2),
                figures.se_figure(result, width=(MAIN_WIDTH - 30) // 2),
                strict=True,
            )
        ]
        intervals = figures.interval_figure(result, width=MAIN_WIDTH - 30, grid=False)
        return [
            html_pane(simulation_summary_html(result)),
            html_pane(
                tables.performance_table(result.table, alpha=result.alpha) + FLAG_LEGEND,
                css_classes=["wb-performance"],
            ),
            *figure_rows,
            pn.pane.Markdown(
                "**Confidence intervals of the first 100 replicates**, ranked by estimate: grey "
                "intervals cover the truth (dashed), vermillion ones miss it.",
                styles=NOTE_STYLE,
            ),
            pn.GridBox(*[pn.pane.Bokeh(f, margin=(0, 2)) for f in intervals], ncols=4),
            html_pane(tables.signals_table(result.table) + SIGNALS_NOTE, css_classes=["wb-signals"]),
            *([html_pane(result.also_html(), css_classes=["wb-also"])] if result.arrays.also_names else []),
        ]

    def __panel__(self):
        return pn.Column(
            JobProgress(job=self.workbench.simulation, css_class="wb-simulation-progress"),
            self.body,
            margin=0,
        )
