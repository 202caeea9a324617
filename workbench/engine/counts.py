"""Count variables (``type = "count"``): Poisson given their causes, arrows on the log scale.

A count ``C`` with causes ``X_1 .. X_m`` has mean ``mu = exp(a + sum(effect x X))`` given them and is drawn
from its standard normal noise ``Z`` by inversion: ``C`` is the smallest integer ``k`` with
``P(Poisson(mu) <= k) >= Phi(Z)``. The intercept ``a`` is calibrated once so that the population mean of
``C`` equals its ``rate``, as a binary variable's intercept gives it its ``proportion``:
``a = log(rate) - log(mean(exp(sum(effect x X))))`` over the calibration draws of the causes (closed form,
no root to find). Drawing by inversion keeps one standard normal per variable and row, so the truth's two
worlds share their random numbers and a count moves monotonically with its mean (common random numbers).

The inversion starts from the Cornish-Fisher value ``floor(mu + sqrt(mu) Z + (Z^2 - 1) / 6)`` (Johnson,
Kemp & Kotz 2005, Univariate Discrete Distributions, 3rd ed., section 4.4: the normal approximation with
its skewness term), evaluates the distribution function there once (``scipy.special.pdtr``) and then steps
by the probability ratio ``p(k + 1) = p(k) mu / (k + 1)`` up or down until the defining inequality holds;
few rows take more than one step. tests/reference/test_counts_reference.py checks it against
``scipy.stats.poisson.ppf``.
"""

from __future__ import annotations

import numpy as np
from scipy import special

from workbench.errors import SimulationError
from workbench.scenario.limits import MAX_COUNT_MEAN as MAX_MEAN

__all__ = ["poisson_from_normal", "count_intercept", "MAX_MEAN"]


def poisson_from_normal(z: np.ndarray, mean: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Poisson counts of mean ``mean`` from standard normal noise ``z`` by inversion (module notes).

    ``out`` (float, shape of ``z``) may be ``z`` itself; a mean of 0 gives 0, a mean that is not finite gives
    NaN (the fit of that replicate then fails and is counted).

    Examples
    --------
    >>> poisson_from_normal(np.array([-3.0, 0.0, 0.0, 3.0]), np.array([2.0, 0.0, 2.0, 2.0]))
    array([0., 0., 2., 7.])
    """
    z = np.asarray(z, dtype=float)
    m = np.broadcast_to(np.asarray(mean, dtype=float), z.shape).reshape(-1)
    flat = z.reshape(-1)
    u = special.ndtr(flat)
    with np.errstate(all="ignore"):
        k = np.floor(m + np.sqrt(m) * flat + (flat * flat - 1.0) / 6.0)
        np.maximum(k, 0.0, out=k)
        cdf = special.pdtr(k, m)
        p = np.exp(k * np.log(m) - m - special.gammaln(k + 1.0))
        good = np.isfinite(m) & (m > 0.0) & (m <= MAX_MEAN)
        rows = np.flatnonzero(good & (u > cdf))
        while rows.size:  # up: the distribution function is still below u
            k[rows] += 1.0
            p[rows] *= m[rows] / k[rows]
            cdf[rows] += p[rows]
            rows = rows[u[rows] > cdf[rows]]
        rows = np.flatnonzero(good & (k > 0.0) & (u <= cdf - p))
        while rows.size:  # down: the distribution function one below is already at least u
            cdf[rows] -= p[rows]
            p[rows] *= k[rows] / m[rows]
            k[rows] -= 1.0
            rows = rows[(k[rows] > 0.0) & (u[rows] <= cdf[rows] - p[rows])]
    k[m == 0.0] = 0.0
    k[~(np.isfinite(m) & (m >= 0.0) & (m <= MAX_MEAN))] = np.nan
    if out is None:
        return k.reshape(z.shape)
    out[...] = k.reshape(z.shape)
    return out


def count_intercept(name: str, rate: float, linear: np.ndarray | None) -> float:
    """The log-scale intercept that gives a count of causes' sum ``linear`` (the calibration draws, None
    without causes) the population mean ``rate``, or a located error.

    Examples
    --------
    >>> round(count_intercept("visits", 2.0, None), 12) == round(float(np.log(2.0)), 12)
    True
    >>> round(count_intercept("visits", 1.0, np.array([-1.0, 1.0])), 6)  # log(1) - log(cosh(1))
    -0.433781
    """
    base = float(np.log(rate))
    if linear is None:
        return base
    with np.errstate(all="ignore"):
        log_mean = float(special.logsumexp(linear)) - float(np.log(linear.size))
    if not np.isfinite(log_mean):
        raise SimulationError(
            f"cannot calibrate the rate of '{name}': the effects of its causes overflow on the log scale",
            where=f"variables.{name}.rate",
        )
    return base - log_mean
