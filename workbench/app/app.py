"""The dashboard page: the sidebar (:mod:`workbench.app.sidebar`) and the tabs (:mod:`~workbench.app.graph_tab`,
:mod:`~workbench.app.estimates_tab`, :mod:`~workbench.app.plan_tab`, :mod:`~workbench.app.explain_tab`,
:mod:`~workbench.app.export_tab`), composed over one :class:`~workbench.app.state.Workbench` state per
browser session.

The page uses no template that fetches anything from another host: Panel and Bokeh serve their scripts and
styles themselves, and the text uses the system's fonts.
"""

from __future__ import annotations

import panel as pn
import param

from workbench import __version__
from workbench.app.estimates_tab import EstimatesView
from workbench.app.explain_tab import ExplainView
from workbench.app.export_tab import ExportView
from workbench.app.graph_tab import graph_tab
from workbench.app.plan_tab import SampleSizeView
from workbench.app.sensitivity_tab import SensitivityView
from workbench.app.sidebar import Sidebar
from workbench.app.state import Workbench
from workbench.formatting.markup import text_html

__all__ = ["App", "create_app", "GLOBAL_CSS"]

#: Page-wide styles: system fonts only (no web fonts), a calm background.
GLOBAL_CSS = """
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
       margin: 0; background: #ffffff; }
"""


class App(pn.viewable.Viewer):
    """The whole page for one session."""

    workbench = param.ClassSelector(class_=Workbench)

    def __init__(self, **params):
        super().__init__(**params)
        wb = self.workbench
        state = wb.scenario_state
        self.header = pn.pane.HTML(
            "", css_classes=["wb-header"], sizing_mode="stretch_width", margin=(8, 12, 0, 12)
        )
        state.param.watch(self._header, "scenario")
        self._header()
        self.result_views = {
            1: EstimatesView(workbench=wb),
            2: SampleSizeView(workbench=wb),
            3: ExplainView(workbench=wb),
        }
        self.tabs = pn.Tabs(
            ("Graph", graph_tab(state)),
            ("Estimates", pn.Column(self.result_views[1], margin=(6, 10))),
            ("Sample size", pn.Column(self.result_views[2], margin=(6, 10))),
            ("Explain", pn.Column(self.result_views[3], margin=(6, 10))),
            ("Export", pn.Column(ExportView(workbench=wb), margin=(6, 10))),
            css_classes=["wb-tabs"],
            dynamic=True,  # a tab's content is sent when first shown: a shorter first load (docs/performance.md)
            margin=(0, 6),
        )
        index = len(self.tabs)  # the Sensitivity tab, last (workbench.app.sensitivity_tab)
        self.result_views[index] = SensitivityView(workbench=wb)
        self.tabs.append(("Sensitivity", pn.Column(self.result_views[index], margin=(6, 10))))
        # The Sweep tab (issue 15) runs only on its Run button; its view is built when the tab is first shown
        self.sweep_view = None
        self._sweep_index = len(self.tabs)
        self._sweep_holder = pn.Column(margin=(6, 10))
        self.tabs.append(("Sweep", self._sweep_holder))
        self.tabs.param.watch(self._tab_shown, "active")
        self.sidebar = Sidebar(workbench=wb)

    def _tab_shown(self, event):
        """Result views rebuild their figures only while shown (a hidden tab's changes wait)."""
        for index, view in self.result_views.items():
            view.active = index == event.new
        if event.new == self._sweep_index and self.sweep_view is None:
            from workbench.app.sweep_tab import SweepView

            self.sweep_view = SweepView(workbench=self.workbench)
            self._sweep_holder.objects = [self.sweep_view]

    def _header(self, *_):
        sc = self.workbench.scenario
        summary = text_html(sc.summary or "")
        self.header.object = (
            f"<div style='font-size:18px;font-weight:700;color:#111'>{text_html(sc.title)}</div>"
            f"<div style='font-size:13px;color:#444;max-width:1060px;line-height:1.4'>{summary}</div>"
            f"<div style='font-size:11px;color:#777'>workbench {__version__}. The graph is an assumption: "
            "the results show its consequences, not facts about the world.</div>"
        )

    def __panel__(self):
        return pn.Row(self.sidebar, pn.Column(self.header, self.tabs, margin=0), margin=0)


def create_app(preset: str | None = None) -> pn.viewable.Viewable:
    """Build the page for one browser session.

    Computations run in worker threads; a periodic callback on the session's own thread applies their
    progress and results, so the page stays responsive while they run.

    Examples
    --------
    >>> page = create_app("common_cause")
    >>> type(page).__name__
    'Row'
    """
    pn.extension("tabulator", raw_css=[GLOBAL_CSS], notifications=False)
    doc = pn.state.curdoc
    if doc is not None:
        # Panel learns where its own static files live only when the page is rendered; components built
        # before that point would otherwise reference its CDN. Tell the document now: served locally.
        import panel.reactive
        from panel.io.resources import LOCAL_DIST

        doc._template_variables.setdefault("dist_url", LOCAL_DIST)
        # A pane updated while its tab is hidden (the tabs are built when first shown) has no document, and
        # Panel then points its stylesheets at its CDN; the page must request nothing from another host, so
        # that fallback is the server's own copy too (Panel 1.9; the browser tests fail on any other host).
        panel.reactive.CDN_DIST = LOCAL_DIST
    workbench = Workbench(preset=preset, deferred=True)
    page = App(workbench=workbench).__panel__()
    if pn.state.curdoc is not None and pn.state.curdoc.session_context is not None:
        pn.state.add_periodic_callback(workbench.poll, period=200)
    return page
