"""The scenario's data model: frozen dataclasses for the variables, arrows, strategies, question and study.

Build a :class:`Scenario` by reading a file (``workbench.load_scenario``, ``workbench.loads_scenario``, or the
raw readers of :mod:`workbench.scenario.parse`), never by hand: the readers validate every field. The graph is
an assumption written down by the user; nothing here checks it against data.

Import order: this module imports nothing of the package but the errors, and :mod:`workbench.scenario.parse`
imports it. :meth:`Scenario.replace` validates its copy with the parser, so it imports
:func:`~workbench.scenario.parse.parse_scenario` and :func:`~workbench.scenario.write.scenario_to_dict` inside
the method, when it is called: a module-level import would make model and parse import each other. The
alternative, a ``replace`` function in the parser, would lose the method users expect on a frozen object.

Examples
--------
>>> from workbench import load_preset
>>> sc = load_preset("common_cause")
>>> sc.replace(study=Study(n=200)).study.n
200
>>> sc.variable("fertilizer")
Traceback (most recent call last):
...
workbench.errors.UnknownNameError: unknown variable 'fertilizer' (did you mean 'fertiliser'?)
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass, field
from typing import Any

from workbench.errors import UnknownNameError

__all__ = [
    "Variable",
    "Arrow",
    "Strategy",
    "Question",
    "Study",
    "Scenario",
    "minimum_study_size",
    "NAME_PATTERN",
    "STRATEGY_NAME_PATTERN",
    "VARIABLE_TYPES",
    "TARGETS",
    "SCALES",
    "MODELS",
    "SE_KINDS",
    "SELECTIONS",
    "CHANGE_THRESHOLD",
]

NAME_PATTERN = re.compile(r"\A[A-Za-z][A-Za-z0-9_]{0,31}\Z")
"""A variable name: a letter, then letters, digits or ``_``, at most 32 characters (``\\Z``, not ``$``, which
would also match before a final newline)."""
STRATEGY_NAME_PATTERN = re.compile(r"\A[A-Za-z][A-Za-z0-9_]{0,59}\Z")
"""A strategy name: like a variable name, at most 60 characters (the default strategies' names go up to 60)."""
VARIABLE_TYPES = ("continuous", "binary", "count")
TARGETS = ("total", "direct")
SCALES = ("difference", "log_odds_ratio", "log_risk_ratio", "log_rate_ratio")
MODELS = ("ols", "logit", "poisson")
SE_KINDS = ("classical", "hc3", "robust")
"""The standard errors a strategy may ask for (``se``): model-based, HC3 (OLS) or the HC0 sandwich (Poisson)."""
SELECTIONS = ("p_value", "change_in_estimate")
"""The data-driven covariate selection rules (``selection`` of a strategy)."""
CHANGE_THRESHOLD = 0.10
"""The change-in-estimate rule keeps a candidate whose removal moves the exposure's coefficient by more than
this share of the full-model coefficient (Mickey & Greenland 1989, American Journal of Epidemiology
129(1):125-137)."""


@dataclass(frozen=True)
class Variable:
    """One variable of the graph.

    Parameters
    ----------
    name : str
        A letter, then letters, digits or ``_``; at most 32 characters.
    type : {"continuous", "binary", "count"}
    noise_sd : float
        Continuous only: SD of the variable's own Gaussian disturbance.
    baseline : float
        Continuous only: the value when all causes are 0.
    proportion : float or None
        Binary only: the population share of 1s, in (0, 1).
    observed : bool
        False for a latent variable: simulated, never adjustable.
    label : str or None
        Text shown to users (with units).
    position : tuple of two floats or None
        Layout hint for drawing.
    """

    name: str
    type: str = "continuous"
    noise_sd: float = 1.0
    baseline: float = 0.0
    proportion: float | None = None
    observed: bool = True
    label: str | None = None
    position: tuple[float, float] | None = None
    r_squared: float | None = None
    """Continuous only: the share of variance explained by the causes, as the file gave it (it set
    ``noise_sd``; :mod:`workbench.scenario.elicit`), else None."""
    noise: str = "normal"
    """Continuous only: the law of the disturbance (:mod:`workbench.engine.noise`): ``"normal"``,
    ``"heavy_tailed"`` (scaled Student t) or ``"skewed"`` (standardised lognormal); SD ``noise_sd``, mean 0."""
    noise_df: float | None = None
    """The t's degrees of freedom (> 2) of ``noise = "heavy_tailed"`` (None otherwise; default 5)."""
    spread_with: tuple[tuple[str, float], ...] = ()
    """Heteroskedastic noise (``spread_with = { distance = 0.5 }``): the noise SD is ``noise_sd x exp(sum c x
    z)``, ``z`` the covariate's standardised value."""
    rate: float | None = None
    """Count only: the population mean of the count (its Poisson mean given its causes is ``exp(a +
    sum(effect x cause))``, ``a`` calibrated to this mean; :mod:`workbench.engine.counts`)."""

    @property
    def is_binary(self) -> bool:
        return self.type == "binary"

    @property
    def is_count(self) -> bool:
        return self.type == "count"

    @property
    def is_continuous(self) -> bool:
        return self.type == "continuous"

    @property
    def display(self) -> str:
        """The label when there is one, else the name."""
        return self.label or self.name


@dataclass(frozen=True)
class Arrow:
    """A direct causal effect ``source -> target`` of size ``effect`` (mean scale for a continuous target,
    log-odds scale for a binary one, log-mean scale for a count). ``standardized`` keeps a ``standardized_effect`` the file gave (the
    raw ``effect`` was converted from it; :mod:`workbench.scenario.elicit`), else None."""

    source: str
    target: str
    effect: float
    standardized: float | None = None
    varies_with: tuple[tuple[str, float], ...] = ()
    """Effect modification (``varies_with = { skill = 0.3 }``): the arrow's effect is ``effect + sum(c x
    (modifier - E[modifier]))`` over these ``(modifier, c)`` pairs (:mod:`workbench.engine.modifiers`)."""
    form: str = "linear"
    """How the cause enters (:mod:`workbench.engine.forms`): ``"linear"`` (``effect x cause``), ``"square"``
    (``effect x (cause - E[cause])^2``) or ``"step"`` (``effect x 1[cause > at]``)."""
    at: float | None = None
    """The threshold of a ``"step"`` form (None for the other forms)."""


@dataclass(frozen=True)
class Strategy:
    """A model to compare: regress the outcome on the exposure and the variables in ``adjust``.

    Parameters
    ----------
    name : str
    adjust : tuple of str
        Observed variables other than the exposure and the outcome.
    model : {"ols", "logit", "poisson"}
        ``poisson``: log link (binary outcome: the modified Poisson log risk ratio, Zou 2004).
    standardize : bool
        ``logit`` only: report the marginal contrast by standardisation over the sample.
    selection : {None, "p_value", "change_in_estimate"}
        None: ``adjust`` is the fixed set. Otherwise ``adjust`` lists the *candidate* covariates and the rule
        picks a subset from the data in each study (``docs/scenario-format.md``).
    restrict : tuple of (str, value)
        Design-stage restriction: the analysis keeps only the units whose variable takes ``value``, an int 0 or
        1 for a binary variable, a ``(low, high)`` pair (closed interval) for a continuous one.
    match : tuple of str
        Design-stage exact matching (binary exposure, continuous outcome, ``ols``): within each stratum of
        these observed binary variables, exposed and unexposed units are paired 1:1 and unpaired units are
        dropped (``docs/scenario-format.md``).
    se : {None, "classical", "hc3", "robust"}
        The standard error asked for; None: the model's default (classical for OLS on a continuous outcome
        and for logit, HC3 for a linear probability model, the HC0 sandwich for Poisson).
    """

    name: str
    adjust: tuple[str, ...] = ()
    model: str = "ols"
    standardize: bool = False
    selection: str | None = None
    restrict: tuple[tuple[str, int | tuple[float, float]], ...] = ()
    match: tuple[str, ...] = ()
    se: str | None = None
    interactions: tuple[str, ...] = ()
    """Covariates of ``adjust`` that also enter as exposure x (covariate - its sample mean) product terms
    (OLS, continuous outcome): the exposure's coefficient is then the sample-averaged effect."""
    flexible: tuple[str, ...] = ()
    """Covariates of ``adjust`` that enter as a restricted cubic spline (4 knots, 2 extra columns each) instead
    of a straight line (:mod:`workbench.engine.splines`)."""

    @property
    def n_coefficients(self) -> int:
        """Fitted coefficients: intercept, exposure, each adjusted variable (each candidate when the set
        is selected from the data: the full model is fitted first) and each interaction term."""
        return 2 + len(self.adjust) + len(self.interactions) + 2 * len(self.flexible)

    @property
    def restricted(self) -> tuple[str, ...]:
        """Names of the variables the analysis restricts on."""
        return tuple(name for name, _ in self.restrict)


@dataclass(frozen=True)
class Question:
    """The effect of interest: ``exposure`` on ``outcome``, ``target`` total or direct, on ``scale``; ``also``
    names further variables whose direct effects are reported beside it."""

    exposure: str
    outcome: str
    target: str = "total"
    scale: str = "difference"
    also: tuple[str, ...] = ()


@dataclass(frozen=True)
class Study:
    """Settings of the simulated study and of the sample-size plan."""

    n: int = 500
    replicates: int = 2000
    seed: int = 20261201
    alpha: float = 0.05
    sample_sizes: tuple[int, ...] = (100, 200, 400, 800, 1600)
    target_power: float = 0.8
    target_halfwidth: float | None = None


@dataclass(frozen=True)
class Scenario:
    """A whole scenario. Build it with :func:`workbench.load_scenario`, :func:`workbench.loads_scenario` or
    :func:`workbench.scenario_from_dict`, which validate.

    From those loaders ``strategies`` is never empty: when the file gives none, the default set is filled in
    by the graph layer (``strategies_given`` is then False). The scenario layer's raw readers
    (:mod:`workbench.scenario.parse`) leave it empty.
    """

    title: str
    question: Question
    variables: tuple[Variable, ...]
    arrows: tuple[Arrow, ...]
    strategies: tuple[Strategy, ...]
    study: Study = field(default_factory=Study)
    summary: str | None = None
    strategies_given: bool = field(default=True, compare=False)

    # --- lookups ---------------------------------------------------------------------------------------
    @property
    def names(self) -> list[str]:
        """Variable names in file order."""
        return [v.name for v in self.variables]

    def variable(self, name: str) -> Variable:
        """The variable called ``name``; :class:`~workbench.errors.UnknownNameError` (a KeyError) naming the
        closest name otherwise."""
        for v in self.variables:
            if v.name == name:
                return v
        raise UnknownNameError("variable", name, self.names)

    @property
    def exposure(self) -> Variable:
        return self.variable(self.question.exposure)

    @property
    def outcome(self) -> Variable:
        return self.variable(self.question.outcome)

    @property
    def observed_names(self) -> list[str]:
        return [v.name for v in self.variables if v.observed]

    @property
    def latent_names(self) -> list[str]:
        return [v.name for v in self.variables if not v.observed]

    @property
    def is_linear_gaussian(self) -> bool:
        """True when every variable is continuous, no arrow's effect varies with a modifier
        (``varies_with``), every arrow is linear (``form``) and every noise normal with a constant SD (``noise``,
        ``spread_with``): the graph is a linear structural model with Gaussian disturbances, so its joint
        distribution is known in closed form."""
        return all(
            v.type == "continuous" and v.noise == "normal" and not v.spread_with for v in self.variables
        ) and not any(a.varies_with or a.form != "linear" for a in self.arrows)

    def parents(self, name: str) -> list[tuple[str, float]]:
        """Direct causes of ``name`` with their effects, in arrow order."""
        return [(a.source, a.effect) for a in self.arrows if a.target == name]

    def strategy(self, name: str) -> Strategy:
        """The strategy called ``name``; :class:`~workbench.errors.UnknownNameError` (a KeyError) naming the
        closest name otherwise.

        Examples
        --------
        >>> from workbench import load_preset
        >>> load_preset("common_cause").strategy("unadjusted").adjust
        ()
        """
        for s in self.strategies:
            if s.name == name:
                return s
        raise UnknownNameError("strategy", name, [s.name for s in self.strategies])

    def replace(self, **changes: Any) -> Scenario:
        """A copy with fields changed, validated again.

        Default strategies (``strategies_given`` False) are kept when only the title, summary or study
        change; when the graph or the question changes they are dropped, and the loaders and verbs derive
        them again from the new graph (:func:`workbench.graph.defaults.with_default_strategies`).
        """
        from workbench.scenario.parse import parse_scenario
        from workbench.scenario.write import scenario_to_dict

        merged = dataclasses.replace(self, **changes)
        given = merged.strategies_given or "strategies" in changes
        keep = given or not changes.keys() & {"variables", "arrows", "question"}
        out = parse_scenario(scenario_to_dict(merged, include_default_strategies=keep))
        return out if given else dataclasses.replace(out, strategies_given=False)


def minimum_study_size(scenario: Scenario) -> tuple[str, int, int]:
    """The strategy with the most coefficients, its coefficients ``p`` and the smallest ``n`` it allows.

    A study needs at least ``p + 2`` units for a strategy with ``p`` fitted coefficients (intercept, exposure
    and each adjusted variable, or each candidate of a selection rule, whose full model is fitted first):
    two residual degrees of freedom at least. The same rule checks ``study.n`` in a scenario file.

    Examples
    --------
    >>> from workbench import load_preset
    >>> minimum_study_size(load_preset("common_cause"))
    ('adjust_soil', 3, 5)
    """
    widest = max(scenario.strategies, key=lambda s: s.n_coefficients)
    p = widest.n_coefficients
    return widest.name, p, p + 2
