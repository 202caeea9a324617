"""The one-page stakeholder summary, the graph pictures and the figures' layout rules (legends that wrap,
one scale per axis, no legend entry for a curve not drawn)."""

from __future__ import annotations

import io
import re
import xml.etree.ElementTree as ET

import pytest

import workbench as wb
from workbench.cli import main
from workbench.report.graph_image import graph_png, graph_svg
from workbench.report.style import legend_columns
from workbench.report.summary import build_summary, headline


@pytest.fixture(scope="module")
def mediator_run():
    scenario = wb.load_preset("mediator")
    return scenario, wb.simulate(scenario, replicates=2000, seed=5)


def _visible_text(html: str) -> str:
    html = re.sub(r"<style>.*?</style>", " ", html, flags=re.S)
    return re.sub(r"<[^>]+>", " ", html)


def test_the_mediator_headline_quotes_the_share_of_the_effect_missed(mediator_run):
    """Path algebra (Wright 1934): the total effect is 0.5 + 0.4 x 2.0 = 1.3 and adjusting for the mediator
    leaves the direct 0.5, so the adjusted analysis misses (1.3 - 0.5) / 1.3 = 61.5% of it; the headline's
    figure is within 3 Monte Carlo SEs of that."""
    scenario, result = mediator_run
    page = build_summary(scenario, result)
    found = re.search(
        r"adjust_skill</b>: Adjusting for skill answers a different question[^:]*: it misses (\d+)%", page
    )
    assert found, "no headline for the mediator strategy"
    row = result.table.set_index("name").loc["adjust_skill"]
    mcse_points = 100 * row["bias_mcse"] / 1.3
    assert abs(int(found.group(1)) - 61.5) <= 3 * mcse_points + 0.5
    assert "unadjusted</b>: Leaving every other variable out gets the training effect right" in page


def test_the_summary_has_no_formula_and_no_request(mediator_run):
    """A stakeholder page: no notation (no '=' or set notation in the text), no link or script to load."""
    scenario, result = mediator_run
    page = build_summary(scenario, result)
    text = _visible_text(page)
    assert "=" not in text and "pa(" not in text and "forb" not in text
    assert "<script" not in page and "<link" not in page
    assert not re.findall(r"https?://(?!www\.w3\.org/2000/svg)", page)
    assert "The graph is an assumption, not a finding." in page


def test_headline_words_for_each_kind_of_error():
    """Common practice, no source: bias in percent of the size of the truth (Morris et al. 2019, Table 6,
    relative bias), said as missed, overstated or reversed."""
    row = {"adjust": ["a"], "valid": False, "truth": 2.0, "coverage": 0.5}
    assert "overstates the x effect by 25%" in headline({**row, "mean": 2.5}, "it is biased", "x")
    assert "misses 40% of the x effect" in headline({**row, "mean": 1.2}, "it is biased", "x")
    assert "reverses the direction" in headline({**row, "mean": -0.4}, "it is biased", "x")
    assert headline({**row, "truth": -2.0, "mean": -2.5}, "it is biased", "x").endswith("by 25%.")


def test_the_graph_picture_as_svg_and_png():
    """The SVG parses as XML with one marker and one title per variable; the PNG decodes (Pillow) at twice
    the size asked, for sharp slides."""
    from PIL import Image

    scenario = wb.load_preset("larger_graph")
    root = ET.fromstring(graph_svg(scenario, width=700, height=380))
    titles = [t.text for t in root.iter("{http://www.w3.org/2000/svg}title")]
    assert sorted(titles) == sorted(scenario.names)
    texts = " ".join(t.text or "" for t in root.iter("{http://www.w3.org/2000/svg}text"))
    assert "UNMEASURED" in texts.upper() and "EXPOSURE" in texts and "OUTCOME" in texts
    image = Image.open(io.BytesIO(graph_png(scenario, width=700, height=380)))
    assert image.size == (1400, 760) and image.format == "PNG"


def test_report_command_writes_the_summary(tmp_path, capsys):
    target = tmp_path / "summary.html"
    assert main(["report", "--preset", "common_effect", "--summary", str(target), "--no-plan"]) == 0
    assert f"wrote {target}" in capsys.readouterr().err
    page = target.read_text(encoding="utf-8")
    assert "adjust_complaints" in page and "No sample-size plan was run" in page
    assert main(["report", "--preset", "common_effect"]) == 2
    assert "give --summary OUT, --html OUT or both" in capsys.readouterr().err
    assert main(["report", "--preset", "common_effect", "--summary", "-"]) == 2
    assert "--summary: give a file name" in capsys.readouterr().err


def test_legends_wrap_to_the_figure_width():
    """Five long strategy names side by side would run past a 530-px plot: the legend takes as many columns
    as fit (common practice, no source)."""
    names = ["standardized_adjust_fragility", "logit_adjust_fragility", "lpm_unadjusted", "a", "b"]
    columns = legend_columns(names, 530)
    assert columns * (len(max(names, key=len)) * 6.6 + 34) <= 530
    assert legend_columns(["a", "b"], 530) >= 2


def test_risk_differences_and_log_odds_ratios_get_separate_panels():
    """One measure scale per axis: a risk difference and a log odds ratio are not comparable numbers
    (Greenland, Robins & Pearl 1999 on non-collapsibility; common practice for plots)."""
    from workbench.analysis.plan import plan
    from workbench.report import figures

    planned = plan(wb.load_preset("binary_outcome"), sample_sizes=[250, 500], replicates=100, seed=1)
    fig = figures.by_n_figure(planned, "bias", title="Bias against n", y_label="bias")
    titles = [child.title.text for child in fig.children]
    assert titles == ["Bias against n: risk difference", "Bias against n: log odds ratio"]
    power = figures.power_figure(planned, target_power=0.8)
    labels = [item.label.value for item in power.below[-1].items]
    assert planned.table["analytic_power"].isna().all()
    assert not any("analytic" in label for label in labels)  # none is drawn, none is listed
