"""The Sweep tab: choose up to two parameters and a measure, run the sweep on a LocalCluster in the background.

The sweep (:func:`workbench.analysis.sweep.iter_sweep`) runs in a worker thread on a LocalCluster of two
processes on loopback; Cancel stops it between tasks (the tasks not yet done are cancelled and the cluster
closed). A periodic callback on the session's thread shows the progress and, when done, the line plot (one
parameter) or the heat map (two) of :mod:`workbench.report.sweep_figures`, with the table of the result.
"""

from __future__ import annotations

import threading

import panel as pn
import param

from workbench.app.state import Workbench
from workbench.app.widgets import MAIN_WIDTH, NOTE_STYLE, html_pane, placeholder
from workbench.errors import WorkbenchError
from workbench.formatting.markup import text_html

__all__ = ["SweepView", "NONE"]

NONE = "(none)"
"""The choice of no second parameter."""

_MEASURES = ["bias", "coverage", "power", "emp_se", "rmse", "model_se"]


class SweepView(pn.viewable.Viewer):
    """Parameter pickers, values, measure, replicates, Run and Cancel, and the result's figure and table."""

    workbench = param.ClassSelector(class_=Workbench)

    def __init__(self, **params):
        super().__init__(**params)
        self.first = pn.widgets.Select(label="Parameter", width=300, css_classes=["wb-sweep-first"])
        self.first_values = pn.widgets.TextInput(
            label="Values (V1,V2 or start:stop:count)", value="", width=220
        )
        self.second = pn.widgets.Select(label="Second parameter", width=300, css_classes=["wb-sweep-second"])
        self.second_values = pn.widgets.TextInput(label="Values", value="", width=220)
        self.measure = pn.widgets.Select(label="Measure", options=_MEASURES, value="bias", width=160)
        self.replicates = pn.widgets.IntInput(
            label="Replicates per cell", value=200, start=10, end=100_000, width=160
        )
        self.run_button = pn.widgets.Button(
            name="Run sweep", button_type="primary", css_classes=["wb-sweep-run"]
        )
        self.cancel_button = pn.widgets.Button(name="Cancel", disabled=True, css_classes=["wb-sweep-cancel"])
        self.status = pn.pane.HTML("", css_classes=["wb-sweep-status"])
        self.body = pn.Column(placeholder("Choose a parameter and its values, then Run sweep."), margin=0)
        self.run_button.on_click(lambda *_: self.start())
        self.cancel_button.on_click(lambda *_: self.cancel())
        self.first.param.watch(lambda *_: self._default_values(self.first, self.first_values), "value")
        self.second.param.watch(lambda *_: self._default_values(self.second, self.second_values), "value")
        self.measure.param.watch(lambda *_: self._draw(), "value")
        self.workbench.scenario_state.param.watch(lambda *_: self._new_scenario(), "scenario")
        self._stop = threading.Event()
        self._thread = None
        self._callback = None
        self.done = self.total = 0
        self.error = None
        self.result = None
        self._new_scenario()

    def _new_scenario(self):
        from workbench.analysis.sweep_params import sweep_parameters

        self.known = sweep_parameters(self.workbench.scenario)
        names = list(self.known)
        self.first.param.update(
            options=names, value=self.first.value if self.first.value in names else names[0]
        )
        self.second.param.update(
            options=[NONE, *names], value=self.second.value if self.second.value in names else NONE
        )
        self._default_values(self.first, self.first_values)
        self._default_values(self.second, self.second_values)

    def _default_values(self, select, box):
        """Values around the parameter's value in the scenario, for the box beside its picker."""
        value = self.known.get(select.value)
        if value is None:
            box.value = ""
        elif select.value in ("study.n", "study.replicates"):
            box.value = f"{max(int(value) // 2, 10)}:{int(value) * 2}:4"
        else:
            box.value = f"{min(0.0, value):g}:{max(2 * value, 1.0):g}:5"

    def vary(self) -> dict:
        """The parameters chosen, with their values' texts."""
        vary = {self.first.value: self.first_values.value}
        if self.second.value not in (None, NONE) and self.second.value != self.first.value:
            vary[self.second.value] = self.second_values.value
        return vary

    def compute(self, workers: int = 2):
        """Run the sweep (in the calling thread), stopping between tasks once :meth:`cancel` was called."""
        import pandas as pd

        from workbench.analysis.sweep import iter_sweep
        from workbench.analysis.sweep_params import build_cells
        from workbench.analysis.sweep_result import SweepResult, sort_rows

        self.error, self.result, self.done = None, None, 0
        scenario = self.workbench.scenario
        try:
            cells = build_cells(scenario, self.vary(), self.replicates.value)
            self.total = len(cells)
            names = list(cells[0].values)
            frames = []
            runs = iter_sweep(cells, names=names, seed=scenario.study.seed, workers=workers)
            for frame in runs:
                frames.append(frame)
                self.done += frame["cell"].nunique()
                if self._stop.is_set():
                    runs.close()
                    return
            table = sort_rows(pd.concat(frames, ignore_index=True))
            self.result = SweepResult(
                scenario, tuple(names), scenario.study.seed, self.replicates.value, "auto", len(cells), table
            )
        except WorkbenchError as exc:
            self.error = str(exc)

    def start(self):
        """Start the sweep in a worker thread, and the session's poll of its progress."""
        if self._thread is not None and self._thread.is_alive():
            return
        self._stop.clear()
        self.run_button.disabled, self.cancel_button.disabled = True, False
        self.status.object = "Starting a local cluster..."
        self._thread = threading.Thread(target=self.compute, daemon=True, name="workbench-sweep")
        self._thread.start()
        self._callback = pn.state.add_periodic_callback(self.poll, period=300)

    def cancel(self):
        self._stop.set()
        self.status.object = "Cancelling..."

    def poll(self):
        """Show progress; once the thread is done, the result (or the error) and stop polling."""
        if self._thread is not None and self._thread.is_alive():
            if self.total:
                self.status.object = f"Sweep: {self.done} of {self.total} cells done"
            return
        if self._callback is not None:
            self._callback.stop()
            self._callback = None
        self.run_button.disabled, self.cancel_button.disabled = False, True
        if self.error:
            self.status.object = f"<span style='color:#b00'>{text_html(self.error)}</span>"
        elif self.result is None:
            self.status.object = "Cancelled."
        else:
            self.status.object = f"Sweep: {self.result.cells} cells done."
        self._draw()

    def _draw(self):
        from workbench.report.sweep_figures import heatmap_figure, line_figure

        if self.result is None:
            return
        result, measure = self.result, self.measure.value
        if len(result.parameters) >= 2:
            strategy = result.table["strategy"].iloc[0]
            figure = heatmap_figure(result, measure, strategy)
        else:
            figure = line_figure(result, measure)
        self.body.objects = [
            pn.pane.Bokeh(figure, css_classes=["wb-sweep-figure"]),
            html_pane(result.as_html(), css_classes=["wb-sweep-table"]),
        ]

    def __panel__(self):
        note = pn.pane.Markdown(
            "Vary up to two values of the scenario; every cell is one simulation with the scenario's seed "
            "(common random numbers), run on a local Dask cluster of two processes (loopback only).",
            styles=NOTE_STYLE,
            width=MAIN_WIDTH - 40,
        )
        return pn.Column(
            note,
            pn.Row(self.first, self.first_values),
            pn.Row(self.second, self.second_values),
            pn.Row(self.measure, self.replicates),
            pn.Row(self.run_button, self.cancel_button, self.status),
            self.body,
            margin=0,
        )
