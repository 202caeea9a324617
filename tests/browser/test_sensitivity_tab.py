"""End-to-end: the Sensitivity tab in a real headless Chromium, on the default preset.

Common practice, no source: the reference for the numbers shown is :func:`workbench.analysis.sensitivity.sensitivity`
on the same scenario (the tab must show what the library computes). A screenshot goes to ``test-artifacts/``.
"""

from __future__ import annotations

import pytest

from workbench.analysis.sensitivity import sensitivity
from workbench.graph.defaults import load_preset
from workbench.scenario.presets import DEFAULT_PRESET

pytestmark = pytest.mark.browser


def test_the_sensitivity_tab_shows_the_robustness_value_and_the_plot(page):
    expected = sensitivity(load_preset(DEFAULT_PRESET))
    page.page.locator(".wb-tabs .bk-tab", has_text="Sensitivity").first.click()
    text = page.wait_for_text(".wb-sens-summary", f"Strategy '{expected.strategy}'", timeout=60)
    assert f"{expected.robustness_value:.3f}" in text
    assert "not evidence that none exists" in text
    page.page.wait_for_timeout(2000)  # let Bokeh draw the contour plot
    page.screenshot("sensitivity_tab")
