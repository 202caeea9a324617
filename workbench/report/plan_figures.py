"""Bokeh figures of a plan's joint power and precision against n (no Panel import): the two-effects and precision views.

:func:`joint_power_figure` draws the power to detect the exposure's and every ``also`` effect in the same
study (``power_all`` of the plan's table) with the target line and the smallest n for it marked;
:func:`precision_figure` draws the mean confidence-interval half-width against n with the target half-width
line and the smallest n reaching it marked.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from bokeh.models import LegendItem, Span
from bokeh.plotting import figure

from workbench.report.style import fit_to_width, legend_below, n_axis, strategy_colours, style_figure

__all__ = ["joint_power_figure", "precision_figure"]


def _curves(plan_result, column: str, mcse: str | None, *, title: str, y_label: str, width: int, marks: dict):
    """One line per strategy of ``column`` against n (a +/- 2 MCSE band where ``mcse`` is given), a triangle
    at each strategy's smallest n (``marks``: name -> (n, y)); strategies whose column is all NaN are left
    out. Returns the figure and its legend items."""
    table = plan_result.table
    names = [
        s for s in dict.fromkeys(table["strategy"]) if table.loc[table["strategy"] == s, column].notna().any()
    ]
    colours = strategy_colours(list(dict.fromkeys(table["strategy"])))
    fig = figure(
        width=width,
        height=360,
        title=title,
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label=y_label,
        tools="save,reset",
        toolbar_location=None,
    )
    style_figure(fig)
    items = []
    for name in names:
        rows = table[table["strategy"] == name].sort_values("n")
        n, y = rows["n"].to_numpy(dtype=float), rows[column].to_numpy(dtype=float)
        if mcse is not None:
            band = 2 * rows[mcse].to_numpy(dtype=float)
            fig.varea(
                x=n,
                y1=np.clip(y - band, 0, 1),
                y2=np.clip(y + band, 0, 1),
                fill_color=colours[name],
                fill_alpha=0.18,
            )
        renderers = [
            fig.line(n, y, line_color=colours[name], line_width=2.2),
            fig.scatter(n, y, color=colours[name], size=6),
        ]
        items.append(LegendItem(label=name, renderers=renderers))
        if name in marks and marks[name][0] is not None:
            fig.scatter(
                [float(marks[name][0])],
                [marks[name][1]],
                marker="inverted_triangle",
                size=13,
                fill_color=colours[name],
                line_color="#000000",
            )
    return fig, items


def _finish(fig, items, table, width: int, target: float | None, label: str):
    if target is not None:
        fig.add_layout(
            Span(location=target, dimension="width", line_color="#000000", line_dash="dotted", line_width=1.5)
        )
        hidden = fig.line(
            [float(table["n"].min())] * 2, [math.nan] * 2, line_color="#000000", line_dash="dotted"
        )
        items.append(LegendItem(label=label, renderers=[hidden]))
    fit_to_width(fig, width)
    fig.height = 360 + 18 * math.ceil(max(len(items), 1) / 2)
    if items:
        legend_below(fig, items)
    n_axis(fig, table["n"])
    return fig


def _size(frame: pd.DataFrame, name: str, column: str):
    found = frame[frame["strategy"] == name]
    return None if not len(found) or pd.isna(found[column].iloc[0]) else int(found[column].iloc[0])


def joint_power_figure(plan_result, *, width: int = 700):
    """Power to detect the exposure's and every ``also`` effect in the same study (``power_all``) against n,
    with +/- 2 MCSE bands, the target line and the smallest n for it (``n_for_joint_power``) marked.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("two_exposures"), sample_sizes=[100, 400], replicates=200, seed=1)
    >>> joint_power_figure(planned).title.text
    'Power to detect every effect in the same study'
    """
    target = plan_result.target_power
    all_n = plan_result.n_for_all_effects
    marks = {s: (_size(all_n, s, "n_for_joint_power"), target) for s in all_n["strategy"]}
    fig, items = _curves(
        plan_result,
        "power_all",
        "power_all_mcse",
        title="Power to detect every effect in the same study",
        y_label="joint power",
        width=width,
        marks=marks,
    )
    fig.y_range.start, fig.y_range.end = 0, 1.04
    return _finish(fig, items, plan_result.table, width, target, f"target power {target:g}; ▼ smallest n")


def precision_figure(plan_result, *, width: int = 700):
    """Mean CI half-width against n per strategy, with the target half-width line and the smallest n reaching
    it (``n_for_halfwidth``) marked when the plan has a target.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("common_cause"), sample_sizes=[50, 200], replicates=200, seed=1,
    ...                target_halfwidth=0.2)
    >>> precision_figure(planned).title.text
    'Precision: confidence-interval half-width against n'
    """
    target = plan_result.target_halfwidth
    smallest = plan_result.smallest_n
    marks = (
        {s: (_size(smallest, s, "n_for_halfwidth"), target) for s in smallest["strategy"]} if target else {}
    )
    fig, items = _curves(
        plan_result,
        "mean_ci_halfwidth",
        None,
        title="Precision: confidence-interval half-width against n",
        y_label="mean CI half-width",
        width=width,
        marks=marks,
    )
    return _finish(
        fig,
        items,
        plan_result.table,
        width,
        target,
        f"target half-width {target:g}; ▼ smallest n" if target else "",
    )
