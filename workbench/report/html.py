"""A standalone HTML report of a scenario and its results: one file that opens with no server and no network.

The report holds the graph with its roles, the verdict of every strategy, the performance table with Monte
Carlo standard errors and flags, the figures (estimates, standard errors, ranked intervals, power and
precision against n), the plain-language explanations, one simulated dataset, the scenario text, the
settings, the seed and the version. BokehJS is inlined (the raw core bundle of ``bokeh.resources.Resources`` in
``inline`` mode, without the extension files other libraries may register), the text uses the system's fonts,
and nothing is fetched from anywhere.

The figures and tables are the dashboard's own (:mod:`workbench.report.figures`,
:mod:`workbench.report.tables`; neither imports Panel), so the report shows what the dashboard shows.

Examples
--------
>>> from workbench import load_preset
>>> page = build_report(load_preset("common_cause"))
>>> page.startswith("<!DOCTYPE html>"), "https://" in page.split("<body>")[0]
(True, False)
"""

from __future__ import annotations

import datetime as _dt
import html
import os

import pandas as pd
from bokeh.embed import components
from bokeh.layouts import gridplot, row
from bokeh.resources import Resources

from workbench import __version__
from workbench.report import figures, tables
from workbench.report.explain import ASSUMPTION_NOTE, explain
from workbench.scenario.model import Scenario
from workbench.scenario.write import dumps_scenario, write_text_atomically

__all__ = ["build_report", "write_report"]

_PAGE_CSS = """
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
       color: #111; margin: 24px auto; max-width: 1120px; padding: 0 16px; line-height: 1.45; }
h1 { font-size: 24px; margin-bottom: 4px; } h2 { font-size: 19px; margin-top: 28px; border-bottom: 1px solid #ccc; }
h3 { font-size: 15px; margin-bottom: 4px; }
.summary { color: #333; } .meta { font-size: 13px; color: #444; }
.note { background: #e8f1fb; border-left: 4px solid #0072B2; padding: 8px 12px; font-size: 14px; }
.story { border-left: 4px solid #999; padding: 4px 12px; margin: 8px 0; font-size: 14px; }
.story.valid { border-color: #00603F; } .story.invalid { border-color: #A33C00; }
pre { background: #f6f6f6; padding: 10px; font-size: 12px; overflow-x: auto; }
dl.settings { display: grid; grid-template-columns: max-content auto; gap: 2px 14px; font-size: 13px; }
dl.settings dt { font-weight: 600; } dl.settings dd { margin: 0; }
"""


def _inline_bokeh() -> str:
    """BokehJS itself as inline ``<script>``/``<style>`` tags: the core bundle only (our figures use nothing
    else), so no extension registered by another library can add a link to a file or a host."""
    resources = Resources(mode="inline", components=["bokeh"])
    css = "".join(f"<style>{raw}</style>" for raw in resources.css_raw)
    js = "".join(f"<script type='text/javascript'>{raw}</script>" for raw in resources.js_raw)
    return css + js


def _slot(name: str) -> str:
    """A place for a figure; user text is escaped, so it can never contain one."""
    return f"<!--figure:{name}-->"


def _settings(scenario: Scenario, result, plan) -> str:
    st = scenario.study
    q = scenario.question
    items = [
        ("question", f"the {q.target} effect of {q.exposure} on {q.outcome} ({q.scale.replace('_', ' ')})"),
        ("sample size n", f"{getattr(result, 'n', st.n):,}"),
        ("replicates", f"{getattr(result, 'replicates', st.replicates):,}"),
        ("seed", str(getattr(result, "seed", st.seed))),
        ("alpha", f"{getattr(result, 'alpha', st.alpha):g}"),
        ("sample sizes planned", ", ".join(str(s) for s in st.sample_sizes)),
        ("target power", f"{st.target_power:g}"),
    ]
    if st.target_halfwidth is not None:
        items.append(("target CI half-width", f"{st.target_halfwidth:g}"))
    if result is not None:
        items.append(("engine", str(result.engine)))
    items.append(("workbench version", __version__))
    items.append(("written", _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")))
    body = "".join(f"<dt>{html.escape(k)}</dt><dd>{html.escape(v)}</dd>" for k, v in items)
    return f'<dl class="settings">{body}</dl>'


def build_report(
    scenario: Scenario,
    *,
    report=None,
    result=None,
    plan=None,
    dataset: pd.DataFrame | None = None,
    covariate: str | None = None,
) -> str:
    """The report as one HTML document.

    Parameters
    ----------
    scenario : Scenario
    report : CheckReport, optional
        The graph analysis; computed with :func:`workbench.analysis.check.check` when not given.
    result : SimulationResult, optional
        A simulation of ``scenario``; without it the report holds the graph analysis only.
    plan : PlanResult, optional
        A sample-size plan of ``scenario``.
    dataset : DataFrame, optional
        One simulated dataset for the one-dataset figures, with ``covariate`` colouring the points.

    Returns
    -------
    str
        A complete HTML document with Bokeh's scripts inlined.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> sc = load_preset("common_cause")
    >>> html = build_report(sc, result=simulate(sc, replicates=200, seed=1))
    >>> html.lstrip().lower().startswith("<!doctype html>"), "adjust_soil" in html
    (True, True)
    """
    if report is None:
        from workbench.analysis.check import check

        report = check(scenario)
    q = scenario.question
    models = {"graph": figures.graph_figure(scenario, report.roles, width=640, height=380)}
    parts: list[str] = []
    alpha = (
        float(getattr(result, "alpha", scenario.study.alpha)) if result is not None else scenario.study.alpha
    )

    parts.append("<h2>The graph</h2>" + _slot("graph"))
    parts.append(tables.strategies_table(report.strategies))
    minimal = "; ".join("{" + ", ".join(m) + "}" for m in report.minimal_sets) or "none"
    optimal = "{" + ", ".join(report.optimal_set) + "}" if report.optimal_set is not None else "none"
    parts.append(
        f"<p class='meta'><b>Minimal valid sets:</b> {html.escape(minimal)}. <b>Optimal valid set:</b> "
        f"{html.escape(optimal)} ({html.escape(report.optimal_note)}).</p>"
    )

    if result is not None:
        truth_mcse = getattr(result, "truth_mcse", None)
        parts.append("<h2>Estimates</h2>")
        parts.append(
            f"<p class='meta'><b>True effect:</b> {result.truth:.4g}"
            + (f" (Monte Carlo SE {truth_mcse:.2g})" if truth_mcse else "")
            + f" &mdash; {html.escape(str(getattr(result, 'truth_description', '') or ''))}</p>"
        )
        parts.append(tables.performance_table(result.table, alpha=alpha))
        parts.append(
            "<p class='meta'>The small &plusmn; figures are Monte Carlo standard errors (MCSE). Highlighted cells: the bias exceeds "
            "3 Monte Carlo SEs, or the coverage lies outside the nominal level &plusmn; 3 Monte Carlo "
            "SEs (Morris, White &amp; Crowther 2019).</p>"
        )
        for i, (a, b) in enumerate(
            zip(
                figures.estimates_figure(result, width=540), figures.se_figure(result, width=540), strict=True
            )
        ):
            models[f"distributions_{i}"] = row(a, b)
            parts.append(_slot(f"distributions_{i}"))
        models["intervals"] = figures.interval_figure(result, width=1080)
        parts.append("<h3>Confidence intervals of the first 100 replicates</h3>" + _slot("intervals"))
        parts.append("<h3>Signals</h3>" + tables.signals_table(result.table))

    if plan is not None:
        parts.append("<h2>Sample size</h2>")
        target = float(getattr(plan, "target_power", None) or scenario.study.target_power)
        models["power"] = figures.power_figure(plan, target_power=target, width=1080)
        parts.append(_slot("power"))
        parts.append(tables.smallest_n_table(plan.smallest_n))
        models["by_n"] = gridplot(
            [
                figures.by_n_figure(
                    plan, "bias", title="Bias against n", y_label="bias", zero_line=True, width=530
                ),
                figures.by_n_figure(
                    plan, "emp_se", title="Empirical SE against n", y_label="empirical SE", width=530
                ),
            ],
            ncols=2,
            toolbar_location=None,
        )
        parts.append(_slot("by_n"))
        also = getattr(plan, "also_table", None)
        if also is not None and len(also):
            models["separation"] = figures.separation_figure(also, plan.table, width=530)
            parts.append("<h3>Separating the effects</h3>" + _slot("separation"))
            also_n = getattr(plan, "also_smallest_n", None)
            if also_n is not None and len(also_n):
                parts.append(tables.also_smallest_n_table(also_n))

    parts.append("<h2>What each strategy does</h2>")
    for story in explain(report, result):
        kind = {True: "valid", False: "invalid"}.get(story.usable, "depends")
        parts.append(f"<div class='story {kind}'><h3>{html.escape(story.title)}</h3>{story.html()}</div>")

    if dataset is not None:
        parts.append("<h2>One simulated dataset</h2>")
        plots = [figures.dataset_scatter(dataset, q.exposure, q.outcome, covariate, width=560)]
        if covariate:
            plots.append(figures.dataset_groups(dataset, q.exposure, covariate, width=480))
        models["dataset"] = row(*plots)
        parts.append(_slot("dataset"))

    parts.append("<h2>Scenario file</h2>")
    parts.append(f"<pre>{html.escape(dumps_scenario(scenario))}</pre>")

    script, divs = components(models)
    body = "\n".join(parts)
    for name, div in divs.items():
        body = body.replace(_slot(name), div)
    head = (
        "<!DOCTYPE html>\n<html lang='en'><head><meta charset='utf-8'>"
        f"<title>{html.escape(scenario.title)} - workbench report</title>"
        f"<style>{_PAGE_CSS}{tables.TABLE_CSS}</style>{_inline_bokeh()}{script}</head>"
    )
    intro = (
        f"<body><h1>{html.escape(scenario.title)}</h1>"
        f"<p class='summary'>{html.escape(scenario.summary or '')}</p>"
        f"<p class='note'>{html.escape(ASSUMPTION_NOTE)}</p>"
        f"{_settings(scenario, result, plan)}"
    )
    if result is None:
        intro += (
            "<p class='meta'>No simulation was run for this report: it holds the graph analysis only.</p>"
        )
    return head + intro + body + "</body></html>"


def write_report(path: str | os.PathLike, scenario: Scenario, **kwargs) -> None:
    """Write :func:`build_report` to ``path`` atomically (keyword arguments as there).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from workbench import load_preset
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "report.html"
    >>> write_report(target, load_preset("common_cause"))
    >>> target.stat().st_size > 100_000
    True
    """
    write_text_atomically(path, build_report(scenario, **kwargs))
