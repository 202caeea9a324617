"""The result of a sensitivity analysis: the grid, the robustness value, the benchmarks and the E-value.

A :class:`SensitivityResult` holds the table (one row per grid point of the two strengths of a latent
confounder U, as partial R^2), the expected robustness value at the planned n, the benchmarks (each observed
covariate of the strategy and the bounds on a U k times as strong) and, for a binary outcome, the E-value. It
renders as text (:meth:`~SensitivityResult.as_text`), HTML (:meth:`~SensitivityResult.as_html`, which
notebooks show) and JSON (:meth:`~SensitivityResult.to_dict`, :meth:`~SensitivityResult.to_json`) with the
same keys as the attributes.
"""

from __future__ import annotations

import json
from dataclasses import dataclass

import pandas as pd

from workbench.formatting.jsonable import to_jsonable
from workbench.formatting.tables import (
    Column,
    Heading,
    Paragraph,
    Table,
    TableSpec,
    number,
    render_html,
    render_text,
    significant,
)

__all__ = ["SensitivityResult", "ASSUMPTION", "BENCHMARK_SPEC"]

ASSUMPTION = (
    "The grid shows what an unmeasured confounder of these strengths would do under the assumed graph; "
    "it is not evidence that none exists."
)

BENCHMARK_SPEC = TableSpec(
    (
        Column("covariate", "covariate"),
        Column("r2_exposure_covariate", "R2 with exposure", number(4), "right"),
        Column("r2_outcome_covariate", "R2 with outcome", number(4), "right"),
        Column("k", "U as strong as", lambda k: f"{k:g} x", "right"),
        Column("r2_exposure", "U R2 exposure (bound)", number(4), "right"),
        Column("r2_outcome", "U R2 outcome (bound)", number(4), "right"),
        Column("estimate", "adjusted estimate", significant(4), "right"),
    )
)
"""The benchmarks table: a covariate's own partial R^2 and the bounds on a U k times as strong."""


_MATRICES = (
    (
        "estimate",
        "Adjusted estimate: a row per partial R2 of U with the outcome, a column per one with the exposure",
    ),
    ("coverage", "Coverage of the truth at n (simulated)"),
    ("power", "Power at n (simulated)"),
)


@dataclass(frozen=True, eq=False)
class SensitivityResult:
    """How a latent confounder of given strengths would move one strategy's estimate.

    Attributes
    ----------
    title, strategy, exposure, outcome : str
    adjust : tuple of str
        The strategy's covariates.
    n, df : int
        The planned sample size and the residual degrees of freedom there (n minus the coefficients).
    large_sample_estimate : float
        The strategy's estimate in large samples (what the adjusted estimates start from).
    se, se_factor, t : float
        Its expected SE at n, SE x sqrt(n), and the expected t statistic at n.
    robustness_value : float
        ``RV_1`` at n: the partial R^2 a U needs with both exposure and outcome to bring the estimate to zero.
    benchmarks : pandas.DataFrame
        ``covariate``, its ``r2_exposure_covariate`` (``R^2_{D~Z_j|X_-j}``, with the exposure given the
        strategy's other covariates) and ``r2_outcome_covariate`` (``R^2_{Y~Z_j|D,X_-j}``, with the outcome
        given the exposure and the other covariates), ``k``, and for a U k times as strong as ``Z_j`` the
        bounds ``r2_exposure`` and ``r2_outcome``, its ``bias`` and the adjusted ``estimate``.
    table : pandas.DataFrame
        One row per grid point: ``r2_exposure``, ``r2_outcome``, ``bias`` (absolute), ``estimate``
        (adjusted, toward zero); with ``simulated``: ``coverage``, ``coverage_mcse``, ``power``,
        ``power_mcse``.
    risk_ratio, e_value : float or None
        Binary outcome: the marginal risk ratio of the large-sample fit and its E-value; None otherwise.
    method : str
        ``"closed form"`` or ``"large simulated data set"``.
    simulated : bool
    replicates : int or None
    seed : object
        Of the simulation, when there is one.
    """

    title: str
    strategy: str
    adjust: tuple[str, ...]
    exposure: str
    outcome: str
    n: int
    df: int
    large_sample_estimate: float
    se: float
    se_factor: float
    t: float
    robustness_value: float
    benchmarks: pd.DataFrame
    table: pd.DataFrame
    risk_ratio: float | None
    e_value: float | None
    method: str
    simulated: bool = False
    replicates: int | None = None
    seed: object = None

    assumption = ASSUMPTION

    def to_dict(self) -> dict:
        """JSON-ready: the attributes, the tables as lists of records (NaN as null)."""
        return to_jsonable(
            {
                "title": self.title,
                "strategy": self.strategy,
                "adjust": list(self.adjust),
                "exposure": self.exposure,
                "outcome": self.outcome,
                "n": self.n,
                "df": self.df,
                "large_sample_estimate": self.large_sample_estimate,
                "se": self.se,
                "se_factor": self.se_factor,
                "t": self.t,
                "robustness_value": self.robustness_value,
                "risk_ratio": self.risk_ratio,
                "e_value": self.e_value,
                "method": self.method,
                "simulated": self.simulated,
                "replicates": self.replicates,
                "seed": self.seed,
                "assumption": ASSUMPTION,
                "benchmarks": self.benchmarks.to_dict(orient="records"),
                "table": self.table.to_dict(orient="records"),
            }
        )

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent)

    def to_csv(self, path=None) -> str | None:
        """The grid table as CSV (to ``path``, or returned as text)."""
        return self.table.to_csv(path, index=False)

    def summary_lines(self) -> tuple[str, ...]:
        """The findings in a few sentences."""
        rv = self.robustness_value
        lines = [
            f"Strategy '{self.strategy}': large-sample estimate {self.large_sample_estimate:.4g}, expected SE "
            f"{self.se:.3g} and t {self.t:.3g} at n = {self.n:,} ({self.method}).",
            f"Robustness value at n = {self.n:,}: {rv:.3f}. A confounder explaining {100 * rv:.1f}% of the "
            "residual variance of both the exposure and the outcome would bring the estimate to zero.",
        ]
        strongest = self.strongest_benchmark()
        if strongest is not None:
            lines.append(
                f"A confounder as strong as '{strongest['covariate']}' (k = 1) would move the estimate to "
                f"{strongest['estimate']:.4g}."
            )
        if self.e_value is not None:
            lines.append(
                f"E-value: {self.e_value:.3g} (marginal risk ratio {self.risk_ratio:.3g}): a confounder "
                "associated with both exposure and outcome by this risk ratio could explain the effect away."
            )
        lines.append(ASSUMPTION)
        return tuple(lines)

    def strongest_benchmark(self):
        """The k = 1 benchmark with the largest bias (a row as a dict), or None without covariates."""
        ones = self.benchmarks[self.benchmarks["k"] == 1].dropna(subset=["bias"])
        if not len(ones):
            return None
        return ones.loc[ones["bias"].idxmax()].to_dict()

    def parts(self) -> list:
        parts = [
            Heading(f"Sensitivity to an unmeasured confounder: {self.title}"),
            Paragraph(self.summary_lines()),
        ]
        if len(self.benchmarks):
            parts.append(
                Table(
                    BENCHMARK_SPEC,
                    tuple(self.benchmarks.to_dict(orient="records")),
                    "Benchmarks: observed covariates (partial R2) and a confounder k times as strong",
                )
            )
        for value, title in _MATRICES:
            if value in self.table.columns:
                parts.append(self._matrix(value, title))
        return parts

    def _matrix(self, value: str, title: str) -> Table:
        """The grid as a matrix: a row per outcome strength, a column per exposure strength."""
        wide = self.table.pivot_table(index="r2_outcome", columns="r2_exposure", values=value)
        wide = wide.sort_index(ascending=False)
        keys = [f"x{i}" for i in range(wide.shape[1])]
        spec = TableSpec(
            (Column("r2_outcome", "R2 outcome \\ exposure", number(3), "right"),)
            + tuple(
                Column(key, f"{x:.3g}", significant(3), "right")
                for key, x in zip(keys, wide.columns, strict=True)
            )
        )
        records = tuple(
            {"r2_outcome": y, **dict(zip(keys, values, strict=True))}
            for y, values in zip(wide.index, wide.to_numpy(float), strict=True)
        )
        return Table(spec, records, title)

    def as_text(self) -> str:
        return render_text(self.parts())

    def as_html(self) -> str:
        return render_html(self.parts())

    def _repr_html_(self) -> str:
        return self.as_html()
