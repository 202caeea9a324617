"""The graph drawing's reading aids: arrow width by standardized size, a legend that fits the figure, labels
on faded arrows still readable. Design rules of the project (common practice, no source), checked on the
figure's Bokeh models; the standardized sizes themselves come from Wright's path rules (Wright 1934)."""

from __future__ import annotations

import math

import pytest
from bokeh.models import Arrow, Legend

from workbench import load_preset
from workbench.graph import judge
from workbench.graph.roles import find_roles
from workbench.report.graph_drawing import graph_figure


def _arrow_source(fig):
    return next(r for r in fig.center + fig.renderers if isinstance(r, Arrow)).source.data


def test_arrow_width_grows_with_the_standardized_size():
    """common_cause: standardized sizes 0.5145 (soil -> fertiliser), 0.4103, 0.2392 (0.6/sqrt(1.36) etc.)."""
    fig = graph_figure(load_preset("common_cause"))
    widths = _arrow_source(fig)["width"]
    sd_fertiliser, sd_yield = math.sqrt(1.36), math.sqrt(1.485)  # implied variances of the preset
    expected = [0.6 / sd_fertiliser, 0.5 / sd_yield, 0.25 * sd_fertiliser / sd_yield]
    assert widths == pytest.approx([1.2 + 3 * b for b in expected], abs=1e-9)


def test_open_paths_are_dashed_and_thicker_blocked_ones_faded_but_labelled():
    sc = load_preset("common_cause")
    fig = graph_figure(sc, find_roles(sc), judge(sc, []))
    data = _arrow_source(fig)
    assert set(data["dash"]) == {"dashed"}  # unadjusted: every arrow lies on an open path
    fig = graph_figure(sc, find_roles(sc), judge(sc, ["soil_quality"]), adjust=["soil_quality"])
    data = _arrow_source(fig)
    blocked = [i for i, dash in enumerate(data["dash"]) if dash == "solid"]
    assert blocked and all(data["alpha"][i] < 1 for i in blocked)
    labels = next(r for r in fig.renderers if "text" in r.data_source.data and "alpha" in r.data_source.data)
    assert min(labels.data_source.data["alpha"]) >= 0.7


@pytest.mark.parametrize("preset", ["larger_graph", "selection_by_significance", "binary_outcome"])
def test_the_legend_rows_fit_the_figure_width(preset):
    """About 6.5 px a character at the figure's font plus glyph and spacing: the widest row fits."""
    sc = load_preset(preset)
    fig = graph_figure(sc, find_roles(sc), judge(sc, []), width=600)
    legend = next(item for item in fig.below if isinstance(item, Legend))
    longest = max(len(str(item.label.value)) for item in legend.items)
    assert legend.ncols * (38 + 6.5 * longest) <= 600
