"""Pieces every dashboard view uses: sizes and styles, the error box next to an editor, a job's progress
inside a result tab, and the base of the result tabs (which rebuild their figures only while shown).

Views hold no computation: they show the state of :mod:`workbench.app.state`, and turn user actions into
calls of its methods. Errors from an edit are shown next to the section the edit came from (an
:class:`ErrorBox` per section); the last valid scenario stays in effect.
"""

from __future__ import annotations

import re

import panel as pn
import param

from workbench.app.runs import BackgroundJob
from workbench.app.state import ScenarioState, Workbench
from workbench.formatting.markup import text_html, text_markdown
from workbench.report import tables

__all__ = [
    "SIDEBAR_WIDTH",
    "MAIN_WIDTH",
    "NOTE_STYLE",
    "PRIMARY_BUTTON_CSS",
    "slug",
    "html_pane",
    "placeholder",
    "result_banner",
    "ErrorBox",
    "JobProgress",
    "TabView",
]

#: Width of the sidebar, in pixels.
SIDEBAR_WIDTH = 290
#: Width of the main column, in pixels: the sidebar, this and the margins fit a 1280-pixel window.
MAIN_WIDTH = 930
#: Style of the explanatory notes beside the editors and figures.
NOTE_STYLE = {"color": "#444", "font-size": "13px"}
#: The primary button colours, for download buttons (Panel draws a FileDownload in the default colour).
PRIMARY_BUTTON_CSS = """
:host .bk-btn, :host .bk-btn a { background-color: #0072b5 !important; border-color: #0072b5 !important;
  color: #ffffff !important; }
:host .bk-btn:hover, :host .bk-btn:hover a { background-color: #005f96 !important; }
:host .bk-btn[disabled] { opacity: 0.55; }
"""
#: The dashboard's tables are narrower than the report's: the main column is MAIN_WIDTH wide at a
#: 1280-pixel window, so cells pad less, headers wrap at about 80 px and long words break inside their own
#: cell (never into the next), and text columns wrap sooner.
_DASHBOARD_TABLE_CSS = f"""
table.wb {{ font-size: 11.5px; max-width: {MAIN_WIDTH - 10}px; }}
table.wb th {{ padding: 4px 3px; max-width: 84px; overflow-wrap: anywhere; }}
table.wb td {{ padding: 3px 3px; }}
table.wb span.mcse {{ font-size: 10.5px; }}
table.wb th.text, table.wb td.text {{ padding-left: 6px; }}
table.wb td.text div {{ max-width: 180px; min-width: 48px; overflow-wrap: break-word; }}
table.wb td:first-child {{ white-space: normal; overflow-wrap: anywhere; min-width: 72px; }}
"""
_TABLE_STYLE = f"<style>{tables.TABLE_CSS}{_DASHBOARD_TABLE_CSS}</style>"


def slug(text: str) -> str:
    """A file-name stem made of a title.

    Examples
    --------
    >>> slug("Night shifts & scanners!")
    'night_shifts_scanners'
    >>> slug("???")
    'scenario'
    """
    return re.sub(r"[^a-z0-9]+", "_", text.lower()).strip("_")[:40] or "scenario"


def html_pane(body: str, **kwargs) -> pn.pane.HTML:
    """An HTML pane with the result tables' styles.

    Examples
    --------
    >>> html_pane("<p>x</p>").object.endswith("<p>x</p>")
    True
    """
    return pn.pane.HTML(_TABLE_STYLE + body, **kwargs)


def placeholder(text: str, css_class: str = "wb-placeholder") -> pn.pane.Markdown:
    """The text a result tab shows before it has a result.

    Examples
    --------
    >>> placeholder("Press **Run**").object
    'Press **Run**'
    """
    return pn.pane.Markdown(
        text, css_classes=[css_class], styles={"color": "#555", "font-size": "14px"}, width=MAIN_WIDTH - 40
    )


def result_banner(wb: Workbench, job: BackgroundJob) -> str:
    """The banner above a result: 'updating' while the job runs, a warning when the result shown belongs
    to an earlier version of the scenario, else ''.

    Examples
    --------
    >>> wb = Workbench(preset="common_cause", live=False)
    >>> result_banner(wb, wb.simulation)
    "<div class='wb-stale' ...
    """
    if job.status == "running":
        return (
            "<div class='wb-running' style='background:#e8f1fb;padding:4px 8px;margin-bottom:4px'>"
            "Updating for the current scenario ...</div>"
        )
    if job.is_current(wb.scenario):
        return ""
    return (
        "<div class='wb-stale' style='background:#fff3cd;padding:4px 8px;margin-bottom:4px'>These results "
        "belong to an earlier version of the scenario. Press <b>Run</b> to update them.</div>"
    )


class ErrorBox(pn.viewable.Viewer):
    """The error of the last failed edit, shown when it came from one of ``sections``; notes shown too."""

    state = param.ClassSelector(class_=ScenarioState)
    sections = param.List(default=[])
    width = param.Integer(default=540, allow_None=True, doc="Width in pixels; None fills the container.")

    def __init__(self, **params):
        super().__init__(**params)
        size = {"width": self.width} if self.width else {"sizing_mode": "stretch_width"}
        name = "-".join(self.sections)
        self._error = pn.pane.Alert(
            "",
            alert_type="danger",
            visible=False,
            css_classes=["wb-error", f"wb-error-{name}"],
            margin=(4, 5),
            **size,
        )
        self._note = pn.pane.Markdown(
            "",
            visible=False,
            styles={"color": "#555", "font-size": "12px"},
            margin=(0, 5),
            css_classes=["wb-note", f"wb-note-{name}"],
            **size,
        )
        self.state.param.watch(self._update, ["error", "error_section", "note", "source", "invalid"])
        self._update()

    def _update(self, *_):
        mine = self.state.error and self.state.error_section in self.sections
        # a refused field value stays refused after other edits: its message stays until it is corrected
        messages = [self.state.error] if mine else []
        messages += [m for m in self.state.invalid_messages(self.sections) if m not in messages]
        self._error.object = "  \n".join(f"**Not applied:** {text_markdown(m)}" for m in messages)
        self._error.visible = bool(messages)
        mine = bool(messages)
        # a note belongs next to the edit that caused it (one place, not every box on the page)
        noted = self.state.source in self.sections
        self._note.object = text_markdown(self.state.note)
        self._note.visible = bool(self.state.note) and not mine and noted

    def __panel__(self):
        return pn.Column(self._error, self._note, margin=0)


class JobProgress(pn.viewable.Viewer):
    """A job's progress bar and message, shown inside a result tab while the job runs (so a long run, such
    as a sample-size plan with a binary outcome, is visible where its results will appear)."""

    job = param.ClassSelector(class_=BackgroundJob, doc="The job to follow.")
    css_class = param.String(default="wb-job-progress")

    def __init__(self, **params):
        super().__init__(**params)
        self._bar = pn.indicators.Progress(value=0, max=100, width=420, height=14, bar_color="primary")
        self._text = pn.pane.HTML("", margin=(0, 8), styles={"font-size": "13px", "color": "#333"})
        self._box = pn.Row(
            self._text,
            self._bar,
            visible=False,
            css_classes=[self.css_class],
            styles={"background": "#e8f1fb", "border-radius": "4px", "padding": "2px 6px"},
            margin=(2, 5, 6, 5),
        )
        self.job.param.watch(self._update, ["status", "progress", "message"])
        self._update()

    def _update(self, *_):
        job = self.job
        running = job.status == "running"
        self._box.visible = running
        if running:
            self._bar.value = int(round(100 * job.progress))
            self._text.object = (
                f"<b>{text_html(job.label.capitalize())} running</b> "
                f"({text_html(job.message.split(': ', 1)[-1])}); Cancel is in the sidebar."
            )

    def __panel__(self):
        return self._box


class TabView(pn.viewable.Viewer):
    """A view that rebuilds its figures only while its tab is shown; changes made while hidden wait.

    A subclass hands its rebuild steps to :meth:`when_shown`; they run at once while the tab is shown, or
    when it is shown next (each step once, however many changes it missed).
    """

    workbench = param.ClassSelector(class_=Workbench)
    active = param.Boolean(default=False, doc="Whether the view's tab is shown.")

    def __init__(self, **params):
        super().__init__(**params)
        self._waiting: dict[str, object] = {}

    def when_shown(self, update) -> None:
        """Run ``update`` now if the tab is shown, else when it is shown next."""
        if self.active:
            update()
        else:
            self._waiting[update.__name__] = update

    @property
    def waiting(self) -> list[str]:
        """Names of the rebuild steps waiting for the tab to be shown."""
        return list(self._waiting)

    def show_result(self, job: BackgroundJob, panes) -> None:
        """Show ``job``'s result as ``[banner, *panes(result)]`` in ``self.body`` (rebuilt once per result),
        or, without a result, the view's ``_waiting_text()``. The subclass provides ``body``, ``banner`` and
        ``_shown`` (the result on show)."""
        result = job.result
        self.banner.object = result_banner(self.workbench, job) if result is not None else ""
        if result is not None and result is self._shown:
            return
        self._shown = result
        if result is None:
            self.body.objects = [placeholder(self._waiting_text())]
            return
        self.body.objects = [self.banner, *panes(result)]

    @param.depends("active", watch=True)
    def _catch_up(self) -> None:
        if not self.active or not self._waiting:
            return
        doc = pn.state.curdoc
        if doc is not None and doc.session_context is not None:
            # Rebuild on the next tick, not inside the browser's tab-change event: Bokeh does not send a
            # layout's new children back to the browser while it is handling that event, so the tab would
            # keep showing the figures of an earlier scenario.
            doc.add_next_tick_callback(self._apply_waiting)
        else:
            self._apply_waiting()

    def _apply_waiting(self) -> None:
        if self.active:
            waiting, self._waiting = self._waiting, {}
            for update in waiting.values():
                update()
