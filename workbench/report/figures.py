"""Bokeh figures of simulation and plan results (no Panel import), for the dashboard and the HTML report.

Every function takes a library result (:class:`~workbench.analysis.simulate.SimulationResult` or
:class:`~workbench.analysis.plan.PlanResult`) and returns a Bokeh figure, a list of figures or a grid.
Nothing here computes a statistic the library already computes; the figures only draw: the estimates and
their model SEs as stacked histograms, the first replicates' confidence intervals ranked by estimate and
coloured by whether they cover the truth, and power, bias and SE against n with +/- 2 Monte Carlo SE bands
(the performance measures of Morris T.P., White I.R., Crowther M.J. (2019). Using simulation studies to
evaluate statistical methods. Statistics in Medicine 38(11):2074-2102).

The causal graph is drawn by :mod:`workbench.report.graph_drawing`, one simulated dataset by
:mod:`workbench.report.dataset_figures`; colours and styling are shared through
:mod:`workbench.report.style`, so one strategy has the same colour in every figure.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.analysis.simulate import simulate
>>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
>>> [type(f).__name__ for f in estimates_figure(result)]
['figure']
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from bokeh.layouts import column as bokeh_column
from bokeh.layouts import gridplot
from bokeh.models import ColumnDataSource, FixedTicker, Legend, LegendItem, Range1d, Span
from bokeh.plotting import figure

from workbench.report.style import (
    FONT,
    fit_to_width,
    legend_above,
    legend_below,
    n_axis,
    scale_of,
    strategy_colours,
    style_figure,
)

__all__ = [
    "truth_groups",
    "estimates_figure",
    "se_figure",
    "interval_figure",
    "power_figure",
    "by_n_figure",
    "separation_figure",
]


# ------------------------------------------------------------------------------------------------------
# Estimates
# ------------------------------------------------------------------------------------------------------
def _ridge(
    values: dict[str, np.ndarray],
    colours: dict[str, str],
    *,
    title: str,
    x_label: str,
    marks: dict[str, float] | None = None,
    mark_label: str = "",
    line: float | None = None,
    line_label: str = "",
    width: int = 540,
    labels: dict[str, str] | None = None,
):
    """Histograms of several samples stacked one row each, on a shared x axis."""
    names = list(values)
    finite = [v[np.isfinite(v)] for v in values.values()]
    pooled = np.concatenate(finite) if finite else np.zeros(1)
    if pooled.size == 0:
        pooled = np.zeros(1)
    lo, hi = np.quantile(pooled, [0.002, 0.998])
    if line is not None and np.isfinite(line):
        lo, hi = min(lo, line), max(hi, line)
    if hi <= lo:
        lo, hi = lo - 0.5, hi + 0.5
    edges = np.linspace(lo, hi, 41)
    pad = 0.04 * (hi - lo)
    fig = figure(
        width=width,
        height=80 + 60 * len(names),
        title=title,
        tools="save",
        toolbar_location=None,
        x_axis_label=x_label,
        y_range=Range1d(-0.15, len(names) + 0.1),
        x_range=Range1d(lo - pad, hi + pad),
    )
    style_figure(fig)
    fit_to_width(fig, width)
    for i, name in enumerate(reversed(names)):
        v = values[name]
        v = v[np.isfinite(v)]
        counts, _ = np.histogram(np.clip(v, lo, hi), bins=edges)
        top = counts / counts.max() * 0.85 if counts.max() > 0 else counts.astype(float)
        fig.quad(
            left=edges[:-1],
            right=edges[1:],
            bottom=i,
            top=i + top,
            fill_color=colours[name],
            fill_alpha=0.55,
            line_color=colours[name],
            line_alpha=0.9,
        )
        if marks and name in marks and marks[name] is not None and np.isfinite(marks[name]):
            fig.segment(
                x0=[marks[name]],
                x1=[marks[name]],
                y0=[i],
                y1=[i + 0.95],
                line_color="#000000",
                line_width=2.5,
            )
    fig.yaxis.ticker = FixedTicker(ticks=[i + 0.35 for i in range(len(names))])
    shown = labels or {}
    fig.yaxis.major_label_overrides = {i + 0.35: shown.get(n, n) for i, n in enumerate(reversed(names))}
    fig.ygrid.visible = False
    items = []
    far = [lo - 10 * (hi - lo)] * 2  # legend samples drawn outside the view
    if line is not None and np.isfinite(line):
        fig.add_layout(
            Span(location=line, dimension="height", line_color="#000000", line_dash="dashed", line_width=2)
        )
        items.append(
            LegendItem(
                label=line_label,
                renderers=[fig.line(far, [0, 0], line_color="#000000", line_dash="dashed", line_width=2)],
            )
        )
    if marks:
        items.append(
            LegendItem(
                label=mark_label, renderers=[fig.line(far, [0, 0], line_color="#000000", line_width=2.5)]
            )
        )
    if items:
        fig.add_layout(
            Legend(
                items=items,
                location="top_left",
                label_text_font_size=FONT,
                orientation="horizontal",
                border_line_color=None,
                padding=2,
                margin=2,
            ),
            "above",
        )
    return fig


def _labels(table: pd.DataFrame) -> dict[str, str]:
    out = {}
    for _, row in table.iterrows():
        valid = row.get("valid")
        out[row["name"]] = f"{row['name']}{'' if valid is None or bool(valid) else ' (invalid)'}"
    return out


def truth_groups(result) -> list[tuple[str, float, list[str]]]:
    """Strategies grouped by the quantity they are scored against: ``(estimand, truth, names)``.

    Strategies on different scales (a risk difference and a log odds ratio) get separate figures.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> truth_groups(result)
    [('total effect (difference in means per unit)', 0.25, ['unadjusted', 'adjust_soil'])]
    """
    table = result.table
    groups: dict[tuple[str, float], list[str]] = {}
    for _, row in table.iterrows():
        truth = float(row["truth"]) if "truth" in row and pd.notna(row["truth"]) else float(result.truth)
        estimand = str(row["estimand"]) if "estimand" in row and pd.notna(row["estimand"]) else "effect"
        scale = (
            scale_of(estimand) if "log " in estimand else estimand
        )  # marginal and conditional ratios together
        key = next(
            (k for k in groups if k[0] == scale and math.isclose(k[1], truth, rel_tol=1e-9, abs_tol=1e-12)),
            (scale, truth),
        )
        groups.setdefault(key, []).append(str(row["name"]))
    return [(scale, truth, names) for (scale, truth), names in groups.items()]


def estimates_figure(result, *, width: int = 540) -> list:
    """Distribution of each strategy's estimates across replicates, with the truth as a dashed line.

    Returns one figure per group of :func:`truth_groups` (usually one).

    Parameters
    ----------
    result : SimulationResult
        Uses ``result.table`` (name, valid, mean, truth, estimand) and ``result.estimates``.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> [f.title.text for f in estimates_figure(result)]
    ['Estimates across replicates']
    """
    table = result.table
    colours = strategy_colours(list(table["name"]))
    est = result.estimates
    means = dict(zip(table["name"], table["mean"], strict=True))
    groups = truth_groups(result)
    figs = []
    for scale, truth, names in groups:
        values = {n: est.loc[est["strategy"] == n, "estimate"].to_numpy(dtype=float) for n in names}
        title = "Estimates across replicates" + (f": {scale}" if len(groups) > 1 else "")
        figs.append(
            _ridge(
                values,
                colours,
                title=title,
                x_label="estimated effect",
                marks=means,
                mark_label="mean estimate",
                line=truth,
                line_label=f"truth {truth:.3g}",
                width=width,
                labels=_labels(table),
            )
        )
    return figs


def se_figure(result, *, width: int = 540) -> list:
    """Distribution of each strategy's model-based SEs, with its empirical SE (SD of the estimates) marked.

    Returns one figure per group of :func:`truth_groups`.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> len(se_figure(result))
    1
    """
    table = result.table
    colours = strategy_colours(list(table["name"]))
    est = result.estimates
    emp = dict(zip(table["name"], table["emp_se"], strict=True))
    groups = truth_groups(result)
    figs = []
    for scale, _truth, names in groups:
        values = {n: est.loc[est["strategy"] == n, "se"].to_numpy(dtype=float) for n in names}
        title = f"Model SEs: {scale}" if len(groups) > 1 else "Model standard errors across replicates"
        figs.append(
            _ridge(
                values,
                colours,
                title=title,
                x_label="model-based SE",
                marks=emp,
                mark_label="empirical SE",
                width=width,
                labels=_labels(table),
            )
        )
    return figs


def interval_figure(result, *, first: int = 100, columns: int = 4, width: int = 1060, grid: bool = True):
    """Ranked confidence intervals of the first ``first`` replicates per strategy, coloured by coverage.

    Each panel sorts the replicates by their estimate; an interval that misses the strategy's truth (dashed)
    is drawn in vermillion, one that covers it in grey. Returns a grid of panels, or with ``grid=False`` the
    list of panels (one per strategy).

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=200, seed=1)
    >>> [f.title.text.split(":")[0] for f in interval_figure(result, grid=False)]
    ['unadjusted (invalid)', 'adjust_soil']
    """
    table = result.table
    est = result.estimates
    est = est[est["replicate"] < est["replicate"].min() + first]
    finite = est[np.isfinite(est["ci_low"]) & np.isfinite(est["ci_high"])]
    cols = max(1, min(columns, len(table)))
    panel_width = max(220, width // cols - 10)
    labels = _labels(table)
    figs = []
    for _scale, truth, names in truth_groups(result):
        rows_all = finite[finite["strategy"].isin(names)]
        lo = float(min(rows_all["ci_low"].min(), truth)) if len(rows_all) else truth - 1
        hi = float(max(rows_all["ci_high"].max(), truth)) if len(rows_all) else truth + 1
        pad = 0.05 * (hi - lo or 1.0)
        x_range = Range1d(lo - pad, hi + pad)
        for name in names:
            rows = rows_all[rows_all["strategy"] == name].sort_values("estimate")
            covers = (rows["ci_low"] <= truth) & (truth <= rows["ci_high"])
            source = ColumnDataSource(
                {
                    "rank": np.arange(1, len(rows) + 1),
                    "low": rows["ci_low"].to_numpy(),
                    "high": rows["ci_high"].to_numpy(),
                    "estimate": rows["estimate"].to_numpy(),
                    "colour": np.where(covers, "#999999", "#D55E00"),
                }
            )
            title = f"{labels[name]}: {int(covers.sum())}/{len(rows)} cover" if len(rows) else labels[name]
            fig = figure(
                width=panel_width,
                height=280,
                x_range=x_range,
                tools="save",
                toolbar_location=None,
                title=title,
                x_axis_label="confidence interval",
                y_axis_label="replicate (ranked)",
            )
            style_figure(fig)
            fig.title.text_font_size = "11px"
            fig.segment(
                x0="low", x1="high", y0="rank", y1="rank", line_color="colour", line_width=1.6, source=source
            )
            fig.scatter("estimate", "rank", size=2.5, color="#000000", source=source)
            fig.add_layout(
                Span(
                    location=truth,
                    dimension="height",
                    line_color="#000000",
                    line_dash="dashed",
                    line_width=1.5,
                )
            )
            fig.ygrid.visible = False
            figs.append(fig)
    return gridplot(figs, ncols=cols, toolbar_location=None) if grid else figs


# ------------------------------------------------------------------------------------------------------
# Sample size
# ------------------------------------------------------------------------------------------------------
def _invalid_strategies(smallest: pd.DataFrame) -> set[str]:
    """The strategies a plan's smallest-n table marks invalid (they detect a biased quantity)."""
    if "valid" not in smallest:
        return set()
    return {r["strategy"] for _, r in smallest.iterrows() if r["valid"] is not None and not bool(r["valid"])}


def _power_curve(fig, rows: pd.DataFrame, colour: str, *, invalid: bool) -> list:
    """One strategy's power against n: a +/- 2 MCSE band, the simulated line and points (dot-dashed when
    the strategy is invalid) and the analytic approximation dashed. Returns the renderers for its legend."""
    n = rows["n"].to_numpy(dtype=float)
    power = rows["power"].to_numpy(dtype=float)
    mcse = rows["power_mcse"].to_numpy(dtype=float) if "power_mcse" in rows else np.zeros_like(power)
    fig.varea(
        x=n,
        y1=np.clip(power - 2 * mcse, 0, 1),
        y2=np.clip(power + 2 * mcse, 0, 1),
        fill_color=colour,
        fill_alpha=0.18,
    )
    line = fig.line(n, power, line_color=colour, line_width=2.2, line_dash="dotdash" if invalid else "solid")
    renderers = [line, fig.scatter(n, power, color=colour, size=6)]
    if "analytic_power" in rows and rows["analytic_power"].notna().any():
        renderers.append(
            fig.line(
                n,
                rows["analytic_power"].to_numpy(dtype=float),
                line_color=colour,
                line_width=1.5,
                line_dash="dashed",
            )
        )
    return renderers


def _mark_smallest_n(fig, smallest: pd.DataFrame, name: str, colour: str, target_power: float) -> None:
    """A triangle at the smallest n that reaches the target power, when the plan found one."""
    found = smallest[smallest["strategy"] == name]
    if len(found) and pd.notna(found["n_for_power"].iloc[0]):
        fig.scatter(
            [float(found["n_for_power"].iloc[0])],
            [target_power],
            marker="inverted_triangle",
            size=13,
            fill_color=colour,
            line_color="#000000",
        )


def _target_items(fig, table: pd.DataFrame, target_power: float) -> list[LegendItem]:
    """The target line and the legend entries explaining it and the dashed analytic curves (their samples
    drawn below the fixed y range)."""
    fig.add_layout(
        Span(
            location=target_power, dimension="width", line_color="#000000", line_dash="dotted", line_width=1.5
        )
    )
    hidden_x = [float(table["n"].min())] * 2
    hidden_y = [-5.0, -5.0]
    items = [
        LegendItem(
            label=f"target power {target_power:g}; ▼ smallest n",
            renderers=[fig.line(hidden_x, hidden_y, line_color="#000000", line_dash="dotted")],
        )
    ]
    if "analytic_power" in table and table["analytic_power"].notna().any():  # only when one is drawn
        items.append(
            LegendItem(
                label="analytic approximation (dashed)",
                renderers=[fig.line(hidden_x, hidden_y, line_color="#555555", line_dash="dashed")],
            )
        )
    return items


def power_figure(plan_result, *, target_power: float, width: int = 700):
    """Power against n per strategy, with +/- 2 MCSE bands, the analytic curve dashed, the target line and
    the smallest n reaching it marked.

    Parameters
    ----------
    plan_result : PlanResult
        Uses ``.table`` (n, strategy, power, power_mcse, analytic_power) and ``.smallest_n``.
    target_power : float

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("common_cause"), sample_sizes=[50, 100], replicates=200, seed=1)
    >>> power_figure(planned, target_power=0.8).title.text
    'Power to detect the effect'
    """
    table = plan_result.table
    smallest = plan_result.smallest_n
    names = list(dict.fromkeys(table["strategy"]))
    colours = strategy_colours(names)
    fig = figure(
        width=width,
        height=380,
        title="Power to detect the effect",
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label="power",
        y_range=Range1d(0, 1.04),
        tools="save,reset",
        toolbar_location=None,
    )
    style_figure(fig)
    items = []
    invalid = _invalid_strategies(smallest)
    for name in names:
        rows = table[table["strategy"] == name].sort_values("n")
        renderers = _power_curve(fig, rows, colours[name], invalid=name in invalid)
        label = name + (" (invalid: detects a biased quantity)" if name in invalid else "")
        items.append(LegendItem(label=label, renderers=renderers))
        if len(smallest):
            _mark_smallest_n(fig, smallest, name, colours[name], target_power)
    items += _target_items(fig, table, target_power)
    fit_to_width(fig, width)
    fig.height = 380 + 18 * math.ceil(len(items) / 2)  # room for the legend below, as it wraps
    legend_below(fig, items)  # below and wrapped: many strategies never run over the plot or each other
    n_axis(fig, table["n"])
    return fig


def by_n_figure(
    plan_result, column: str, *, title: str, y_label: str, width: int = 520, zero_line: bool = False
):
    """One performance measure (``bias``, ``emp_se``, ...) against n, one line per strategy; strategies on
    different scales (risk difference, log odds ratio: :func:`workbench.report.style.scale_of`) get one panel
    each, stacked in a Bokeh ``column``, so no axis mixes two scales.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("common_cause"), sample_sizes=[50, 100], replicates=200, seed=1)
    >>> by_n_figure(planned, "emp_se", title="Empirical SE", y_label="SE").title.text
    'Empirical SE'
    """
    table = plan_result.table
    names = list(dict.fromkeys(table["strategy"]))
    colours = strategy_colours(names)
    smallest = plan_result.smallest_n
    scales: dict[str, list[str]] = {}
    estimands = (
        dict(zip(smallest["strategy"], smallest["estimand"], strict=True)) if "estimand" in smallest else {}
    )
    for name in names:
        scales.setdefault(scale_of(estimands.get(name, "")), []).append(name)
    panels = [
        _by_n_panel(
            table,
            group,
            colours,
            column,
            title=title + (f": {scale}" if len(scales) > 1 else ""),
            y_label=y_label,
            width=width,
            zero_line=zero_line,
        )
        for scale, group in scales.items()
    ]
    return (
        panels[0] if len(panels) == 1 else bokeh_column(*panels, sizing_mode="stretch_width", max_width=width)
    )


def _by_n_panel(table, names, colours, column, *, title, y_label, width, zero_line):
    """One panel of :func:`by_n_figure`: the strategies ``names``, all on one scale."""
    table = table[table["strategy"].isin(names)]
    fig = figure(
        width=width,
        height=300,
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
        n = rows["n"].to_numpy(dtype=float)
        y = rows[column].to_numpy(dtype=float)
        mcse_col = f"{column}_mcse"
        renderers = [
            fig.line(n, y, line_color=colours[name], line_width=2),
            fig.scatter(n, y, color=colours[name], size=5),
        ]
        if mcse_col in rows:
            m = rows[mcse_col].to_numpy(dtype=float)
            renderers.append(
                fig.varea(x=n, y1=y - 2 * m, y2=y + 2 * m, fill_color=colours[name], fill_alpha=0.15)
            )
        items.append(LegendItem(label=name, renderers=renderers))
    if zero_line:
        fig.add_layout(Span(location=0, dimension="width", line_color="#000000", line_dash="dotted"))
    fit_to_width(fig, width)
    legend_above(fig, items)
    n_axis(fig, table["n"])
    return fig


def separation_figure(
    also_table: pd.DataFrame, table: pd.DataFrame | None = None, *, width: int = 530, grid: bool = True
):
    """For ``question.also``: whether n units can tell two effects apart.

    Left: power against n for each further effect (solid) beside the exposure's own power under the same
    strategy (dashed). Right: the correlation between the two estimates across replicates (a strong
    correlation means the data cannot separate the two effects well). With ``grid=False`` the two figures
    are returned as a list (a page that lays them out itself draws them more reliably than a grid).

    Parameters
    ----------
    also_table : DataFrame
        ``PlanResult.also_table`` (n, strategy, variable, power, correlation, ...).
    table : DataFrame, optional
        ``PlanResult.table``, for the exposure's power.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.plan import plan
    >>> planned = plan(load_preset("two_exposures"), sample_sizes=[100, 200], replicates=200, seed=1)
    >>> type(separation_figure(planned.also_table, planned.table)).__name__
    'GridPlot'
    """
    strategies = list(dict.fromkeys(also_table["strategy"]))
    colours = strategy_colours(list(dict.fromkeys(table["strategy"])) if table is not None else strategies)
    power = figure(
        width=width,
        height=320,
        title="Power: further effect (solid) and exposure (dashed)",
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label="power",
        y_range=Range1d(0, 1.04),
        tools="save",
        toolbar_location=None,
    )
    corr = figure(
        width=width,
        height=320,
        title="Correlation of the two estimates across replicates",
        x_axis_type="log",
        x_axis_label="sample size n",
        y_axis_label="correlation",
        y_range=Range1d(-1.04, 1.04),
        tools="save",
        toolbar_location=None,
    )
    for fig in (power, corr):
        style_figure(fig)
    power_items, corr_items = [], []
    for (strategy, variable), rows in also_table.groupby(["strategy", "variable"], sort=False):
        rows = rows.sort_values("n")
        n = rows["n"].to_numpy(float)
        colour = colours.get(strategy, "#999999")
        label = f"{variable} under {strategy}"
        rs = [
            power.line(n, rows["power"].to_numpy(float), line_color=colour, line_width=2),
            power.scatter(n, rows["power"].to_numpy(float), color=colour, size=5),
        ]
        if table is not None:
            own = table[table["strategy"] == strategy].sort_values("n")
            rs.append(
                power.line(
                    own["n"].to_numpy(float),
                    own["power"].to_numpy(float),
                    line_color=colour,
                    line_width=1.5,
                    line_dash="dashed",
                )
            )
        power_items.append(LegendItem(label=label, renderers=rs))
        corr_items.append(
            LegendItem(
                label=label,
                renderers=[
                    corr.line(n, rows["correlation"].to_numpy(float), line_color=colour, line_width=2),
                    corr.scatter(n, rows["correlation"].to_numpy(float), color=colour, size=5),
                ],
            )
        )
    corr.add_layout(Span(location=0, dimension="width", line_color="#000000", line_dash="dotted"))
    legend_above(power, power_items)
    legend_above(corr, corr_items)
    for fig in (power, corr):
        n_axis(fig, also_table["n"])
    if not grid:
        return [power, corr]
    return gridplot([power, corr], ncols=2, toolbar_location=None)
