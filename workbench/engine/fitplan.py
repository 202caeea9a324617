"""The fitting plan of a scenario: what the replicate loop fits in every simulated study.

Each strategy becomes one :class:`Fit` (its model kind, regressors as variable indices, selection rule,
restriction and matching, and the truth it is scored against). Every fit is compared with the unadjusted fit
of the same model (the change in estimate and the SE ratio); where the scenario has no such strategy, a
hidden reference fit is added after the reported ones. The plan is cached per scenario, as are the validity
verdicts of the adjustment sets a selection rule may pick (:func:`is_valid_set`) and of whole strategies
(:func:`strategy_is_valid`).

Examples
--------
>>> from workbench import load_preset
>>> plan = fit_plan(load_preset("common_cause"))
>>> [(f.name, f.kind, f.regressors, f.reference) for f in plan.fits]
[('unadjusted', 'ols', (1,), 0), ('adjust_soil', 'ols', (1, 0), 0)]
"""

from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass

import numpy as np

from workbench.engine.truth import KIND_WORDS, estimand, model_kind, true_effect
from workbench.graph import judge, judge_strategy
from workbench.graph.linear import implied_covariance
from workbench.scenario.model import Scenario

__all__ = [
    "Fit",
    "Plan",
    "fit_plan",
    "is_valid_set",
    "strategy_is_valid",
    "used_covariance",
]


@dataclass(frozen=True)
class Fit:
    """One fit of the plan: a strategy, or the hidden unadjusted reference of a model kind.

    Attributes
    ----------
    name : str
    adjust : tuple of str
        The adjustment set (the candidates of a selection rule).
    kind : {"ols", "lpm", "logit", "logit_std", "ols_hc3", "poisson", "poisson_robust", "ols_interaction"}
        Classical OLS from cross-products, OLS with HC3 SEs (the linear probability model), logistic
        regression, standardised logistic contrast, OLS with HC3 SEs on a continuous outcome, Poisson
        regression with model-based SEs, modified Poisson (HC0 sandwich SEs), OLS with exposure x covariate
        terms (the sample-averaged effect).
    regressors : tuple of int
        Variable indices (file order), exposure first.
    also : tuple of int
        For each ``question.also`` variable its position among the regressors, or -1.
    reference : int
        Index in :attr:`Plan.fits` of the unadjusted fit of the same model.
    reported : bool
        A strategy of the scenario (False for a hidden reference).
    estimand, scale, note : str
        What the estimate targets in words, the truth's scale (``"difference"``, ``"log_odds_ratio"`` or
        ``"log_risk_ratio"``), a note on it.
    selection : str or None
        A data-driven rule choosing among ``adjust`` in each replicate.
    restrict : tuple of (int, value)
        Restrictions by variable index (see :func:`workbench.engine.design.restriction_mask`).
    match : tuple of int
        Variable indices matched on exactly.
    interactions : tuple of int
        ``ols_interaction`` only: positions in ``adjust`` of the covariates that also enter as exposure x
        (covariate - sample mean) terms (:mod:`workbench.engine.interactions`).
    """

    name: str
    adjust: tuple[str, ...]
    kind: str
    regressors: tuple[int, ...]
    also: tuple[int, ...]
    reference: int
    reported: bool
    estimand: str
    scale: str
    note: str
    selection: str | None = None
    restrict: tuple = ()
    match: tuple[int, ...] = ()
    interactions: tuple[int, ...] = ()
    flexible: tuple[int, ...] = ()
    """``ols_flexible`` only: positions in ``adjust`` of the covariates that also enter through restricted
    cubic spline columns (:mod:`workbench.engine.splines`)."""

    @property
    def masked(self) -> bool:
        """Fitted on a subset of each replicate's rows (a restriction or matching)."""
        return bool(self.restrict or self.match)

    @property
    def fixed(self) -> bool:
        """A plain fit: fixed set, whole sample (usable as the unadjusted reference)."""
        return self.selection is None and not self.masked


@dataclass(frozen=True, eq=False)
class Plan:
    """Every fit of a scenario and what the replicate loop needs to know about its variables.

    Attributes
    ----------
    fits : tuple of Fit
        The reported strategies in scenario order, then the hidden references.
    exposure, outcome : int
        Variable indices (file order).
    used : tuple of int
        The variables any fit uses, file order.
    binary_outcome, binary_exposure, linear_gaussian : bool
    also_names : tuple of str
        The question's ``also`` variables.
    truths : dict of str to Truth
        The true effect on each scale a fit (or the question) targets.
    """

    fits: tuple[Fit, ...]
    exposure: int
    outcome: int
    used: tuple[int, ...]
    binary_outcome: bool
    binary_exposure: bool
    linear_gaussian: bool
    also_names: tuple[str, ...]
    truths: dict

    @property
    def reported(self) -> list[Fit]:
        """The fits of the scenario's strategies (they come first in :attr:`fits`)."""
        return [f for f in self.fits if f.reported]

    @property
    def needs_rows(self) -> bool:
        """Some fit needs each replicate's rows, not only its cross-products."""
        return any(f.kind != "ols" or f.masked for f in self.fits)

    @property
    def restricts(self) -> bool:
        """Some fit uses a subset of the rows (restriction or matching)."""
        return any(f.masked for f in self.fits)


@functools.lru_cache(maxsize=256)
def is_valid_set(scenario: Scenario, adjust: tuple[str, ...]) -> bool:
    """Whether adjusting for ``adjust`` identifies the question's effect (cached).

    Examples
    --------
    >>> from workbench import load_preset
    >>> is_valid_set(load_preset("common_cause"), ("soil_quality",))
    True
    """
    return bool(judge(scenario, adjust).valid)


@functools.lru_cache(maxsize=256)
def strategy_is_valid(scenario: Scenario, strategy) -> bool:
    """Whether a strategy (its set, restriction and matching) identifies the question's effect (cached).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> [strategy_is_valid(sc, s) for s in sc.strategies]
    [False, True]
    """
    return bool(judge_strategy(scenario, strategy).valid)


def _fit(
    scenario: Scenario,
    name,
    adjust,
    kind,
    reported,
    reference=-1,
    selection=None,
    restrict=(),
    match=(),
    interactions=(),
    flexible=(),
):
    """One :class:`Fit` from a strategy's names (variables turned into file-order indices)."""
    names = scenario.names
    q = scenario.question
    regressors = (names.index(q.exposure),) + tuple(names.index(a) for a in adjust)
    also = tuple((1 + adjust.index(v)) if v in adjust else -1 for v in q.also)
    words, scale, note = estimand(kind, scenario, tuple(adjust))
    return Fit(
        name,
        tuple(adjust),
        kind,
        regressors,
        also,
        reference,
        reported,
        words,
        scale,
        note,
        selection,
        tuple((names.index(v), value) for v, value in restrict),
        tuple(names.index(v) for v in match),
        tuple(adjust.index(v) for v in interactions),
        tuple(adjust.index(v) for v in flexible),
    )


def _with_references(scenario: Scenario, fits: list[Fit]) -> list[Fit]:
    """The fits with their unadjusted reference set, plus the hidden references they need.

    The reference of a fit is a reported plain strategy with no adjustment and the same model, else a hidden
    unadjusted fit of that model (one per model kind), appended after the reported fits.
    """
    hidden: list[Fit] = []
    resolved = []
    for f in fits:
        # no covariate, no interaction, no spline: plain OLS
        kind = "ols" if f.kind in ("ols_interaction", "ols_flexible") else f.kind
        ref = next((j for j, g in enumerate(fits) if g.kind == kind and not g.adjust and g.fixed), None)
        if ref is None:
            ref = next((len(fits) + j for j, g in enumerate(hidden) if g.kind == kind), None)
        if ref is None:
            ref = len(fits) + len(hidden)
            hidden.append(_fit(scenario, f"(unadjusted {KIND_WORDS[kind]})", (), kind, False, ref))
        resolved.append(ref)
    return [dataclasses.replace(f, reference=r) for f, r in zip(fits, resolved, strict=True)] + hidden


@functools.lru_cache(maxsize=64)
def fit_plan(scenario: Scenario) -> Plan:
    """The fitting plan of a scenario (cached per scenario).

    Parameters
    ----------
    scenario : Scenario

    Returns
    -------
    Plan

    Examples
    --------
    >>> from workbench import load_preset
    >>> plan = fit_plan(load_preset("binary_outcome"))
    >>> [(f.kind, f.reference) for f in plan.reported][:3], sorted(plan.truths)
    ([('lpm', 0), ('lpm', 0), ('logit', 2)], ['difference', 'log_odds_ratio'])
    """
    names = scenario.names
    q = scenario.question
    x, y = names.index(q.exposure), names.index(q.outcome)
    binary_outcome = scenario.outcome.is_binary
    fits = [
        _fit(
            scenario,
            s.name,
            s.adjust,
            model_kind(s, binary_outcome),
            True,
            -1,
            s.selection,
            s.restrict,
            s.match,
            s.interactions,
            s.flexible,
        )
        for s in scenario.strategies
    ]
    fits = _with_references(scenario, fits)
    used = sorted({x, y} | {i for f in fits for i in f.regressors} | {i for f in fits for i in f.match})
    truths = {}
    for scale in [f.scale for f in fits] + [q.scale]:
        if scale not in truths:
            truths[scale] = true_effect(scenario, scale)
    return Plan(
        tuple(fits),
        x,
        y,
        tuple(used),
        binary_outcome,
        scenario.exposure.is_binary,
        scenario.is_linear_gaussian,
        tuple(q.also),
        truths,
    )


@functools.lru_cache(maxsize=64)
def used_covariance(scenario: Scenario, used: tuple[int, ...]) -> np.ndarray:
    """The implied covariance of the variables ``used`` (file-order indices) of a linear-Gaussian scenario.

    Examples
    --------
    >>> from workbench import load_preset
    >>> used_covariance(load_preset("common_cause"), (0, 1)).shape
    (2, 2)
    """
    sigma = implied_covariance(scenario)
    return sigma[np.ix_(used, used)]
