"""End-to-end: a hostile scenario file runs no script, anywhere in the dashboard or in its exported report.

The file carries script payloads in every string field the format accepts (the title, the summary, every
variable's label with its unit, and the strategy names when the parser still accepts them there), and a
second upload makes the error message quote a hostile name. The session opens it by upload in headless
Chromium, visits every tab and editor, runs, plans, reads the stories, downloads the HTML report and opens
it too. Every payload would set ``window.__pwned`` or open a dialog if it ran; neither may happen, and the
payload must still be shown as the text the user wrote.

Common practice, no source: the payloads are the classic HTML-injection probes (an ``<img>`` with an
``onerror`` handler, a ``<script>`` element, an ``<svg onload>``, a ``javascript:`` link in Markdown syntax).
"""

from __future__ import annotations

import re

import pytest

from workbench.errors import ScenarioError
from workbench.graph.defaults import loads_scenario

pytestmark = pytest.mark.browser

PAYLOADS = (
    "<img src=x onerror=window.__pwned=1>",
    "<script>window.__pwned=1</script>",
    "<svg onload=window.__pwned=1></svg>",
    "[click](javascript:window.__pwned=1)",
    "<b onmouseover=alert(1)>**bold**</b>",
)
IMG = PAYLOADS[0]


def _quoted(text: str) -> str:
    """A TOML basic string holding ``text``."""
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _strategy_name(name: str, hostile: str) -> str:
    """``hostile`` if the parser accepts it as a strategy name, else ``name`` (names may be restricted to
    letters, digits and '_', which leaves no room for markup)."""
    probe = f"""title = "probe"
[question]
exposure = "a"
outcome = "b"
[variables.a]
[variables.b]
[[arrows]]
from = "a"
to = "b"
effect = 0.5
[[strategies]]
name = {_quoted(hostile)}
adjust = []
"""
    try:
        loads_scenario(probe)
    except ScenarioError:
        return name
    return hostile


def hostile_toml() -> str:
    """A small linear-Gaussian scenario (so the dashboard runs it at once) with payloads everywhere."""
    labels = [
        f"Soil {PAYLOADS[1]} (z {PAYLOADS[2]})",
        f"Fertiliser {IMG} (kg {PAYLOADS[3]})",
        f"Yield {PAYLOADS[4]}",
    ]
    unadjusted = _strategy_name("unadjusted", f"raw{IMG}")
    adjusted = _strategy_name("adjust_soil", f"soil{PAYLOADS[1]}")
    return f"""title = {_quoted("Farms " + IMG + " " + PAYLOADS[1])}
summary = {_quoted(" ".join(PAYLOADS))}

[question]
exposure = "fertiliser"
outcome = "wheat_yield"

[variables.soil_quality]
label = {_quoted(labels[0])}

[variables.fertiliser]
label = {_quoted(labels[1])}

[variables.wheat_yield]
label = {_quoted(labels[2])}

[[arrows]]
from = "soil_quality"
to = "fertiliser"
effect = 0.6

[[arrows]]
from = "soil_quality"
to = "wheat_yield"
effect = 0.5

[[arrows]]
from = "fertiliser"
to = "wheat_yield"
effect = 0.25

[[strategies]]
name = {_quoted(unadjusted)}
adjust = []

[[strategies]]
name = {_quoted(adjusted)}
adjust = ["soil_quality"]

[study]
n = 200
replicates = 200
seed = 7
sample_sizes = [50, 100, 200]
"""


def _tab(page, name: str) -> None:
    page.page.locator(".wb-tabs .bk-tab", has_text=name).first.click()
    page.page.wait_for_timeout(600)


def _editor_tab(page, name: str) -> None:
    page.open_editor(name)


def _assert_clean(tab, dialogs: list, where: str) -> None:
    pwned = tab.evaluate("() => typeof window.__pwned")
    assert pwned == "undefined", f"a payload ran in {where}"
    assert not dialogs, f"a dialog opened in {where}: {dialogs}"


@pytest.fixture(scope="module")
def dialogs(page):
    seen: list[str] = []

    def dismiss(dialog):
        seen.append(dialog.message)
        dialog.dismiss()

    page.page.on("dialog", dismiss)
    return seen


def test_the_hostile_file_opens_and_shows_its_text_as_text(page, dialogs):
    text = hostile_toml()
    loads_scenario(text)  # the file itself is valid: only its strings are hostile
    page.page.locator(".wb-upload input[type=file]").set_input_files(
        files=[{"name": "farm.toml", "mimeType": "application/toml", "buffer": text.encode()}]
    )
    header = page.wait_for_text(".wb-header", "Farms <img src=x", timeout=60)
    assert "<script>window.__pwned=1</script>" in header
    _assert_clean(page.page, dialogs, "the header")


def test_every_tab_and_editor_stays_inert(page, dialogs):
    _tab(page, "Graph")
    box = page.page.locator(".wb-graph").first.bounding_box()
    if box:  # sweep the pointer over the graph so the node tooltips (labels included) are drawn
        for i in range(1, 10):
            for j in range(1, 6):
                page.page.mouse.move(box["x"] + box["width"] * i / 10, box["y"] + box["height"] * j / 6)
                page.page.wait_for_timeout(30)
        _assert_clean(page.page, dialogs, "the graph's tooltips")
    for name in ("Arrows", "Variables", "Strategies", "Scenario text (TOML)"):
        _editor_tab(page, name)
        _assert_clean(page.page, dialogs, f"the {name} editor")
    _editor_tab(page, "Variables")  # only the editor shown is in the page
    page.wait_for_text(".wb-variables", "Fertiliser <img src=x")
    highlight = page.page.locator(".wb-highlight select")
    for option in highlight.locator("option").all_inner_texts()[1:]:
        highlight.select_option(label=option)
        page.wait_for_text(".wb-verdict", option[:3])
        _assert_clean(page.page, dialogs, f"the verdict of {option!r}")
    page.page.locator(".wb-run button").click()
    _tab(page, "Estimates")
    page.page.wait_for_selector(".wb-performance table", timeout=90_000)
    _assert_clean(page.page, dialogs, "the Estimates tab")
    _tab(page, "Sample size")
    page.page.wait_for_selector(".wb-smallest-n table", timeout=120_000)
    _assert_clean(page.page, dialogs, "the Sample size tab")
    _tab(page, "Explain")
    page.wait_for_text(".wb-stories", "In the simulation", timeout=60)
    page.wait_for_text(".wb-dataset-caption", "wheat_yield against fertiliser")
    _assert_clean(page.page, dialogs, "the Explain tab")


def test_the_exported_report_stays_inert(page, dialogs, browser, tmp_path):
    _tab(page, "Export")
    with page.page.expect_download(timeout=180_000) as download_info:
        page.page.locator(".wb-export-html button, .wb-export-html a").first.click()
    target = tmp_path / "report.html"
    download_info.value.save_as(target)
    text = target.read_text(encoding="utf-8")
    assert "&lt;img src=x onerror=window.__pwned=1&gt;" in text
    for payload in PAYLOADS[:3]:  # the markup payloads appear only escaped (BokehJS itself holds "<svg")
        assert payload not in text
    context = browser.new_context()
    offline = context.new_page()
    report_dialogs: list[str] = []
    offline.on("dialog", lambda d: (report_dialogs.append(d.message), d.dismiss()))
    offline.route(re.compile(r"^https?://"), lambda route: route.abort())
    offline.goto(target.as_uri())
    offline.wait_for_selector(".bk-Canvas, canvas, .bk-Figure", state="attached", timeout=30_000)
    offline.wait_for_timeout(1000)
    try:
        _assert_clean(offline, report_dialogs, "the exported report")
        shown = offline.locator("h1").inner_text()
        assert IMG in shown
    finally:
        context.close()


def test_an_error_quoting_a_hostile_name_stays_inert(page, dialogs):
    text = hostile_toml().replace("[variables.soil_quality]", f'[variables."{IMG}"]', 1)
    page.page.locator(".wb-upload input[type=file]").set_input_files(
        files=[{"name": f"x{IMG}.toml", "mimeType": "application/toml", "buffer": text.encode()}]
    )
    page.wait_for_text(".wb-error", "Not applied", timeout=30)
    page.page.wait_for_timeout(500)
    _assert_clean(page.page, dialogs, "an error message")
