"""The Export tab: the standalone HTML report (:func:`workbench.report.html.build_report`), the one-page
stakeholder summary (:func:`workbench.report.summary.build_summary`), the graph as SVG and PNG, the results as
CSV (as the command line writes them), and what the report will hold. Only results of the scenario in
effect are offered: a result of an earlier version is not exported.
"""

from __future__ import annotations

import io
import tempfile
from pathlib import Path

import panel as pn
import param

from workbench.app.settings import sizes_text
from workbench.app.state import Workbench
from workbench.app.widgets import NOTE_STYLE, PRIMARY_BUTTON_CSS, slug
from workbench.report.graph_image import graph_png, graph_svg
from workbench.report.html import build_report
from workbench.report.summary import build_summary

__all__ = ["ExportView", "result_csv"]


def result_csv(result) -> io.StringIO:
    """A result's own CSV (``to_csv``, as the command line writes it), for download ('' for None).

    Examples
    --------
    >>> result_csv(None).getvalue()
    ''
    """
    if result is None:
        return io.StringIO("")
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "result.csv"
        result.to_csv(path)
        return io.StringIO(path.read_text(encoding="utf-8"))


class ExportView(pn.viewable.Viewer):
    """Downloads: the standalone HTML report, the one-page summary, the graph as SVG and PNG, results as
    CSV."""

    workbench = param.ClassSelector(class_=Workbench)

    def __init__(self, **params):
        super().__init__(**params)
        self.report = pn.widgets.FileDownload(
            callback=self._report,
            filename="workbench_report.html",
            label="Download the HTML report",
            color="primary",
            embed=False,
            width=320,
            css_classes=["wb-export-html"],
            # Panel renders a FileDownload with the default colour whatever its colour: paint the main
            # action in the primary colour ourselves
            stylesheets=[PRIMARY_BUTTON_CSS],
        )
        self.summary = pn.widgets.FileDownload(
            callback=self._summary,
            filename="workbench_summary.html",
            label="One-page summary for stakeholders (HTML)",
            embed=False,
            width=320,
            css_classes=["wb-export-summary"],
        )
        self.graph_svg = self._csv_button(self._graph_svg, "graph.svg", "The graph as a picture (SVG)")
        self.graph_png = self._csv_button(self._graph_png, "graph.png", "The graph as a picture (PNG)")
        self.performance = self._csv_button(
            self._performance, "performance.csv", "Performance table (CSV)", ["wb-export-csv"]
        )
        self.estimates = self._csv_button(
            self._estimates, "estimates.csv", "Every replicate's estimates (CSV)"
        )
        self.plan = self._csv_button(self._plan, "sample_size.csv", "Sample-size table (CSV)")
        self.status = pn.pane.Markdown("", styles=NOTE_STYLE, width=760)
        for job in (self.workbench.simulation, self.workbench.planning):
            job.param.watch(self._refresh, ["result"])
        self.workbench.scenario_state.param.watch(self._refresh, "scenario")
        self._refresh()

    @staticmethod
    def _csv_button(callback, filename: str, label: str, css_classes=()) -> pn.widgets.FileDownload:
        return pn.widgets.FileDownload(
            callback=callback,
            filename=filename,
            label=label,
            embed=False,
            width=320,
            css_classes=list(css_classes),
        )

    def _refresh(self, *_):
        wb = self.workbench
        simulation, planning = self._current(wb.simulation), self._current(wb.planning)
        self.performance.disabled = simulation is None
        self.summary.disabled = simulation is None
        self.estimates.disabled = simulation is None
        self.plan.disabled = planning is None
        lines = [
            "**The report will hold:** the graph, the roles and verdicts, the stories and the scenario text"
        ]
        if simulation is not None:
            lines.append(
                f"the simulation (n = {simulation.n:,}, {simulation.replicates:,} replicates, seed {simulation.seed})"
            )
        else:
            lines.append("no simulation of the current scenario yet (press **Run**)")
        if planning is not None:
            lines.append(f"the sample-size plan ({sizes_text(wb.scenario.study.sample_sizes)})")
        else:
            lines.append("no sample-size plan of the current scenario yet")
        if wb.sample.data is not None:
            lines.append("one simulated dataset")
        self.status.object = "; ".join(lines) + "."

    def _current(self, job):
        return job.result if job.is_current(self.workbench.scenario) else None

    def _report(self):
        wb = self.workbench
        text = build_report(
            wb.scenario,
            report=wb.scenario_state.report,
            result=self._current(wb.simulation),
            plan=self._current(wb.planning),
            dataset=wb.sample.data,
            covariate=wb.sample.covariate,
        )
        self.report.filename = f"{slug(wb.scenario.title)}_report.html"
        return io.StringIO(text)

    def _summary(self):
        wb = self.workbench
        result = self._current(wb.simulation)
        if result is None:
            return io.StringIO("")
        self.summary.filename = f"{slug(wb.scenario.title)}_summary.html"
        text = build_summary(
            wb.scenario, result, plan=self._current(wb.planning), report=wb.scenario_state.report
        )
        return io.StringIO(text)

    def _roles(self):
        report = self.workbench.scenario_state.report
        return report.roles if report is not None else None

    def _graph_svg(self):
        self.graph_svg.filename = f"{slug(self.workbench.scenario.title)}_graph.svg"
        return io.StringIO(graph_svg(self.workbench.scenario, self._roles()))

    def _graph_png(self):
        self.graph_png.filename = f"{slug(self.workbench.scenario.title)}_graph.png"
        return io.BytesIO(graph_png(self.workbench.scenario, self._roles()))

    def _performance(self):
        return result_csv(self._current(self.workbench.simulation))

    def _estimates(self):
        result = self._current(self.workbench.simulation)
        return io.StringIO("" if result is None else result.estimates.to_csv(index=False))

    def _plan(self):
        return result_csv(self._current(self.workbench.planning))

    def __panel__(self):
        text = pn.pane.Markdown(
            "The **HTML report** is one file that opens in any browser with no server and no network: the "
            "graph, the verdicts, the tables, the figures, the explanations, the scenario text, the settings, "
            "the seed and the version. The **one-page summary** is for people who were not in the room: the "
            "question, the graph, one plain sentence per strategy, the sample size needed and the assumptions; "
            "it prints on one A4 page. The graph pictures go into slides. The CSV files hold the numbers behind "
            "the tables.",
            width=700,
            styles=NOTE_STYLE,
        )
        return pn.Column(
            text,
            self.status,
            self.report,
            self.summary,
            pn.Row(self.graph_svg, self.graph_png, margin=0),
            self.performance,
            self.estimates,
            self.plan,
        )
