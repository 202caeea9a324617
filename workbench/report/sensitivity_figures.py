"""Bokeh figures of a sensitivity analysis (no Panel import): the adjusted estimate over the strengths of U.

:func:`sensitivity_figure` draws the contour plot of Cinelli & Hazlett (2020): the adjusted estimate (or, after
a simulation, coverage or power) over the grid of U's partial R^2 with the exposure (x axis) and with the
outcome (y axis), filled contours with labelled levels, the zero-effect line (where U would explain the
effect away, drawn from the closed form), the robustness value on the diagonal, and the observed covariates
as benchmarks: each covariate's own partial R^2 (open circle) and the bounds on a U 1, 2 and 3 times as strong
(filled, labelled ``1x soil_quality``).

References
----------
1. Cinelli C., Hazlett C. (2020). Making sense of sensitivity: extending omitted variable bias. JRSS-B
   82(1):39-67, Figures 2-4 (contour plots with benchmark bounds).
"""

from __future__ import annotations

import numpy as np
from bokeh.models import ColumnDataSource, HoverTool, Label, LabelSet, Range1d
from bokeh.palettes import interp_palette
from bokeh.plotting import figure

from workbench.formatting.markup import text_html
from workbench.formatting.tables import Table, render_html
from workbench.report.style import FONT, style_figure

__all__ = ["sensitivity_figure", "sensitivity_section", "sensitivity_figures", "zero_line", "VALUES"]

VALUES = {
    "estimate": "adjusted estimate",
    "bias": "|bias| from U",
    "coverage": "coverage of the truth (simulated)",
    "power": "power (simulated)",
}
"""The table columns the figure can draw, with their titles."""

_LOW, _MID, _HIGH = "#0072B2", "#f7f7f7", "#D55E00"  # Okabe-Ito blue and vermilion around a pale middle


def zero_line(estimate: float, se_factor: float, r2_exposure: np.ndarray) -> np.ndarray:
    """Where the adjusted estimate is zero: ``r2_outcome = estimate^2 (1 - r2_exposure) / (r2_exposure
    se_factor^2)`` (solving Cinelli & Hazlett's bias formula for the outcome strength); NaN above 1.

    Examples
    --------
    >>> [round(float(v), 3) for v in zero_line(0.25, 1.0, np.array([0.1, 0.5]))]
    [0.562, 0.062]
    """
    r2_exposure = np.asarray(r2_exposure, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        r2_outcome = estimate**2 * (1 - r2_exposure) / (r2_exposure * se_factor**2)
    return np.where((r2_outcome <= 1) & (r2_exposure > 0), r2_outcome, np.nan)


def _levels(z: np.ndarray, value: str) -> np.ndarray:
    finite = z[np.isfinite(z)]
    if value in ("coverage", "power"):
        return np.linspace(0.0, 1.0, 11)
    if value == "estimate":  # symmetric around zero, so that zero is a level and the colours diverge there
        top = float(np.abs(finite).max()) or 1e-6
        return np.linspace(-top, top, 11)
    low, high = float(finite.min()), float(finite.max())
    if high - low < 1e-12:
        high = low + 1e-6
    return np.linspace(low, high, 11)


def _benchmarks(fig, result) -> None:
    b = result.benchmarks
    if not len(b):
        return
    own = b.drop_duplicates("covariate")
    fig.scatter(
        own["r2_exposure_covariate"],
        own["r2_outcome_covariate"],
        size=9,
        marker="circle",
        fill_color=None,
        line_color="#000000",
        line_width=1.5,
        legend_label="observed covariate (its own partial R2)",
    )
    bounds = b.dropna(subset=["r2_exposure", "r2_outcome"])
    source = ColumnDataSource(
        {
            "x": bounds["r2_exposure"].to_numpy(float),
            "y": bounds["r2_outcome"].to_numpy(float),
            "label": [f"{k:g}x {c}" for k, c in zip(bounds["k"], bounds["covariate"], strict=True)],
            "estimate": bounds["estimate"].to_numpy(float),
        }
    )
    fig.scatter(
        "x",
        "y",
        source=source,
        size=9,
        marker="triangle",
        color="#000000",
        legend_label="U k times as strong as a covariate (bound)",
    )
    fig.add_layout(
        LabelSet(x="x", y="y", text="label", source=source, x_offset=6, y_offset=4, text_font_size=FONT)
    )


def sensitivity_figure(result, *, value: str = "estimate", width: int = 620, height: int = 560):
    """The contour plot of ``value`` over the grid of U's partial R^2 (module notes).

    Parameters
    ----------
    result : SensitivityResult
    value : {"estimate", "bias", "coverage", "power"}
        A column of ``result.table``; coverage and power only after a simulation.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.sensitivity import sensitivity
    >>> fig = sensitivity_figure(sensitivity(load_preset("common_cause"), grid=5))
    >>> fig.title.text
    "Adjusted estimate of 'adjust_soil' if an unmeasured confounder U existed"
    """
    if value not in VALUES or value not in result.table.columns:
        raise ValueError(f"value must be one of the table's columns {sorted(VALUES)}, got {value!r}")
    t = result.table
    xs = np.unique(t["r2_exposure"].to_numpy(float))
    ys = np.unique(t["r2_outcome"].to_numpy(float))
    z = t.pivot_table(index="r2_outcome", columns="r2_exposure", values=value).reindex(index=ys, columns=xs)
    z = z.to_numpy(float)
    what = "Adjusted estimate" if value == "estimate" else VALUES[value].capitalize()
    fig = figure(
        width=width,
        height=height,
        title=f"{what} of '{result.strategy}' if an unmeasured confounder U existed",
        x_axis_label=f"partial R2 of U with the exposure {result.exposure} (given the covariates)",
        y_axis_label=f"partial R2 of U with the outcome {result.outcome}",
        x_range=Range1d(0, float(xs.max()) * 1.02 or 1),
        y_range=Range1d(0, float(ys.max()) * 1.02 or 1),
        tools="save,reset",
        toolbar_location=None,
    )
    style_figure(fig)
    if len(xs) >= 2 and len(ys) >= 2:
        levels = _levels(z, value)
        palette = interp_palette((_LOW, _MID, _HIGH), len(levels) - 1)
        grid_x, grid_y = np.meshgrid(xs, ys)
        contours = fig.contour(
            grid_x,
            grid_y,
            z,
            levels,
            fill_color=palette,
            fill_alpha=0.75,
            line_color="#555555",
            line_alpha=0.5,
        )
        colorbar = contours.construct_color_bar(title=VALUES[value], title_text_font_size=FONT)
        fig.add_layout(colorbar, "right")
    if value == "estimate":
        line_x = np.linspace(max(float(xs.max()), 1e-6) / 400, float(xs.max()), 200)
        fig.line(
            line_x,
            zero_line(result.large_sample_estimate, result.se_factor, line_x),
            line_color="#D55E00",
            line_width=3,
            line_dash="dashed",
            legend_label="zero effect: U explains the effect away",
        )
    rv = result.robustness_value
    if rv <= min(xs.max(), ys.max()):
        fig.scatter(
            [rv], [rv], size=10, marker="diamond", color="#009E73", legend_label=f"robustness value {rv:.3f}"
        )
    _benchmarks(fig, result)
    fig.add_tools(HoverTool(tooltips=[("R2 exposure", "$x{0.000}"), ("R2 outcome", "$y{0.000}")]))
    legend = fig.legend[0]
    legend.label_text_font_size = FONT
    legend.border_line_color = None
    legend.spacing = 0
    fig.add_layout(legend, "below")
    fig.add_layout(
        Label(
            x=6,
            y=6,
            x_units="screen",
            y_units="screen",
            text_font_size="10px",
            text_color="#444444",
            text="Under the assumed graph; not evidence that no confounder exists.",
        )
    )
    return fig


def sensitivity_figures(result, *, width: int = 620) -> list:
    """The adjusted-estimate contour plot, and after a simulation the coverage and power maps."""
    values = ["estimate"] + [v for v in ("coverage", "power") if v in result.table.columns]
    return [sensitivity_figure(result, value=v, width=width) for v in values]


def sensitivity_section(result) -> str:
    """The report's section on an unmeasured confounder: the findings, the figures (with their own Bokeh
    script; the page's BokehJS renders them) and the benchmarks table. Every piece of text is escaped.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.sensitivity import sensitivity
    >>> html = sensitivity_section(sensitivity(load_preset("common_cause"), grid=5))
    >>> html.startswith('<section id="sensitivity">'), "not evidence that none exists" in html
    (True, True)
    """
    from bokeh.layouts import row

    from workbench.report.embed import standalone_components

    script, div = standalone_components(row(*sensitivity_figures(result)))
    lines = "<br>".join(text_html(line) for line in result.summary_lines())
    tables = [part for part in result.parts() if isinstance(part, Table)]
    benchmarks = "".join(render_html([t]) for t in tables if t.title.startswith("Benchmarks"))
    grids = "".join(render_html([t]) for t in tables if not t.title.startswith("Benchmarks"))
    return (
        '<section id="sensitivity"><h2>Sensitivity to an unmeasured confounder</h2>'
        f'<p class="meta">{lines}</p>{script}{div}{benchmarks}'
        f"<details><summary>The grid as tables</summary>{grids}</details></section>"
    )
