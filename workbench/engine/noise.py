"""Non-normal and heteroskedastic noise in the structural equations: heavy-tailed, skewed and spread disturbances.

A continuous variable's disturbance is ``noise_sd x S x E`` instead of ``noise_sd x Z``, where ``Z`` is the
variable's standard normal draw from the engine's streams (:mod:`workbench.engine.streams`, laid out by
:func:`~workbench.engine.generate.draw_noise`) and ``E`` a fixed monotone function of ``Z``, so a seed gives
the same data at any chunk size and no extra random numbers are drawn:

* ``noise = "normal"``: ``E = Z``;
* ``noise = "heavy_tailed"``: ``E = T sqrt((df - 2) / df)`` with ``T = F_t^-1(Phi(Z))`` a Student t with
  ``df = noise_df`` degrees of freedom (by the inverse CDF, taken in the lower tail for both signs so the
  tails keep their precision); mean 0, SD 1, kurtosis ``3 + 6 / (df - 4)`` for ``df > 4`` (Student t
  moments);
* ``noise = "skewed"``: the standardised lognormal ``E = (exp(s Z) - exp(s^2 / 2)) / sqrt((exp(s^2) - 1)
  exp(s^2))`` with ``s = SKEW_SIGMA = 0.5``: mean 0, SD 1, a long right tail, skewness ``(exp(s^2) + 2)
  sqrt(exp(s^2) - 1) = 1.7502`` (:data:`SKEWNESS`; lognormal moments);
* ``spread_with = { c = a, ... }``: ``S = exp(sum a x (c - E[c]) / SD[c])``, so ``Var(noise | c) = noise_sd^2
  exp(2 sum a z_c)``: ``noise_sd`` is the SD where every covariate sits at its mean, and the variable's
  marginal variance is larger than ``noise_sd^2`` (by ``E[S^2]``).

``E[c]`` and ``SD[c]`` are population moments under the scenario (no intervention), fixed once per graph:

* in closed form when no ancestor of ``c`` (nor ``c``) is binary, the target of a modified or non-linear
  arrow, or has spread noise: the linear structural model's mean and variance (every equation upstream is
  linear with constant-SD noise; the noise law does not change a mean or a variance). A binary ``c`` has
  mean ``proportion`` and variance ``proportion (1 - proportion)``;
* otherwise from :data:`~workbench.engine.modifiers.MEAN_DRAWS` draws of the equations from
  :data:`~workbench.engine.modifiers.MEAN_SEED` (the truth's draws and seed), covariate after covariate in
  the graph's order, each with the moments found before it.

Under an intervention the standardisation stays the observational one. The disturbance keeps mean 0 given
every cause (``E`` is independent of the causes with mean 0), so the average effect of the exposure is the
one of the same graph with normal noise: the noise is additive and mean-zero, and no binary variable may
descend from a variable with such noise (:mod:`workbench.scenario.parse_noise`). Such a graph is never
linear-Gaussian: it goes to the raw engine and its truth is the simulated intervention.

Examples
--------
>>> from workbench import loads_scenario
>>> sc = loads_scenario('''
... title = "Delivery distance and delay"
... [question]
... exposure = "distance"
... outcome = "delay"
... [variables.distance]
... baseline = 3.0
... [variables.delay]
... noise = "skewed"
... spread_with = { distance = 0.5 }
... [[arrows]]
... from = "distance"
... to = "delay"
... effect = 1.0
... ''')
>>> from workbench.engine.generate import structure, evaluate
>>> [(t.target, t.law, t.means.tolist(), t.sds.tolist()) for t in structure(sc).noises]
[(1, 'skewed', [3.0], [1.0])]
>>> out = evaluate(sc, np.array([[1.0], [0.0]]), axis=0)  # distance 4, z = 1: delay 4 + exp(0.5) x E(0)
>>> bool(np.isclose(out[1, 0], 4 + np.exp(0.5) * standardised(np.zeros(1), "skewed")[0]))
True
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from scipy import special

from workbench.engine.forms import ancestors
from workbench.engine.modifiers import MEAN_DRAWS, MEAN_SEED
from workbench.errors import SimulationError

__all__ = ["SKEW_SIGMA", "SKEWNESS", "NoiseTerm", "standardised", "shape_noise", "with_noise"]

SKEW_SIGMA = 0.5
SKEWNESS = float((np.exp(SKEW_SIGMA**2) + 2) * np.sqrt(np.expm1(SKEW_SIGMA**2)))
_CHUNK = 2**16


@dataclass(frozen=True, eq=False)
class NoiseTerm:
    """The disturbance of one variable with non-normal or spread noise, in index form.

    Attributes
    ----------
    target : int
        The variable's index (file order).
    law : str
        ``"normal"``, ``"heavy_tailed"`` or ``"skewed"``.
    df : float or None
        The t's degrees of freedom (``"heavy_tailed"``).
    covariates : ndarray of int
        The ``spread_with`` covariates (may be empty).
    coefficients, means, sds : ndarray of float
        Each covariate's coefficient, population mean and SD (module notes).
    """

    target: int
    law: str
    df: float | None
    covariates: np.ndarray
    coefficients: np.ndarray
    means: np.ndarray
    sds: np.ndarray


def standardised(
    z: np.ndarray, law: str, df: float | None = None, out: np.ndarray | None = None
) -> np.ndarray:
    """The mean-0, SD-1 disturbance ``E`` of ``law`` from standard normal draws ``z`` (module notes).

    Examples
    --------
    >>> standardised(np.array([0.0, 1.0]), "normal").tolist()
    [0.0, 1.0]
    >>> float(standardised(np.array([0.0]), "heavy_tailed", 5.0)[0])
    0.0
    """
    if out is None:
        out = np.empty_like(z, dtype=float)
    if law == "normal":
        np.copyto(out, z)
    elif law == "heavy_tailed":
        positive = z > 0
        np.abs(z, out=out)
        np.negative(out, out=out)
        special.ndtr(out, out=out)
        special.stdtrit(df, out, out=out)  # the lower-tail quantile, <= 0
        np.negative(out, out=out, where=positive)
        out *= np.sqrt((df - 2.0) / df)
    elif law == "skewed":
        s2 = SKEW_SIGMA**2
        np.multiply(z, SKEW_SIGMA, out=out)
        np.exp(out, out=out)
        out -= np.exp(s2 / 2)
        out /= np.sqrt(np.expm1(s2) * np.exp(s2))
    else:
        raise ValueError(f"unknown noise law {law!r}")
    return out


def shape_noise(st, j: int, z: np.ndarray, values: np.ndarray, scratch: np.ndarray) -> bool:
    """Write the disturbance of variable ``j`` (``noise_sd x S x E``) into ``values[j]`` and return True, or
    return False when ``j`` has normal noise with a constant SD (the caller then writes ``noise_sd x z``).

    ``values`` has the variables on axis 0 (``evaluate``'s layout), the covariates already computed; ``z`` is
    ``j``'s standard normal row (it may be ``values[j]`` itself); ``scratch`` has the shape of one row.
    """
    term = next((t for t in st.noises if t.target == j), None) if st.noises else None
    if term is None:
        return False
    if len(term.covariates):
        np.subtract(values[term.covariates[0]], term.means[0], out=scratch)
        scratch *= term.coefficients[0] / term.sds[0]
        for c, a, mu, sd in zip(
            term.covariates[1:], term.coefficients[1:], term.means[1:], term.sds[1:], strict=True
        ):
            scratch += (a / sd) * (values[c] - mu)
        with np.errstate(over="ignore"):
            np.exp(scratch, out=scratch)
        scratch *= st.noise_sd[j]
        spread = scratch
    else:
        spread = st.noise_sd[j]
    shaped = standardised(z, term.law, term.df)
    np.multiply(shaped, spread, out=values[j])
    return True


def _closed_form_moments(st, variables, j: int) -> tuple[float, float]:
    """Mean and SD of ``j`` when every equation upstream is linear with constant-SD noise (module notes)."""
    if st.binary[j]:
        p = variables[j].proportion
        return p, float(np.sqrt(p * (1 - p)))
    above = ancestors(st, j)
    mean = np.zeros(st.k)
    cov = np.zeros((st.k, st.k))
    done: list[int] = []
    for i in (i for i in st.order if i in above):
        idx, eff = st.parents[i]
        mean[i] = st.intercept[i] + (float(eff @ mean[idx]) if len(idx) else 0.0)
        for d in done:
            cov[i, d] = cov[d, i] = float(eff @ cov[idx, d]) if len(idx) else 0.0
        cov[i, i] = (float(eff @ cov[np.ix_(idx, idx)] @ eff) if len(idx) else 0.0) + st.noise_sd[i] ** 2
        done.append(i)
    return float(mean[j]), float(np.sqrt(cov[j, j]))


def _simulated_moments(st, j: int) -> tuple[float, float]:
    """Mean and SD of ``j`` over :data:`MEAN_DRAWS` draws of the equations (its ancestors only)."""
    from workbench.engine.generate import evaluate

    above = ancestors(st, j)
    partial = dataclasses.replace(st, order=tuple(i for i in st.order if i in above))
    rng = np.random.default_rng(MEAN_SEED)
    rows = np.empty((st.k, _CHUNK))
    total = total2 = 0.0
    for _ in range(MEAN_DRAWS // _CHUNK):
        rng.standard_normal(out=rows)
        with np.errstate(over="ignore", under="ignore"):
            evaluate(partial, rows, axis=0, out=rows)
        total += float(rows[j].sum())
        total2 += float(np.dot(rows[j], rows[j]))
    mean = total / MEAN_DRAWS
    return mean, float(np.sqrt(max(total2 / MEAN_DRAWS - mean**2, 0.0)))


def with_noise(st, variables: tuple, arrows: tuple):
    """``st`` with the disturbances of the variables with non-normal or spread noise and their covariates'
    moments (module notes); ``st`` itself when every variable has normal noise with a constant SD."""
    chosen = [(j, v) for j, v in enumerate(variables) if v.noise != "normal" or v.spread_with]
    if not chosen:
        return st
    index = {name: i for i, name in enumerate(st.names)}
    terms = [
        NoiseTerm(
            j,
            v.noise,
            v.noise_df,
            np.array([index[c] for c, _ in v.spread_with], dtype=np.intp),
            np.array([a for _, a in v.spread_with], dtype=float),
            np.zeros(len(v.spread_with)),
            np.ones(len(v.spread_with)),
        )
        for j, v in chosen
    ]
    bent = {index[a.target] for a in arrows if a.varies_with or a.form != "linear"}
    bent |= {index[v.name] for v in variables if v.spread_with}
    out = dataclasses.replace(st, noises=tuple(terms))
    needed = sorted({int(c) for t in terms for c in t.covariates}, key=st.order.index)
    for c in needed:
        above = ancestors(st, c)
        # a count's variance is not the linear recursion's: counts upstream go to the draws as well
        linear = st.binary[c] or not (above & bent or any(st.binary[i] or i in st.counts for i in above))
        mean, sd = _closed_form_moments(st, variables, c) if linear else _simulated_moments(out, c)
        if not sd > 0:
            name = next(v.name for v in variables if v.spread_with and st.names[c] in dict(v.spread_with))
            raise SimulationError(
                f"'{st.names[c]}' has SD 0, so it cannot be standardised",
                where=f"variables.{name}.spread_with",
            )
        for t in terms:
            t.means[t.covariates == c] = mean
            t.sds[t.covariates == c] = sd
    for t in terms:
        t.means.setflags(write=False)
        t.sds.setflags(write=False)
    return out
