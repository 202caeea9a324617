"""Bokeh figures of one simulated dataset (no Panel import): what a single study's data look like.

:func:`dataset_scatter` draws the outcome against the exposure, coloured by a covariate (so a confounder's
pull on both is visible); :func:`dataset_groups` compares the covariate across exposure groups (box plots
of Tukey J.W. (1977). Exploratory Data Analysis, Addison-Wesley, with whiskers at 1.5 IQR).

Examples
--------
>>> from workbench import load_preset
>>> from workbench.engine.generate import draw
>>> data = draw(load_preset("common_cause"), 100, seed=1)
>>> type(dataset_scatter(data, "fertiliser", "wheat_yield", None)).__name__
'figure'
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from bokeh.models import ColorBar, ColumnDataSource, LegendItem, LinearColorMapper
from bokeh.palettes import Cividis256
from bokeh.plotting import figure

from workbench.report.style import FONT, legend_above, style_figure

__all__ = ["dataset_scatter", "dataset_groups"]


def _is_binary(values: pd.Series) -> bool:
    return set(np.unique(values.dropna())) <= {0.0, 1.0}


def _jittered(values: pd.Series, seed: int, spread: float) -> np.ndarray:
    """The values as floats, a binary variable spread by +/- ``spread`` so its points do not sit on a line."""
    out = values.to_numpy(dtype=float)
    if _is_binary(values):
        out = out + np.random.default_rng(seed).uniform(-spread, spread, size=out.size)
    return out


def _colour_by_levels(fig, source: dict, covariate: str) -> None:
    """Points of a binary covariate in two colours, with the legend above the plot (inside it would cover
    points)."""
    c = source["c"]
    items = []
    for value, colour in ((0, "#0072B2"), (1, "#D55E00")):
        chosen = ColumnDataSource({k: np.asarray(v)[c == value] for k, v in source.items()})
        dots = fig.scatter("x", "y", source=chosen, color=colour, size=5, alpha=0.6)
        items.append(LegendItem(label=f"{covariate} = {value}", renderers=[dots]))
    legend_above(fig, items)


def _colour_by_scale(fig, source: dict, covariate: str) -> None:
    """Points of a continuous covariate on the Cividis scale, with a colour bar at the right."""
    c = source["c"]
    mapper = LinearColorMapper(palette=Cividis256, low=float(np.nanmin(c)), high=float(np.nanmax(c)))
    fig.scatter(
        "x",
        "y",
        source=ColumnDataSource(source),
        size=5,
        alpha=0.7,
        color={"field": "c", "transform": mapper},
    )
    fig.add_layout(
        ColorBar(
            color_mapper=mapper,
            title=covariate,
            width=10,
            title_text_font_size=FONT,
            major_label_text_font_size=FONT,
        ),
        "right",
    )


def dataset_scatter(
    data: pd.DataFrame, exposure: str, outcome: str, covariate: str | None, *, width: int = 560, seed: int = 0
):
    """The outcome against the exposure in one simulated dataset, points coloured by ``covariate``.

    A binary exposure is jittered sideways so that the points do not sit on two lines.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.generate import draw
    >>> data = draw(load_preset("common_cause"), 100, seed=1)
    >>> dataset_scatter(data, "fertiliser", "wheat_yield", "soil_quality").title.text
    'wheat_yield against fertiliser, coloured by soil_quality'
    """
    source = {"x": _jittered(data[exposure], seed, 0.18), "y": _jittered(data[outcome], seed + 1, 0.08)}
    title = f"{outcome} against {exposure}" + (f", coloured by {covariate}" if covariate else "")
    fig = figure(
        width=width,
        height=400,
        title=title,
        x_axis_label=exposure,
        y_axis_label=outcome,
        tools="save,reset,box_zoom",
        toolbar_location=None,
    )
    style_figure(fig)
    if not covariate:
        fig.scatter("x", "y", source=ColumnDataSource(source), size=5, alpha=0.6, color="#0072B2")
        return fig
    source["c"] = data[covariate].to_numpy(dtype=float)
    if _is_binary(data[covariate]):
        _colour_by_levels(fig, source, covariate)
    else:
        _colour_by_scale(fig, source, covariate)
    return fig


def _exposure_groups(exposure: pd.Series) -> tuple[np.ndarray, list[str], str]:
    """Each unit's exposure group (its value when binary, else its quintile), the groups in order and the
    axis label."""
    name = exposure.name
    if _is_binary(exposure):
        groups = np.where(exposure.to_numpy() > 0.5, f"{name} = 1", f"{name} = 0")
        return groups, [f"{name} = 0", f"{name} = 1"], str(name)
    codes = pd.qcut(exposure, 5, labels=False, duplicates="drop").to_numpy()
    groups = np.array([f"Q{int(c) + 1}" for c in codes])
    return groups, sorted({str(g) for g in groups}), f"{name} quintile (Q1 lowest)"


def _box_stats(values: np.ndarray, groups: np.ndarray, order: list[str]) -> dict[str, list]:
    """Quartiles and whiskers (the furthest value within 1.5 IQR of the box) per group."""
    stats = {k: [] for k in ("g", "q1", "q2", "q3", "lo", "hi")}
    for g in order:
        v = values[groups == g]
        q1, q2, q3 = np.quantile(v, [0.25, 0.5, 0.75])
        iqr = q3 - q1
        stats["g"].append(g)
        stats["q1"].append(q1)
        stats["q2"].append(q2)
        stats["q3"].append(q3)
        stats["lo"].append(max(v.min(), q1 - 1.5 * iqr))
        stats["hi"].append(min(v.max(), q3 + 1.5 * iqr))
    return stats


def _draw_boxes(fig, stats: dict[str, list]) -> None:
    src = ColumnDataSource(stats)
    fig.segment("g", "lo", "g", "q1", source=src, line_color="#333333")
    fig.segment("g", "q3", "g", "hi", source=src, line_color="#333333")
    fig.vbar("g", 0.6, "q1", "q3", source=src, fill_color="#56B4E9", line_color="#0072B2", fill_alpha=0.8)
    fig.rect("g", "q2", 0.6, 0.0001, source=src, line_color="#000000", line_width=2)


def dataset_groups(data: pd.DataFrame, exposure: str, covariate: str, *, width: int = 460):
    """The covariate in each exposure group: box plots by exposure value (binary exposure) or by exposure
    quintile; for a binary covariate, the share of 1s per group.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.engine.generate import draw
    >>> data = draw(load_preset("common_cause"), 100, seed=1)
    >>> list(dataset_groups(data, "fertiliser", "soil_quality").x_range.factors)
    ['Q1', 'Q2', 'Q3', 'Q4', 'Q5']
    """
    groups, order, x_label = _exposure_groups(data[exposure])
    values = data[covariate].to_numpy(dtype=float)
    binary = _is_binary(data[covariate])
    title = f"Share with {covariate} = 1 in each group" if binary else f"{covariate} in each group"
    fig = figure(
        width=width,
        height=400,
        x_range=order,
        title=title,
        x_axis_label=x_label,
        y_axis_label=(f"share {covariate} = 1" if binary else covariate),
        tools="save",
        toolbar_location=None,
    )
    style_figure(fig)
    if binary:
        shares = [float(values[groups == g].mean()) for g in order]
        fig.vbar(x=order, top=shares, width=0.6, fill_color="#56B4E9", line_color="#0072B2")
        fig.y_range.start = 0
    else:
        _draw_boxes(fig, _box_stats(values, groups, order))
    return fig
