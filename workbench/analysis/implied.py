"""What a graph implies about the data: the correlation matrix of the observed variables and each R^2.

For a graph whose variables are continuous, or binary without causes of their own, the covariance is known
in closed form (:func:`workbench.scenario.elicit.implied_moments`, the linear recursion of Wright's path
rules; Bollen 1989, ch. 4); the correlations are ``Sigma_ij / sqrt(Sigma_ii Sigma_jj)`` and a continuous
variable's R^2 is the share of its variance its causes explain, ``1 - noise_sd^2 / Sigma_jj``; the
exposure's variance inflation factor in a strategy is ``VIF = 1 / (1 - R^2_x|Z)`` with ``R^2_x|Z`` the
share of the exposure's variance its adjustment set ``Z`` explains, ``Sigma_xZ Sigma_ZZ^-1 Sigma_Zx /
Sigma_xx`` (the large-sample factor by which adjusting for ``Z`` widens the exposure's SE, before the
residual variance of the outcome changes; Fox & Monette 1992, JASA 87:178-183, from memory). A binary
variable with causes has no closed form: its R^2 and the matrix are then not shown, and :attr:`note` says
why. People can compare these numbers with what they know of real data before trusting the graph's sizes.

References
----------
1. Wright S. (1934). The method of path coefficients. Annals of Mathematical Statistics 5:161-215.
2. Bollen K.A. (1989). Structural Equations with Latent Variables. Wiley, ch. 4.

Examples
--------
>>> from workbench import load_preset
>>> moments = implied_moments_of(load_preset("common_cause"))
>>> moments.names
('soil_quality', 'fertiliser', 'wheat_yield')
>>> round(moments.r_squared["fertiliser"], 4)  # 0.36 / 1.36
0.2647
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from workbench.formatting.tables import Column, Paragraph, Table, TableSpec, number
from workbench.scenario.elicit import implied_moments
from workbench.scenario.model import Scenario

__all__ = ["ImpliedMoments", "implied_moments_of", "NOT_SHOWN"]

NOT_SHOWN = (
    "Implied correlations not shown: they need a linear-Gaussian graph (binary variables only without "
    "causes of their own)"
)


@dataclass(frozen=True)
class ImpliedMoments:
    """The implied correlation matrix of the observed variables and every variable's R^2.

    Attributes
    ----------
    names : tuple of str
        The observed variables, in file order (the rows and columns of ``correlation``).
    correlation : ndarray of shape (k, k) or None
        None when the graph has no closed form (see ``note``).
    r_squared : dict of str to float or None
        Per variable (latent ones too): the share of its variance explained by its direct causes.
    note : str or None
        Why the matrix is not shown, else None.
    exposure_vif : dict of str to float or None
        Per strategy: the exposure's variance inflation factor from its adjustment set (1.0 without
        covariates; None where the covariance has no closed form).
    """

    names: tuple[str, ...]
    correlation: np.ndarray | None
    r_squared: dict[str, float | None]
    note: str | None = None
    exposure_vif: dict[str, float | None] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """The ``implied_correlation`` (``{"variables": [...], "matrix": [[...]]}`` or None) and
        ``r_squared`` keys of ``workbench check --json``."""
        matrix = None
        if self.correlation is not None:
            matrix = {"variables": list(self.names), "matrix": self.correlation.tolist()}
        return {
            "implied_correlation": matrix,
            "r_squared": dict(self.r_squared),
            "implied_note": self.note,
            "exposure_vif": dict(self.exposure_vif),
        }

    def parts(self) -> list:
        """The correlation table and the R^2 line, as report parts."""
        r2 = ", ".join(f"{n} {'-' if v is None else f'{v:.3f}'}" for n, v in self.r_squared.items())
        out: list = []
        if self.correlation is not None:
            spec = TableSpec(
                (Column("variable", "variable"),)
                + tuple(Column(n, n, number(3), "right") for n in self.names)
            )
            rows = tuple(
                {"variable": a} | {b: float(self.correlation[i, j]) for j, b in enumerate(self.names)}
                for i, a in enumerate(self.names)
            )
            out.append(Table(spec, rows, "Implied correlations of the observed variables"))
        lines = [f"R^2 (share of each variable's variance its causes explain): {r2}"]
        if self.exposure_vif:
            vif = ", ".join(f"{n} {'-' if v is None else f'{v:.2f}'}" for n, v in self.exposure_vif.items())
            lines.append(
                f"Variance inflation of the exposure's estimate by each strategy's covariates: {vif}"
            )
        if self.note:
            lines.append(self.note)
        out.append(Paragraph(tuple(lines)))
        return out


def implied_moments_of(scenario: Scenario) -> ImpliedMoments:
    """The implied correlations and R^2 of ``scenario`` (closed form; see the module docstring).

    Examples
    --------
    >>> from workbench import load_preset
    >>> m = implied_moments_of(load_preset("common_cause"))
    >>> round(float(m.correlation[0, 1]), 4)  # 0.6 / sqrt(1.36)
    0.5145
    """
    names, sigma, known = implied_moments(scenario.variables, scenario.arrows)
    if any(a.form != "linear" for a in scenario.arrows):  # square or step arrows: no closed form
        known = [False] * len(known)
    vif = {s.name: _exposure_vif(scenario, s.adjust, sigma, known) for s in scenario.strategies}
    r_squared: dict[str, float | None] = {}
    for i, v in enumerate(scenario.variables):
        has_causes = any(a.target == v.name for a in scenario.arrows)
        if not known[i] or (v.is_binary and has_causes):
            r_squared[v.name] = None
        elif v.is_binary or sigma[i, i] <= 0:
            r_squared[v.name] = 0.0
        else:
            r_squared[v.name] = float(1.0 - v.noise_sd**2 / sigma[i, i])
    observed = [i for i, v in enumerate(scenario.variables) if v.observed]
    observed_names = tuple(names[i] for i in observed)
    if not all(known[i] for i in observed):
        return ImpliedMoments(observed_names, None, r_squared, NOT_SHOWN, vif)
    sub = sigma[np.ix_(observed, observed)]
    sd = np.sqrt(np.diag(sub))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = sub / np.outer(sd, sd)
    return ImpliedMoments(observed_names, corr, r_squared, None, vif)


def _exposure_vif(scenario: Scenario, adjust, sigma: np.ndarray, known: list[bool]) -> float | None:
    """``Sigma_xx / (Sigma_xx - Sigma_xZ Sigma_ZZ^-1 Sigma_Zx)`` for the adjustment set ``adjust``; None
    without a closed form, inf when ``Z`` determines the exposure."""
    index = {v.name: i for i, v in enumerate(scenario.variables)}
    x = index[scenario.question.exposure]
    z = [index[name] for name in adjust if name in index]
    if not known[x] or not all(known[i] for i in z):
        return None
    if not z:
        return 1.0
    s_xz = sigma[x, z]
    try:
        explained = float(s_xz @ np.linalg.solve(sigma[np.ix_(z, z)], s_xz))
    except np.linalg.LinAlgError:
        return None
    left = float(sigma[x, x]) - explained
    return float(sigma[x, x] / left) if left > 1e-12 * sigma[x, x] else float("inf")
