"""HTML tables built from library results (no Panel import), for the dashboard and the HTML report.

The performance table flags a cell when the Monte Carlo evidence says something is off (Morris, White &
Crowther 2019, "Using simulation studies to evaluate statistical methods", Statistics in Medicine
38:2074-2102), by the one rule of :mod:`workbench.engine.metrics`: the bias when
:func:`~workbench.engine.metrics.is_biased` (``|bias| > 3 x MCSE(bias)`` and at least 5% of the true
effect), the coverage when :func:`~workbench.engine.metrics.coverage_is_off` (outside
``nominal +/- 3 x MCSE(coverage)``). :data:`FLAG_NOTE` says so in words under the table. Every number cell
carries ``data-strategy``, ``data-field`` and ``data-value`` attributes so tests and scripts can read the
exact values.

Examples
--------
>>> import pandas as pd
>>> row = dict(name="a", adjust=[], valid=True, mean=0.25, bias=0.02, bias_mcse=0.002, relative_bias=8.0,
...            truth=0.25, emp_se=0.07, emp_se_mcse=0.001, model_se=0.07, model_se_mcse=0.0005, rmse=0.07,
...            coverage=0.95, coverage_mcse=0.005, power=0.9, power_mcse=0.007, failures=0)
>>> html = performance_table(pd.DataFrame([row]), alpha=0.05)
>>> 'class="flag"' in html
True
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import pandas as pd

from workbench.analysis.check import StrategyCheck
from workbench.engine.metrics import BIAS_MCSE_MULTIPLE, BIAS_RELATIVE_FLOOR, coverage_is_off, is_biased
from workbench.formatting.markup import attr_html, text_html
from workbench.formatting.numbers import effect_digits, estimate_decimals, fmt, fmt_mcse
from workbench.formatting.phrases import selected_sets_text, strategy_text

__all__ = [
    "TABLE_CSS",
    "BIAS_FLAG_TEXT",
    "COVERAGE_FLAG_TEXT",
    "FLAG_NOTE",
    "flags",
    "performance_table",
    "signals_table",
    "change_in_estimate",
    "CHANGE_NOTE",
    "strategies_table",
    "smallest_n_table",
    "also_smallest_n_table",
]

BIAS_FLAG_TEXT = (
    f"the bias exceeds {BIAS_MCSE_MULTIPLE:g} Monte Carlo SEs and {BIAS_RELATIVE_FLOOR:.0%} of the true "
    "effect in size"
)
"""Why a bias cell is flagged (:func:`workbench.engine.metrics.is_biased`), in words."""
COVERAGE_FLAG_TEXT = f"the coverage lies outside the nominal level ± {BIAS_MCSE_MULTIPLE:g} Monte Carlo SEs"
"""Why a coverage cell is flagged (:func:`workbench.engine.metrics.coverage_is_off`), in words."""
FLAG_NOTE = (
    "The small ± figures are Monte Carlo standard errors (MCSE). Flagged cells: "
    f"{BIAS_FLAG_TEXT}, or {COVERAGE_FLAG_TEXT} (Morris, White & Crowther 2019)."
)
"""The note under a performance table (plain text: escape it for HTML)."""

#: Styles of the tables (no web fonts: the system's sans-serif).
TABLE_CSS = """
table.wb { border-collapse: collapse; font-family: system-ui, -apple-system, "Segoe UI", sans-serif;
  font-size: 12.5px; margin: 4px 0 8px 0; }
table.wb th { text-align: right; padding: 4px 7px; border-bottom: 2px solid #333; font-weight: 600;
  background: #f4f4f4; white-space: normal; vertical-align: bottom; max-width: 96px; }
table.wb th:first-child, table.wb td:first-child, table.wb th.text { text-align: left; }
table.wb th.text { min-width: 48px; padding-left: 12px; }
table.wb td.text { padding-left: 12px; }
table.wb td { text-align: right; padding: 3px 7px; vertical-align: top; border-bottom: 1px solid #ddd;
  white-space: nowrap; font-variant-numeric: tabular-nums; }
table.wb td.text { text-align: left; white-space: normal; }
table.wb td.text div { max-width: 460px; min-width: 90px; }
table.wb td.flag { background: #F0E442; font-weight: 600; }
table.wb td.invalid { color: #A33C00; font-weight: 600; }
table.wb td.valid { color: #00603F; font-weight: 600; }
table.wb span.mcse { color: #666; font-size: 11px; font-weight: normal; }
"""


_TEXT_HEAD = {
    h: ' class="text"'
    for h in ("adjusts for", "estimates", "note", "why", "further effect of", "chosen most often")
}


def _html_table(table_id: str, head, rows: list[str]) -> str:
    """A ``<table class="wb">`` with the column names ``head`` and the ``<tr>`` strings ``rows``."""
    header = "".join(f"<th{_TEXT_HEAD.get(h, '')}>{text_html(h)}</th>" for h in head)
    return (
        f'<table class="wb" id="{table_id}"><thead><tr>{header}</tr></thead><tbody>'
        + "".join(rows)
        + "</tbody></table>"
    )


def _get(row: Any, key: str) -> Any:
    try:
        value = row[key]
    except (KeyError, IndexError):
        return None
    if not isinstance(value, list | tuple) and pd.isna(value):
        return None
    return value


def flags(row: Any, alpha: float) -> dict[str, bool]:
    """Which cells of a performance-table row to flag, by the one rule of :mod:`workbench.engine.metrics`:
    ``bias`` when :func:`~workbench.engine.metrics.is_biased` (against the row's ``truth``; without one, by
    the MCSE alone), ``coverage`` when :func:`~workbench.engine.metrics.coverage_is_off` for the nominal
    level 1 - alpha.

    Examples
    --------
    >>> flags({"bias": 0.01, "bias_mcse": 0.002, "truth": 0.1, "coverage": 0.95, "coverage_mcse": 0.005}, 0.05)
    {'bias': True, 'coverage': False}
    >>> flags({"bias": 0.01, "bias_mcse": 0.002, "truth": 1.0}, 0.05)  # under 5% of the truth
    {'bias': False, 'coverage': False}
    """
    truth = _get(row, "truth")
    return {
        "bias": is_biased(_get(row, "bias"), _get(row, "bias_mcse"), math.nan if truth is None else truth),
        "coverage": coverage_is_off(_get(row, "coverage"), _get(row, "coverage_mcse"), 1 - alpha),
    }


def _cell(
    strategy: str,
    field: str,
    value: Any,
    *,
    mcse: Any = None,
    digits: int = 3,
    flagged: bool = False,
    title: str = "",
    percent: bool = False,
) -> str:
    text = fmt(value, digits)
    if percent and value is not None and math.isfinite(float(value)):
        text = f"{100 * float(value):.{digits}f}%"
    if mcse is not None:
        text += f'<br><span class="mcse">&plusmn; {fmt_mcse(mcse)}</span>'
    raw = (
        ""
        if value is None
        else attr_html(repr(float(value)) if isinstance(value, int | float) else str(value))
    )
    attrs = f'data-strategy="{attr_html(strategy)}" data-field="{field}" data-value="{raw}"'
    if flagged:
        attrs += ' class="flag"'
    if title:
        attrs += f' title="{attr_html(title)}"'
    return f"<td {attrs}>{text}</td>"


def _verdict_cell(valid: Any) -> str:
    if valid is None:
        return "<td>-</td>"
    return '<td class="valid">valid</td>' if bool(valid) else '<td class="invalid">invalid</td>'


@dataclass(frozen=True)
class _Columns:
    """Which optional column groups a performance table shows."""

    scored: bool
    """The strategies estimate different quantities or are scored against different truths."""
    selection: bool
    """Some strategy chooses its set from the data."""
    retained: bool
    """Some strategy restricts or matches, so the units kept vary."""

    def head(self, alpha: float) -> list[str]:
        """The column names."""
        head = ["strategy", "verdict", "adjusts for"]
        if self.scored:
            head += ["estimates", "its truth"]
        if self.selection:
            head += ["chosen set valid in", "chosen most often"]
        if self.retained:
            head += ["units kept (mean)"]
        return head + [
            "mean estimate",
            "bias",
            "relative bias %",
            "empirical SE",
            "model SE",
            "RMSE",
            f"coverage of {1 - alpha:.0%} CI",
            "power",
            "type S (wrong sign, of significant)",
            "exaggeration (significant)",
            "failed fits",
        ]


def _columns(table: pd.DataFrame) -> _Columns:
    scored = (
        "truth" in table
        and "estimand" in table
        and (table["truth"].nunique(dropna=True) > 1 or table["estimand"].nunique(dropna=True) > 1)
    )
    selection = "selection" in table and any(isinstance(v, str) and v for v in table["selection"])
    retained = "mean_retained_n" in table and bool(
        pd.to_numeric(table["mean_retained_n"], errors="coerce").notna().any()
    )
    return _Columns(bool(scored), bool(selection), retained)


def _strategy_verdict_cell(r: Any) -> str:
    """The graph's verdict; for a set chosen from the data, the share of studies whose chosen set was valid
    (a chosen set is valid only in those)."""
    share = _get(r, "selected_valid_share")
    if isinstance(_get(r, "selection"), str) and share is not None:
        kind = "valid" if share >= 0.95 else "invalid"
        return f'<td class="{kind}" title="share of studies whose chosen set was valid">valid in {100 * share:.0f}%</td>'
    return _verdict_cell(_get(r, "valid"))


def _description_cells(r: Any, name: str, columns: _Columns) -> list[str]:
    """The cells that say what a strategy is: name, verdict, set, and the optional groups (what it
    estimates, how it chose its set, the units it kept)."""
    adjust_text = strategy_text(
        _get(r, "adjust"), _get(r, "selection"), _get(r, "restrict"), _get(r, "match")
    )
    cells = [
        f"<td>{text_html(name)}</td>",
        _strategy_verdict_cell(r),
        f'<td class="text"><div>{text_html(str(adjust_text))}</div></td>',
    ]
    if columns.scored:
        cells += [
            f'<td class="text"><div>{text_html(str(_get(r, "estimand") or ""))}</div></td>',
            _cell(name, "truth", _get(r, "truth"), digits=effect_digits(_get(r, "emp_se"))),
        ]
    if columns.selection:
        share = _get(r, "selected_valid_share")
        chosen = selected_sets_text(_get(r, "selected_sets"))
        cells += [
            _cell(name, "selected_valid_share", share, digits=0, percent=True)
            if share is not None
            else f'<td data-strategy="{attr_html(name)}" data-field="selected_valid_share">-</td>',
            f'<td class="text" data-strategy="{attr_html(name)}" data-field="selected_sets"><div>'
            f"{text_html(chosen) or '-'}</div></td>",
        ]
    if columns.retained:
        cells.append(_cell(name, "mean_retained_n", _get(r, "mean_retained_n"), digits=1))
    return cells


def _measure_cells(r: Any, name: str, alpha: float) -> list[str]:
    """The performance measures, each with its MCSE where it has one; bias and coverage flagged by
    :func:`flags`. Estimates show about a hundredth of their spread (:func:`effect_digits`)."""
    flag = flags(r, alpha)
    d = effect_digits(_get(r, "emp_se"))
    return [
        _cell(name, "mean", _get(r, "mean"), digits=d),
        _cell(
            name,
            "bias",
            _get(r, "bias"),
            digits=estimate_decimals(_get(r, "bias_mcse"), d),
            mcse=_get(r, "bias_mcse"),
            flagged=flag["bias"],
            title=BIAS_FLAG_TEXT if flag["bias"] else "",
        ),
        _cell(name, "relative_bias", _get(r, "relative_bias"), digits=1),
        _cell(name, "emp_se", _get(r, "emp_se"), mcse=_get(r, "emp_se_mcse"), digits=d),
        _cell(name, "model_se", _get(r, "model_se"), mcse=_get(r, "model_se_mcse"), digits=d),
        _cell(name, "rmse", _get(r, "rmse"), digits=d),
        _cell(
            name,
            "coverage",
            _get(r, "coverage"),
            mcse=_get(r, "coverage_mcse"),
            flagged=flag["coverage"],
            title=COVERAGE_FLAG_TEXT if flag["coverage"] else "",
        ),
        _cell(name, "power", _get(r, "power"), mcse=_get(r, "power_mcse")),
        _cell(name, "type_s", _get(r, "type_s"), mcse=_get(r, "type_s_mcse")),
        _cell(name, "exaggeration", _get(r, "exaggeration"), mcse=_get(r, "exaggeration_mcse"), digits=2),
        _cell(name, "failures", _get(r, "failures"), digits=0),
    ]


def _row_notes(r: Any, name: str) -> list[str]:
    """A strategy's note and its failed fits' reasons, as list items."""
    notes = []
    note = _get(r, "note")
    if note:
        notes.append(f"<li><b>{text_html(name)}</b>: {text_html(str(note))}</li>")
    reasons = _get(r, "failure_reasons")
    if isinstance(reasons, dict) and reasons:
        text = ", ".join(f"{k}: {v}" for k, v in reasons.items())
        notes.append(f"<li><b>{text_html(name)}</b> failed fits: {text_html(text)}</li>")
    return notes


def performance_table(table: pd.DataFrame, *, alpha: float, table_id: str = "performance") -> str:
    """The performance table: each measure with its Monte Carlo SE below it, suspicious cells flagged.

    Parameters
    ----------
    table : DataFrame
        ``SimulationResult.table``.
    alpha : float
        The study's alpha; nominal coverage is 1 - alpha.

    Returns
    -------
    str
        An HTML table, followed by a list of the strategies' notes when there are any.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.simulate import simulate
    >>> result = simulate(load_preset("common_cause"), replicates=300, seed=1)
    >>> html = performance_table(result.table, alpha=0.05)
    >>> html.startswith("<table"), "flag" in html  # the unadjusted bias is flagged
    (True, True)
    """
    columns = _columns(table)
    rows, notes = [], []
    for _, r in table.iterrows():
        name = str(r["name"])
        cells = _description_cells(r, name, columns) + _measure_cells(r, name, alpha)
        rows.append("<tr>" + "".join(cells) + "</tr>")
        notes += _row_notes(r, name)
    out = _html_table(table_id, columns.head(alpha), rows)
    if notes:
        out += f'<ul class="wb-notes" style="font-size:12px;margin:2px 0 6px 0">{"".join(notes)}</ul>'
    return out


#: What the change-in-estimate column of :func:`signals_table` shows.
CHANGE_NOTE = (
    "Change in estimate: how far the strategy's average estimate over the simulated studies lies from the "
    "unadjusted model's (same model kind), in % of the size of the unadjusted average: "
    "100 x (mean - unadjusted mean) / |unadjusted mean|. When the unadjusted average lies within one "
    "empirical SE of 0, a percentage of it means nothing; the column then gives the change itself, in the "
    "estimate's units, marked 'units'. When the unadjusted fit is not a listed strategy, the column gives the "
    "median over studies of the same change in % of each study's |unadjusted estimate|."
)


def change_in_estimate(table: pd.DataFrame) -> dict[str, tuple[float | None, str]]:
    """Per strategy, the change in estimate against its unadjusted reference and its kind: ``"%"`` (percent
    of the unadjusted average), ``"units"`` (the unadjusted average is within one empirical SE of 0, so the
    difference of averages is given instead), ``"% median"`` (the reference is not in the table: the median of
    the per-study relative change) or ``""`` (unknown). :data:`CHANGE_NOTE` says it in words.

    Examples
    --------
    >>> rows = [{"name": "u", "reference": "u", "mean": -2.0, "emp_se": 0.5},
    ...         {"name": "a", "reference": "u", "mean": -1.5, "emp_se": 0.6},
    ...         {"name": "z", "reference": "w", "mean": 0.3, "emp_se": 0.6},
    ...         {"name": "w", "reference": "w", "mean": 0.1, "emp_se": 0.6}]
    >>> change_in_estimate(pd.DataFrame(rows))
    {'u': (0.0, '%'), 'a': (25.0, '%'), 'z': (0.2, 'units'), 'w': (0.0, 'units')}
    """
    by_name = {str(r["name"]): r for _, r in table.iterrows()}
    out: dict[str, tuple[float | None, str]] = {}
    for name, r in by_name.items():
        ref = by_name.get(str(_get(r, "reference")))
        mean = _get(r, "mean")
        if ref is not None and mean is not None and _get(ref, "mean") is not None:
            ref_mean, ref_se = float(ref["mean"]), _get(ref, "emp_se")
            if ref_se is not None and abs(ref_mean) < float(ref_se):
                out[name] = (float(mean) - ref_mean, "units")
            else:
                out[name] = (100.0 * (float(mean) - ref_mean) / abs(ref_mean), "%")
        elif _get(r, "change_in_estimate_median") is not None:
            out[name] = (100.0 * float(r["change_in_estimate_median"]), "% median")
        else:
            out[name] = (None, "")
    return out


def signals_table(table: pd.DataFrame, *, table_id: str = "signals") -> str:
    """Change in estimate against the unadjusted strategy (:func:`change_in_estimate`, defined under the
    table by :data:`CHANGE_NOTE`), SE ratio and the exposure's VIF per strategy.

    Examples
    --------
    >>> import pandas as pd
    >>> html = signals_table(pd.DataFrame([{"name": "a", "se_ratio": 1.25, "vif": 1.5}]))
    >>> 'data-field="se_ratio" data-value="1.25"' in html
    True
    """
    head = (
        "strategy",
        "change in estimate vs unadjusted (%)",
        "share of studies with change > 10%",
        "SE ratio vs unadjusted",
        "VIF of the exposure",
    )
    changes = change_in_estimate(table)
    rows = []
    for _, r in table.iterrows():
        name = str(r["name"])
        value, kind = changes[name]
        change = _cell(name, "change_in_estimate", value, digits=1)
        if kind in ("units", "% median"):
            marker = "units" if kind == "units" else "median"
            change = change.replace("</td>", f' <span class="mcse">({marker})</span></td>', 1)
        cells = [
            f"<td>{text_html(name)}</td>",
            change.replace("<td", f'<td data-kind="{attr_html(kind)}"', 1),
            _cell(
                name, "share_change_over_10pct", _get(r, "share_change_over_10pct"), digits=1, percent=True
            ),
            _cell(name, "se_ratio", _get(r, "se_ratio")),
            _cell(name, "vif", _get(r, "vif"), digits=2),
        ]
        rows.append("<tr>" + "".join(cells) + "</tr>")
    note = f'<p class="wb-note" style="font-size:12px;margin:2px 0 6px 0">{text_html(CHANGE_NOTE)}</p>'
    return _html_table(table_id, head, rows) + note


def strategies_table(checks: Iterable[StrategyCheck], *, table_id: str = "verdicts") -> str:
    """Strategies with their verdict and reasons (the records of ``CheckReport.checks``).

    Examples
    --------
    >>> from workbench import check, load_preset
    >>> html = strategies_table(check(load_preset("common_cause")).checks)
    >>> '<td>unadjusted</td><td class="invalid">invalid</td>' in html, "soil_quality" in html
    (True, True)
    """
    out = []
    for c in checks:
        adjust = strategy_text(c.adjust, c.selection, c.restrict, c.match)
        reasons = "<br>".join(text_html(x) for x in c.reasons)
        notes = "<br>".join(text_html(x) for x in c.notes)
        model = c.fit or c.model + (" (standardised)" if c.standardize else "")
        out.append(
            f"<tr><td>{text_html(c.name)}</td>{_verdict_cell(c.valid)}"
            f'<td class="text"><div>{text_html(adjust)}</div></td><td>{text_html(model)}</td>'
            f'<td class="text"><div>{reasons}{"<br><i>" + notes + "</i>" if notes else ""}</div></td></tr>'
        )
    return _html_table(table_id, ("strategy", "verdict", "adjusts for", "model", "why"), out)


def smallest_n_table(smallest: pd.DataFrame, *, table_id: str = "smallest-n") -> str:
    """The smallest n per strategy for the target power (and half-width), with notes.

    Examples
    --------
    >>> import pandas as pd
    >>> row = {"strategy": "a", "n_for_power": 131, "n_for_halfwidth": None, "valid": True, "note": ""}
    >>> 'data-field="n_for_power" data-value="131.0"' in smallest_n_table(pd.DataFrame([row]))
    True
    """
    out = []
    for _, r in smallest.iterrows():
        name = str(r["strategy"])
        cells = [
            f"<td>{text_html(name)}</td>",
            _verdict_cell(_get(r, "valid")),
            _cell(name, "n_for_power", _get(r, "n_for_power"), digits=0),
            _cell(name, "n_for_halfwidth", _get(r, "n_for_halfwidth"), digits=0),
            f'<td class="text"><div>{text_html(str(_get(r, "note") or ""))}</div></td>',
        ]
        out.append("<tr>" + "".join(cells) + "</tr>")
    return _html_table(
        table_id,
        (
            "strategy",
            "verdict",
            "smallest n for target power",
            "smallest n for target half-width",
            "note",
        ),
        out,
    )


def also_smallest_n_table(smallest: pd.DataFrame, *, table_id: str = "also-smallest-n") -> str:
    """The smallest n reaching the target power for each further effect of ``question.also``.

    Examples
    --------
    >>> import pandas as pd
    >>> row = {"strategy": "a", "variable": "b", "n_for_power": 290, "valid": True, "note": "",
    ...        "analytic_n_for_power": 285}
    >>> "<td>b</td>" in also_smallest_n_table(pd.DataFrame([row]))
    True
    """
    out = []
    for _, r in smallest.iterrows():
        name = str(r["strategy"])
        cells = [
            f"<td>{text_html(name)}</td>",
            f"<td>{text_html(str(r['variable']))}</td>",
            _verdict_cell(_get(r, "valid")),
            _cell(name, "n_for_power", _get(r, "n_for_power"), digits=0),
            _cell(name, "analytic_n_for_power", _get(r, "analytic_n_for_power"), digits=0),
            f'<td class="text"><div>{text_html(str(_get(r, "note") or ""))}</div></td>',
        ]
        out.append("<tr>" + "".join(cells) + "</tr>")
    return _html_table(
        table_id,
        (
            "strategy",
            "further effect of",
            "verdict",
            "smallest n for target power",
            "analytic approximation",
            "note",
        ),
        out,
    )
