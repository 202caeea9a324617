"""The Explain tab: one plain-language story per strategy (from :func:`workbench.report.explain.explain`,
quoting the simulation once one of the current scenario has run) and one simulated dataset drawn from the
scenario, coloured by a covariate the user picks.
"""

from __future__ import annotations

import panel as pn

from workbench.app.widgets import MAIN_WIDTH, NOTE_STYLE, TabView, placeholder
from workbench.formatting.markup import text_html, text_markdown
from workbench.report.dataset_figures import dataset_groups, dataset_scatter
from workbench.report.explain import ASSUMPTION_NOTE, also_sentences, explain

__all__ = ["ExplainView", "story_html"]

#: The colour of a story's edge: usable, not usable, or not judged.
_STORY_COLOURS = {True: "#00603F", False: "#A33C00"}


def story_html(story) -> str:
    """One strategy's story as a card, its edge coloured by whether the strategy is usable.

    Examples
    --------
    >>> from workbench import check, load_preset
    >>> from workbench.report.explain import explain
    >>> card = story_html(explain(check(load_preset("common_cause")))[0])
    >>> card.startswith("<div style='border-left:4px solid")
    True
    """
    colour = _STORY_COLOURS.get(story.usable, "#999999")
    return (
        f"<div style='border-left:4px solid {colour};padding:4px 12px;margin:4px 0;font-size:13px;"
        f"line-height:1.45;max-width:1000px'><div style='font-weight:700;font-size:14px'>"
        f"{text_html(story.title)}</div>{story.html()}</div>"
    )


class ExplainView(TabView):
    """Plain-language stories per strategy and the one-dataset view."""

    def __init__(self, **params):
        super().__init__(**params)
        wb = self.workbench
        self.stories = pn.Column(margin=0, css_classes=["wb-stories"])
        self.covariate = pn.widgets.Select(label="Colour by", width=200, css_classes=["wb-covariate"])
        self.covariate.param.watch(self._covariate_chosen, "value")
        self.redraw = pn.widgets.Button(label="Draw another dataset", width=180)
        self.redraw.on_click(lambda e: setattr(wb.sample, "draw_number", wb.sample.draw_number + 1))
        self.plots = pn.Row(margin=0, css_classes=["wb-explain-plots"])
        self.caption = pn.pane.Markdown("", styles=NOTE_STYLE, css_classes=["wb-dataset-caption"])
        wb.simulation.param.watch(lambda *_: self.when_shown(self.refresh_stories), ["result"])
        wb.scenario_state.param.watch(lambda *_: self.when_shown(self.refresh_stories), ["report"])
        wb.sample.param.watch(lambda *_: self.when_shown(self.refresh_plots), ["data", "covariate"])
        # drawn when the tab is first shown: the first page load does not wait for these figures
        self.when_shown(self.refresh_stories)
        self.when_shown(self.refresh_plots)

    def _covariate_chosen(self, event):
        if event.new is not None and event.new != self.workbench.sample.covariate:
            self.workbench.sample.covariate = event.new

    def refresh_stories(self):
        """Tell each strategy's story, with the simulation's numbers when it is of the current scenario."""
        wb = self.workbench
        report = wb.scenario_state.report
        result = wb.simulation.result if wb.simulation.is_current(wb.scenario) else None
        if report is None:
            self.stories.objects = [placeholder(text_markdown(wb.scenario_state.report_error))]
            return
        cards = [
            pn.pane.HTML(story_html(story), sizing_mode="stretch_width", css_classes=["wb-story"])
            for story in explain(report, result)
        ]
        also = also_sentences(result)
        if also:
            cards.append(
                pn.pane.Markdown("\n\n".join(map(text_markdown, also)), css_classes=["wb-also-stories"])
            )
        if result is None:
            cards.append(
                placeholder(
                    "The stories use the graph alone until a simulation of this scenario "
                    "has run; then they quote its bias and coverage."
                )
            )
        self.stories.objects = cards

    def refresh_plots(self):
        """Draw the dataset: the outcome against the exposure, and the covariate by exposure group."""
        wb = self.workbench
        sample = wb.sample
        self.covariate.options = list(sample.param.covariate.objects)
        self.covariate.value = sample.covariate
        data = sample.data
        if data is None:
            self.plots.objects = [placeholder(text_markdown(sample.message) or "No dataset drawn.")]
            return
        q = wb.scenario.question
        objects = [pn.pane.Bokeh(dataset_scatter(data, q.exposure, q.outcome, sample.covariate, width=480))]
        if sample.covariate:
            objects.append(pn.pane.Bokeh(dataset_groups(data, q.exposure, sample.covariate, width=400)))
        self.plots.objects = objects
        latent = ", ".join(data.attrs.get("latent", [])) or "none"
        colour = f", coloured by {sample.covariate}" if sample.covariate else ""
        self.caption.object = text_markdown(
            f"One dataset of n = {len(data):,} drawn from the scenario: {q.outcome} against "
            f"{q.exposure}{colour}. Latent variables (simulated, never seen in practice): "
            f"{latent}."
        )

    def __panel__(self):
        note = pn.pane.Alert(
            ASSUMPTION_NOTE, alert_type="info", css_classes=["wb-assumption"], width=MAIN_WIDTH - 40
        )
        return pn.Column(
            note,
            pn.pane.Markdown("### What each strategy does", margin=(0, 10)),
            self.stories,
            pn.pane.Markdown("### One simulated dataset", margin=(10, 10, 0, 10)),
            pn.Row(self.covariate, pn.Column(pn.Spacer(height=18), self.redraw, margin=0)),
            self.caption,
            self.plots,
            margin=0,
        )
