"""How an arrow of the causal graph is marked: its label (effect, form, modifiers) and its line width.

The width follows the standardized size of the effect, so strong and weak arrows read apart at a glance;
the label says how a modified arrow's effect varies and marks a non-linear form
(:func:`workbench.report.graph_drawing.graph_figure` draws them).
"""

from __future__ import annotations

from workbench.scenario.elicit import standardized_effects
from workbench.scenario.model import Scenario

__all__ = ["effect_text", "arrow_text", "arrow_widths"]


def effect_text(effect: float) -> str:
    """An arrow's label: at most three significant digits, no plus sign.

    Examples
    --------
    >>> effect_text(0.25), effect_text(-0.08), effect_text(1.0), effect_text(0.123456)
    ('0.25', '-0.08', '1', '0.123')
    """
    return f"{effect:.3g}"


def arrow_text(arrow) -> str:
    """An arrow's label: its effect, the shape of a non-linear form (``sq``: times the squared deviation of
    the cause from its mean; ``[>at]``: a step at ``at``), and how the effect changes with each modifier of
    ``varies_with`` (per unit of the modifier above its mean), so a modified arrow reads differently.

    Examples
    --------
    >>> from workbench.scenario.model import Arrow
    >>> arrow_text(Arrow("a", "b", 4.0)), arrow_text(Arrow("a", "b", 4.0, varies_with=(("skill", 1.5),)))
    ('4', '4 +1.5·skill')
    """
    text = effect_text(arrow.effect)
    form = getattr(arrow, "form", "linear")
    if form == "square":
        text += "·sq"
    elif form == "step":
        text += f"·[>{getattr(arrow, 'at', 0.0):.3g}]"
    for name, change in getattr(arrow, "varies_with", ()):
        text += f" {change:+.3g}·{name}"
    return text


def arrow_widths(scenario: Scenario) -> dict[tuple[str, str], float]:
    """Each arrow's line width in pixels, 1.2 to 4.2 by its standardized size (|b*| capped at 1); an arrow
    whose standardized size has no closed form (into a binary variable, say) by its |effect| relative to
    the largest such |effect|, on the same range."""
    standardized = standardized_effects(scenario.variables, scenario.arrows)
    raw_max = max(
        (abs(a.effect) for a, b in zip(scenario.arrows, standardized, strict=True) if b is None), default=0
    )
    out = {}
    for a, b in zip(scenario.arrows, standardized, strict=True):
        size = abs(b) if b is not None else (abs(a.effect) / raw_max if raw_max > 0 else 0.0)
        out[(a.source, a.target)] = 1.2 + 3.0 * min(1.0, size)
    return out
