"""Rendering of the result objects: one table spec gives the text and the HTML, and the HTML is escaped.

The HTML is read back with the standard library's parser (``html.parser.HTMLParser``, outside the project):
the cells it finds must be the cells of the text table, and a strategy named like an HTML tag must come back
as text, never as a tag (common practice, no source: escape every user-supplied string placed in HTML).
"""

from __future__ import annotations

import dataclasses
import html
from html.parser import HTMLParser

import pytest

import workbench as wb
from workbench.analysis.check import check
from workbench.analysis.plan import plan
from workbench.analysis.simulate import simulate
from workbench.formatting.numbers import estimate_decimals, fmt, fmt_mcse
from workbench.formatting.tables import Column, Table, TableSpec, render_html, render_text

EVIL = "<img src=x onerror=alert(1)>"


class _Cells(HTMLParser):
    """The tags met and the text of every table cell, as a browser would read them."""

    def __init__(self):
        super().__init__()
        self.tags: list[str] = []
        self.cells: list[str] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.cells.append("".join(self._cell))
            self._cell = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def parse(fragment: str) -> _Cells:
    parser = _Cells()
    parser.feed(fragment)
    parser.close()
    return parser


@pytest.fixture(scope="module")
def scenario():
    sc = wb.load_preset("common_cause")
    first = dataclasses.replace(sc.strategies[0], name=EVIL)
    # a file cannot name a strategy like this (the parser keeps names to letters, digits and '_'); the object is
    # built directly, so that the escaping is tested as the second line of defence
    return dataclasses.replace(sc, strategies=(first, *sc.strategies[1:]))


@pytest.fixture(scope="module")
def results(scenario):
    return {
        "check": check(scenario),
        "simulate": simulate(scenario, replicates=200, seed=4),
        "plan": plan(scenario, sample_sizes=[50, 100], replicates=200, seed=4),
    }


@pytest.mark.parametrize("kind", ["check", "simulate", "plan"])
def test_text_and_html_show_the_same_cells(results, kind):
    result = results[kind]
    text, cells = result.as_text(), parse(result.as_html()).cells
    tables = [p for p in result.parts() if isinstance(p, Table)]
    assert tables
    expected = []
    for table in tables:
        expected += [c.header for c in table.spec.columns]
        for row in table.spec.cells(table.records):
            expected += row
            assert len(row) == len(table.spec.columns)
            for value in row:
                assert value in text
    assert cells == expected


@pytest.mark.parametrize("kind", ["check", "simulate", "plan"])
def test_html_escapes_a_strategy_named_like_a_tag(results, kind):
    result = results[kind]
    page = result.as_html()
    assert EVIL not in page and html.escape(EVIL) in page
    parsed = parse(page)
    assert "img" not in parsed.tags
    assert any(EVIL in cell for cell in parsed.cells)
    assert EVIL in result.as_text()


@pytest.mark.parametrize("kind", ["check", "simulate", "plan"])
def test_notebooks_get_the_html(results, kind):
    result = results[kind]
    assert result._repr_html_() == result.as_html()
    assert result.as_html().startswith('<div class="wb-result">')


def test_a_figure_beside_its_mcse_is_rounded_to_it(results):
    """Morris, White & Crowther (2019), Statistics in Medicine 38(11):2074-2102, sec. 5.2: report a
    Monte Carlo estimate with its MCSE, to the digits the MCSE supports. The cell is the value at
    ``estimate_decimals`` and the MCSE at two significant digits, in text and HTML alike."""
    result = results["simulate"]
    row = result.table.set_index("name").loc["adjust_soil"]
    cell = f"{fmt(row['bias'], estimate_decimals(row['bias_mcse'], 3))} ({fmt_mcse(row['bias_mcse'])})"
    assert cell in result.as_text()
    assert cell in parse(result.as_html()).cells


def test_check_verdicts_and_notes_are_in_both(results):
    report = results["check"]
    text, page = report.as_text(), report.as_html()
    for c in report.checks:
        for reason in c.reasons:
            assert reason in text and html.escape(reason) in page
    assert "INVALID" in parse(page).cells and "VALID" in parse(page).cells


def test_plan_notes_are_in_both(results):
    result = results["plan"]
    notes = [n for n in result.smallest_n["note"] if n]
    assert notes
    for note in notes:
        assert note in result.as_text() and html.escape(note) in result.as_html()


def test_table_spec_aligns_numbers_right_and_escapes_headers():
    spec = TableSpec((Column("name", "a<b"), Column("n", "n", lambda v: f"{v:,}", "right")))
    records = [{"name": "x", "n": 5}, {"name": "long name", "n": 12345}]
    text = render_text([Table(spec, tuple(records))])
    lines = text.splitlines()
    assert lines[0].split() == ["a<b", "n"]
    assert lines[-1].endswith("12,345") and lines[-2].endswith("     5")
    page = render_html([Table(spec, tuple(records))])
    assert '<th class="text">a&lt;b</th>' in page
    assert parse(page).cells == ["a<b", "n", "x", "5", "long name", "12,345"]
