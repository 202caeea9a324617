"""A standalone HTML report of a scenario and its results: one file that opens with no server and no network.

The report holds the graph with its roles, the verdict of every strategy, the performance table with Monte
Carlo standard errors and flags, the figures (estimates, standard errors, ranked intervals, power and
precision against n), the plain-language explanations, one simulated dataset, the scenario text, the
settings, the seed and the version. BokehJS is inlined (the raw core bundle of ``bokeh.resources.Resources`` in
``inline`` mode, without the extension files other libraries may register), the text uses the system's fonts,
and nothing is fetched from anywhere.

The figures and tables are the dashboard's own (:mod:`workbench.report.graph_drawing`,
:mod:`workbench.report.figures`, :mod:`workbench.report.dataset_figures`, :mod:`workbench.report.tables`;
none imports Panel), so the report shows what the dashboard shows. The page is the Jinja2 template
``templates/report.html.j2`` with autoescaping on: titles, summaries and strategy names are user text and
reach the page escaped; only the fragments this layer builds (already escaped tables and stories, Bokeh's
own script and divs) are inserted as they are. :func:`build_report` gathers one part of the page per step
(the settings, the graph, the estimates, the sample size, the stories, one dataset).

Examples
--------
>>> from workbench import load_preset
>>> page = build_report(load_preset("common_cause"))
>>> page.startswith("<!DOCTYPE html>"), "<script src=" in page, "<link" in page
(True, False, False)
"""

from __future__ import annotations

import datetime as _dt
import os
from functools import lru_cache

import jinja2
import pandas as pd
from bokeh.layouts import gridplot, row
from bokeh.resources import Resources

from workbench import __version__
from workbench.formatting.markup import text_html
from workbench.formatting.numbers import fmt_mcse
from workbench.report import dataset_figures, figures, graph_drawing, plan_figures, tables
from workbench.report.embed import standalone_components
from workbench.report.explain import ASSUMPTION_NOTE, consequences_html, explain
from workbench.scenario.model import Scenario
from workbench.scenario.write import dumps_scenario, write_text_atomically

__all__ = ["build_report", "write_report"]

TEMPLATE = "report.html.j2"
"""The page's template, in ``workbench/report/templates`` (shipped as package data)."""


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    """The template environment: templates read from the package (a source checkout or an installed
    wheel alike), every value autoescaped, an unknown name an error."""
    return jinja2.Environment(
        loader=jinja2.PackageLoader("workbench.report", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def _inline_bokeh() -> str:
    """BokehJS itself as inline ``<script>``/``<style>`` tags: the core bundle only (our figures use nothing
    else), so no extension registered by another library can add a link to a file or a host."""
    resources = Resources(mode="inline", components=["bokeh"])
    css = "".join(f"<style>{raw}</style>" for raw in resources.css_raw)
    js = "".join(f"<script type='text/javascript'>{raw}</script>" for raw in resources.js_raw)
    return css + js


def _settings(scenario: Scenario, result) -> list[tuple[str, str]]:
    """The settings the report was made with, as (name, value) pairs: the run's own when there is one."""
    st = scenario.study
    q = scenario.question
    items = [
        ("question", f"the {q.target} effect of {q.exposure} on {q.outcome} ({q.scale.replace('_', ' ')})"),
        ("sample size n", f"{st.n if result is None else result.n:,}"),
        ("replicates", f"{st.replicates if result is None else result.replicates:,}"),
        ("seed", str(st.seed if result is None else result.seed)),
        ("alpha", f"{st.alpha if result is None else result.alpha:g}"),
        ("sample sizes planned", ", ".join(str(s) for s in st.sample_sizes)),
        ("target power", f"{st.target_power:g}"),
    ]
    if st.target_halfwidth is not None:
        items.append(("target CI half-width", f"{st.target_halfwidth:g}"))
    if result is not None:
        items.append(("engine", str(result.engine)))
    items.append(("workbench version", __version__))
    items.append(("written", _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")))
    return items


def _graph_section(scenario: Scenario, report, models: dict) -> dict:
    """The graph with its roles, the strategies' verdicts and the valid sets."""
    models["graph"] = graph_drawing.graph_figure(scenario, report.roles, width=640, height=380)
    return {
        "strategies_table": tables.strategies_table(report.checks),
        "consequences": consequences_html(report),
        "minimal": "; ".join("{" + ", ".join(m) + "}" for m in report.minimal_sets) or "none",
        "optimal": "{" + ", ".join(report.optimal_set) + "}" if report.optimal_set is not None else "none",
        "optimal_note": report.optimal_note,
    }


def _estimates_section(result, models: dict) -> dict:
    """The truth, the performance table with its flags, the estimates' and SEs' distributions, the ranked
    intervals and the signals."""
    distributions = zip(
        figures.estimates_figure(result, width=540), figures.se_figure(result, width=540), strict=True
    )
    keys = []
    for i, (a, b) in enumerate(distributions):
        models[f"distributions_{i}"] = row(a, b)
        keys.append(f"distributions_{i}")
    models["intervals"] = figures.interval_figure(result, width=1080)
    return {
        "truth": f"{result.truth:.4g}",
        "truth_mcse": fmt_mcse(result.truth_mcse) if result.truth_mcse else "",
        "truth_description": result.truth_description or "",
        "performance_table": tables.performance_table(result.table, alpha=result.alpha),
        "flag_note": tables.FLAG_NOTE,
        "distribution_figures": keys,
        "signals_table": tables.signals_table(result.table),
    }


def _plan_section(plan, models: dict) -> dict:
    """Power against n with the smallest n, bias and empirical SE against n, and for ``question.also`` how
    well the effects separate."""
    models["power"] = figures.power_figure(plan, target_power=plan.target_power, width=1080)
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
    models["precision"] = plan_figures.precision_figure(plan, width=1080)
    section = {"smallest_n_table": tables.smallest_n_table(plan.smallest_n), "separation": False}
    if plan.also_table is not None and len(plan.also_table):
        models["joint_power"] = plan_figures.joint_power_figure(plan, width=1080)
        models["separation"] = figures.separation_figure(plan.also_table, plan.table, width=530)
        also_n = plan.also_smallest_n
        section["separation"] = True
        section["also_smallest_n_table"] = (
            tables.also_smallest_n_table(also_n) if also_n is not None and len(also_n) else ""
        )
        sentence = plan.all_effects_sentence()
        if sentence:
            section["also_smallest_n_table"] += f'<p class="wb-all-effects">{text_html(sentence)}</p>'
    return section


def _stories(report, result) -> list[dict]:
    """One entry per strategy: its story's title, body (escaped HTML) and whether to use it."""
    return [
        {
            "name": story.name,
            "kind": {True: "valid", False: "invalid"}.get(story.usable, "depends"),
            "title": story.title,
            "body": story.html(),
        }
        for story in explain(report, result)
    ]


def _dataset_figure(scenario: Scenario, dataset: pd.DataFrame, covariate: str | None):
    """The one-dataset figures side by side."""
    q = scenario.question
    plots = [dataset_figures.dataset_scatter(dataset, q.exposure, q.outcome, covariate, width=560)]
    if covariate:
        plots.append(dataset_figures.dataset_groups(dataset, q.exposure, covariate, width=480))
    return row(*plots)


def build_report(
    scenario: Scenario,
    *,
    report=None,
    result=None,
    plan=None,
    dataset: pd.DataFrame | None = None,
    covariate: str | None = None,
    sensitivity=None,
) -> str:
    """The report as one HTML document, rendered from the template :data:`TEMPLATE`.

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
    sensitivity : SensitivityResult, optional
        A sensitivity analysis (:func:`workbench.analysis.sensitivity.sensitivity`): adds its section.

    Returns
    -------
    str
        A complete HTML document with Bokeh's scripts inlined; every piece of user text escaped.

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
    models: dict = {}
    context = {
        "title": scenario.title,
        "summary": scenario.summary or "",
        "assumption": ASSUMPTION_NOTE,
        "settings": _settings(scenario, result),
        "graph": _graph_section(scenario, report, models),
        "estimates": None if result is None else _estimates_section(result, models),
        "plan": None if plan is None else _plan_section(plan, models),
        "stories": _stories(report, result),
        "dataset": dataset is not None,
        "scenario_text": dumps_scenario(scenario),
        "table_css": tables.TABLE_CSS,
        "bokeh_resources": _inline_bokeh(),
    }
    if dataset is not None:
        models["dataset"] = _dataset_figure(scenario, dataset, covariate)
    script, divs = standalone_components(models)
    page = _environment().get_template(TEMPLATE).render(context, bokeh_script=script, figures=divs)
    if sensitivity is not None:  # an optional section, built (escaped) by report.sensitivity_figures
        from workbench.report.sensitivity_figures import sensitivity_section

        page = page.replace(
            '<section id="scenario">', sensitivity_section(sensitivity) + '<section id="scenario">', 1
        )
    return page


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
