"""The true effect each strategy is scored against.

* ``target = "direct"``: the effect written on the arrow exposure -> outcome (0 without an arrow). The
  outcome is then continuous and its equation is linear in its causes, so this is exactly the change in the
  outcome's mean when the exposure rises by one unit and every other cause of the outcome is held fixed.
  A square arrow exposure -> outcome gives the same number (centred at the exposure's mean, a unit shift
  changes the square term by ``2 (X - E[X]) + 1``, of mean 1); a step arrow gives ``effect x P(at - 1 < X <=
  at)`` over the exposure's draws (:func:`workbench.engine.forms.direct_step_effect`).
* ``target = "total"`` on a linear-Gaussian graph: the closed form, the sum over directed paths of the
  products of the arrows' effects (Wright 1934; :func:`workbench.graph.linear.total_effects`).
* Anything else, by simulated intervention with common random numbers: the same ``2**20`` noise draws
  (from a fixed internal seed, in chunks to bound memory) are pushed through the structural equations twice,

  - binary exposure: with the exposure set to 1 and set to 0, ``E[Y | do(X = 1)] - E[Y | do(X = 0)]``;
  - continuous exposure: with everyone's exposure shifted up by one unit and as it is,
    ``E[Y(X + 1)] - E[Y(X)]``;

  descendants of the exposure recomputed each time. For a binary outcome the outcome's probability given its
  causes replaces the 0/1 draw (same mean, smaller Monte Carlo error). ``scale = "log_odds_ratio"`` reports
  ``logit(E[Y_1]) - logit(E[Y_0])`` and ``scale = "log_risk_ratio"`` reports ``log(E[Y_1]) - log(E[Y_0])``
  (the marginal log risk ratio; for a continuous exposure the log ratio of the risks after and before the
  one-unit shift), both with a delta-method Monte Carlo SE. A Poisson fit is scored against the log risk
  ratio: unadjusted it targets it; adjusted it targets a conditional log risk ratio, equal to the marginal one
  only when the risk ratio does not vary with the covariates (a logistic outcome equation makes it vary).

  When the outcome is continuous and so is every variable on a causal path from the exposure to it, the
  equations the intervention recomputes are linear, so the contrast is the same number in every draw (the
  sum over causal paths of the products of effects, whatever the binary variables elsewhere do): the first
  :data:`EXACT_DRAWS` draws of the same stream then give it to rounding, with a Monte Carlo SE of 0 up to
  rounding (:func:`truth_draws`).

  A modified arrow (``varies_with``, :mod:`workbench.engine.modifiers`) is part of the equations the
  intervention recomputes, so the contrast averages every unit's own effect: along the arrow ``effect +
  sum(c (E[m | do] - E[m]))``, just ``effect`` when the modifier ``m`` does not descend from the exposure.
  Such a graph is never linear-Gaussian, and its contrast varies from draw to draw: all
  :data:`TRUTH_DRAWS` are used.

  A square or step arrow (``form``, :mod:`workbench.engine.forms`) is also part of those equations: on a
  causal path the contrast of a unit shift then depends on each unit's value of the arrow's cause (and, for
  a square, on the size of the shift), so all :data:`TRUTH_DRAWS` are used; off the causal paths the
  arrow's term is the same in both worlds and cancels.

Results are cached per scenario graph and question, so repeated simulations pay once.

References
----------
1. Wright S. (1934). The method of path coefficients. Annals of Mathematical Statistics 5:161-215.
2. Pearl J. (2009). Causality, 2nd ed. Cambridge University Press, ch. 3 (the do-operator).
3. Greenland S., Robins J.M., Pearl J. (1999). Confounding and collapsibility in causal inference.
   Statistical Science 14(1):29-46 (marginal versus conditional odds ratios).
"""

from __future__ import annotations

import dataclasses
import functools
from dataclasses import dataclass, replace

import numpy as np

from workbench.graph.linear import total_effects
from workbench.scenario.model import Scenario, Strategy

__all__ = [
    "TRUTH_DRAWS",
    "TRUTH_SEED",
    "EXACT_DRAWS",
    "truth_draws",
    "KIND_WORDS",
    "Truth",
    "true_effect",
    "conditional_log_odds_ratio",
    "direct_effect",
    "model_kind",
    "fit_label",
    "estimand",
    "simulated_effect",
]

TRUTH_DRAWS = 2**20
TRUTH_SEED = 19_340_161
EXACT_DRAWS = 2**10
"""Draws of a simulated intervention whose contrast is the same in every draw (see :func:`truth_draws`)."""
_CHUNK = 2**16


@dataclass(frozen=True)
class Truth:
    """A true effect.

    Attributes
    ----------
    value : float
    mcse : float
        Its Monte Carlo standard error (0 for a closed form).
    method : {"closed form", "simulated intervention"}
    description : str
        What the number means, in words.
    draws : int
        Draws of the simulated intervention (0 for a closed form).
    scale : {"difference", "log_odds_ratio", "log_risk_ratio", "log_rate_ratio"}
    """

    value: float
    mcse: float
    method: str
    description: str
    draws: int = 0
    scale: str = "difference"


def direct_effect(scenario: Scenario) -> float:
    """The effect on the arrow exposure -> outcome, 0 when there is no such arrow.

    Examples
    --------
    >>> from workbench import load_preset
    >>> direct_effect(load_preset("common_cause"))
    0.25
    """
    q = scenario.question
    for a in scenario.arrows:
        if a.source == q.exposure and a.target == q.outcome:
            return float(a.effect)
    return 0.0


def conditional_log_odds_ratio(scenario: Scenario) -> float:
    """The conditional (structural) log odds ratio of a binary outcome for the exposure: the effect on the
    arrow exposure -> outcome in the outcome's own logistic equation, 0 without an arrow. It is what a
    logistic regression adjusting for exactly the outcome's other causes estimates.

    Examples
    --------
    >>> from workbench import load_preset
    >>> conditional_log_odds_ratio(load_preset("common_cause"))
    0.25
    """
    return direct_effect(scenario)


def _words(scenario: Scenario, scale: str) -> str:
    q = scenario.question
    x, y = scenario.exposure, scenario.outcome
    if q.target == "direct":
        return (
            f"change in the mean of '{y.name}' per unit of '{x.name}' with every other direct cause of "
            f"'{y.name}' held fixed (the arrow's effect)"
        )
    if x.is_binary:
        contrast = f"if every unit had '{x.name}' = 1 versus if every unit had '{x.name}' = 0"
    else:
        contrast = f"if every unit's '{x.name}' were one unit higher versus as it is"
    if y.is_binary:
        what = {
            "difference": "difference in the share of '{y}' = 1",
            "log_odds_ratio": "log odds ratio of '{y}' = 1 (marginal, over the whole population)",
            "log_risk_ratio": "log risk ratio of '{y}' = 1 (marginal, over the whole population)",
        }[scale].format(y=y.name)
    elif y.is_count and scale == "log_rate_ratio":
        what = f"log rate ratio of '{y.name}' (log of the ratio of mean counts, over the whole population)"
    else:
        what = f"difference in the mean of '{y.name}'"
    return f"{what} {contrast}"


def _world_orders(st, x: int, y: int) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """The evaluation orders of the two worlds: the outcome's ancestors (and itself), then those of them
    that descend from the exposure (and the exposure), both in the structure's topological order."""
    ancestors = {y}
    for j in reversed(st.order):
        if j in ancestors:
            ancestors.update(int(i) for i in st.parents[j][0])
    descendants = {x}
    for j in st.order:
        if any(int(i) in descendants for i in st.parents[j][0]):
            descendants.add(j)
    first = tuple(j for j in st.order if j in ancestors)
    return first, tuple(j for j in first if j in descendants)


def truth_draws(variables: tuple, arrows: tuple, exposure: str, outcome: str) -> int:
    """The draws :func:`simulated_effect` uses: :data:`EXACT_DRAWS` when the outcome and every variable on a
    causal path from the exposure to it (the exposure excepted) are continuous (not binary, not counts) and none of them is the
    target of a modified arrow (``varies_with``), else :data:`TRUTH_DRAWS`.

    In that case every equation the intervention changes is linear in its causes, so the outcome's change
    is the sum over causal paths of the products of the arrows' effects times the exposure's change (Wright
    1934), the same in every draw: more draws add nothing but rounding (common practice, no source).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("restriction")
    >>> truth_draws(sc.variables, sc.arrows, sc.question.exposure, sc.question.outcome) == EXACT_DRAWS
    True
    >>> sc = load_preset("binary_outcome")
    >>> truth_draws(sc.variables, sc.arrows, sc.question.exposure, sc.question.outcome) == TRUTH_DRAWS
    True
    """
    binary = {v.name for v in variables if v.type != "continuous"}  # binary and count variables
    if outcome in binary:
        return TRUTH_DRAWS
    children: dict[str, list[str]] = {}
    parents: dict[str, list[str]] = {}
    for a in arrows:
        children.setdefault(a.source, []).append(a.target)
        parents.setdefault(a.target, []).append(a.source)

    def reach(start: str, step: dict) -> set:
        seen, todo = {start}, [start]
        while todo:
            for nxt in step.get(todo.pop(), ()):
                if nxt not in seen:
                    seen.add(nxt)
                    todo.append(nxt)
        return seen

    on_paths = (reach(exposure, children) & reach(outcome, parents)) - {exposure}
    modified = {a.target for a in arrows if a.varies_with}  # the contrast varies with the modifier
    # a square or step arrow from the exposure or a variable on a causal path: the contrast varies too
    bent = {a.target for a in arrows if a.form != "linear" and a.source in on_paths | {exposure}}
    # noise whose spread moves with the exposure or a variable on a causal path: mean-zero, but not constant
    bent |= {v.name for v in variables if any(c in on_paths | {exposure} for c, _ in v.spread_with)}
    return TRUTH_DRAWS if on_paths & (binary | modified | bent) else EXACT_DRAWS


@functools.lru_cache(maxsize=128)
def simulated_effect(
    variables: tuple, arrows: tuple, exposure: str, outcome: str, scale: str
) -> tuple[float, float]:
    """The effect of ``exposure`` on ``outcome`` by simulated intervention, and its Monte Carlo SE.

    The graph is given as a scenario's ``variables`` and ``arrows`` tuples (cached per graph, question and
    scale). :func:`truth_draws` noise draws (:data:`TRUTH_DRAWS`, or :data:`EXACT_DRAWS` when the contrast
    is the same in every draw) from :data:`TRUTH_SEED` are pushed through the structural equations in both
    worlds (module notes); :func:`true_effect` calls this where no closed form applies.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> value, mcse = simulated_effect(sc.variables, sc.arrows, "fertiliser", "wheat_yield", "difference")
    >>> round(value, 6), mcse < 1e-6  # the closed form is 0.25, here met exactly with common random numbers
    (0.25, True)
    """
    # the data-generating engine is loaded only for graphs without a closed form
    from scipy import special

    from workbench.engine.generate import evaluate, graph_structure
    from workbench.engine.threads import blas_threads

    with blas_threads():  # the calibration and the small products below: one BLAS thread (threads.py)
        return _simulated_effect(
            variables, arrows, exposure, outcome, scale, special, evaluate, graph_structure
        )


def _simulated_effect(variables, arrows, exposure, outcome, scale, special, evaluate, graph_structure):
    st = graph_structure(variables, arrows)
    x = st.index(exposure)
    y = st.index(outcome)
    binary_x = bool(st.binary[x])
    binary_y = bool(st.binary[y]) or y in st.counts  # the probability, or the mean count, given the causes
    rng = np.random.default_rng(TRUTH_SEED)
    probability = outcome if binary_y else None
    if binary_x:
        worlds = (("set", 1.0), ("set", 0.0))
    else:
        worlds = (("shift", 1.0), None)
    # the first world needs only the outcome's ancestors; the second starts from the first world's values
    # and recomputes only the exposure's descendants among them (the others are the same in both worlds)
    first, second = _world_orders(st, x, y)
    draws = truth_draws(variables, arrows, exposure, outcome)
    chunk = min(_CHUNK, draws)
    sums = np.zeros(2)
    cross = np.zeros((2, 2))
    done = 0
    z = np.empty((chunk, st.k))
    # the equations run variable by variable: one contiguous row per variable (same numbers as the draws'
    # (draws, variables) layout, elementwise, but without a strided pass per variable)
    rows = np.empty((st.k, chunk))
    values = np.empty_like(rows)
    pair = np.empty((2, chunk))
    while done < draws:
        rng.standard_normal(out=z)
        np.copyto(rows, z.T)
        for w, (world, order) in enumerate(zip(worlds, (first, second), strict=True)):
            with np.errstate(over="ignore", under="ignore"):
                evaluate(
                    replace(st, order=order),
                    rows,
                    intervention=world,
                    exposure=exposure,
                    axis=0,
                    out=values,
                    probability=probability,
                )
            pair[w] = values[y]
        sums += pair.sum(axis=1)
        cross += pair @ pair.T
        done += chunk
    N = float(done)
    means = sums / N
    cov = (cross / N - np.outer(means, means)) * N / (N - 1) / N  # covariance of the two means
    if scale == "log_odds_ratio":
        value = float(special.logit(means[0]) - special.logit(means[1]))
        grad = np.array([1.0 / (means[0] * (1 - means[0])), -1.0 / (means[1] * (1 - means[1]))])
    elif scale in ("log_risk_ratio", "log_rate_ratio"):
        value = float(np.log(means[0]) - np.log(means[1]))
        grad = np.array([1.0 / means[0], -1.0 / means[1]])
    else:
        value = float(means[0] - means[1])
        grad = np.array([1.0, -1.0])
    mcse = float(np.sqrt(max(grad @ cov @ grad, 0.0)))
    if draws < _CHUNK and scale == "difference":
        # one chunk: the SD of the per-draw contrast itself, free of the cancellation in the moments above
        # (which would leave a rounding residue of about 1e-9 where the contrast is the same in every draw)
        mcse = float(np.std(pair[0] - pair[1], ddof=1) / np.sqrt(N))
    return value, mcse


def true_effect(scenario: Scenario, scale: str | None = None) -> Truth:
    """The true effect of the question's exposure on its outcome.

    Parameters
    ----------
    scenario : Scenario
    scale : {"difference", "log_odds_ratio", "log_risk_ratio", "log_rate_ratio"}, optional
        Default the question's scale. A binary outcome's strategies may target a different scale from the
        question's (a linear probability model estimates a difference).

    Returns
    -------
    Truth

    Notes
    -----
    See the module docstring for the definitions. The simulated intervention uses ``2**20`` draws with common
    random numbers for the two worlds (:data:`EXACT_DRAWS` where the contrast is the same in every draw,
    :func:`truth_draws`); its Monte Carlo SE is the SD of the per-draw contrast over
    ``sqrt(draws)`` (delta method for the log odds ratio).

    References
    ----------
    Wright S. (1934). The method of path coefficients. Annals of Mathematical Statistics 5:161-215.
    Pearl J. (2009). Causality, 2nd ed., ch. 3.

    Examples
    --------
    >>> from workbench import load_preset
    >>> t = true_effect(load_preset("common_cause"))
    >>> t.value, t.method
    (0.25, 'closed form')
    """
    q = scenario.question
    scale = scale or q.scale
    words = _words(scenario, scale)
    if q.target == "direct":
        from workbench.engine.forms import direct_step_effect  # forms imports this module (its seed)

        step = direct_step_effect(scenario)  # a step arrow exposure -> outcome: over the exposure's values
        if step is not None:
            return Truth(step[0], step[1], "simulated intervention", words, TRUTH_DRAWS, scale)
        return Truth(direct_effect(scenario), 0.0, "closed form", words, 0, scale)
    # a linear graph with non-normal or spread noise has the closed-form truth: the noise is additive with mean
    # 0 given every cause (workbench.engine.noise), so the average effect is the sum over causal paths
    linear = all(v.type == "continuous" for v in scenario.variables) and not any(
        a.varies_with or a.form != "linear" for a in scenario.arrows
    )
    if linear and scale == "difference":
        names = scenario.names
        value = float(total_effects(scenario)[names.index(q.exposure), names.index(q.outcome)])
        return Truth(value, 0.0, "closed form", words, 0, scale)
    value, mcse = simulated_effect(scenario.variables, scenario.arrows, q.exposure, q.outcome, scale)
    draws = truth_draws(scenario.variables, scenario.arrows, q.exposure, q.outcome)
    return Truth(value, mcse, "simulated intervention", words, draws, scale)


KIND_WORDS = {
    "ols": "OLS",
    "lpm": "linear probability model",
    "logit": "logistic",
    "logit_std": "standardised logistic",
    "ols_hc3": "OLS with HC3 SEs",
    "poisson": "Poisson, model-based SEs",
    "poisson_robust": "modified Poisson",
    "ols_interaction": "OLS with exposure x covariate terms",
    "ols_flexible": "OLS with spline covariates",
}
"""Words for each kind of fit (see :func:`model_kind`)."""


def model_kind(strategy: Strategy, binary_outcome: bool) -> str:
    """The kind of fit a strategy is: ``"ols"`` (classical OLS, continuous outcome), ``"lpm"`` (OLS on a
    binary outcome: the linear probability model, HC3 SEs), ``"logit"`` or ``"logit_std"`` (standardised),
    ``"ols_hc3"`` (OLS on a continuous outcome with ``se = "hc3"``), ``"poisson_robust"`` (modified Poisson:
    log link, HC0 sandwich SEs, the default for ``model = "poisson"``), ``"poisson"`` (``se =
    "classical"``: model-based SEs) or ``"ols_interaction"`` (``interactions``: OLS with exposure x
    covariate terms reporting the sample-averaged effect, :mod:`workbench.engine.interactions`) or
    ``"ols_flexible"`` (``flexible``: OLS with restricted cubic spline covariates,
    :mod:`workbench.engine.splines`).

    Examples
    --------
    >>> model_kind(Strategy("s", (), "logit", True), True)
    'logit_std'
    """
    if strategy.model == "logit":
        return "logit_std" if strategy.standardize else "logit"
    if strategy.model == "poisson":
        return "poisson" if strategy.se == "classical" else "poisson_robust"
    if strategy.interactions:
        return "ols_interaction"
    if getattr(strategy, "flexible", ()):
        return "ols_flexible"
    if binary_outcome:
        return "lpm"
    return "ols_hc3" if strategy.se == "hc3" else "ols"


def fit_label(strategy: Strategy, scenario: Scenario) -> str:
    """A short name of the fit a strategy runs, for the tables' model column: the model with its SE and the
    terms it adds (the ``model`` key alone says ``ols`` for a spline or an interaction fit).

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("heteroskedastic_noise")
    >>> [fit_label(s, sc) for s in sc.strategies][-2:]
    ['OLS', 'OLS, HC3 SE']
    """
    kind = model_kind(strategy, scenario.outcome.is_binary)
    spline = f", spline: {', '.join(strategy.flexible)}" if strategy.flexible else ""
    if kind in ("logit", "logit_std", "poisson", "poisson_robust") and spline:
        return fit_label(dataclasses.replace(strategy, flexible=()), scenario) + spline
    if kind == "poisson_robust":
        return "modified Poisson (robust SE)" if scenario.outcome.is_binary else "Poisson, robust SE"
    if kind == "ols_interaction":
        terms = ", ".join(f"x*{t}" for t in strategy.interactions)
        return f"OLS + {terms}" + (", HC3 SE" if strategy.se == "hc3" else "")
    if kind == "ols_flexible":
        return f"OLS, spline: {', '.join(strategy.flexible)}" + (", HC3 SE" if strategy.se == "hc3" else "")
    return {
        "ols": "OLS",
        "lpm": "OLS (LPM, HC3 SE)",
        "logit": "logit",
        "logit_std": "logit (standardised)",
        "ols_hc3": "OLS, HC3 SE",
        "poisson": "Poisson, model SE",
    }[kind]


def estimand(kind: str, scenario: Scenario, adjust: tuple[str, ...] = ()) -> tuple[str, str, str]:
    """What a fit of ``kind`` with adjustment set ``adjust`` estimates, the scale of the truth it is scored
    against, and a note when the two differ by design (see ``docs/targets.md``).

    Returns
    -------
    words : str
        For example ``"marginal risk difference"`` or ``"conditional log odds ratio"``.
    scale : {"difference", "log_odds_ratio", "log_risk_ratio", "log_rate_ratio"}
        The scale of the true effect it is compared with (:func:`true_effect` with that ``scale``).
    note : str
        Empty, or why the estimate and its truth differ even without bias (non-collapsibility).

    Examples
    --------
    >>> from workbench import load_preset
    >>> estimand("ols", load_preset("common_cause"))
    ('total effect (difference in means per unit)', 'difference', '')
    """
    q = scenario.question
    per_unit = "" if scenario.exposure.is_binary else " per unit"
    if kind in ("ols", "ols_hc3", "ols_flexible"):
        target = "direct effect" if q.target == "direct" else "total effect"
        return f"{target} (difference in means{per_unit})", "difference", ""
    if kind == "ols_interaction":
        target = "direct effect" if q.target == "direct" else "total effect"
        return f"population-averaged {target} (difference in means{per_unit})", "difference", ""
    if kind == "lpm":
        return f"marginal risk difference{per_unit}", "difference", ""
    if kind in ("poisson", "poisson_robust") and scenario.outcome.is_count:
        # a log-linear count equation: the conditional rate ratio given covariates equals the marginal one
        # (a log link is collapsible), so no note
        return f"{'marginal' if not adjust else 'conditional'} log rate ratio{per_unit}", "log_rate_ratio", ""
    if kind in ("poisson", "poisson_robust"):
        if not adjust:
            return f"marginal log risk ratio{per_unit}", "log_risk_ratio", ""
        note = (
            "conditional log risk ratio scored against the marginal log risk ratio; they are equal only when "
            "the risk ratio does not vary with the adjusted covariates (no effect modification on that "
            "scale; a logistic outcome equation has some)"
        )
        return f"conditional log risk ratio{per_unit}", "log_risk_ratio", note
    if kind == "logit_std":
        words = "marginal risk difference" if q.scale == "difference" else "marginal log odds ratio"
        return f"{words}{per_unit}", q.scale, ""
    if not adjust:
        return f"marginal log odds ratio{per_unit}", "log_odds_ratio", ""
    note = (
        "conditional log odds ratio scored against the marginal log odds ratio; they differ even without "
        f"confounding (non-collapsibility); the structural conditional log odds ratio is "
        f"{conditional_log_odds_ratio(scenario):.4g}"
    )
    return f"conditional log odds ratio{per_unit}", "log_odds_ratio", note
