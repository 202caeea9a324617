"""What the graph alone says, before any simulation: roles, paths, verdicts, valid sets and the truth.

:func:`check` gathers the graph analysis of :mod:`workbench.graph.adjustment` and, for linear-Gaussian graphs, the
closed-form algebra of :mod:`workbench.graph.linear` (true effect; each strategy's large-sample estimate, bias and
SE factor), so users see the answer the simulation should reproduce.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

from workbench.graph import adjustment, linear
from workbench.scenario.model import Scenario

__all__ = ["CheckReport", "check", "large_sample_rows", "large_sample_selection"]


@dataclass
class CheckReport:
    """The graph analysis of one scenario (see :func:`check`).

    Attributes
    ----------
    scenario : Scenario
    roles : dict of str to list of (role, reason)
    paths : list of PathInfo
        Every path between exposure and outcome.
    strategies : list of dict
        Per strategy: name, adjust, model, valid, reasons, notes, open_paths, blocked_paths,
        large_sample_estimate, large_sample_bias, large_sample_se_factor, vif (None where not available).
    minimal_sets : list of tuple of str
    optimal_set : tuple of str or None
    optimal_note : str
    truth : float or None
        The true effect when known in closed form (linear-Gaussian graphs), or its simulated value.
    truth_method : str
    notes : list of str
    """

    scenario: Scenario
    roles: dict[str, list[tuple[str, str]]]
    paths: list[adjustment.PathInfo]
    strategies: list[dict[str, Any]]
    minimal_sets: list[tuple[str, ...]]
    optimal_set: tuple[str, ...] | None
    optimal_note: str
    truth: float | None
    truth_method: str
    direct_effect: float | None = None
    intercepts: dict[str, float] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """The JSON shape of ``workbench check --json`` (NaN written as None)."""
        q = self.scenario.question
        return _clean(
            {
                "title": self.scenario.title,
                "exposure": q.exposure,
                "outcome": q.outcome,
                "target": q.target,
                "scale": q.scale,
                "roles": {v: [r for r, _ in roles] for v, roles in self.roles.items()},
                "role_reasons": {v: [reason for _, reason in roles] for v, roles in self.roles.items()},
                "paths": [{"path": p.text, "causal": p.causal} for p in self.paths],
                "strategies": [
                    {
                        **{k: v for k, v in s.items() if k not in ("open_paths", "blocked_paths")},
                        "adjust": list(s["adjust"]),
                        "open_paths": [p.text for p in s["open_paths"]],
                        "blocked_paths": [p.text for p in s["blocked_paths"]],
                    }
                    for s in self.strategies
                ],
                "minimal_sets": [list(m) for m in self.minimal_sets],
                "optimal_set": list(self.optimal_set) if self.optimal_set is not None else None,
                "optimal_note": self.optimal_note,
                "truth": self.truth,
                "truth_method": self.truth_method,
                "direct_effect": self.direct_effect,
                "intercepts": self.intercepts,
                "notes": self.notes,
                "assumption": ASSUMPTION,
            }
        )

    def to_text(self) -> str:
        """A readable report: roles, paths open or blocked per strategy, verdicts with reasons, valid sets,
        truth and large-sample estimates."""
        sc, q = self.scenario, self.scenario.question
        lines = [sc.title, "=" * min(len(sc.title), 100)]
        if sc.summary:
            lines += [sc.summary, ""]
        lines.append(f"Question: the {q.target} effect of {q.exposure} on {q.outcome} ({q.scale})")
        if self.truth is not None:
            lines.append(f"True effect: {self.truth:.4g}  [{self.truth_method}]")
        lines += ["", "Roles"]
        width = max((len(v) for v in self.roles), default=4)
        for v, roles in self.roles.items():
            for i, (role, reason) in enumerate(roles):
                lines.append(f"  {(v if i == 0 else ''):<{width}}  {role:<22} {reason}")
        lines += ["", "Paths between exposure and outcome"]
        for p in self.paths:
            lines.append(f"  {'causal    ' if p.causal else 'non-causal'}  {p.text}")
        lines += ["", "Strategies"]
        for s in self.strategies:
            verdict = "VALID  " if s["valid"] else "INVALID"
            adjust = ", ".join(s["adjust"]) or "nothing"
            if s.get("selection"):
                how = f"chooses by {s['selection'].replace('_', ' ')} among {adjust}"
            else:
                how = f"adjusts for {adjust}"
            for name, value in s.get("restrict", {}).items():
                how += (
                    f"; restricted to {name} in [{value[0]:g}, {value[1]:g}]"
                    if isinstance(value, list)
                    else f"; restricted to {name} = {value}"
                )
            if s.get("match"):
                how += f"; matched on {', '.join(s['match'])}"
            lines.append(f"  {verdict} {s['name']} (model {s['model']}; {how})")
            for reason in s["reasons"]:
                lines.append(f"            - {reason}")
            for note in s["notes"]:
                lines.append(f"            * {note}")
            lines.append(f"            estimates: {s['estimand']}")
            if s["estimand_note"]:
                lines.append(f"            ! {s['estimand_note']}")
            open_text = "; ".join(p.text for p in s["open_paths"]) or "none"
            lines.append(f"            open paths: {open_text}")
            if s["large_sample_estimate"] is not None:
                vif = f", VIF {s['vif']:.3g}" if s["vif"] is not None else ""
                mcse = f" (MCSE {s['large_sample_mcse']:.2g})" if s.get("large_sample_mcse") else ""
                if s.get("large_sample_selected") is not None:
                    chosen = ", ".join(s["large_sample_selected"]) or "nothing"
                    lines.append(f"            large sample: the rule keeps {chosen}")
                lines.append(
                    f"            large sample: estimate {s['large_sample_estimate']:.4g}, bias "
                    f"{s['large_sample_bias']:+.4g}{mcse}, SE x sqrt(n) {s['large_sample_se_factor']:.4g}"
                    f"{vif}  [{s['large_sample_method']}]"
                )
        lines += ["", "Minimal valid adjustment sets (observed variables)"]
        if self.minimal_sets:
            lines += ["  {" + ", ".join(m) + "}" for m in self.minimal_sets]
        else:
            lines.append("  none")
        optimal = "{" + ", ".join(self.optimal_set) + "}" if self.optimal_set is not None else "none"
        lines.append(f"Optimal valid set: {optimal}  [{self.optimal_note}]")
        for name, value in self.intercepts.items():
            lines.append(f"Calibrated intercept of {name}: {value:.4f}")
        lines += [f"Note: {n}" for n in self.notes]
        lines += ["", ASSUMPTION]
        return "\n".join(lines)


ASSUMPTION = (
    "The graph and its effect sizes are assumptions. Everything here shows the consequences of those "
    "assumptions, not facts about the world."
)


def _clean(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    return value


def large_sample_rows(scenario: Scenario) -> dict[str, dict[str, float]]:
    """Large-sample (population) OLS results for each strategy of a linear-Gaussian scenario: the exposure's
    coefficient, its SE factor (SE x sqrt(n)) and the exposure's variance inflation factor.

    Returns an empty dict when the scenario has binary variables (no closed form).

    Examples
    --------
    >>> from workbench import load_preset
    >>> rows = large_sample_rows(load_preset("common_cause"))
    >>> round(rows["adjust_soil"]["estimate"], 6)
    0.25
    """
    if not scenario.is_linear_gaussian:
        return {}
    sigma = linear.implied_covariance(scenario)
    q = scenario.question
    out = {}
    for s in scenario.strategies:
        if s.restrict or s.match:  # a restricted (truncated) or matched sample has no closed form here
            continue
        adjust = large_sample_selection(scenario, s, sigma) if s.selection else tuple(s.adjust)
        fit = linear.population_regression(sigma, scenario.names, q.outcome, [q.exposure, *adjust])
        out[s.name] = {
            "estimate": fit.coefficients[q.exposure],
            "se_factor": fit.se_factor,
            "vif": fit.vif,
            "also": {a: fit.coefficients[a] for a in q.also if a in adjust},
            "selected": adjust if s.selection else None,
        }
    return out


def large_sample_selection(scenario: Scenario, strategy, sigma=None) -> tuple[str, ...]:
    """The set a selection rule converges to as n grows, on a linear-Gaussian graph.

    ``"p_value"`` keeps, in the limit, every candidate whose population coefficient in the full model is not
    zero (its p-value tends to 0); ``"change_in_estimate"`` keeps every candidate whose removal changes the
    population coefficient of the exposure by more than 10% of it.

    References
    ----------
    Mickey R.M., Greenland S. (1989). American Journal of Epidemiology 129(1):125-137.

    Examples
    --------
    >>> from workbench import load_preset
    >>> from workbench.scenario.parse import Strategy
    >>> sc = load_preset("common_cause")
    >>> large_sample_selection(sc, Strategy("s", ("soil_quality",), selection="p_value"))
    ('soil_quality',)
    """
    from workbench.engine.ols import CHANGE_THRESHOLD

    sigma = linear.implied_covariance(scenario) if sigma is None else sigma
    q = scenario.question
    candidates = list(strategy.adjust)
    full = linear.population_regression(sigma, scenario.names, q.outcome, [q.exposure, *candidates])
    if strategy.selection == "p_value":
        scale = max(1e-300, max(abs(v) for v in full.coefficients.values()))
        return tuple(c for c in candidates if abs(full.coefficients[c]) > 1e-10 * scale)
    b = full.coefficients[q.exposure]
    kept = []
    for c in candidates:
        others = [o for o in candidates if o != c]
        without = linear.population_regression(sigma, scenario.names, q.outcome, [q.exposure, *others])
        change = abs(b - without.coefficients[q.exposure])
        if change > CHANGE_THRESHOLD * abs(b) and change > 1e-12:
            kept.append(c)
    return tuple(kept)


LARGE_SAMPLE_N = 200_000
LARGE_SAMPLE_SEED = 20261202


@lru_cache(maxsize=64)
def _simulated_large_sample(scenario: Scenario) -> dict[str, dict[str, Any]]:
    """Per strategy, the fit on one simulated data set of :data:`LARGE_SAMPLE_N` units (graphs with binary
    variables, which have no closed form): estimate, its SE (the Monte Carlo error of this large-sample
    figure), SE x sqrt(n), and the truth on the strategy's own scale."""
    from workbench.analysis.estimate import estimate
    from workbench.engine.generate import draw
    from workbench.engine.truth import estimand, model_kind, true_effect

    data = draw(scenario, LARGE_SAMPLE_N, seed=LARGE_SAMPLE_SEED)
    fits = estimate(scenario, data).set_index("strategy")
    binary = scenario.outcome.is_binary
    out = {}
    for s in scenario.strategies:
        _, scale, _ = estimand(model_kind(s, binary), scenario, s.adjust)
        row = fits.loc[s.name]
        out[s.name] = {
            "estimate": float(row["estimate"]),
            "mcse": float(row["se"]),
            "se_factor": float(row["se"]) * LARGE_SAMPLE_N**0.5,
            "truth": float(true_effect(scenario, scale).value),
        }
    return out


def _truth(scenario: Scenario) -> tuple[float | None, str, float | None]:
    q = scenario.question
    direct = next((a.effect for a in scenario.arrows if (a.source, a.target) == (q.exposure, q.outcome)), 0.0)
    if scenario.is_linear_gaussian:
        if q.target == "direct":
            return direct, "closed form (the arrow's effect)", direct
        names = scenario.names
        total = linear.total_effects(scenario)[names.index(q.exposure), names.index(q.outcome)]
        return float(total), "closed form (sum over causal paths of products of effects)", direct
    try:
        from workbench.engine.truth import true_effect
    except ImportError:  # pragma: no cover - the engine ships truth.py
        return None, "not available", None
    truth = true_effect(scenario)
    return float(truth.value), str(truth.method), direct if q.target == "direct" else None


def _bias(estimate: float | None, truth: float | None) -> float | None:
    if estimate is None or truth is None:
        return None
    bias = estimate - truth
    return 0.0 if abs(bias) < 1e-12 * max(1.0, abs(truth)) else bias


def check(scenario: Scenario) -> CheckReport:
    """Analyse the scenario's graph for its question.

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    CheckReport

    Examples
    --------
    >>> from workbench import load_preset
    >>> report = check(load_preset("common_cause"))
    >>> report.truth, [s["valid"] for s in report.strategies]
    (0.25, [False, True])
    >>> round(report.strategies[0]["large_sample_bias"], 4)
    0.2206
    """
    roles = adjustment.find_roles(scenario)
    paths = adjustment.list_paths(scenario)
    truth, method, direct = _truth(scenario)
    large = large_sample_rows(scenario)
    simulated = {} if large or truth is None else _simulated_large_sample(scenario)
    rows = []
    from workbench.engine.truth import estimand, model_kind

    for s in scenario.strategies:
        verdict = adjustment.judge_strategy(scenario, s)
        words, _, estimand_note = estimand(model_kind(s, scenario.outcome.is_binary), scenario, s.adjust)
        ls = large.get(s.name)
        estimate = ls["estimate"] if ls else None
        strategy_truth = truth
        extra: dict[str, Any] = {"large_sample_method": "closed form" if ls else None}
        if s.name in simulated:
            sim = simulated[s.name]
            estimate, strategy_truth = sim["estimate"], sim["truth"]
            ls = {"se_factor": sim["se_factor"], "vif": None}
            extra = {
                "large_sample_method": f"one simulated data set of {LARGE_SAMPLE_N:,} units",
                "large_sample_mcse": sim["mcse"],
                "strategy_truth": strategy_truth,
            }
        rows.append(
            {
                "name": s.name,
                "adjust": list(s.adjust),
                "model": s.model,
                "standardize": s.standardize,
                "selection": s.selection,
                "restrict": {name: list(v) if isinstance(v, tuple) else v for name, v in s.restrict},
                "match": list(s.match),
                "large_sample_selected": (
                    list(ls["selected"]) if ls and ls.get("selected") is not None else None
                ),
                "valid": verdict.valid,
                "reasons": verdict.reasons,
                "notes": verdict.notes,
                "open_paths": verdict.open_paths,
                "blocked_paths": verdict.blocked_paths,
                "large_sample_estimate": estimate,
                "large_sample_bias": _bias(estimate, strategy_truth),
                "large_sample_se_factor": ls["se_factor"] if ls else None,
                "vif": ls["vif"] if ls else None,
                "estimand": words,
                "estimand_note": estimand_note,
                **extra,
            }
        )
    optimal, latent, note = adjustment.optimal_set(scenario)
    notes = []
    sets_note = adjustment.minimal_sets_note(scenario)
    if sets_note:
        notes.append(sets_note)
    if len(paths) >= adjustment.MAX_PATHS:
        notes.append(
            f"only the first {adjustment.MAX_PATHS} paths between exposure and outcome are listed; "
            "verdicts use d-separation on the whole graph and do not depend on the list"
        )
    minimal = adjustment.minimal_sets(scenario)
    if not minimal:
        notes.append(
            "no valid adjustment set exists among the observed variables: no regression on these "
            "data can recover the effect under this graph (consider design-stage remedies)"
        )
    intercepts: dict[str, float] = {}
    if not scenario.is_linear_gaussian:
        try:
            from workbench.engine.generate import calibrate_intercepts

            intercepts = dict(calibrate_intercepts(scenario))
        except ImportError:  # pragma: no cover
            intercepts = {}
    return CheckReport(
        scenario, roles, paths, rows, minimal, optimal, note, truth, method, direct, intercepts, notes
    )
