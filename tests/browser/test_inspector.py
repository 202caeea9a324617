"""End-to-end: the Graph tab's inspector ("Selected") in a real headless Chromium.

One user session on the default preset (common_cause): picking a variable and making it a count writes
``type = "count"`` with ``rate = 1.0`` into the TOML view; picking an arrow and making it square writes
``form = "square"``; a refused rate shows the parser's located message in the inspector's box.

Common practice, no source: the reference for every expectation is the scenario file format
(docs/scenario-format.md: ``type``, ``rate``, ``form``) and the parser's messages, read back from the page.
"""

from __future__ import annotations

import pytest

from tests.browser.test_canvas import _toml, _wait_toml  # the TOML view, read back (the same helpers)

pytestmark = pytest.mark.browser


def _tab(page, name: str) -> None:
    page.open_editor(name)


def test_a_variable_becomes_a_count(page):
    page.wait_for_text(".wb-truth", "True effect under this graph: 0.25")
    _tab(page, "Selected")
    page.page.locator(".wb-inspect-pick select").select_option(label="variable soil_quality")
    page.page.locator(".wb-inspect-type select").select_option("count")
    data = _wait_toml(page, lambda d: d["variables"]["soil_quality"].get("type") == "count")
    assert data["variables"]["soil_quality"]["rate"] == 1.0
    assert "noise_sd" not in data["variables"]["soil_quality"]


def test_a_refused_rate_shows_the_parsers_message(page):
    _tab(page, "Selected")
    rate = page.page.locator(".wb-inspect-rate input")
    rate.wait_for(state="visible", timeout=20_000)
    rate.fill("0")
    rate.press("Enter")
    page.wait_for_text(".wb-error-inspector", "variables.soil_quality.rate: must lie in [0.001, 100000]")
    assert _toml(page)["variables"]["soil_quality"]["rate"] == 1.0  # the last good scenario stays


def test_an_arrow_becomes_square(page):
    _tab(page, "Selected")
    page.page.locator(".wb-inspect-pick select").select_option(label="arrow fertiliser -> wheat_yield")
    page.page.locator(".wb-inspect-form select").select_option("square")
    data = _wait_toml(
        page,
        lambda d: any(a.get("form") == "square" for a in d["arrows"] if a["from"] == "fertiliser"),
    )
    arrow = next(a for a in data["arrows"] if (a["from"], a["to"]) == ("fertiliser", "wheat_yield"))
    assert arrow["form"] == "square" and "at" not in arrow
    page.screenshot("inspector_square")
