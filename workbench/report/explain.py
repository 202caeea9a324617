"""Plain-language stories of what each strategy does, for stakeholders.

:func:`explain` turns the graph analysis (:func:`workbench.analysis.check.check`) and, when there is one, a simulation
result (:func:`workbench.analysis.simulate.simulate`) into one short story per strategy: what it adjusts for, which
paths between the exposure and the outcome that opens or blocks, the resulting bias and coverage with numbers
from the run, and a recommendation. The dashboard's Explain tab and the HTML report show the same stories.

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

from workbench.analysis.check import ASSUMPTION, CheckReport
from workbench.report.tables import selected_sets_text, strategy_text, with_mcse

__all__ = ["ASSUMPTION_NOTE", "Story", "explain"]

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


#: How a selection rule is named in a title and described in a sentence.
_RULES = {"p_value": "by p-value", "change_in_estimate": "by change in estimate"}
_RULE_WORDS = {
    "p_value": "whose coefficient is significant (p < alpha)",
    "change_in_estimate": "whose removal changes the estimate by more than 10%",
}


def _restriction(restrict: dict) -> str:
    """``{"shift": 0, "age": [1, 5]}`` as ``shift = 0, age in [1, 5]``."""
    return strategy_text([], None, restrict).split("only units with ", 1)[-1]


def _sentence(note: str, names) -> str:
    """A note as a sentence: a capital first letter (unless it starts with a variable's name, which keeps
    its spelling) and a full stop."""
    first = note.split(" ", 1)[0].strip(",.:;'")
    head = note if first in names else note[:1].upper() + note[1:]
    return head + ("" if note.endswith(".") else ".")


def _number(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _sets(names) -> str:
    names = list(names)
    if not names:
        return "nothing"
    if len(names) == 1:
        return names[0]
    return ", ".join(names[:-1]) + " and " + names[-1]


def _rows_by_name(result) -> dict[str, dict]:
    if result is None:
        return {}
    return {str(r["name"]): r for r in result.table.to_dict("records")}


def explain(report: CheckReport, result=None) -> list[Story]:
    """One plain-language story per strategy.

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
    It blocks the non-causal path fertiliser <- soil_quality -> wheat_yield.
    """
    scenario = report.scenario
    q = scenario.question
    sim = _rows_by_name(result)
    alpha = scenario.study.alpha if result is None else float(getattr(result, "alpha", scenario.study.alpha))
    truth = _number(result.truth) if result is not None else _number(report.truth)
    nominal = 1 - alpha

    def off_target(name: str) -> bool:
        """A valid set whose estimates still miss the truth clearly in the run (e.g. a conditional odds
        ratio scored against a marginal one): |bias| over 3 MCSE and at least 5% of the truth."""
        row = sim.get(name)
        if row is None:
            return False
        bias, mcse, row_truth = (_number(row.get(k)) for k in ("bias", "bias_mcse", "truth"))
        if bias is None or mcse is None:
            return False
        scale = abs(row_truth) if row_truth else abs(truth or 0.0)
        return abs(bias) > 3 * mcse and (scale == 0 or abs(bias) >= 0.05 * scale)

    def group(name: str) -> tuple[str, float]:
        """Strategies compared for precision: same scale and same truth."""
        row = sim.get(name, {})
        estimand = str(row.get("estimand") or "effect")
        row_truth = _number(row.get("truth"))
        return (
            "log odds ratio" if "log odds" in estimand else estimand,
            round(row_truth if row_truth is not None else (truth or 0.0), 9),
        )

    def doubtful_selection(s: dict) -> bool:
        """A set chosen from the data counts as usable only when the run shows it valid in >= 95% of
        studies."""
        if not isinstance(s.get("selection"), str):
            return False
        share = _number(sim.get(s["name"], {}).get("selected_valid_share"))
        return share is None or share < 0.95

    usable = [
        s["name"]
        for s in report.strategies
        if s["valid"] and not off_target(s["name"]) and not doubtful_selection(s)
    ]
    precision: dict[str, float] = {}
    for s in report.strategies:
        if s["name"] not in usable:
            continue
        if sim:
            se = _number(sim.get(s["name"], {}).get("emp_se"))
        else:
            se = _number(s.get("large_sample_se_factor"))
        if se is not None:
            precision[s["name"]] = se

    best_in: dict[tuple[str, float], str] = {}
    for candidate, se in precision.items():
        current = best_in.get(group(candidate))
        if current is None or se < precision[current]:
            best_in[group(candidate)] = candidate

    stories = []
    for s in report.strategies:
        name, adjust = s["name"], list(s["adjust"])
        selection = s.get("selection") if isinstance(s.get("selection"), str) else None
        restrict = s.get("restrict") if isinstance(s.get("restrict"), dict) else {}
        verdict = "valid" if s["valid"] else "invalid"
        if selection:
            rule = _RULES.get(selection, selection)
            title = f"{name}: chooses from {_sets(adjust)} {rule} (candidates {verdict})"
        else:
            title = f"{name}: adjusts for {_sets(adjust)} ({verdict})"
        if restrict:
            title = title.replace(f" ({verdict})", f", only units with {_restriction(restrict)} ({verdict})")
        match = [str(m) for m in s.get("match") or []]
        if match:
            title = title.replace(f" ({verdict})", f", matched on {', '.join(match)} ({verdict})")
        paragraphs = []
        model = s.get("model", "ols")
        what = {
            "ols": "a linear regression",
            "logit": "a logistic regression"
            + (" standardised to the whole sample" if s.get("standardize") else ""),
        }.get(model, model)
        if selection:
            paragraphs.append(
                f"It fits {what} of {q.outcome} on {q.exposure} and the covariates it keeps: the set is "
                f"chosen from the data in each study, keeping among {_sets(adjust)} those "
                f"{_RULE_WORDS.get(selection, selection)}."
            )
        else:
            paragraphs.append(
                f"It fits {what} of {q.outcome} on {q.exposure}"
                + (
                    f" and {_sets(adjust)}"
                    if adjust
                    else (
                        " alone, within the units kept" if restrict or match else " alone, the raw comparison"
                    )
                )
                + "."
            )
        if restrict:
            paragraphs.append(
                f"It analyses only the units with {_restriction(restrict)}, which conditions on "
                + (
                    "that variable much as adjusting for it"
                    if len(restrict) == 1
                    else "those variables much as adjusting for them"
                )
                + " would."
            )
        if match:
            paragraphs.append(
                f"It first pairs each unit with {q.exposure} = 1 with one with {q.exposure} = 0 and the same "
                f"{', '.join(match)}, and drops the units left unpaired: this balances the matched variables "
                "between the groups by design."
            )
        open_noncausal = [p.text for p in s["open_paths"] if not p.causal]
        blocked_noncausal = [p.text for p in s["blocked_paths"] if not p.causal]
        blocked_causal = [p.text for p in s["blocked_paths"] if p.causal]
        if blocked_noncausal:
            word = "path" if len(blocked_noncausal) == 1 else "paths"
            paragraphs.append(f"It blocks the non-causal {word} {'; '.join(blocked_noncausal)}.")
        if open_noncausal:
            word = "path" if len(open_noncausal) == 1 else "paths"
            paragraphs.append(
                f"It leaves the non-causal {word} {'; '.join(open_noncausal)} open, so part of "
                f"the association between {q.exposure} and {q.outcome} is not their effect."
            )
        if blocked_causal and q.target == "total":
            paragraphs.append(f"It cuts part of the effect itself by blocking {'; '.join(blocked_causal)}.")
        if not s["valid"]:
            other = [r for r in s["reasons"] if not r.startswith("leaves the non-causal")]
            if other:
                paragraphs.append("Why it fails: " + "; ".join(other) + ".")
        for note in s.get("notes") or []:
            paragraphs.append(_sentence(note, scenario.names))

        row = sim.get(name)
        valid_share = _number(row.get("selected_valid_share")) if row is not None else None
        if selection and row is not None and valid_share is not None:
            chosen = selected_sets_text(row.get("selected_sets"))
            paragraphs.append(
                f"The set is chosen from the data: in {valid_share:.0%} of the simulated studies the chosen "
                f"set was valid" + (f"; chosen most often: {chosen}" if chosen else "") + "."
            )
        elif selection and s.get("large_sample_selected") is not None:
            paragraphs.append(
                f"In a very large sample the rule would keep {_sets(s['large_sample_selected'])}; in a study "
                f"of n = {scenario.study.n} it may keep another set: run the simulation to see how often."
            )
        kept = _number(row.get("mean_retained_n")) if row is not None else None
        if (restrict or match) and kept is not None:
            n_run = getattr(result, "n", scenario.study.n)
            paragraphs.append(f"On average {kept:.0f} of the {n_run:,} units were kept.")
        if row is not None:
            row_truth = _number(row.get("truth"))
            row_truth = truth if row_truth is None else row_truth
            bias, bias_mcse = _number(row.get("bias")), _number(row.get("bias_mcse"))
            cov, cov_mcse = _number(row.get("coverage")), _number(row.get("coverage_mcse"))
            emp_se, power = _number(row.get("emp_se")), _number(row.get("power"))
            numbers = []
            if bias is not None and row_truth is not None:
                size = with_mcse(bias, bias_mcse)
                share = 100 * abs(bias) / abs(row_truth) if row_truth else math.nan
                rel = (
                    (
                        f", {share:.0f}% of the true effect {row_truth:.3g}"
                        if share >= 1
                        else f", under 1% of the true effect {row_truth:.3g}"
                    )
                    if row_truth
                    else ""
                )
                numbers.append(
                    f"across the simulated studies its estimates were off by {size} on average{rel}"
                )
            if cov is not None:
                cov_text = f"its {nominal:.0%} confidence intervals covered the truth in {cov:.1%} of studies"
                if cov_mcse is not None and abs(cov - nominal) > 3 * cov_mcse:
                    cov_text += f" (they should in {nominal:.0%})"
                numbers.append(cov_text)
            if emp_se is not None:
                numbers.append(f"its estimates varied with a standard error of {emp_se:.3g}")
            if power is not None:
                numbers.append(f"it found an effect (p < {alpha:g}) in {power:.0%} of studies")
            if numbers:
                paragraphs.append("In the simulation, " + "; ".join(numbers) + ".")
            if row.get("note"):
                paragraphs.append(_sentence(str(row["note"]), scenario.names))
        else:
            ls_bias = _number(s.get("large_sample_bias"))
            if ls_bias is not None and truth is not None:
                paragraphs.append(
                    f"In a very large sample its estimate would be {truth + ls_bias:.3g} against a true effect "
                    f"of {truth:.3g} (bias {ls_bias:+.3g}). Run the simulation to see coverage and precision at "
                    f"n = {scenario.study.n}."
                )

        best = best_in.get(group(name))
        if selection and valid_share is None and s["valid"]:
            recommendation = (
                "Depends on the data: the candidates include a valid set, but each study keeps its own "
                "choice. Run the simulation to see how often the chosen set is valid."
            )
        elif selection and valid_share is not None and valid_share < 0.95:
            recommendation = (
                f"Not recommended: the set chosen from the data was valid in only {valid_share:.0%} of "
                "studies, and the reported intervals ignore the choice. Fix the set from the graph instead."
            )
        elif s["valid"] and off_target(name):
            recommendation = (
                "Not recommended for this question: the adjustment set is valid, but the simulated "
                "estimates miss the quantity asked for (see the note above)."
            )
        elif s["valid"]:
            if best is None or name == best:
                several_scales = len({group(u) for u in usable}) > 1
                where = f" for the {group(name)[0]}" if several_scales else " here"
                recommendation = "Recommended: valid" + (
                    f", and the most precise valid strategy{where}."
                    if len(usable) > 1
                    else ", the only valid one."
                )
            else:
                ratio = precision.get(name, math.nan) / precision[best]
                extra = (
                    f" (its standard error is {100 * (ratio - 1):.0f}% larger)"
                    if math.isfinite(ratio) and ratio > 1.005
                    else ""
                )
                recommendation = f"Valid, but {best} estimates the same effect more precisely{extra}."
        elif usable:
            recommendation = "Not recommended: it answers a different question than the one asked."
        else:
            recommendation = (
                "Not recommended, but no strategy here is valid: under this graph no set of "
                "observed variables removes the bias. Measuring the latent variables or "
                "another design is needed."
            )
        stories.append(Story(name, bool(s["valid"]), title, paragraphs, recommendation))
    return stories
