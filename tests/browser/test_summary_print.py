"""End-to-end: the one-page stakeholder summary prints on one A4 page in Chromium and loads nothing.

Chromium's own PDF print (``page.pdf(format="A4")``) of ``workbench report --summary`` for the ``mediator``
and ``common_effect`` presets: the PDF has exactly one page object, and the page made no request beyond its
own file. Common practice, no source: a hand-out that spills onto a second page loses its reader.
"""

from __future__ import annotations

import re

import pytest

from workbench.cli import main

pytestmark = pytest.mark.browser


@pytest.mark.parametrize("preset", ["mediator", "common_effect"])
def test_the_summary_prints_on_one_a4_page(browser, preset, tmp_path):
    target = tmp_path / f"{preset}_summary.html"
    assert main(["report", "--preset", preset, "--summary", str(target)]) == 0
    page = browser.new_page()
    requests: list[str] = []
    page.on("request", lambda request: requests.append(request.url))
    try:
        page.goto(target.as_uri())
        pdf = page.pdf(format="A4", print_background=True)
    finally:
        page.close()
    pages = re.findall(rb"/Type\s*/Page(?![s\w])", pdf)
    assert len(pages) == 1, f"{preset}: the summary prints on {len(pages)} pages"
    assert [url for url in requests if url != target.as_uri()] == []
