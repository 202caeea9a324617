"""A one-page summary for stakeholders: the question, the graph, one plain headline per strategy, two
strategies' intervals side by side, the sample size needed and the assumptions; no formulas, one A4 page.

The page is one HTML file with its pictures inline as SVG (:mod:`workbench.report.graph_image`): it makes no
request to any host, and its print styles fit it on one A4 page. The headlines reuse the verdicts of
:func:`workbench.report.explain.explain` and quote the simulation: how much of the true effect a strategy
misses or adds, on average over the simulated studies, in percent of the size of the truth.

Examples
--------
>>> from workbench import load_preset, simulate
>>> result = simulate(load_preset("mediator"), replicates=300, seed=1)
>>> page = build_summary(load_preset("mediator"), result)
>>> "Adjusting for skill" in page and "<svg" in page and "http" not in page.replace(
...     'xmlns="http://www.w3.org/2000/svg"', "")
True
"""

from __future__ import annotations

import math
import os

import numpy as np
import pandas as pd

from workbench.formatting.markup import text_html
from workbench.report.graph_image import graph_svg

__all__ = ["build_summary", "headline", "pick_pair", "write_summary"]

_CSS = """
@page { size: A4; margin: 11mm 12mm; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, Arial, sans-serif; color: #111;
       margin: 0 auto; max-width: 186mm; font-size: 10pt; line-height: 1.35; }
h1 { font-size: 15pt; margin: 0 0 2mm 0; }
h2 { font-size: 11pt; margin: 3mm 0 1mm 0; color: #0b3d66; }
p { margin: 0 0 1.5mm 0; }
ul { margin: 0 0 1mm 0; padding-left: 5mm; }
li { margin-bottom: 0.8mm; }
.wb-figure svg { width: 100%; height: auto; display: block; }
.wb-graph-picture svg { max-height: 68mm; }
.wb-intervals svg { max-height: 46mm; }
.good { color: #00603F; font-weight: 700; }
.bad { color: #A33C00; font-weight: 700; }
.small { font-size: 8.5pt; color: #444; }
@media print { body { max-width: none; } }
"""


def _plain(names) -> str:
    words = [n.replace("_", " ") for n in names]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _doing(adjust) -> str:
    """How a strategy reads as the subject of a sentence: 'Adjusting for skill', 'Not adjusting at all'."""
    return f"Adjusting for {_plain(adjust)}" if adjust else "Leaving every other variable out"


def headline(row: dict, reason: str, exposure: str) -> str:
    """One strategy's result in plain words, from its table row and the reason of its verdict.

    Examples
    --------
    >>> row = {"adjust": ["skill"], "valid": False, "mean": 0.49, "truth": 1.3, "coverage": 0.77}
    >>> headline(row, "it answers a different question than the one asked", "training")
    'Adjusting for skill answers a different question than the one asked: it misses 62% of the training effect.'
    >>> headline({"adjust": [], "valid": True, "mean": 1.31, "truth": 1.3, "coverage": 0.95}, "", "training")
    'Leaving every other variable out gets the training effect right: 1.31 on average against a true 1.3; 95% of its intervals contain the truth.'
    """
    doing = _doing(row["adjust"])
    mean, truth = float(row["mean"]), float(row["truth"])
    cover = row.get("coverage")
    cover_text = (
        f"; {100 * float(cover):.0f}% of its intervals contain the truth" if cover is not None else ""
    )
    if not math.isfinite(mean) or not math.isfinite(truth):
        return f"{doing}: no estimate could be made."
    off = (mean - truth) / abs(truth) if truth != 0 else math.nan
    if row.get("valid") and (not math.isfinite(off) or abs(off) < 0.05):
        return f"{doing} gets the {exposure} effect right: {mean:.3g} on average against a true {truth:.3g}{cover_text}."
    verb = reason.removeprefix("it ").rstrip(".") if reason else "is off"
    if not math.isfinite(off):
        size = f"it finds {mean:.3g} on average where the true effect is 0"
    elif mean * truth < 0:
        size = f"it reverses the direction of the {exposure} effect ({mean:.3g} on average against a true {truth:.3g})"
    elif abs(mean) < abs(truth):  # same direction, smaller: a share of the effect is missed
        size = f"it misses {100 * (1 - abs(mean) / abs(truth)):.0f}% of the {exposure} effect"
    else:
        size = f"it overstates the {exposure} effect by {100 * (abs(mean) / abs(truth) - 1):.0f}%"
    return f"{doing} {verb}: {size}."


def pick_pair(table: pd.DataFrame) -> tuple[str | None, str | None]:
    """The recommended strategy (valid, least biased, then most precise) and the most tempting wrong one
    (invalid, with the narrowest spread: it looks the most convincing).

    Examples
    --------
    >>> table = pd.DataFrame([{"name": "a", "valid": True, "bias": 0.01, "emp_se": 0.5},
    ...                       {"name": "b", "valid": False, "bias": -0.7, "emp_se": 0.4}])
    >>> pick_pair(table)
    ('a', 'b')
    """
    valid = table[table["valid"].fillna(False).astype(bool)]
    wrong = table[~table["valid"].fillna(False).astype(bool)]
    good = None
    if len(valid):
        ranked = valid.assign(_b=valid["bias"].abs().round(6)).sort_values(["_b", "emp_se"])
        good = str(ranked.iloc[0]["name"])
    bad = str(wrong.sort_values("emp_se").iloc[0]["name"]) if len(wrong) else None
    return good, bad


def _intervals_svg(result, names: list[str], truth: float, shown: int = 20) -> str:
    """The first ``shown`` studies' 95% intervals of each strategy, one panel each, the truth dashed."""
    est = result.estimates
    panels = [est[(est["strategy"] == n) & ~est["failed"].astype(bool)].head(shown) for n in names]
    lows = np.concatenate([p["ci_low"].to_numpy(float) for p in panels] + [[truth]])
    highs = np.concatenate([p["ci_high"].to_numpy(float) for p in panels] + [[truth]])
    lo, hi = float(np.nanmin(lows)), float(np.nanmax(highs))
    pad = 0.05 * (hi - lo or 1.0)
    lo, hi = lo - pad, hi + pad
    width, height, gap = 640, 190, 24
    panel_w = (width - gap * (len(names) - 1)) / max(len(names), 1)
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" font-family="system-ui, Arial">'
    ]
    for k, (name, rows) in enumerate(zip(names, panels, strict=True)):
        left = k * (panel_w + gap)

        def x(v, left=left):
            return left + 8 + (v - lo) / (hi - lo) * (panel_w - 16)

        out.append(
            f'<text x="{left + 8:.1f}" y="14" font-size="13" font-weight="700">{text_html(name)}</text>'
        )
        tx = x(truth)
        out.append(
            f'<line x1="{tx:.1f}" y1="22" x2="{tx:.1f}" y2="{height - 22}" stroke="#000" stroke-dasharray="5 4"/>'
        )
        step = (height - 52) / max(len(rows), 1)
        for i, (a, b) in enumerate(zip(rows["ci_low"], rows["ci_high"], strict=True)):
            y = 28 + i * step
            covers = a <= truth <= b
            colour, dash = ("#7a7a7a", "") if covers else ("#D55E00", ' stroke-dasharray="2 2"')
            out.append(
                f'<line x1="{x(a):.1f}" y1="{y:.1f}" x2="{x(b):.1f}" y2="{y:.1f}" stroke="{colour}" '
                f'stroke-width="{1.6 if covers else 2.2}"{dash}/>'
            )
        out.append(
            f'<text x="{tx:.1f}" y="{height - 8}" font-size="11" text-anchor="middle">true effect {truth:.3g}</text>'
        )
    out.append("</svg>")
    return "".join(out)


def _sample_size_text(plan, name: str | None, target_power: float, alpha: float = 0.05) -> str:
    if plan is None or name is None:
        return "No sample-size plan was run for this summary (<code>workbench plan</code> makes one)."
    rows = plan.smallest_n[plan.smallest_n["strategy"] == name]
    n = rows["n_for_power"].iloc[0] if len(rows) else None
    if n is None or pd.isna(n):
        largest = max(plan.table["n"])
        return (
            f"Even {int(largest):,} units were not enough to detect the effect {100 * target_power:.0f}% of the "
            f"time with {text_html(name)}: a larger study, or a stronger effect, is needed."
        )
    return (
        f"With {text_html(name)}, a study of about <b>{int(n):,} units</b> detects the effect in "
        f"{100 * target_power:.0f}% of studies (at the {100 * alpha:g}% level of significance, as assumed here)."
    )


def _assumptions(scenario) -> str:
    latent = [v.name for v in scenario.variables if not v.observed]
    items = [
        "<b>The graph is an assumption, not a finding.</b> Every number on this page follows from the arrows "
        "drawn above and their sizes; a missing arrow or a wrong size changes them.",
        f"{len(scenario.arrows)} direct effects are assumed, with the sizes written on the arrows (per unit of "
        "the cause); every common cause of two of the variables is drawn, measured or not.",
    ]
    if latent:
        items.append(f"Not measured, so no analysis can adjust for it: {text_html(_plain(latent))}.")
    st = scenario.study
    items.append(
        f"Each simulated study has {st.n:,} units; {st.replicates:,} studies were simulated (seed {st.seed})."
    )
    return "<ul>" + "".join(f"<li>{item}</li>" for item in items) + "</ul>"


def build_summary(scenario, result, plan=None, report=None) -> str:
    """The one-page summary as standalone HTML.

    Parameters
    ----------
    scenario : Scenario
    result : SimulationResult
        The simulation the headlines quote.
    plan : PlanResult, optional
        For the sample size needed (omitted, the page says no plan was run).
    report : CheckReport, optional
        The graph analysis (computed when not given).

    Examples
    --------
    >>> from workbench import load_preset, simulate
    >>> page = build_summary(load_preset("common_effect"), simulate(load_preset("common_effect"),
    ...                                                               replicates=200, seed=2))
    >>> "@page { size: A4" in page and "is an assumption" in page
    True
    """
    from workbench.analysis.check import check
    from workbench.report.explain import explain

    report = report if report is not None else check(scenario)
    q = scenario.question
    label = {v.name: (v.label or v.name.replace("_", " ")) for v in scenario.variables}
    stories = {s.name: s for s in explain(report, result)}
    rows = {str(r["name"]): r for r in result.table.to_dict("records")}
    heads = []
    for name, row in rows.items():
        story = stories.get(name)
        reason = (
            story.recommendation.split(":", 1)[1].strip() if story and ":" in story.recommendation else ""
        )
        text = headline(row, reason if not row.get("valid") else "", q.exposure.replace("_", " "))
        mark = '<span class="good">✓</span>' if row.get("valid") else '<span class="bad">✗</span>'
        heads.append(f"<li>{mark} <b>{text_html(name)}</b>: {text_html(text)}</li>")
    good, bad = pick_pair(result.table)
    pair = [n for n in (good, bad) if n is not None]
    truth = float(rows[pair[0]]["truth"]) if pair else float(result.truth)
    pictures = ""
    if pair:
        said = f"the recommended <b>{text_html(good)}</b>" if good else ""
        if bad:
            said += (" and " if said else "") + f"the most tempting wrong choice, <b>{text_html(bad)}</b>"
        pictures = (
            f"<h2>What a study would show</h2><p>The first 20 simulated studies' 95% intervals for {said}. Grey "
            "intervals contain the true effect (dashed line); orange dotted ones miss it.</p>"
            f'<div class="wb-figure wb-intervals">{_intervals_svg(result, pair, truth)}</div>'
        )
    question = (
        f"What is the {q.target} effect of <b>{text_html(label[q.exposure])}</b> on "
        f"<b>{text_html(label[q.outcome])}</b>, and which analysis finds it?"
    )
    return (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        f"<title>{text_html(scenario.title)}: summary</title><style>{_CSS}</style></head><body>"
        f"<h1>{text_html(scenario.title)}</h1><p><b>The question.</b> {question}</p>"
        + (f'<p class="small">{text_html(scenario.summary)}</p>' if scenario.summary else "")
        + f'<div class="wb-figure wb-graph-picture">{graph_svg(scenario, report.roles, width=640, height=300)}</div>'
        f"<h2>What each analysis finds</h2><ul>{''.join(heads)}</ul>{pictures}"
        f"<h2>How many units a study needs</h2><p>{_sample_size_text(plan, good, scenario.study.target_power, scenario.study.alpha)}</p>"
        f"<h2>What this rests on</h2>{_assumptions(scenario)}</body></html>"
    )


def write_summary(path: str | os.PathLike, scenario, result, plan=None, report=None) -> None:
    """Write :func:`build_summary` to ``path`` atomically."""
    from workbench.scenario.write import write_text_atomically

    write_text_atomically(path, build_summary(scenario, result, plan=plan, report=report))
