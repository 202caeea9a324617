"""End-to-end: the two-effects view of the Sample size tab on the ``two_exposures`` preset, in headless Chromium.

Common practice, no source: the reference for the sentence is :meth:`PlanResult.all_effects_sentence` of the
library on the same scenario's settings (the tab must say what the library computes). Screenshots go to
``test-artifacts/``.
"""

from __future__ import annotations

import pytest

from workbench.scenario.presets import list_presets

pytestmark = pytest.mark.browser


def test_two_effects_sentence_and_also_selector(page):
    label = f"{list_presets()['two_exposures']} (two_exposures)"
    page.page.locator(".wb-preset select").select_option(label=label)
    page.wait_for_text(".wb-header", list_presets()["two_exposures"], timeout=40)
    page.wait_for_text(".wb-also", "heating", timeout=30)
    page.page.locator(".wb-tabs .bk-tab", has_text="Sample size").first.click()
    page.page.locator(".wb-run button").click()
    text = page.wait_for_text(
        ".wb-all-effects", "To detect both the lighting and the heating effect", timeout=300
    )
    assert "units (strategy adjust_heating)" in text
    page.page.locator(".wb-all-effects").first.scroll_into_view_if_needed()
    page.page.wait_for_timeout(2000)  # let Bokeh draw the joint power and precision figures
    page.screenshot("two_effects_view")
