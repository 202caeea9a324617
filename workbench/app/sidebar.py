"""The dashboard's sidebar: the preset picker, open and save, the study settings, and Run and Cancel with
the progress of the running jobs.

The study inputs are bound to a :class:`~workbench.app.settings.StudySettings` with ``from_param``: their
bounds are those of :data:`workbench.scenario.constraints.STUDY_SETTINGS`, and the state checks every value.
"""

from __future__ import annotations

import html
import io

import panel as pn
import param

from workbench.app.settings import StudySettings
from workbench.app.state import MAX_UPLOAD_BYTES, Workbench
from workbench.app.upload import UploadInput
from workbench.app.widgets import SIDEBAR_WIDTH, ErrorBox, slug
from workbench.formatting.markup import text_markdown
from workbench.scenario.presets import list_presets

__all__ = ["Sidebar"]

#: The entry the preset list shows while an opened file is in effect.
_OPENED_FILE = "(the opened file)"


class Sidebar(pn.viewable.Viewer):
    """Preset picker, open and save, study settings, and the Run and Cancel buttons with progress."""

    workbench = param.ClassSelector(class_=Workbench)

    def __init__(self, **params):
        super().__init__(**params)
        self.settings = StudySettings(state=self.workbench.scenario_state)
        self._presets = {f"{title} ({name})": name for name, title in list_presets().items()}
        self._build_files()
        self._build_study()
        self._build_run()

    # --- building ----------------------------------------------------------------------------------
    def _build_files(self) -> None:
        """The preset picker, the upload and the save button."""
        state = self.workbench.scenario_state
        self.preset = pn.widgets.Select(
            label="Preset",
            options=dict(self._presets),
            value=state.preset,
            css_classes=["wb-preset"],
            width=SIDEBAR_WIDTH - 20,
        )
        self.preset.param.watch(self._preset_chosen, "value")
        state.param.watch(self._source_changed, "source")
        # The closed select cuts long titles; the full title of the scenario in effect wraps under it.
        self.title = pn.pane.HTML(
            "", css_classes=["wb-scenario-title"], width=SIDEBAR_WIDTH - 20, margin=(0, 10, 4, 10)
        )
        state.param.watch(self._show_title, "scenario")
        self._show_title()
        self.upload = UploadInput(
            on_file=state.upload,
            on_refused=state.refuse_upload,
            css_classes=["wb-upload"],
            width=SIDEBAR_WIDTH - 20,
            height=30,
        )
        self.download = pn.widgets.FileDownload(
            callback=self._toml_file,
            filename="scenario.toml",
            label="Save scenario (TOML)",
            embed=False,
            color="default",
            css_classes=["wb-save"],
            width=SIDEBAR_WIDTH - 20,
        )

    def _build_study(self) -> None:
        """The study inputs, bound to :attr:`settings`."""
        settings = self.settings.param
        self.n = pn.widgets.IntInput.from_param(
            settings.n, label="Sample size n", width=125, css_classes=["wb-n"]
        )
        self.replicates = pn.widgets.IntInput.from_param(
            settings.replicates, label="Replicates", width=125, css_classes=["wb-replicates"]
        )
        self.seed = pn.widgets.IntInput.from_param(
            settings.seed, label="Seed", width=125, css_classes=["wb-seed"]
        )
        self.alpha = pn.widgets.FloatInput.from_param(
            settings.alpha, label="Alpha", width=125, css_classes=["wb-alpha"]
        )
        for field in (self.n, self.replicates, self.seed, self.alpha):
            # no bounds in the browser: an input with bounds silently refuses a value outside them and
            # keeps showing it; every value goes to the state, which names what is wrong beside the field
            field.param.update(start=None, end=None)
        self.live = pn.widgets.Checkbox.from_param(
            self.workbench.param.live,
            label="Re-run at once on every change (linear-Gaussian graphs)",
            css_classes=["wb-live"],
        )

    def _build_run(self) -> None:
        """Run, Cancel, the progress bar and the jobs' messages."""
        wb = self.workbench
        self.run = pn.widgets.Button(label="Run", color="primary", width=130, css_classes=["wb-run"])
        self.cancel = pn.widgets.Button(
            label="Cancel", color="default", width=130, disabled=True, css_classes=["wb-cancel"]
        )
        self.run.on_click(lambda e: wb.run())
        self.cancel.on_click(lambda e: wb.cancel())
        self.progress = pn.indicators.Progress(
            value=0,
            max=100,
            width=SIDEBAR_WIDTH - 20,
            height=14,
            bar_color="primary",
            css_classes=["wb-progress"],
        )
        self.status = pn.pane.Markdown(
            "", css_classes=["wb-status"], styles={"font-size": "12px"}, width=SIDEBAR_WIDTH - 20
        )
        for job in (wb.simulation, wb.planning):
            job.param.watch(self._job_changed, ["status", "progress", "message"])
        wb.param.watch(self._job_changed, "notice")
        self.cost = pn.pane.Markdown(
            "",
            css_classes=["wb-cost"],
            styles={"font-size": "12px"},
            width=SIDEBAR_WIDTH - 20,
            margin=(0, 10),
        )
        wb.param.watch(self._cost_changed, ["cost", "over_budget"])
        self._cost_changed()
        self._job_changed()

    # --- events ------------------------------------------------------------------------------------
    _rewriting_presets = False

    def _preset_chosen(self, event):
        if not event.new or self._rewriting_presets:
            return  # the "(opened file)" entry, or the list being rewritten
        state = self.workbench.scenario_state
        if state.preset != event.new:
            state.preset = event.new
        else:  # the same preset again, after a file was opened: load it anew
            state.load_preset(event.new)

    def _show_title(self, *_):
        title = html.escape(self.workbench.scenario_state.scenario.title)
        self.title.object = (
            f"<div style='font-size:12px;line-height:1.3;color:#333;overflow-wrap:anywhere'>{title}</div>"
        )

    def _source_changed(self, *_):
        """After a file is opened the preset list says so; choosing any preset (even the one shown before)
        then loads it."""
        state = self.workbench.scenario_state
        self._rewriting_presets = True
        try:
            if state.source == "upload":
                self.preset.param.update(options={_OPENED_FILE: "", **self._presets}, value="")
            elif state.source == "preset" and "" in self.preset.options.values():
                self.preset.param.update(options=dict(self._presets), value=state.preset)
        finally:
            self._rewriting_presets = False

    def _toml_file(self):
        state = self.workbench.scenario_state
        self.download.filename = f"{slug(state.scenario.title)}.toml"
        return io.StringIO(state.download_text())

    def _cost_changed(self, *_):
        """The estimate of what Run costs, in a warning colour when over the budget."""
        wb = self.workbench
        self.cost.object = text_markdown(wb.cost)
        self.cost.styles = {"font-size": "12px", "color": "#A33C00" if wb.over_budget else "#555"}

    def _job_changed(self, *_):
        sim, plan = self.workbench.simulation, self.workbench.planning
        running = [job for job in (sim, plan) if job.status == "running"]
        self.cancel.disabled = not running
        self.run.disabled = bool(running) and not self.workbench.runs_live
        if running:
            self.progress.value = int(round(100 * running[0].progress))
        else:
            self.progress.value = 100 if sim.status == "done" else 0
        lines = [self.workbench.notice] + [job.message for job in (sim, plan)]
        self.status.object = "  \n".join(text_markdown(line) for line in lines if line)

    def __panel__(self):
        state = self.workbench.scenario_state
        head = pn.pane.HTML(
            "<div style='font-size:20px;font-weight:700;color:#111'>workbench</div>"
            "<div style='font-size:12px;color:#555'>adjustment strategies, simulated</div>",
            margin=(6, 10),
        )
        return pn.Column(
            head,
            self.preset,
            self.title,
            pn.pane.Markdown(
                f"**Open a scenario file** (TOML, at most {MAX_UPLOAD_BYTES // 1024} KiB)",
                margin=(6, 10, 0, 10),
                styles={"font-size": "12px"},
            ),
            self.upload,
            ErrorBox(state=state, sections=["upload", "preset"], width=None),
            self.download,
            pn.pane.Markdown("**Study settings**", margin=(10, 10, 0, 10)),
            pn.Row(self.n, self.replicates, margin=0),
            pn.Row(self.seed, self.alpha, margin=0),
            ErrorBox(state=state, sections=["study"], width=None),
            self.live,
            pn.Row(self.run, self.cancel, margin=(8, 0)),
            self.cost,
            self.progress,
            self.status,
            width=SIDEBAR_WIDTH,
            styles={"background": "#f3f4f6", "border-right": "1px solid #ddd", "min-height": "100vh"},
            css_classes=["wb-sidebar"],
        )
