"""Plain-language stories of what each strategy does, for stakeholders.

:func:`explain` turns the graph analysis (:func:`workbench.analysis.check.check`) and, when there is one, a simulation
result (:func:`workbench.analysis.simulate.simulate`) into one short story per strategy: what it adjusts for, which
paths between the exposure and the outcome that opens or blocks, the resulting bias and coverage with numbers
from the run, and a recommendation. The dashboard's Explain tab and the HTML report show the same stories.
Each part of a story is one step: the method, the paths, how the set was chosen and the units kept, the
run's numbers (or the large-sample figures) and the recommendation.

The stories share their rules and words with the tables: a valid strategy the run shows biased
(:func:`workbench.engine.metrics.is_biased`) is not recommended, coverage is called off by
:func:`workbench.engine.metrics.coverage_is_off`, restrictions, matching and selection rules read as in
:mod:`workbench.formatting.phrases`, and a Monte Carlo estimate is rounded to its MCSE by
:func:`workbench.formatting.numbers.with_mcse`.

The words follow the adjustment criterion for total effects and the single-door criterion for direct effects
(Pearl J. (2009). Causality, 2nd ed., Def. 3.3.1 and Thm 5.3.1; Shpitser I., VanderWeele T., Robins J.
(2010). On the validity of covariate adjustment for estimating causal effects. UAI), and the advice on good
and bad controls of Cinelli C., Forney A., Pearl J. (2022). A Crash Course in Good and Bad Controls.
Sociological Methods & Research.

Examples
--------
>>> from workbench.analysis.check import check
>>> from workbench import load_preset
>>> stories = explain(check(load_preset("common_cause")))
>>> [s.name for s in stories], [s.valid for s in stories]
(['unadjusted', 'adjust_soil'], [False, True])
>>> print(stories[0].recommendation)
Not recommended: it answers a different question than the one asked.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from typing import Any

import networkx as nx
import numpy as np

from workbench.analysis.check import ASSUMPTION, CheckReport, StrategyCheck
from workbench.analysis.large_sample import se_note
from workbench.engine.metrics import coverage_is_off, is_biased
from workbench.formatting.numbers import with_mcse
from workbench.formatting.phrases import (
    RULE_NAMES,
    kept_units_text,
    match_text,
    names_in_words,
    rule_sentence,
    selected_sets_text,
)
from workbench.graph.build import build_graph

__all__ = ["ASSUMPTION_NOTE", "Story", "explain", "consequences_html", "also_sentences"]

#: The note shown beside every result: the graph is an assumption.
ASSUMPTION_NOTE = ASSUMPTION


@dataclass
class Story:
    """One strategy's story.

    Attributes
    ----------
    name : str
    valid : bool
    title : str
        One line: the name, the adjustment set and the verdict.
    paragraphs : list of str
        Plain sentences: what it adjusts for, the paths, the numbers.
    recommendation : str
    """

    name: str
    valid: bool
    title: str
    paragraphs: list[str] = field(default_factory=list)
    recommendation: str = ""

    @property
    def usable(self) -> bool | None:
        """Whether the story recommends using the strategy: True (recommended or valid), False (not
        recommended), None (it depends on a run not made yet). Views colour a story by this, not by the
        graph verdict alone: a valid candidate set chosen by p-value can still be a bad strategy.

        Examples
        --------
        >>> Story("a", True, "a", recommendation="Not recommended: ...").usable
        False
        """
        if self.recommendation.startswith("Not recommended"):
            return False
        if self.recommendation.startswith("Depends"):
            return None
        return self.valid

    def text(self) -> str:
        """The story as plain text."""
        return "\n".join([self.title, *self.paragraphs, self.recommendation])

    def html(self) -> str:
        """The story as HTML paragraphs (the title excluded), escaped."""
        body = "".join(f"<p style='margin:3px 0'>{html.escape(p)}</p>" for p in self.paragraphs)
        return body + f"<p style='margin:3px 0'><b>{html.escape(self.recommendation)}</b></p>"


def _sentence(note: str, names) -> str:
    """A note as a sentence: a capital first letter (unless it starts with a variable's name, which keeps
    its spelling) and a full stop."""
    first = note.split(" ", 1)[0].strip(",.:;'")
    head = note if first in names else note[:1].upper() + note[1:]
    return head + ("" if note.endswith(".") else ".")


def _number(value: Any) -> float | None:
    """A finite float, or None for anything missing (a story leaves out what it cannot say)."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


# ------------------------------------------------------------------------------------------------------
# What the stories share: the run's rows, the truth, and which strategy is the most precise usable one
# ------------------------------------------------------------------------------------------------------
@dataclass
class _Context:
    """What every story of one explanation reads: the scenario, the run's rows by strategy name, alpha and
    the truth; then which strategies are usable and the most precise usable one per scale and truth."""

    report: CheckReport
    result: Any
    sim: dict[str, dict]
    alpha: float
    truth: float | None
    usable: list[str] = field(default_factory=list)
    precision: dict[str, float] = field(default_factory=dict)
    best_in: dict[tuple[str, float], str] = field(default_factory=dict)

    @property
    def nominal(self) -> float:
        return 1 - self.alpha

    def off_target(self, name: str) -> bool:
        """A valid set whose estimates still miss the truth clearly in the run (e.g. a conditional odds
        ratio scored against a marginal one): biased by :func:`workbench.engine.metrics.is_biased`."""
        row = self.sim.get(name)
        if row is None:
            return False
        row_truth = _number(row.get("truth"))
        scale = row_truth if row_truth else (self.truth if self.truth is not None else math.nan)
        return is_biased(row.get("bias"), row.get("bias_mcse"), scale)

    def group(self, name: str) -> tuple[str, float]:
        """Strategies compared for precision: same scale and same truth."""
        row = self.sim.get(name, {})
        estimand = str(row.get("estimand") or "effect")
        row_truth = _number(row.get("truth"))
        return (
            "log odds ratio" if "log odds" in estimand else estimand,
            round(row_truth if row_truth is not None else (self.truth or 0.0), 9),
        )

    def doubtful_selection(self, s: StrategyCheck) -> bool:
        """A set chosen from the data counts as usable only when the run shows it valid in >= 95% of
        studies."""
        if s.selection is None:
            return False
        share = _number(self.sim.get(s.name, {}).get("selected_valid_share"))
        return share is None or share < 0.95


def _context(report: CheckReport, result) -> _Context:
    """The shared facts, with the usable strategies ranked by precision: the run's empirical SE, or without
    a run the closed form's large-sample SE factor."""
    sim = {} if result is None else {str(r["name"]): r for r in result.table.to_dict("records")}
    ctx = _Context(
        report=report,
        result=result,
        sim=sim,
        alpha=report.scenario.study.alpha if result is None else float(result.alpha),
        truth=_number(result.truth) if result is not None else _number(report.truth),
    )
    ctx.usable = [
        s.name
        for s in report.checks
        if s.valid
        and s.model_ok is not False
        and not ctx.off_target(s.name)
        and not ctx.doubtful_selection(s)
    ]
    for s in report.checks:
        if s.name not in ctx.usable:
            continue
        if sim:
            se = _number(sim.get(s.name, {}).get("emp_se"))
        else:
            se = _number(s.large_sample_se_factor)
        if se is not None:
            ctx.precision[s.name] = se
    for candidate, se in ctx.precision.items():
        current = ctx.best_in.get(ctx.group(candidate))
        if current is None or se < ctx.precision[current]:
            ctx.best_in[ctx.group(candidate)] = candidate
    return ctx


# ------------------------------------------------------------------------------------------------------
# The parts of one story
# ------------------------------------------------------------------------------------------------------
def _title(s: StrategyCheck) -> str:
    """One line: the name, the set (or the candidates and the rule), the units kept and the verdict."""
    adjust, selection = list(s.adjust), s.selection
    verdict = "valid" if s.valid else "invalid"
    if selection:
        head = f"{s.name}: chooses from {names_in_words(adjust)} by {RULE_NAMES.get(selection, selection)}"
        verdict = f"candidates {verdict}"
    else:
        head = f"{s.name}: adjusts for {names_in_words(adjust)}"
    kept = [kept_units_text(s.restrict), match_text(list(s.match))]
    return ", ".join([head, *(k for k in kept if k)]) + f" ({verdict})"


def _method_paragraphs(s: StrategyCheck, q) -> list[str]:
    """What the strategy fits, and how it chooses its set, restricts or matches."""
    adjust, selection, restrict, match = list(s.adjust), s.selection, s.restrict, list(s.match)
    what = {
        "ols": "a linear regression",
        "logit": "a logistic regression" + (" standardised to the whole sample" if s.standardize else ""),
    }.get(s.model, s.model)
    if selection:
        fits = (
            f"It fits {what} of {q.outcome} on {q.exposure} and the covariates it keeps: the set is "
            f"chosen from the data in each study, keeping among {names_in_words(adjust)} those "
            f"{rule_sentence(selection)}."
        )
    elif adjust:
        fits = f"It fits {what} of {q.outcome} on {q.exposure} and {names_in_words(adjust)}."
    elif restrict or match:
        fits = f"It fits {what} of {q.outcome} on {q.exposure} alone, within the units kept."
    else:
        fits = f"It fits {what} of {q.outcome} on {q.exposure} alone, the raw comparison."
    paragraphs = [fits]
    if restrict:
        like = (
            "that variable much as adjusting for it"
            if len(restrict) == 1
            else "those variables much as adjusting for them"
        )
        paragraphs.append(f"It analyses {kept_units_text(restrict)}, which conditions on {like} would.")
    if match:
        paragraphs.append(
            f"It first pairs each unit with {q.exposure} = 1 with one with {q.exposure} = 0 and the same "
            f"{', '.join(match)}, and drops the units left unpaired: this balances the matched variables "
            "between the groups by design."
        )
    return paragraphs


def _conditioned(s: StrategyCheck) -> set[str]:
    """What a strategy conditions on: its covariates, its restricted and its matched variables."""
    return set(s.adjust) | {name for name, _ in s.restrict} | set(s.match)


def _blocked_text(G: nx.DiGraph, path, zset: set[str]) -> str:
    """A blocked path in words: blocked by adjusting for a non-collider on it, or closed at a collider."""
    inner = range(1, len(path.nodes) - 1)
    colliders = set(path.colliders())
    blockers = [path.nodes[i] for i in inner if path.nodes[i] not in colliders and path.nodes[i] in zset]
    if blockers:
        return f"{path.text} (blocked by adjusting for {names_in_words(blockers)})"
    shut = [c for c in path.colliders() if c not in zset and not nx.descendants(G, c) & zset]
    return f"{path.text} (closed at the collider {shut[0]})" if shut else path.text


def _open_text(G: nx.DiGraph, path, zset: set[str]) -> str:
    """An open non-causal path in words: left open, or opened by adjusting for a collider on it."""
    for c in path.colliders():
        if c in zset:
            return f"{path.text} (opened by adjusting for the collider {c})"
        below = sorted(nx.descendants(G, c) & zset)
        if below:
            return f"{path.text} (opened by adjusting for {below[0]}, a consequence of the collider {c})"
    return f"{path.text} (left open)"


def _path_paragraphs(s: StrategyCheck, scenario) -> list[str]:
    """The non-causal paths the strategy blocks, leaves closed at a collider, leaves open or opens, causal
    paths it cuts, why it fails and its precision notes."""
    q, names = scenario.question, scenario.names
    G, zset = build_graph(scenario), _conditioned(s)
    open_noncausal = [_open_text(G, p, zset) for p in s.open_paths if not p.causal]
    blocked_noncausal = [_blocked_text(G, p, zset) for p in s.blocked_paths if not p.causal]
    blocked_causal = [p.text for p in s.blocked_paths if p.causal]
    paragraphs = []
    if blocked_noncausal:
        word = "This non-causal path is" if len(blocked_noncausal) == 1 else "These non-causal paths are"
        paragraphs.append(f"{word} closed: {'; '.join(blocked_noncausal)}.")
    if open_noncausal:
        word, verb = ("path", "carries") if len(open_noncausal) == 1 else ("paths", "carry")
        paragraphs.append(
            f"The non-causal {word} {'; '.join(open_noncausal)} {verb} association between "
            f"{q.exposure} and {q.outcome} that is not their effect."
        )
    if blocked_causal and q.target == "total":
        paragraphs.append(f"It cuts part of the effect itself by blocking {'; '.join(blocked_causal)}.")
    if not s.valid:
        other = [r for r in s.reasons if not r.startswith("leaves the non-causal")]
        if other:
            paragraphs.append("Why it fails: " + "; ".join(other) + ".")
    if s.valid and s.model_ok is False:
        paragraphs.append(
            f"The adjustment set is valid, but the model is not right for these data: {s.model_reason}."
        )
    flag = se_note(s.large_sample_se_ratio)
    if flag:
        paragraphs.append(_sentence(flag, names))
    paragraphs += [_sentence(note, names) for note in s.notes]
    return paragraphs


def _choice_paragraphs(ctx: _Context, s: StrategyCheck, row: dict | None) -> list[str]:
    """How often a set chosen from the data was valid in the run (or which set the rule keeps in a very
    large sample), and how many units a restriction or matching kept."""
    study = ctx.report.scenario.study
    selection = s.selection
    paragraphs = []
    valid_share = _number(row.get("selected_valid_share")) if row is not None else None
    if selection and row is not None and valid_share is not None:
        chosen = selected_sets_text(row.get("selected_sets"))
        paragraphs.append(
            f"The set is chosen from the data: in {valid_share:.0%} of the simulated studies the chosen "
            f"set was valid" + (f"; chosen most often: {chosen}" if chosen else "") + "."
        )
    elif selection and s.large_sample_selected is not None:
        paragraphs.append(
            f"In a very large sample the rule would keep {names_in_words(s.large_sample_selected)}; in a "
            f"study of n = {study.n} it may keep another set: run the simulation to see how often."
        )
    kept = _number(row.get("mean_retained_n")) if row is not None else None
    if (s.restrict or s.match) and kept is not None:
        paragraphs.append(f"On average {kept:.0f} of the {ctx.result.n:,} units were kept.")
    return paragraphs


def _bias_text(bias: float, bias_mcse: float | None, truth: float) -> str:
    """The mean error in words, rounded to its Monte Carlo SE, with its share of the true effect."""
    size = with_mcse(bias, bias_mcse)
    rel = ""
    if truth:
        share = 100 * abs(bias) / abs(truth)
        rel = (
            f", {share:.0f}% of the true effect {truth:.3g}"
            if share >= 1
            else f", under 1% of the true effect {truth:.3g}"
        )
    return f"across the simulated studies its estimates were off by {size} on average{rel}"


def _run_paragraphs(ctx: _Context, row: dict, names) -> list[str]:
    """The run's bias, coverage, empirical SE and power for the strategy, and the run's note on it."""
    row_truth = _number(row.get("truth"))
    row_truth = ctx.truth if row_truth is None else row_truth
    bias, bias_mcse = _number(row.get("bias")), _number(row.get("bias_mcse"))
    cov, cov_mcse = _number(row.get("coverage")), _number(row.get("coverage_mcse"))
    emp_se, power = _number(row.get("emp_se")), _number(row.get("power"))
    numbers = []
    if bias is not None and row_truth is not None:
        numbers.append(_bias_text(bias, bias_mcse, row_truth))
    if cov is not None:
        cov_text = f"its {ctx.nominal:.0%} confidence intervals covered the truth in {cov:.1%} of studies"
        if coverage_is_off(cov, cov_mcse, ctx.nominal):
            cov_text += f" (they should in {ctx.nominal:.0%})"
        numbers.append(cov_text)
    if emp_se is not None:
        numbers.append(f"its estimates varied with a standard error of {emp_se:.3g}")
    wrong = _wrong_sign(ctx, str(row.get("name")), row_truth)
    mean = _number(row.get("mean"))
    if mean is not None and row_truth and mean * row_truth < 0:
        numbers.append(
            f"its estimates had the wrong sign on average ({mean:+.3g} against a true effect of {row_truth:+.3g})"
        )
    if power is not None:
        found = f"it found an effect (p < {ctx.alpha:g}) in {power:.0%} of studies"
        if wrong is not None and wrong > 0:
            found += f", of the wrong sign in {wrong:.0%}"
        numbers.append(found)
    paragraphs = ["In the simulation, " + "; ".join(numbers) + "."] if numbers else []
    paragraphs += _sign_magnitude_sentence(ctx, row, power)
    if row.get("note"):
        paragraphs.append(_sentence(str(row["note"]), names))
    return paragraphs


def _sign_magnitude_sentence(ctx: _Context, row: dict, power: float | None) -> list[str]:
    """Gelman & Carlin's (2014) warning at low power: a significant estimate overstates the effect (the
    exaggeration ratio, when power < 0.8 and the ratio > 1.2) and may have the wrong sign (type S, when over
    1%)."""
    ratio, type_s = _number(row.get("exaggeration")), _number(row.get("type_s"))
    if power is None or power >= 0.8 or ratio is None or ratio <= 1.2:
        return []
    n = getattr(ctx.result, "n", None)
    where = f"At n = {n:,}" if isinstance(n, int) else "At this sample size"
    text = f"{where} a significant estimate overstates the effect {ratio:.1f}-fold on average"
    if type_s is not None and type_s > 0.01:
        text += f", and {type_s:.0%} of the significant estimates have the wrong sign"
    return [text + " (Gelman & Carlin's exaggeration ratio)."]


def _wrong_sign(ctx: _Context, name: str, truth: float | None) -> float | None:
    """The share of the run's studies that found an effect (p < alpha) of the wrong sign (Gelman & Carlin
    2014's type S error, counted over all studies); None without a run or a non-zero truth."""
    arrays = getattr(ctx.result, "arrays", None)
    if arrays is None or not truth or name not in list(arrays.strategies):
        return None
    j = list(arrays.strategies).index(name)
    estimate, p_value = arrays.estimate[:, j], arrays.p_value[:, j]
    fitted = np.isfinite(estimate) & np.isfinite(p_value)
    if not fitted.any():
        return None
    wrong = (p_value[fitted] < ctx.alpha) & (np.sign(estimate[fitted]) == -np.sign(truth))
    return float(wrong.mean())


def _large_sample_paragraphs(ctx: _Context, s: StrategyCheck) -> list[str]:
    """Without a run: the closed form's large-sample estimate against the truth."""
    ls_bias = _number(s.large_sample_bias)
    if ls_bias is None or ctx.truth is None:
        return []
    truth = ctx.truth
    return [
        f"In a very large sample its estimate would be {truth + ls_bias:.3g} against a true effect "
        f"of {truth:.3g} (bias {ls_bias:+.3g}). Run the simulation to see coverage and precision at "
        f"n = {ctx.report.scenario.study.n}."
    ]


def _recommendation(ctx: _Context, s: StrategyCheck, row: dict | None) -> str:
    """Use it, prefer another, wait for a run, or not: from the verdict, the run and the precision ranking."""
    name, selection = s.name, s.selection
    valid_share = _number(row.get("selected_valid_share")) if row is not None else None
    if selection and valid_share is None and s.valid:
        return (
            "Depends on the data: the candidates include a valid set, but each study keeps its own "
            "choice. Run the simulation to see how often the chosen set is valid."
        )
    if selection and valid_share is not None and valid_share < 0.95:
        return (
            f"Not recommended: the set chosen from the data was valid in only {valid_share:.0%} of "
            "studies, and the reported intervals ignore the choice. Fix the set from the graph instead."
        )
    if s.valid and s.model_ok is False and not s.estimand_note:
        return (
            "Not recommended: the adjustment set is valid, but the model does not estimate the target "
            "even in large samples (misspecified; see above)."
        )
    if s.valid and (ctx.off_target(name) or s.model_ok is False):
        return (
            "Not recommended for this question: the adjustment set is valid, but the simulated "
            "estimates miss the quantity asked for (see the note above)."
        )
    if s.valid:
        return _valid_recommendation(ctx, name)
    if ctx.usable:
        return "Not recommended: it answers a different question than the one asked."
    return (
        "Not recommended, but no strategy here is valid: under this graph no set of "
        "observed variables removes the bias. Measuring the latent variables or "
        "another design is needed."
    )


def _valid_recommendation(ctx: _Context, name: str) -> str:
    """A usable valid strategy: recommended when it is the most precise of its scale, else name the
    better one and how much larger its SE is."""
    best = ctx.best_in.get(ctx.group(name))
    if best is None or name == best:
        several_scales = len({ctx.group(u) for u in ctx.usable}) > 1
        where = f" for the {ctx.group(name)[0]}" if several_scales else " here"
        return "Recommended: valid" + (
            f", and the most precise valid strategy{where}."
            if len(ctx.usable) > 1
            else ", the only valid one."
        )
    ratio = ctx.precision.get(name, math.nan) / ctx.precision[best]
    extra = (
        f" ({name}'s standard error is {100 * (ratio - 1):.0f}% larger than {best}'s)"
        if math.isfinite(ratio) and ratio > 1.005
        else ""
    )
    return f"Valid, but {best} estimates the same effect more precisely{extra}."


def explain(report: CheckReport, result=None) -> list[Story]:
    """One plain-language story per strategy.

    Each story tells, in order: what the strategy fits (:func:`_method_paragraphs`), the paths it blocks or
    leaves open (:func:`_path_paragraphs`), how its set was chosen and the units kept
    (:func:`_choice_paragraphs`), the run's numbers or the large-sample figures, and a recommendation.

    Parameters
    ----------
    report : CheckReport
        The graph analysis of the scenario.
    result : SimulationResult, optional
        A simulation of the same scenario; without it the stories quote the large-sample figures of the
        closed form where there is one.

    Returns
    -------
    list of Story
        In the scenario's strategy order.

    Examples
    --------
    >>> from workbench.analysis.check import check
    >>> from workbench import load_preset
    >>> story = explain(check(load_preset("common_cause")))[1]
    >>> story.title
    'adjust_soil: adjusts for soil_quality (valid)'
    >>> print(story.paragraphs[1])
    This non-causal path is closed: fertiliser <- soil_quality -> wheat_yield (blocked by adjusting for soil_quality).
    """
    ctx = _context(report, result)
    scenario = report.scenario
    stories = []
    for s in report.checks:
        row = ctx.sim.get(s.name)
        paragraphs = _method_paragraphs(s, scenario.question)
        paragraphs += _path_paragraphs(s, scenario)
        paragraphs += _choice_paragraphs(ctx, s, row)
        if row is not None:
            paragraphs += _run_paragraphs(ctx, row, scenario.names)
        else:
            paragraphs += _large_sample_paragraphs(ctx, s)
        recommendation = _recommendation(ctx, s, row)
        stories.append(Story(s.name, s.valid, _title(s), paragraphs, recommendation))
    return stories


_LABEL_COLOURS = {"good": "#00603F", "neutral": "#555555", "bad": "#A33C00"}


def consequences_html(report: CheckReport | None, strategy: str = "") -> str:
    """For the dashboard's Graph tab and the report: the chosen strategy's model verdict, then for every
    observed covariate the consequence of adjusting for it alone and on top of the optimal set (good,
    neutral or bad, and why), as an HTML fragment with every name escaped.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.analysis.check import check
    >>> text = consequences_html(check(load_preset("m_bias")), "adjust_rating")
    >>> "show_rating" in text and ">bad<" in text and "Model:" in text
    True
    """
    if report is None:
        return ""
    parts = []
    chosen = next((c for c in report.checks if c.name == strategy), None)
    if chosen is not None:
        word = {True: "right", False: "MISSPECIFIED", None: "not judged"}[chosen.model_ok]
        parts.append(
            f"<p style='margin:4px 0'><b>Model:</b> {html.escape(word)} ({html.escape(chosen.model_reason)})</p>"
        )
    rows = []
    for name, found in report.adjust_consequences.items():
        cells = []
        for key in ("alone", "with_optimal"):
            c = found[key]
            if c is None:
                cells.append("<td>-</td>")
                continue
            colour = _LABEL_COLOURS.get(c.label, "#333333")
            cells.append(
                f"<td title='{html.escape(c.why, quote=True)}'><span style='color:{colour};font-weight:700'>"
                f"{html.escape(c.label)}</span><br><span style='color:#555'>{html.escape(c.why)}</span></td>"
            )
        rows.append(f"<tr><td><b>{html.escape(name)}</b></td>{''.join(cells)}</tr>")
    if rows:
        parts.append(
            "<b>Adjusting for each covariate</b><table style='font-size:11px;border-collapse:collapse'>"
            "<tr><th>variable</th><th>alone</th><th>on top of the optimal set</th></tr>"
            + "".join(rows)
            + "</table>"
        )
    return "<div class='wb-consequences' style='font-size:12px'>" + "".join(parts) + "</div>"


def also_sentences(result) -> list[str]:
    """One plain sentence per strategy and ``also`` effect of a simulation: how often the study detects that
    effect, how far off it is, and how much the correlation with the other regressors inflates its variance
    (the closed-form VIF, :func:`workbench.engine.metrics.variance_inflation`); empty without ``also``.

    Examples
    --------
    >>> from workbench import load_preset, simulate
    >>> also_sentences(simulate(load_preset("two_exposures"), replicates=200, seed=1))[0][:40]
    'Strategy adjust_heating also estimates t'
    """
    if result is None or not result.arrays.also_names:
        return []
    sentences = []
    for r in result.also_table().to_dict(orient="records"):
        text = (
            f"Strategy {r['strategy']} also estimates the direct effect of {r['variable']} (true value "
            f"{r['truth']:.3g}): it found it in {r['power']:.0%} of studies of n = {result.n:,}, "
            f"off by {r['bias']:+.3g} on average"
        )
        vif = _number(r.get("vif"))
        if vif is not None and vif > 1.05:
            text += (
                f"; its correlation with the other variables in the model makes its variance {vif:.1f} times "
                "what it would be alone (variance inflation factor)"
            )
        sentences.append(text + ".")
    return sentences
