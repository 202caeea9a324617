"""The standalone HTML report, rendered from its Jinja2 template.

User text (a scenario's title and summary, strategy names, variable labels) must reach the page escaped:
text placed in an HTML element or attribute is escaped, and text inside a script is never able to close it
(the OWASP Cross Site Scripting Prevention Cheat Sheet, rules 1 and 2; common practice). The page must
open with no server and no network: no element loads a file or a host.
"""

from __future__ import annotations

import html
import importlib.resources
import re
import weakref

import pytest

from workbench import load_preset, loads_scenario
from workbench.analysis.check import check
from workbench.analysis.simulate import simulate
from workbench.engine.metrics import BIAS_MCSE_MULTIPLE
from workbench.report.explain import ASSUMPTION_NOTE
from workbench.report.html import TEMPLATE, build_report, write_report
from workbench.report.tables import FLAG_NOTE

HOSTILE_TITLE = "<img src=x onerror=alert(1)>"
HOSTILE_NAME = "</script><script>alert('name')</script>"

SCENARIO = f"""
title = "{HOSTILE_TITLE}"
summary = "Workshops <b>bold</b> & sons {HOSTILE_NAME}"

[question]
exposure = "training"
outcome = "output"

[variables.workshop_size]
label = "<script>alert('label')</script>"

[variables.training]

[variables.output]

[[arrows]]
from = "workshop_size"
to = "training"
effect = 0.5

[[arrows]]
from = "workshop_size"
to = "output"
effect = 0.4

[[arrows]]
from = "training"
to = "output"
effect = 0.3

[[strategies]]
name = "unadjusted"
adjust = []

[[strategies]]
name = "adjust_size"
adjust = ["workshop_size"]

[study]
n = 150
replicates = 100
seed = 7
"""


@pytest.fixture(scope="module")
def hostile():
    sc = loads_scenario(SCENARIO)
    result = simulate(sc, replicates=100, seed=7)
    return sc, build_report(sc, result=result)


def _our_scripts(page: str) -> list[str]:
    """The opening script tags of the page (BokehJS inline and Bokeh's document script)."""
    return re.findall(r"<script\b[^>]*>", page)


def test_the_template_ships_with_the_package():
    """The template is package data: found through importlib.resources, as from an installed wheel."""
    template = importlib.resources.files("workbench.report") / "templates" / TEMPLATE
    assert template.is_file()
    assert "autoescaped" in template.read_text(encoding="utf-8")


def test_a_hostile_title_appears_escaped(hostile):
    _, page = hostile
    assert HOSTILE_TITLE not in page
    assert html.escape(HOSTILE_TITLE) in page
    assert f"<title>{html.escape(HOSTILE_TITLE)} - workbench report</title>" in page
    assert f"<h1>{html.escape(HOSTILE_TITLE)}</h1>" in page
    assert "Workshops &lt;b&gt;bold&lt;/b&gt; &amp; sons" in page


def test_script_from_user_text_never_appears_unescaped(hostile):
    _, page = hostile
    assert "<script>alert(" not in page
    assert "</script><script>alert" not in page
    # every script tag is one of ours (inline BokehJS, Bokeh's document script): none has a source
    assert set(_our_scripts(page)) <= {"<script>", "<script type='text/javascript'>"}
    assert (
        "&lt;/script&gt;&lt;script&gt;alert(" in page
    )  # the summary's script, escaped (names are identifiers)


def test_the_assumption_note_is_stated(hostile):
    _, page = hostile
    assert f'<p class="note" id="assumption">{html.escape(ASSUMPTION_NOTE)}</p>' in page
    assert "assumption" in ASSUMPTION_NOTE


def test_one_story_section_per_strategy(hostile):
    sc, page = hostile
    sections = re.findall(r'<section class="story (valid|invalid|depends)" data-strategy="([^"]*)">', page)
    assert [html.unescape(name) for _, name in sections] == [s.name for s in sc.strategies]
    assert [kind for kind, _ in sections] == [
        "invalid",
        "valid",
    ]  # the confounded comparison, the adjusted one


def test_the_flag_rule_is_stated_beside_the_table(hostile):
    """The note under the performance table states the rule of workbench.engine.metrics."""
    _, page = hostile
    assert html.escape(FLAG_NOTE) in page
    assert f"{BIAS_MCSE_MULTIPLE:g} Monte Carlo SEs" in FLAG_NOTE


def test_the_report_opens_with_no_network():
    """No element loads a file or a host: no src/href attribute, and no URL in the page's markup outside
    the inlined BokehJS (whose code names hosts it would fetch from only on request, e.g. for LaTeX)."""
    page = build_report(load_preset("common_cause"))
    assert not re.search(r"<(script|link|img|iframe)\b[^>]*\b(src|href)=", page)
    markup = re.sub(r"<(script|style)\b[^>]*>.*?</\1>", "", page, flags=re.S)
    assert "https://" not in markup and "http://" not in markup
    assert "No simulation was run for this report" in page


def test_every_section_is_there_with_a_run_and_a_plan(tmp_path):
    from workbench.analysis.plan import plan

    sc = load_preset("two_exposures")
    report = check(sc)
    result = simulate(sc, replicates=100, seed=2)
    planned = plan(sc, sample_sizes=[60, 120], replicates=60, seed=2)
    target = tmp_path / "report.html"
    write_report(target, sc, report=report, result=result, plan=planned)
    page = target.read_text(encoding="utf-8")
    for section in ("graph", "estimates", "sample-size", "stories", "scenario"):
        assert f'<section id="{section}">' in page
    assert "Separating the effects" in page
    # the precision view and the joint power of the two effects (issue 14 items 3 and 5), figure titles in the
    # embedded Bokeh document (common practice, no source)
    assert "Precision: confidence-interval half-width against n" in page
    assert "Power to detect every effect in the same study" in page
    assert "No simulation was run" not in page
    assert page.count('<section class="story') == len(sc.strategies)


def test_the_verdicts_table_reads_the_check_records():
    """Common practice, no source: the table shows each strategy's set, restriction and matching in the
    words of workbench.formatting.phrases, with the graph's verdict."""
    from workbench.report.tables import strategies_table

    report = check(load_preset("restriction"))
    table = strategies_table(report.checks)
    assert table.count("<tr>") == len(report.checks) + 1  # the header and one row per strategy
    assert "<div>nothing; only units with night_shift = 0, experience in [-1, 1]</div>" in table
    assert "<div>night_shift, experience; matched on night_shift</div>" in table
    assert '<td>day_shift_experience_band</td><td class="invalid">invalid</td>' in table


def test_a_leaked_bokeh_curdoc_does_not_break_the_report():
    """Bokeh's ``patch_curdoc`` (bokeh/io/doc.py, 3.x) restores ``curdoc()`` only when its body ends without
    an exception; an exception in a dashboard callback leaves another session's Document patched in, and
    that Document is destroyed when its session closes. Bokeh's ``components()`` then fails on every model
    that is not in a Document yet. The reports put their figures in a Document of their own, so exports do
    not depend on what an earlier callback left behind. (Found in the browser tests; common practice, no
    source for the remedy beyond Bokeh's OutputDocumentFor, which reuses a Document holding all the roots.)
    """
    from bokeh.document import Document
    from bokeh.io import doc as bokeh_doc

    stale = Document()
    bokeh_doc._PATCHED_CURDOCS.append(weakref.ref(stale))  # what the failed callback leaves behind
    stale.callbacks.destroy()  # what closing its session does (Document.destroy)
    try:
        page = build_report(load_preset("binary_exposure"))
    finally:
        bokeh_doc._PATCHED_CURDOCS.pop()
    assert "<script" in page and load_preset("binary_exposure").title in html.unescape(page)
