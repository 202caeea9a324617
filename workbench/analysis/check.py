"""What the graph alone says, before any simulation: roles, paths, verdicts, valid sets and the truth.

:func:`check` gathers the graph analysis of :mod:`workbench.graph` and, for linear-Gaussian graphs, the
closed-form algebra of :mod:`workbench.graph.linear` (true effect; each strategy's large-sample estimate, bias and
SE factor), so users see the answer the simulation should reproduce. Graphs with binary variables (and
strategies that restrict or match) have no closed form: their large-sample figures come from a large
simulation in batches, with a Monte Carlo SE (:mod:`workbench.analysis.large_sample`).

Every strategy gets two verdicts: ``set_valid`` (the graph's: does the adjustment set identify the target?)
and ``model_ok`` (does the fitted model, with that set, converge to the target? False when
misspecified, as a linear probability model is for a risk difference with a continuous confounder). Every
observed covariate gets the consequence of adjusting for it, alone and on top of the optimal set
(:mod:`workbench.graph.controls`).

Each strategy's findings are a :class:`StrategyCheck`; the :class:`CheckReport` holds them and renders them as
text (:meth:`CheckReport.as_text`), HTML (:meth:`CheckReport.as_html`, shown by notebooks) and JSON
(:meth:`CheckReport.to_dict`).

Examples
--------
>>> from workbench import load_preset
>>> report = check(load_preset("common_cause"))
>>> [(c.name, c.valid) for c in report.checks]
[('unadjusted', False), ('adjust_soil', True)]
>>> "INVALID unadjusted" in report.as_text()
True
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from workbench.analysis.implied import ImpliedMoments, implied_moments_of
from workbench.analysis.large_sample import (
    LARGE_SAMPLE_N,
    LARGE_SAMPLE_SEED,
    model_verdict,
    se_note,
    simulated_large_sample,
)
from workbench.engine.truth import estimand, fit_label, model_kind, true_effect
from workbench.formatting.jsonable import to_jsonable
from workbench.formatting.phrases import strategy_text
from workbench.formatting.tables import (
    Bullets,
    Column,
    Heading,
    Paragraph,
    Table,
    TableSpec,
    render_html,
    render_text,
    significant,
)
from workbench.graph import (
    MAX_PATHS,
    PathInfo,
    find_roles,
    judge_strategy,
    linear,
    list_paths,
    minimal_sets,
    minimal_sets_note,
    optimal_set,
    with_default_strategies,
)
from workbench.graph.controls import Consequence, consequences
from workbench.scenario.model import CHANGE_THRESHOLD, Scenario, Strategy

__all__ = [
    "CheckReport",
    "StrategyCheck",
    "check",
    "large_sample_rows",
    "large_sample_selection",
    "ASSUMPTION",
    "LARGE_SAMPLE_N",
    "LARGE_SAMPLE_SEED",
]

ASSUMPTION = (
    "The graph and its effect sizes are assumptions. Everything here shows the consequences of those "
    "assumptions, not facts about the world."
)


@dataclass(frozen=True)
class StrategyCheck:
    """What the graph says about one strategy, and its large-sample figures.

    Attributes
    ----------
    name, model : str
    adjust : tuple of str
        The covariates (the candidates of a selection rule).
    standardize : bool
    selection : str or None
    restrict : tuple of (str, value)
        As in :class:`~workbench.scenario.model.Strategy`.
    match : tuple of str
    valid : bool
        The graph's verdict (:func:`workbench.graph.verdicts.judge_strategy`).
    reasons, notes : tuple of str
        Why, and precision notes.
    open_paths, blocked_paths : tuple of PathInfo
    estimand, estimand_note : str
        What the strategy's estimate targets, in words, and a note when that differs from the question.
    large_sample_estimate, large_sample_bias, large_sample_se_factor, vif : float or None
        The large-sample estimate, its bias, SE x sqrt(n) and the exposure's variance inflation factor
        (None where not available).
    large_sample_method : str or None
        ``"closed form"`` or the simulated data set it comes from.
    large_sample_selected : tuple of str or None
        For a selection rule, the set it keeps in large samples.
    large_sample_mcse, strategy_truth : float or None
        For a simulated large-sample figure: its Monte Carlo SE, and the truth on the strategy's own scale.
    large_sample_bias_mcse : float or None
        The Monte Carlo SE of the simulated large-sample bias (estimate and truth).
    large_sample_se_ratio : float or None
        Classical over empirical (sandwich) SE in large samples, for a classical OLS fit on a simulated graph.
    model_ok : bool or None
        The model verdict (:func:`workbench.analysis.large_sample.model_verdict`); None when not judged.
    model_reason : str
        Why, in words.
    """

    name: str
    adjust: tuple[str, ...]
    model: str
    standardize: bool
    selection: str | None
    restrict: tuple
    match: tuple[str, ...]
    valid: bool
    reasons: tuple[str, ...]
    notes: tuple[str, ...]
    open_paths: tuple[PathInfo, ...]
    blocked_paths: tuple[PathInfo, ...]
    estimand: str
    estimand_note: str
    large_sample_estimate: float | None = None
    large_sample_bias: float | None = None
    large_sample_se_factor: float | None = None
    vif: float | None = None
    large_sample_method: str | None = None
    large_sample_selected: tuple[str, ...] | None = None
    large_sample_mcse: float | None = None
    strategy_truth: float | None = None
    large_sample_bias_mcse: float | None = None
    large_sample_se_ratio: float | None = None
    model_ok: bool | None = None
    model_reason: str = ""
    fit: str = ""
    """The fit in words (:func:`workbench.engine.truth.fit_label`): the model, its SE and added terms."""

    @property
    def set_valid(self) -> bool:
        """The adjustment-set verdict (the same as :attr:`valid`, kept for compatibility)."""
        return self.valid

    @property
    def simulated(self) -> bool:
        """True when the large-sample figures come from a simulated data set (they then have an MCSE)."""
        return self.large_sample_mcse is not None

    def as_dict(self) -> dict[str, Any]:
        """The record as a dict (paths as :class:`~workbench.graph.PathInfo`): the rows of
        :attr:`CheckReport.strategies`."""
        out = {
            "name": self.name,
            "adjust": list(self.adjust),
            "model": self.model,
            "standardize": self.standardize,
            "selection": self.selection,
            "restrict": {name: list(v) if isinstance(v, tuple) else v for name, v in self.restrict},
            "match": list(self.match),
            "large_sample_selected": (
                list(self.large_sample_selected) if self.large_sample_selected is not None else None
            ),
            "valid": self.valid,
            "set_valid": self.valid,
            "model_ok": self.model_ok,
            "model_reason": self.model_reason,
            "reasons": list(self.reasons),
            "notes": list(self.notes),
            "open_paths": list(self.open_paths),
            "blocked_paths": list(self.blocked_paths),
            "large_sample_estimate": self.large_sample_estimate,
            "large_sample_bias": self.large_sample_bias,
            "large_sample_se_factor": self.large_sample_se_factor,
            "vif": self.vif,
            "estimand": self.estimand,
            "estimand_note": self.estimand_note,
            "large_sample_method": self.large_sample_method,
        }
        if self.simulated:
            out["large_sample_mcse"] = self.large_sample_mcse
            out["large_sample_bias_mcse"] = self.large_sample_bias_mcse
            out["large_sample_se_ratio"] = self.large_sample_se_ratio
            out["strategy_truth"] = self.strategy_truth
        return out

    def to_dict(self) -> dict[str, Any]:
        """The JSON shape of one strategy in ``workbench check --json`` (paths as text)."""
        out = {k: v for k, v in self.as_dict().items() if k not in ("open_paths", "blocked_paths")}
        out["open_paths"] = [p.text for p in self.open_paths]
        out["blocked_paths"] = [p.text for p in self.blocked_paths]
        return out

    def details(self) -> list[str]:
        """The strategy's findings, one line each: reasons, precision notes, estimand, open paths and the
        large-sample figures in words."""
        lines = [f"adjustment set {'valid' if self.valid else 'invalid'}: " + "; ".join(self.reasons)]
        lines.append(f"model: {self.model_reason}")
        flag = se_note(self.large_sample_se_ratio)
        if flag:
            lines.append(f"model SE: {flag}")
        lines += [f"precision: {note}" for note in self.notes]
        lines.append(f"estimates: {self.estimand}")
        if self.estimand_note:
            lines.append(f"note: {self.estimand_note}")
        lines.append("open paths: " + ("; ".join(p.text for p in self.open_paths) or "none"))
        if self.large_sample_selected is not None:
            chosen = ", ".join(self.large_sample_selected) or "nothing"
            lines.append(f"large sample: the rule keeps {chosen}")
        return lines


# ---- the report's tables, each specified once ------------------------------------------------------------
ROLES_TABLE = TableSpec((Column("variable", "variable"), Column("role", "role"), Column("reason", "reason")))
PATHS_TABLE = TableSpec((Column("kind", "path kind"), Column("path", "path")))
CONTROLS_TABLE = TableSpec(
    (
        Column("variable", "variable"),
        Column("alone", "alone"),
        Column("alone_why", "why"),
        Column("with_optimal", "on top of the optimal set"),
        Column("with_optimal_why", "why"),
    )
)
STRATEGIES_TABLE = TableSpec(
    (
        Column("verdict", "set"),
        Column("model_verdict", "model verdict"),
        Column("name", "strategy"),
        Column("model", "model"),
        Column("how", "adjusts for"),
        Column("large_sample_estimate", "large-sample estimate", significant(4), "right"),
        Column("large_sample_bias", "bias (MCSE)", align="right", mcse="large_sample_mcse", digits=4),
        Column("large_sample_se_factor", "SE x sqrt(n)", significant(4), "right"),
        Column("vif", "VIF", significant(3), "right"),
        Column("large_sample_method", "large-sample method"),
    )
)


def _strategy_record(c: StrategyCheck) -> dict[str, Any]:
    return {
        "verdict": "VALID" if c.valid else "INVALID",
        "model_verdict": {True: "ok", False: "MISSPECIFIED", None: "-"}[c.model_ok],
        "name": c.name,
        "model": c.fit or c.model + (" (standardised)" if c.standardize else ""),
        "how": strategy_text(c.adjust, c.selection, c.restrict, c.match),
        "large_sample_estimate": c.large_sample_estimate,
        "large_sample_bias": c.large_sample_bias,
        "large_sample_mcse": c.large_sample_bias_mcse or c.large_sample_mcse,
        "large_sample_se_factor": c.large_sample_se_factor,
        "vif": c.vif,
        "large_sample_method": c.large_sample_method,
    }


@dataclass
class CheckReport:
    """The graph analysis of one scenario (see :func:`check`).

    Attributes
    ----------
    scenario : Scenario
    roles : dict of str to list of (role, reason)
    paths : list of PathInfo
        Every path between exposure and outcome.
    checks : tuple of StrategyCheck
        One per strategy, in the scenario's order.
    minimal_sets : list of tuple of str
    optimal_set : tuple of str or None
    optimal_note : str
    truth : float or None
        The true effect when known in closed form (linear-Gaussian graphs), or its simulated value.
    truth_method : str
    direct_effect : float or None
    intercepts : dict of str to float
        The calibrated intercepts of binary variables.
    notes : list of str
    adjust_consequences : dict of str to dict
        Per observed covariate, ``{"alone": Consequence, "with_optimal": Consequence or None}``
        (:func:`workbench.graph.controls.consequences`): good, neutral or bad, and why.
    """

    scenario: Scenario
    roles: dict[str, list[tuple[str, str]]]
    paths: list[PathInfo]
    checks: tuple[StrategyCheck, ...]
    minimal_sets: list[tuple[str, ...]]
    optimal_set: tuple[str, ...] | None
    optimal_note: str
    truth: float | None
    truth_method: str
    direct_effect: float | None = None
    intercepts: dict[str, float] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    adjust_consequences: dict[str, dict[str, Consequence | None]] = field(default_factory=dict)
    implied: ImpliedMoments | None = None
    """The implied correlations of the observed variables and each R^2 (:mod:`workbench.analysis.implied`)."""

    def _consequence_json(self, key: str) -> dict[str, Any]:
        return {
            v: (c[key].to_dict() if c[key] is not None else None) for v, c in self.adjust_consequences.items()
        }

    @property
    def strategies(self) -> list[dict[str, Any]]:
        """The :attr:`checks` as dicts (:meth:`StrategyCheck.as_dict`): name, adjust, model, valid, reasons,
        notes, open_paths, blocked_paths, large_sample_estimate, large_sample_bias, large_sample_se_factor,
        vif, ... (None where not available)."""
        return [c.as_dict() for c in self.checks]

    def to_dict(self) -> dict[str, Any]:
        """The JSON shape of ``workbench check --json`` (NaN written as None)."""
        q = self.scenario.question
        return to_jsonable(
            {
                "title": self.scenario.title,
                "exposure": q.exposure,
                "outcome": q.outcome,
                "target": q.target,
                "scale": q.scale,
                "roles": {v: [r for r, _ in roles] for v, roles in self.roles.items()},
                "role_reasons": {v: [reason for _, reason in roles] for v, roles in self.roles.items()},
                "adjust_alone": self._consequence_json("alone"),
                "adjust_with_optimal": self._consequence_json("with_optimal"),
                "paths": [{"path": p.text, "causal": p.causal} for p in self.paths],
                "strategies": [c.to_dict() for c in self.checks],
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
            | (self.implied.to_dict() if self.implied is not None else {})
        )

    def parts(self) -> list:
        """The report as parts (:mod:`workbench.formatting.tables`), the one source of :meth:`as_text` and
        :meth:`as_html`."""
        sc, q = self.scenario, self.scenario.question
        intro = [sc.summary] if sc.summary else []
        intro.append(f"Question: the {q.target} effect of {q.exposure} on {q.outcome} ({q.scale})")
        if self.truth is not None:
            intro.append(f"True effect: {self.truth:.4g}  [{self.truth_method}]")
        roles = [
            {"variable": v if i == 0 else "", "role": role, "reason": reason}
            for v, items in self.roles.items()
            for i, (role, reason) in enumerate(items)
        ]
        paths = [{"kind": "causal" if p.causal else "non-causal", "path": p.text} for p in self.paths]
        controls = [
            {
                "variable": v,
                "alone": c["alone"].label,
                "alone_why": c["alone"].why,
                "with_optimal": c["with_optimal"].label if c["with_optimal"] else "-",
                "with_optimal_why": c["with_optimal"].why if c["with_optimal"] else "no observed valid set",
            }
            for v, c in self.adjust_consequences.items()
        ]
        parts: list = [
            Heading(sc.title),
            Paragraph(tuple(intro)),
            Table(ROLES_TABLE, tuple(roles), "Roles"),
            Table(PATHS_TABLE, tuple(paths), "Paths between exposure and outcome"),
            Table(CONTROLS_TABLE, tuple(controls), "Adjusting for each covariate: good, neutral or bad"),
            Table(STRATEGIES_TABLE, tuple(_strategy_record(c) for c in self.checks), "Strategies"),
        ]
        for c in self.checks:
            model = " (model MISSPECIFIED)" if c.model_ok is False else ""
            title = f"{'VALID' if c.valid else 'INVALID'} {c.name}{model}: " + strategy_text(
                c.adjust, c.selection, c.restrict, c.match
            )
            parts.append(Bullets(tuple(c.details()), title))
        minimal = tuple("{" + ", ".join(m) + "}" for m in self.minimal_sets) or ("none",)
        parts.append(Bullets(minimal, "Minimal valid adjustment sets (observed variables)"))
        optimal = "{" + ", ".join(self.optimal_set) + "}" if self.optimal_set is not None else "none"
        settled = [f"Optimal valid set: {optimal}  [{self.optimal_note}]"]
        settled += [f"Calibrated intercept of {name}: {value:.4f}" for name, value in self.intercepts.items()]
        parts.append(Paragraph(tuple(settled)))
        if self.implied is not None:
            parts.extend(self.implied.parts())
        parts.append(Bullets(tuple(self.notes), "Notes"))
        parts.append(Paragraph((ASSUMPTION,)))
        return parts

    def as_text(self) -> str:
        """A readable report: roles, paths, a table of the strategies with their verdicts and large-sample
        figures, each strategy's reasons and open paths, valid sets, truth and notes."""
        return render_text(self.parts())

    def as_html(self) -> str:
        """The report of :meth:`as_text` as an HTML fragment (every name escaped)."""
        return render_html(self.parts())

    def _repr_html_(self) -> str:
        return self.as_html()


# ---- large-sample figures ----------------------------------------------------------------------------------
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


def large_sample_selection(scenario: Scenario, strategy: Strategy, sigma=None) -> tuple[str, ...]:
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
    >>> from workbench.scenario.model import Strategy
    >>> sc = load_preset("common_cause")
    >>> large_sample_selection(sc, Strategy("s", ("soil_quality",), selection="p_value"))
    ('soil_quality',)
    """
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


def _intercepts(scenario: Scenario) -> dict[str, float]:
    """The calibrated intercepts of the binary variables (the data-generating engine is loaded only for
    graphs that have them, so ``workbench check`` on a linear-Gaussian graph starts without it)."""
    from workbench.engine.generate import calibrate_intercepts

    return dict(calibrate_intercepts(scenario))


def _truth(scenario: Scenario) -> tuple[float | None, str, float | None]:
    q = scenario.question
    direct = next((a.effect for a in scenario.arrows if (a.source, a.target) == (q.exposure, q.outcome)), 0.0)
    if scenario.is_linear_gaussian:
        if q.target == "direct":
            return direct, "closed form (the arrow's effect)", direct
        names = scenario.names
        total = linear.total_effects(scenario)[names.index(q.exposure), names.index(q.outcome)]
        return float(total), "closed form (sum over causal paths of products of effects)", direct
    truth = true_effect(scenario)
    return float(truth.value), str(truth.method), direct if q.target == "direct" else None


def _bias(estimate: float | None, truth: float | None) -> float | None:
    if estimate is None or truth is None:
        return None
    bias = estimate - truth
    return 0.0 if abs(bias) < 1e-12 * max(1.0, abs(truth)) else bias


def _large_sample_figures(s: Strategy, truth, closed: dict | None, simulated) -> dict[str, Any]:
    """The large-sample fields of one :class:`StrategyCheck`: from the closed form, the large simulation
    (:class:`workbench.analysis.large_sample.LargeSample`), or none."""
    if closed is not None:
        selected = closed.get("selected")
        return {
            "large_sample_estimate": closed["estimate"],
            "large_sample_bias": _bias(closed["estimate"], truth),
            "large_sample_se_factor": closed["se_factor"],
            "vif": closed["vif"],
            "large_sample_method": "closed form",
            "large_sample_selected": tuple(selected) if selected is not None else None,
        }
    if simulated is None:
        return {}
    return {
        "large_sample_estimate": simulated.estimate,
        "large_sample_bias": _bias(simulated.estimate, simulated.truth),
        "large_sample_se_factor": simulated.se_factor,
        "large_sample_method": (
            f"simulation of {LARGE_SAMPLE_N:,} units in batches (seed {LARGE_SAMPLE_SEED})"
        ),
        "large_sample_mcse": simulated.mcse,
        "large_sample_bias_mcse": simulated.bias_mcse,
        "large_sample_se_ratio": simulated.se_ratio,
        "strategy_truth": simulated.truth,
    }


def _strategy_check(scenario: Scenario, s: Strategy, truth, closed, simulated) -> StrategyCheck:
    verdict = judge_strategy(scenario, s)
    words, _, estimand_note = estimand(model_kind(s, scenario.outcome.is_binary), scenario, s.adjust)
    figures = _large_sample_figures(s, truth, closed, simulated)
    model_ok, model_reason = model_verdict(
        verdict.valid,
        figures.get("large_sample_bias"),
        figures.get("large_sample_bias_mcse"),
        figures.get("strategy_truth", truth),
        closed is not None,
    )
    return StrategyCheck(
        fit=fit_label(s, scenario),
        name=s.name,
        adjust=tuple(s.adjust),
        model=s.model,
        standardize=s.standardize,
        selection=s.selection,
        restrict=tuple(s.restrict),
        match=tuple(s.match),
        valid=verdict.valid,
        reasons=tuple(verdict.reasons),
        notes=tuple(verdict.notes),
        open_paths=tuple(verdict.open_paths),
        blocked_paths=tuple(verdict.blocked_paths),
        estimand=words,
        estimand_note=estimand_note,
        model_ok=model_ok,
        model_reason=model_reason,
        **figures,
    )


def _report_notes(scenario: Scenario, paths, minimal) -> list[str]:
    notes = []
    sets_note = minimal_sets_note(scenario)
    if sets_note:
        notes.append(sets_note)
    if len(paths) >= MAX_PATHS:
        notes.append(
            f"only the first {MAX_PATHS} paths between exposure and outcome are listed; "
            "verdicts use d-separation on the whole graph and do not depend on the list"
        )
    if not minimal:
        notes.append(
            "no valid adjustment set exists among the observed variables: no regression on these "
            "data can recover the effect under this graph (consider design-stage remedies)"
        )
    return notes


def check(scenario: Scenario) -> CheckReport:
    """Analyse the scenario's graph for its question.

    Parameters
    ----------
    scenario : Scenario
        Without strategies, the default strategies of its graph are checked
        (:func:`workbench.graph.defaults.with_default_strategies`).

    Returns
    -------
    CheckReport

    Examples
    --------
    >>> from workbench import load_preset
    >>> report = check(load_preset("common_cause"))
    >>> report.truth, [c.valid for c in report.checks]
    (0.25, [False, True])
    >>> round(report.checks[0].large_sample_bias, 4)
    0.2206
    """
    scenario = with_default_strategies(scenario)
    paths = list_paths(scenario)
    truth, method, direct = _truth(scenario)
    closed = large_sample_rows(scenario)
    needs_simulation = truth is not None and any(s.name not in closed for s in scenario.strategies)
    simulated = simulated_large_sample(scenario) if needs_simulation else {}
    checks = tuple(
        _strategy_check(scenario, s, truth, closed.get(s.name), simulated.get(s.name))
        for s in scenario.strategies
    )
    optimal, _, note = optimal_set(scenario)
    minimal = minimal_sets(scenario)
    intercepts = {} if scenario.is_linear_gaussian else _intercepts(scenario)
    return CheckReport(
        scenario=scenario,
        roles=find_roles(scenario),
        paths=paths,
        checks=checks,
        minimal_sets=minimal,
        optimal_set=optimal,
        optimal_note=note,
        truth=truth,
        truth_method=method,
        direct_effect=direct,
        intercepts=intercepts,
        notes=_report_notes(scenario, paths, minimal),
        adjust_consequences=consequences(scenario),
        implied=implied_moments_of(scenario),
    )
