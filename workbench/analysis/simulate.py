"""``simulate()``: many simulated studies from a scenario, every strategy scored with Monte Carlo SEs.

The replicates are drawn and fitted by the engine (:func:`workbench.engine.replicates.run_replicates`); this
module scores them (:mod:`workbench.engine.metrics`) into a :class:`SimulationResult`.

Examples
--------
>>> from workbench import load_preset
>>> result = simulate(load_preset("common_cause"), replicates=500, seed=1)
>>> result.engine, list(result.table["name"])
('exact', ['unadjusted', 'adjust_soil'])
>>> bool(abs(result.table["bias"].iloc[1]) < 4 * result.table["bias_mcse"].iloc[1])
True
"""

from __future__ import annotations

import functools
import json
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from workbench.engine.ols import (
    selected_names,
)
from workbench.engine.replicates import (
    ReplicateArrays,
    fit_plan,
    is_valid_set,
    run_replicates,
    strategy_is_valid,
)
from workbench.engine.truth import (
    Truth,
    conditional_log_odds_ratio,
)
from workbench.formatting.phrases import selected_sets_text
from workbench.scenario.model import Scenario
from workbench.scenario.write import write_text_atomically

__all__ = ["SimulationResult", "simulate", "TABLE_COLUMNS", "REQUIRED_KEYS"]

TABLE_COLUMNS = [
    "name",
    "adjust",
    "model",
    "standardize",
    "valid",
    "estimand",
    "target",
    "truth",
    "truth_mcse",
    "mean",
    "bias",
    "bias_mcse",
    "relative_bias",
    "relative_bias_mcse",
    "emp_se",
    "emp_se_mcse",
    "model_se",
    "model_se_mcse",
    "relative_error_model_se",
    "relative_error_model_se_mcse",
    "rmse",
    "rmse_mcse",
    "coverage",
    "coverage_mcse",
    "be_coverage",
    "be_coverage_mcse",
    "power",
    "power_mcse",
    "failures",
    "failure_reasons",
    "change_in_estimate_median",
    "share_change_over_10pct",
    "se_ratio",
    "reference",
    "vif",
    "df",
    "note",
    "selection",
    "restrict",
    "match",
    "selected_valid_share",
    "selected_sets",
    "mean_retained_n",
]


# --------------------------------------------------------------------------------------------------------
# The scored result
# --------------------------------------------------------------------------------------------------------
def _plain(value: Any) -> Any:
    """JSON-ready: NaN and infinities become None, numpy scalars Python ones."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        value = float(value)
        return value if math.isfinite(value) else None
    return value


REQUIRED_KEYS = [
    "name",
    "adjust",
    "valid",
    "mean",
    "bias",
    "bias_mcse",
    "relative_bias",
    "emp_se",
    "emp_se_mcse",
    "model_se",
    "model_se_mcse",
    "rmse",
    "coverage",
    "coverage_mcse",
    "power",
    "power_mcse",
    "failures",
    "change_in_estimate_median",
    "share_change_over_10pct",
    "se_ratio",
    "vif",
]


def _verdict_word(row) -> str:
    """The verdict column of the text table: a selection rule's verdict depends on the data."""
    share = row.get("selected_valid_share")
    if row.get("selection") and share is not None and np.isfinite(share):
        return f"{share:.0%}"
    return "yes" if row["valid"] else "NO"


@dataclass
class SimulationResult:
    """The scored result of :func:`simulate`.

    Attributes
    ----------
    scenario : Scenario
    n, replicates, seed : int
    alpha : float
    engine : {"exact", "raw"}
    truth, truth_mcse : float
        The question's true effect and its Monte Carlo SE (0 for a closed form).
    truth_method, truth_description : str
    table : pandas.DataFrame
        One row per strategy; columns :data:`TABLE_COLUMNS` (the JSON keys).
    arrays : ReplicateArrays
        The per-replicate results behind the table.
    conditional_log_odds_ratio : float or None
        For a binary outcome, the structural conditional log odds ratio of the exposure (the arrow's effect).
    """

    scenario: Scenario
    n: int
    replicates: int
    seed: int
    alpha: float
    engine: str
    truth: float
    truth_mcse: float
    truth_method: str
    truth_description: str
    table: pd.DataFrame
    arrays: ReplicateArrays = field(repr=False)
    conditional_log_odds_ratio: float | None = None

    @functools.cached_property
    def estimates(self) -> pd.DataFrame:
        """Long table: ``replicate, strategy, estimate, se, ci_low, ci_high, p_value, failed``."""
        a = self.arrays
        R, S = a.estimate.shape
        return pd.DataFrame(
            {
                "replicate": np.repeat(np.arange(R), S),
                "strategy": np.tile(np.array(a.strategies, dtype=object), R),
                "estimate": a.estimate.ravel(),
                "se": a.se.ravel(),
                "ci_low": a.ci_low.ravel(),
                "ci_high": a.ci_high.ravel(),
                "p_value": a.p_value.ravel(),
                "failed": a.failed.ravel(),
            }
        )

    @functools.cached_property
    def also_estimates(self) -> pd.DataFrame:
        """Long table of the ``also`` variables' coefficients: ``replicate, strategy, variable, estimate, se,
        ci_low, ci_high, p_value`` (only strategies that adjust for the variable)."""
        a = self.arrays
        R, S, A = a.also_estimate.shape
        columns = ["replicate", "strategy", "variable", "estimate", "se", "ci_low", "ci_high", "p_value"]
        parts = []
        for s in range(S):
            for v in range(A):
                if np.all(np.isnan(a.also_estimate[:, s, v])) and np.all(np.isnan(a.also_se[:, s, v])):
                    continue
                parts.append(
                    pd.DataFrame(
                        {
                            "replicate": np.arange(R),
                            "strategy": a.strategies[s],
                            "variable": a.also_names[v],
                            "estimate": a.also_estimate[:, s, v],
                            "se": a.also_se[:, s, v],
                            "ci_low": a.also_ci_low[:, s, v],
                            "ci_high": a.also_ci_high[:, s, v],
                            "p_value": a.also_p_value[:, s, v],
                        }
                    )
                )
        if not parts:
            return pd.DataFrame({c: [] for c in columns})
        return pd.concat(parts, ignore_index=True).sort_values(
            ["replicate", "strategy"], kind="stable", ignore_index=True
        )

    def also_table(self) -> pd.DataFrame:
        """Performance of the ``also`` variables' coefficients against their arrows' effects: one row per
        strategy and variable it adjusts for."""
        a = self.arrays
        rows = []
        parents = dict(self.scenario.parents(self.scenario.question.outcome))
        for v, name in enumerate(a.also_names):
            truth = float(parents.get(name, 0.0))
            m = a.score_also(v, truth)
            for s, strategy in enumerate(a.strategies):
                if np.all(np.isnan(a.also_se[:, s, v])):
                    continue
                rows.append(
                    {
                        "strategy": strategy,
                        "variable": name,
                        "truth": truth,
                        **{
                            key: m[key][s]
                            for key in (
                                "mean",
                                "bias",
                                "bias_mcse",
                                "emp_se",
                                "model_se",
                                "coverage",
                                "coverage_mcse",
                                "power",
                                "power_mcse",
                            )
                        },
                    }
                )
        return pd.DataFrame(rows)

    def to_dict(self) -> dict:
        """The JSON contract: ``title, n, replicates, seed, alpha, engine, truth, truth_mcse, strategies``
        plus extras; NaN becomes None."""
        q = self.scenario.question
        strategies = []
        for record in self.table.to_dict(orient="records"):
            item = {key: record[key] for key in REQUIRED_KEYS}
            item.update({key: record[key] for key in TABLE_COLUMNS if key not in item})
            item["adjust"] = list(record["adjust"])
            strategies.append(item)
        out = {
            "title": self.scenario.title,
            "n": self.n,
            "replicates": self.replicates,
            "seed": self.seed,
            "alpha": self.alpha,
            "engine": self.engine,
            "truth": self.truth,
            "truth_mcse": self.truth_mcse,
            "truth_method": self.truth_method,
            "truth_description": self.truth_description,
            "question": {"exposure": q.exposure, "outcome": q.outcome, "target": q.target, "scale": q.scale},
            "strategies": strategies,
        }
        if self.conditional_log_odds_ratio is not None:
            out["conditional_log_odds_ratio"] = self.conditional_log_odds_ratio
        if self.arrays.also_names:
            out["also"] = self.also_table().to_dict(orient="records")
        return _plain(out)

    def to_json(self, indent: int | None = 2) -> str:
        """:meth:`to_dict` as JSON text (NaN as null)."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def to_csv(self, path) -> None:
        """Write the per-strategy table as CSV, atomically."""
        table = self.table.copy()
        table["adjust"] = [" ".join(a) for a in table["adjust"]]
        table["failure_reasons"] = [
            "; ".join(f"{k}: {v}" for k, v in d.items()) for d in table["failure_reasons"]
        ]
        table["selected_sets"] = [selected_sets_text(sets, limit=None) for sets in table["selected_sets"]]
        table["restrict"] = [
            "; ".join(f"{k} = {v}" for k, v in d.items()) if d else "" for d in table["restrict"]
        ]
        table["match"] = [" ".join(m) for m in table["match"]]
        write_text_atomically(path, table.to_csv(index=False))

    def to_text(self) -> str:
        """A readable table: estimates with their Monte Carlo SEs in brackets."""
        q = self.scenario.question
        lines = [
            f"{self.scenario.title}",
            f"effect of {q.exposure} on {q.outcome} ({q.target}, {q.scale}): truth {self.truth:.4g}"
            + (
                f" (MCSE {self.truth_mcse:.2g}, {self.truth_method})"
                if self.truth_mcse
                else f" ({self.truth_method})"
            ),
            f"{self.replicates:,} simulated studies of n = {self.n:,}, engine {self.engine}, seed {self.seed}, "
            f"alpha {self.alpha:g}",
        ]
        if self.conditional_log_odds_ratio is not None:
            lines.append(
                f"structural conditional log odds ratio (the arrow): {self.conditional_log_odds_ratio:.4g}"
            )
        lines.append("")

        def pm(value, mcse, digits=4):
            if value is None or not np.isfinite(value):
                return "-"
            if not np.isfinite(mcse) or mcse <= 0:
                return f"{value:.{digits}g}"
            decimals = int(max(0, min(8, 1 - math.floor(math.log10(mcse)))))
            return f"{value:.{decimals}f} ({mcse:.{decimals}f})"

        header = [
            "strategy",
            "valid",
            "mean",
            "bias (MCSE)",
            "emp SE",
            "model SE",
            "coverage",
            "power",
            "fail",
        ]
        binary = self.scenario.outcome.is_binary
        if binary:
            header[2:2] = ["estimand", "truth"]
        body = []
        for _, r in self.table.iterrows():
            row = [
                r["name"],
                _verdict_word(r),
                f"{r['mean']:.4g}" if np.isfinite(r["mean"]) else "-",
                pm(r["bias"], r["bias_mcse"]),
                pm(r["emp_se"], r["emp_se_mcse"]),
                pm(r["model_se"], r["model_se_mcse"]),
                pm(r["coverage"], r["coverage_mcse"], 3),
                pm(r["power"], r["power_mcse"], 3),
                str(int(r["failures"])),
            ]
            if binary:
                row[2:2] = [r["estimand"], f"{r['truth']:.4g}"]
            body.append(row)
        widths = [max(len(str(x)) for x in col) for col in zip(header, *body, strict=True)]
        lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)))
        for row in body:
            lines.append("  ".join(str(x).ljust(w) for x, w in zip(row, widths, strict=True)))
        notes = [f"{r['name']}: {r['note']}" for _, r in self.table.iterrows() if r["note"]]
        for _, r in self.table.iterrows():
            if isinstance(r["selection"], str):
                sets = selected_sets_text(r["selected_sets"], limit=None)
                valid_share = r["selected_valid_share"]
                share = f"{100 * valid_share:.0f}%" if np.isfinite(valid_share) else "-"
                notes.append(
                    f"{r['name']}: covariates chosen by {r['selection'].replace('_', ' ')} among "
                    f"{', '.join(r['adjust'])}; chosen set valid in {share} of studies; most chosen: {sets}"
                )
            if r["restrict"]:
                where = ", ".join(
                    f"{k} in [{v[0]:g}, {v[1]:g}]" if isinstance(v, list) else f"{k} = {v}"
                    for k, v in r["restrict"].items()
                )
                notes.append(
                    f"{r['name']}: analysis restricted to {where}; mean units kept "
                    f"{r['mean_retained_n']:.1f} of {self.n}"
                )
            if r["match"]:
                notes.append(
                    f"{r['name']}: exposed and unexposed units matched 1:1 on {', '.join(r['match'])}; "
                    f"mean units kept {r['mean_retained_n']:.1f} of {self.n}"
                )
        for _, r in self.table.iterrows():
            if r["failure_reasons"]:
                text = "; ".join(f"{k} ({v})" for k, v in r["failure_reasons"].items())
                notes.append(f"{r['name']}: failed replicates: {text}")
        if notes:
            lines.append("")
            lines.extend(notes)
        if self.arrays.also_names:
            also = self.also_table()
            lines.append("")
            lines.append(
                "Also estimated: direct effects of further variables on the outcome (truth = the arrow)"
            )
            if also.empty:
                lines.append("  no strategy adjusts for them")
            for _, r in also.iterrows():
                lines.append(
                    f"  {r['variable']} in {r['strategy']}: truth {r['truth']:.4g}, mean {r['mean']:.4g}, "
                    f"bias {pm(r['bias'], r['bias_mcse'])}, coverage {pm(r['coverage'], r['coverage_mcse'], 3)}, "
                    f"power {pm(r['power'], r['power_mcse'], 3)}"
                )
        lines.append("")
        lines.append(
            "Reminder: these figures hold only if the scenario's graph and effect sizes are right; the graph "
            "is an assumption, not a finding."
        )
        return "\n".join(lines)


def _relative_change(estimate: np.ndarray, reference: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    with np.errstate(divide="ignore", invalid="ignore"):
        change = (estimate - reference) / np.abs(reference)
    finite = np.isfinite(change)
    S = estimate.shape[1]
    median = np.full(S, np.nan)
    share = np.full(S, np.nan)
    for s in range(S):
        values = change[finite[:, s], s]
        if values.size:
            median[s] = np.median(values)
            share[s] = np.mean(np.abs(values) > 0.10)
    return median, share


def simulate(
    scenario: Scenario,
    *,
    n: int | None = None,
    replicates: int | None = None,
    seed=None,
    alpha: float | None = None,
    engine: str = "auto",
    progress=None,
) -> SimulationResult:
    """Simulate repeated studies from a scenario and score every strategy.

    Parameters
    ----------
    scenario : Scenario
    n, replicates, seed, alpha : optional
        Left at None, taken from the scenario's ``[study]``.
    engine : {"auto", "exact", "raw"}
    progress : callable, optional
        ``progress(done_replicates, total_replicates)``; may raise :class:`~workbench.errors.Cancelled`.

    Returns
    -------
    SimulationResult

    Notes
    -----
    Per strategy the table holds the Morris et al. (2019) measures with MCSEs (:func:`workbench.engine.metrics.performance`)
    against the truth the strategy targets, and:

    * ``change_in_estimate_median``: median over replicates of ``(estimate - reference) / |reference|``, the
      reference being the unadjusted fit of the same model in the same replicate;
    * ``share_change_over_10pct``: share of replicates where that change exceeds 10% in absolute value;
    * ``se_ratio``: model SE over the reference's model SE;
    * ``vif``: median over replicates of the exposure's variance inflation factor;
    * ``selection``, ``restrict``: the strategy's rule (or None) and restriction (a dict, empty if none);
    * ``selected_valid_share``: for a selection rule, the share of replicates (whose full model could be
      fitted) where the chosen set is a valid adjustment set (restricted and matched variables counting as
      conditioned on); NaN for a fixed set;
    * ``selected_sets``: for a selection rule, the three most frequent chosen sets as
      ``[{"adjust": [...], "share": float}, ...]``; empty for a fixed set;
    * ``match``: the variables a strategy matches on exactly (a list, empty if none);
    * ``mean_retained_n``: for a restricted or matched strategy, the mean number of units kept (inside the
      restriction, paired by matching); NaN otherwise;
    * ``df``: ``n - p``, or for a selection rule or a restriction the mean over fitted replicates of their own
      degrees of freedom.

    References
    ----------
    Morris T.P., White I.R., Crowther M.J. (2019). Statistics in Medicine 38(11):2074-2102.
    Mickey R.M., Greenland S. (1989). American Journal of Epidemiology 129(1):125-137.

    Examples
    --------
    >>> from workbench import load_preset
    >>> result = simulate(load_preset("common_cause"), n=100, replicates=300, seed=2)
    >>> result.n, result.replicates, result.truth
    (100, 300, 0.25)
    >>> '"strategies"' in result.to_json()
    True
    """
    study = scenario.study
    n = study.n if n is None else n
    replicates = study.replicates if replicates is None else replicates
    seed = study.seed if seed is None else seed
    alpha = study.alpha if alpha is None else alpha
    arrays = run_replicates(scenario, n, replicates, seed, engine=engine, alpha=alpha, progress=progress)
    plan = fit_plan(scenario)
    measures = arrays.score()
    median, share = _relative_change(arrays.estimate, arrays.reference_estimate)
    with np.errstate(divide="ignore", invalid="ignore"):
        # the reference's model SE by the arithmetic of metrics.performance
        ok = ~np.isnan(arrays.reference_estimate)
        ref_var = np.where(ok, arrays.reference_se**2, np.nan)
        ref_model_se = np.sqrt(np.nansum(ref_var, axis=0) / ok.sum(axis=0))
        se_ratio = measures["model_se"] / ref_model_se
        vif = np.array([np.nanmedian(col) if np.isfinite(col).any() else np.nan for col in arrays.vif.T])
    itself = np.array([ref == name for ref, name in zip(arrays.reference, arrays.strategies, strict=True)])
    se_ratio[itself & np.isfinite(se_ratio)] = 1.0
    reported = plan.reported
    rows = []
    for s, f in enumerate(reported):
        strategy = scenario.strategy(f.name)
        sets = arrays.selected_sets(s)
        valid_share = float("nan")
        if strategy.selection is not None:
            # validity once per selected pattern (restricted variables count as conditioned on)
            codes, counts = np.unique(arrays.selected[:, s], return_counts=True)
            fitted = codes >= 0
            if fitted.any():
                restricted = strategy.restricted + strategy.match
                valid = np.array(
                    [
                        is_valid_set(scenario, selected_names(int(c), f.adjust) + restricted)
                        for c in codes[fitted]
                    ]
                )
                valid_share = float((counts[fitted] * valid).sum() / counts[fitted].sum())
        retained = arrays.retained_n[:, s]
        row = {
            "name": f.name,
            "adjust": list(f.adjust),
            "model": strategy.model,
            "standardize": strategy.standardize,
            "selection": strategy.selection,
            "restrict": {name: list(v) if isinstance(v, tuple) else v for name, v in strategy.restrict},
            "match": list(strategy.match),
            "selected_valid_share": valid_share,
            "selected_sets": [{"adjust": list(chosen), "share": share} for chosen, share in sets[:3]],
            "mean_retained_n": (
                float(np.mean(retained)) if strategy.restrict or strategy.match else float("nan")
            ),
            "valid": strategy_is_valid(scenario, strategy),
            "estimand": f.estimand,
            "target": scenario.question.target,
            "truth": float(arrays.truth[s]),
            "truth_mcse": float(arrays.truth_mcse[s]),
        }
        for key in TABLE_COLUMNS:
            if key in measures:
                row[key] = measures[key][s].item()
        row.update(
            {
                "failures": int(measures["failures"][s]),
                "failure_reasons": dict(arrays.reasons[f.name]),
                "change_in_estimate_median": float(median[s]),
                "share_change_over_10pct": float(share[s]),
                "se_ratio": float(se_ratio[s]),
                "reference": arrays.reference[s],
                "vif": float(vif[s]),
                "df": float(arrays.df[s]),
                "note": f.note,
                "n_ok": int(measures["n_ok"][s]),
            }
        )
        rows.append(row)
    table = pd.DataFrame(rows, columns=TABLE_COLUMNS + ["n_ok"])
    truth: Truth = plan.truths[scenario.question.scale]
    return SimulationResult(
        scenario=scenario,
        n=int(n),
        replicates=int(replicates),
        seed=arrays.seed,
        alpha=float(alpha),
        engine=arrays.engine,
        truth=float(truth.value),
        truth_mcse=float(truth.mcse),
        truth_method=truth.method,
        truth_description=truth.description,
        table=table,
        arrays=arrays,
        conditional_log_odds_ratio=conditional_log_odds_ratio(scenario) if plan.binary_outcome else None,
    )
