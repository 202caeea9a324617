"""End-to-end: the dashboard fits the window on every preset, in a real headless Chromium.

At 1440 x 900 and 1280 x 800 every tab of every preset is checked through the page's open shadow roots:
the page does not scroll sideways, no visible element reaches past the right edge of the window, no text is
cut off by its box (an element hiding its overflow, or an ellipsis), and no table header runs into the next
one (each ``<th>`` holds its own text). Legends drawn inside Bokeh canvases are checked in
``tests/test_people_layout.py`` on the figures themselves.

Common practice, no source: a page that needs a horizontal scroll bar or cuts its own labels off at a common
laptop size fails its reader.
"""

from __future__ import annotations

from pathlib import Path
from urllib.parse import urlparse

import pytest

from workbench.scenario.presets import list_presets

from .conftest import DEEP_TEXT

pytestmark = pytest.mark.browser

PROBE = (Path(__file__).parent / "layout_probe.js").read_text(encoding="utf-8")
TABS = ("Graph", "Estimates", "Sample size", "Explain", "Export", "Sensitivity", "Sweep")


def _layout_faults(page, width: int) -> list[str]:
    found = page.evaluate(PROBE, width)
    faults = (
        [f"page scrolls sideways: {found['scrollWidth']} px > {width} px"]
        if found["scrollWidth"] > width
        else []
    )
    faults += [f"past the right edge: {x}" for x in found["beyond"]]
    faults += [f"text cut off: {x}" for x in found["clipped"]]
    return faults


def _open(browser, server, width: int, height: int):
    context = browser.new_context(viewport={"width": width, "height": height})
    tab = context.new_page()
    requests: list[str] = []
    tab.on("request", lambda request: requests.append(request.url))
    tab.goto(server)
    tab.wait_for_selector(".wb-graph", timeout=60_000)
    return context, tab, requests


def _deep_text(tab, selector: str) -> str:
    return tab.evaluate(DEEP_TEXT, selector) or ""


def _pick(tab, name: str) -> None:
    title = list_presets()[name]
    for _ in range(3):
        tab.locator(".wb-preset select").select_option(label=f"{title} ({name})")
        for _ in range(100):
            if title in _deep_text(tab, ".wb-header"):
                tab.wait_for_timeout(600)
                return
            tab.wait_for_timeout(200)
    raise AssertionError(f"the page never showed the preset {name}")


@pytest.mark.parametrize("width,height", [(1440, 900), (1280, 800)])
def test_every_preset_and_tab_fits_the_window(server, browser, width, height):
    context, tab, requests = _open(browser, server, width, height)
    faults: dict[str, list[str]] = {}
    try:
        for name in list_presets():
            _pick(tab, name)
            for tab_name in TABS:
                tab.locator(".wb-tabs .bk-tab", has_text=tab_name).first.click()
                tab.wait_for_timeout(1500 if tab_name in ("Estimates", "Sample size") else 700)
                found = _layout_faults(tab, width)
                if found:
                    faults[f"{name} / {tab_name}"] = found[:5]
    finally:
        context.close()
    host = urlparse(server).netloc
    assert all(urlparse(u).netloc in (host, "") for u in requests if u.startswith("http")), "foreign request"
    assert not faults, "\n".join(f"{where}: {found}" for where, found in faults.items())
