"""Bokeh figures of a sweep (no Panel import): a measure against one parameter per strategy, a heat map over two.

The line plot draws each strategy's measure with a band of +-2 Monte Carlo SEs; the heat map colours one
strategy's measure over two parameters and shows the value and its MCSE on hover.
:func:`write_sweep_report` writes a standalone HTML page (Bokeh's scripts inline, no network).

Examples
--------
>>> from workbench import load_preset, sweep
>>> res = sweep(load_preset("common_cause"), {"study.n": [100, 200]}, replicates=50, workers=1)
>>> type(sweep_figure(res, "bias")).__name__
'figure'
"""

from __future__ import annotations

import numpy as np
from bokeh.models import ColorBar, ColumnDataSource, HoverTool, LinearColorMapper
from bokeh.plotting import figure

from workbench.analysis.sweep_result import SweepResult
from workbench.scenario.write import write_text_atomically

__all__ = ["line_figure", "heatmap_figure", "sweep_figure", "write_sweep_report"]

_PALETTE = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#F0E442", "#000000")
"""Okabe & Ito (2008) colour-blind-safe colours."""


def _rows(result: SweepResult, measure: str):
    rows = result.table[result.table["measure"] == measure]
    if rows.empty:
        raise ValueError(f"no measure {measure!r} in the sweep")
    return rows


def line_figure(result: SweepResult, measure: str, parameter: str | None = None):
    """``measure`` against ``parameter`` (default: the first), one line per strategy, +-2 MCSE bands; other
    parameters are held at their first value."""
    parameter = parameter or result.parameters[0]
    rows = _rows(result, measure)
    for other in result.parameters:
        if other != parameter:
            rows = rows[rows[other] == rows[other].iloc[0]]
    fig = figure(
        width=640,
        height=360,
        title=f"{measure} against {parameter}",
        x_axis_label=parameter,
        y_axis_label=measure,
        toolbar_location="right",
    )
    for i, (name, part) in enumerate(rows.groupby("strategy", sort=False)):
        part = part.sort_values(parameter)
        mcse = np.nan_to_num(part["mcse"].to_numpy(dtype=float))
        source = ColumnDataSource(
            {
                "x": part[parameter].to_numpy(dtype=float),
                "y": part["value"].to_numpy(),
                "low": part["value"].to_numpy() - 2 * mcse,
                "high": part["value"].to_numpy() + 2 * mcse,
                "mcse": mcse,
            }
        )
        colour = _PALETTE[i % len(_PALETTE)]
        fig.varea(x="x", y1="low", y2="high", source=source, fill_color=colour, fill_alpha=0.2)
        fig.line(x="x", y="y", source=source, color=colour, line_width=2, legend_label=str(name))
        fig.scatter(x="x", y="y", source=source, color=colour, size=6)
    fig.add_tools(HoverTool(tooltips=[(parameter, "@x"), (measure, "@y"), ("Monte Carlo SE", "@mcse")]))
    fig.legend.location = "top_left"
    return fig


def heatmap_figure(result: SweepResult, measure: str, strategy: str | None = None, x=None, y=None):
    """One strategy's ``measure`` over two parameters (default: the first two), value and MCSE on hover."""
    x = x or result.parameters[0]
    y = y or result.parameters[1]
    rows = _rows(result, measure)
    strategy = strategy or rows["strategy"].iloc[0]
    rows = rows[rows["strategy"] == strategy]
    xs = [f"{v:g}" for v in sorted(rows[x].unique())]
    ys = [f"{v:g}" for v in sorted(rows[y].unique())]
    source = ColumnDataSource(
        {
            "x": [f"{v:g}" for v in rows[x]],
            "y": [f"{v:g}" for v in rows[y]],
            "value": rows["value"].to_numpy(),
            "mcse": rows["mcse"].to_numpy(),
        }
    )
    mapper = LinearColorMapper(
        palette="Viridis256",
        low=float(np.nanmin(source.data["value"])),
        high=float(np.nanmax(source.data["value"])),
    )
    fig = figure(
        width=560,
        height=440,
        x_range=xs,
        y_range=ys,
        x_axis_label=x,
        y_axis_label=y,
        title=f"{measure} of {strategy}",
        toolbar_location="right",
    )
    fig.rect(
        x="x",
        y="y",
        width=1,
        height=1,
        source=source,
        fill_color={"field": "value", "transform": mapper},
        line_color=None,
    )
    fig.add_layout(ColorBar(color_mapper=mapper, title=measure), "right")
    fig.add_tools(
        HoverTool(tooltips=[(x, "@x"), (y, "@y"), (measure, "@value"), ("Monte Carlo SE", "@mcse")])
    )
    return fig


def sweep_figure(result: SweepResult, measure: str = "bias"):
    """The line plot for one parameter, the heat map of the first strategy for two or more."""
    if len(result.parameters) >= 2:
        return heatmap_figure(result, measure)
    return line_figure(result, measure)


def write_sweep_report(result: SweepResult, path, measures=("bias", "coverage", "power")) -> None:
    """A standalone HTML page: the sweep's figures for ``measures`` and its table (no network needed)."""
    from bokeh.layouts import column
    from bokeh.models import Div

    from workbench.report.embed import standalone_page

    figures = [Div(text=result.as_html(), width=900)]
    for m in measures:
        figures.append(line_figure(result, m))
        if len(result.parameters) >= 2:
            figures.append(heatmap_figure(result, m))
    html = standalone_page(column(*figures), title=f"Sweep: {result.scenario.title}")
    write_text_atomically(path, html)
