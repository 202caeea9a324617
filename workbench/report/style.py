"""The look shared by every figure: the palette, fonts, axes and legends.

Colours follow the colour-blind-safe palette of Okabe M., Ito K. (2008). Color Universal Design (CUD): How
to make figures and presentations that are friendly to colorblind people. Strategies take colours in a
fixed order (:func:`strategy_colours`), so one strategy has the same colour in every figure; the graph's
roles have their own fixed colour and marker each (:data:`ROLE_STYLE`): a family of roles shares a hue
(back-door roles vermillion, effect roles blue, colliders yellow, descendants of the outcome pink, cause-only
roles blue-green) and the marker tells the roles within a family apart, so no role relies on colour alone.

Examples
--------
>>> from bokeh.plotting import figure
>>> fig = figure(width=300, height=200)
>>> style_figure(fig)
>>> fig.toolbar.logo is None, fig.outline_line_color is None
(True, True)
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

from bokeh.models import FixedTicker, Legend

__all__ = [
    "OKABE_ITO",
    "EDGE_COLOUR",
    "FONT",
    "ROLE_STYLE",
    "strategy_colours",
    "style_figure",
    "n_axis",
    "legend_above",
    "legend_below",
    "legend_columns",
    "fit_to_width",
    "scale_of",
]

#: The eight Okabe-Ito colours.
OKABE_ITO = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7")

#: The order in which strategies take the Okabe-Ito colours (blue and vermillion first, then a grey).
_STRATEGY_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000", "#999999")

#: Role -> (legend text, fill colour, marker): every role of :data:`workbench.graph.roles.ROLES`, the
#: exposure, the outcome and "other" (no role known). The order is the legend's order; lighter tints of the
#: Okabe-Ito colours mark the second member of a family, and every (colour, marker) pair is unique.
ROLE_STYLE = {
    "exposure": ("exposure", "#E69F00", "square"),
    "outcome": ("outcome", "#CC79A7", "diamond"),
    "confounder": ("confounder", "#D55E00", "circle"),
    "back_door_link": ("back-door link", "#F0A982", "hex"),
    "proxy_of_confounder": ("proxy of a confounder", "#F0A982", "circle"),
    "mediator": ("mediator", "#56B4E9", "circle"),
    "mediator_descendant": ("descendant of a mediator", "#56B4E9", "inverted_triangle"),
    "exposure_descendant": ("descendant of the exposure", "#A9D8F3", "inverted_triangle"),
    "common_effect": ("common effect", "#F0E442", "triangle"),
    "collider_on_path": ("collider on a path", "#F0E442", "star"),
    "pre_exposure_collider": ("pre-exposure collider", "#F0E442", "hex"),
    "collider_descendant": ("descendant of a collider", "#F7F1A0", "inverted_triangle"),
    "outcome_descendant": ("descendant of the outcome", "#E6BCD3", "inverted_triangle"),
    "instrument": ("instrument", "#0072B2", "triangle"),
    "outcome_cause": ("outcome cause", "#009E73", "circle"),
    "unrelated": ("unrelated", "#BBBBBB", "circle"),
    "other": ("other", "#999999", "square"),
}

#: The colour of an arrow or a line that is not highlighted.
EDGE_COLOUR = "#4d4d4d"

#: The font size of tick labels, legends and small labels.
FONT = "11px"


def strategy_colours(names: Sequence[str]) -> dict[str, str]:
    """A colour per strategy, in the order given (cycling through eight Okabe-Ito colours).

    Examples
    --------
    >>> strategy_colours(["unadjusted", "adjusted"])
    {'unadjusted': '#0072B2', 'adjusted': '#D55E00'}
    """
    return {name: _STRATEGY_COLOURS[i % len(_STRATEGY_COLOURS)] for i, name in enumerate(names)}


def style_figure(fig) -> None:
    """Give a Bokeh figure the house style: no logo, a bold small title, small axis labels, no outline.

    Examples
    --------
    >>> from bokeh.plotting import figure
    >>> fig = figure(title="Power", width=300, height=200)
    >>> style_figure(fig)
    >>> fig.title.text_font_style, fig.xaxis[0].major_label_text_font_size
    ('bold', '11px')
    """
    fig.toolbar.logo = None
    if fig.title is not None:
        fig.title.text_font_size = "13px"
        fig.title.text_font_style = "bold"
    for axis in (*fig.xaxis, *fig.yaxis):
        axis.axis_label_text_font_size = "12px"
        axis.axis_label_text_font_style = "normal"
        axis.major_label_text_font_size = FONT
    fig.outline_line_color = None
    fig.background_fill_color = "#ffffff"


def n_axis(fig, sizes: Iterable[float]) -> None:
    """Label a log-scaled sample-size axis at the sizes simulated (at most nine labels).

    Examples
    --------
    >>> from bokeh.plotting import figure
    >>> fig = figure(x_axis_type="log", width=300, height=200)
    >>> n_axis(fig, range(10, 200, 10))
    >>> fig.xaxis[0].ticker.ticks
    [10, 40, 70, 100, 130, 160, 190]
    """
    ticks = sorted({int(n) for n in sizes})
    if len(ticks) > 9:
        step = math.ceil(len(ticks) / 9)
        ticks = ticks[::step]
    fig.xaxis.ticker = FixedTicker(ticks=ticks, minor_ticks=[])


#: About how wide one character of a legend label is at :data:`FONT`, and what a legend entry adds (its
#: glyph, padding and spacing), in pixels: enough to keep wrapped entries from running into each other.
_CHAR_PX, _ENTRY_PX = 6.6, 34


def legend_columns(labels: Sequence[str], width: int) -> int:
    """How many legend entries fit side by side in ``width`` pixels (the widest label sets the column).

    Examples
    --------
    >>> legend_columns(["unadjusted", "adjust_soil"], 540)
    4
    >>> legend_columns(["standardized_adjust_fragility"] * 5, 530)
    2
    """
    widest = max((len(label) for label in labels), default=1)
    return max(1, int((width - 20) // (widest * _CHAR_PX + _ENTRY_PX)))


def _label_text(item) -> str:
    label = item.label
    return str(getattr(label, "value", label.get("value", "") if isinstance(label, dict) else label))


def _legend(fig, items, place: str) -> None:
    labels = [_label_text(item) for item in items]
    width = fig.max_width or fig.width or 600
    fig.add_layout(
        Legend(
            items=items,
            label_text_font_size=FONT,
            border_line_color=None,
            orientation="horizontal",
            ncols=min(len(items), legend_columns(labels, width)) or 1,
            padding=2,
            margin=2,
            spacing=8,
        ),
        place,
    )


def legend_above(fig, items) -> None:
    """Put a horizontal legend with ``items`` (``LegendItem``) above the plot, where it covers no data; it
    wraps into rows when the entries do not fit side by side (:func:`legend_columns`).

    Examples
    --------
    >>> from bokeh.models import LegendItem
    >>> from bokeh.plotting import figure
    >>> fig = figure(width=300, height=200)
    >>> legend_above(fig, [LegendItem(label=f"strategy_{i}", renderers=[fig.line([0, 1], [0, 1])]) for i in range(5)])
    >>> fig.above[0].orientation, fig.above[0].ncols
    ('horizontal', 2)
    """
    _legend(fig, items, "above")


def legend_below(fig, items) -> None:
    """:func:`legend_above`, below the plot (under the x axis).

    Examples
    --------
    >>> from bokeh.models import LegendItem
    >>> from bokeh.plotting import figure
    >>> fig = figure(width=300, height=200)
    >>> legend_below(fig, [LegendItem(label="a", renderers=[fig.line([0, 1], [0, 1])])])
    >>> fig.below[-1].ncols
    1
    """
    _legend(fig, items, "below")


def fit_to_width(fig, width: int, smallest: int = 320) -> None:
    """Let a figure shrink to its container, from ``width`` pixels down to ``smallest``, so two figures side
    by side fit a narrower window instead of making it scroll sideways.

    Examples
    --------
    >>> from bokeh.plotting import figure
    >>> fig = figure(width=530, height=200)
    >>> fit_to_width(fig, 530)
    >>> fig.sizing_mode, fig.max_width, fig.min_width
    ('stretch_width', 530, 320)
    """
    fig.sizing_mode = "stretch_width"
    fig.max_width = width
    fig.min_width = min(smallest, width)


def scale_of(estimand: str) -> str:
    """The measurement scale of an estimand, for keeping one scale per axis: ``log odds ratio``, ``log risk
    ratio``, ``log rate ratio``, ``risk difference`` or ``difference``.

    Examples
    --------
    >>> scale_of("conditional log odds ratio"), scale_of("marginal risk difference"), scale_of("total effect")
    ('log odds ratio', 'risk difference', 'difference')
    >>> scale_of("marginal log rate ratio"), scale_of("conditional log risk ratio per unit")
    ('log rate ratio', 'log risk ratio')
    """
    text = str(estimand)
    for scale in ("log odds ratio", "log risk ratio", "log rate ratio"):
        if scale in text:
            return scale
    if "log odds" in text:
        return "log odds ratio"
    return "risk difference" if "risk difference" in text else "difference"
