"""``simulate()``: many simulated studies from a scenario, every strategy scored with Monte Carlo SEs.

The replicates are drawn and fitted by the engine (:func:`workbench.engine.replicates.run_replicates`); this
module scores them (:mod:`workbench.engine.metrics`) into a :class:`SimulationResult`, which renders as text
(:meth:`SimulationResult.as_text`), HTML (:meth:`SimulationResult.as_html`, shown by notebooks), JSON and CSV.

A run with ``seed=None`` draws fresh entropy; the result records it, so ``simulate(sc, seed=result.seed)``
repeats the run number for number.

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
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from workbench.analysis.interaction_table import interaction_parts, interaction_rows
from workbench.analysis.large_sample import model_word, with_model_verdicts
from workbench.engine.fitplan import fit_plan, is_valid_set, strategy_is_valid
from workbench.engine.metrics import variance_inflation
from workbench.engine.ols import selected_names
from workbench.engine.replicates import ReplicateArrays, check_arguments, run_replicates
from workbench.engine.streams import seed_entropy, seed_sequence
from workbench.engine.truth import Truth, conditional_log_odds_ratio
from workbench.formatting.jsonable import to_jsonable
from workbench.formatting.numbers import effect_digits, estimate_decimals, fmt, fmt_mcse
from workbench.formatting.phrases import (
    kept_units_text,
    selected_sets_text,
    strategy_text,
)
from workbench.formatting.tables import (
    Bullets,
    Column,
    Heading,
    Paragraph,
    Table,
    TableSpec,
    integer,
    number,
    render_html,
    render_text,
)
from workbench.graph.defaults import with_default_strategies
from workbench.scenario.model import Scenario, Strategy
from workbench.scenario.write import write_text_atomically

__all__ = ["SimulationResult", "simulate", "score_table", "verdict_word", "TABLE_COLUMNS", "REQUIRED_KEYS"]

TABLE_COLUMNS = [
    "name",
    "adjust",
    "model",
    "standardize",
    "valid",
    "set_valid",
    "model_ok",
    "large_sample_estimate",
    "large_sample_bias",
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
    "type_s",
    "type_s_mcse",
    "exaggeration",
    "exaggeration_mcse",
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
"""Keys every strategy of the JSON output has (the contract); the others of :data:`TABLE_COLUMNS` follow."""


def verdict_word(row) -> str:
    """The verdict cell of a strategy's row: ``yes`` / ``NO`` from the graph, or for a selection rule the
    share of studies whose chosen set was valid (the verdict then depends on the data).

    Examples
    --------
    >>> verdict_word({"valid": True}), verdict_word({"valid": True, "selection": "p_value",
    ...                                              "selected_valid_share": 0.57})
    ('yes', '57%')
    """
    share = row.get("selected_valid_share")
    if row.get("selection") and share is not None and np.isfinite(share):
        return f"{share:.0%}"
    return "yes" if row["valid"] else "NO"


def _digits(record) -> int:
    return effect_digits(record.get("emp_se"))


# ---- the result's tables, each specified once ------------------------------------------------------------
PERFORMANCE_COLUMNS = (
    Column("name", "strategy"),
    Column("verdict", "valid"),
    Column("model_verdict", "model"),
    Column("estimand", "estimand"),
    Column("truth", "truth", align="right", digits=_digits),
    Column("mean", "mean", align="right", digits=_digits),
    Column("bias", "bias (MCSE)", align="right", mcse="bias_mcse", digits=_digits),
    Column("emp_se", "emp SE (MCSE)", align="right", mcse="emp_se_mcse", digits=_digits),
    Column("model_se", "model SE (MCSE)", align="right", mcse="model_se_mcse", digits=_digits),
    Column("coverage", "coverage (MCSE)", align="right", mcse="coverage_mcse"),
    Column("power", "power (MCSE)", align="right", mcse="power_mcse"),
    Column("type_s", "type S (MCSE)", align="right", mcse="type_s_mcse"),
    Column("exaggeration", "exaggeration (MCSE)", align="right", mcse="exaggeration_mcse"),
    Column("failures", "fail", integer, "right"),
)
PERFORMANCE_TABLE = TableSpec(PERFORMANCE_COLUMNS)
"""The performance table: one row per strategy."""
PERFORMANCE_TABLE_SAME_TARGET = TableSpec(
    tuple(c for c in PERFORMANCE_COLUMNS if c.key not in ("estimand", "truth"))
)
"""The performance table when every strategy targets the question's truth (a continuous outcome)."""
ALSO_TABLE = TableSpec(
    (
        Column("variable", "variable"),
        Column("strategy", "strategy"),
        Column("truth", "truth", align="right", digits=_digits),
        Column("mean", "mean", align="right", digits=_digits),
        Column("bias", "bias (MCSE)", align="right", mcse="bias_mcse", digits=_digits),
        Column("coverage", "coverage (MCSE)", align="right", mcse="coverage_mcse"),
        Column("power", "power (MCSE)", align="right", mcse="power_mcse"),
        Column("vif", "VIF", number(2), "right"),
    )
)
"""The ``also`` variables' table: one row per strategy and variable it adjusts for."""
REMINDER = (
    "Reminder: these figures hold only if the scenario's graph and effect sizes are right; the graph is an "
    "assumption, not a finding."
)


def _strategy_notes(r, n: int) -> list[str]:
    """The notes of one strategy's row: the model's note, its selection rule, restriction, matching and
    failed replicates."""
    notes = [f"{r['name']}: {r['note']}"] if r["note"] else []
    if isinstance(r["selection"], str):
        sets = selected_sets_text(r["selected_sets"], limit=None)
        share = r["selected_valid_share"]
        valid = f"{100 * share:.0f}%" if np.isfinite(share) else "-"
        notes.append(
            f"{r['name']}: covariates {strategy_text(r['adjust'], r['selection'])}; chosen set valid in "
            f"{valid} of studies; most chosen: {sets}"
        )
    if r["restrict"]:
        notes.append(
            f"{r['name']}: analysis of {kept_units_text(r['restrict'])}; mean units kept "
            f"{r['mean_retained_n']:.1f} of {n}"
        )
    if r["match"]:
        notes.append(
            f"{r['name']}: exposed and unexposed units matched 1:1 on {', '.join(r['match'])}; "
            f"mean units kept {r['mean_retained_n']:.1f} of {n}"
        )
    if r["failure_reasons"]:
        text = "; ".join(f"{k} ({v})" for k, v in r["failure_reasons"].items())
        notes.append(f"{r['name']}: failed replicates: {text}")
    return notes


@dataclass
class SimulationResult:
    """The scored result of :func:`simulate`.

    Attributes
    ----------
    scenario : Scenario
    n, replicates : int
    seed : int or list of int
        The entropy of the run's seed sequence; passing it back as ``seed`` repeats the run.
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
    seed: int | list[int]
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
        rows, q = [], self.scenario.question
        parents = dict(self.scenario.parents(q.outcome))
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
                        "vif": variance_inflation(
                            self.scenario, (q.exposure, *self.scenario.strategy(strategy).adjust), name
                        ),
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
                                "type_s",
                                "type_s_mcse",
                                "exaggeration",
                                "exaggeration_mcse",
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
        if rows := interaction_rows(self.scenario, self.arrays):
            out["interactions"] = rows
        return to_jsonable(out)

    def to_json(self, indent: int | None = 2) -> str:
        """:meth:`to_dict` as JSON text (NaN as null)."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def to_csv(self, path=None) -> str | None:
        """Write the per-strategy table as CSV, atomically; with ``path=None`` return the CSV text instead."""
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
        if path is None:
            return table.to_csv(index=False)
        write_text_atomically(path, table.to_csv(index=False))
        return None

    # ---- rendering ---------------------------------------------------------------------------------------
    def _settings_lines(self) -> tuple[str, ...]:
        q = self.scenario.question
        if self.truth_mcse:
            value = fmt(self.truth, estimate_decimals(self.truth_mcse, 4))
            truth = f"{value} (MCSE {fmt_mcse(self.truth_mcse)}, {self.truth_method})"
        else:
            truth = f"{self.truth:.4g} ({self.truth_method})"
        lines = [
            f"effect of {q.exposure} on {q.outcome} ({q.target}, {q.scale}): truth {truth}",
            f"{self.replicates:,} simulated studies of n = {self.n:,}, engine {self.engine}, seed {self.seed}, "
            f"alpha {self.alpha:g}",
        ]
        if self.conditional_log_odds_ratio is not None:
            lines.append(
                f"structural conditional log odds ratio (the arrow): {self.conditional_log_odds_ratio:.4g}"
            )
        return tuple(lines)

    def _also_parts(self) -> list:
        if not self.arrays.also_names:
            return []
        title = "Also estimated: direct effects of further variables on the outcome (truth = the arrow)"
        also = self.also_table()
        if also.empty:
            return [Paragraph((title, "  no strategy adjusts for them"))]
        return [Table(ALSO_TABLE, tuple(also.to_dict(orient="records")), title)]

    def parts(self) -> list:
        """The result as parts (:mod:`workbench.formatting.tables`), the one source of :meth:`as_text` and
        :meth:`as_html`: settings, the performance table, notes, the ``also`` table, the reminder."""
        records = tuple(
            {**r, "verdict": verdict_word(r), "model_verdict": model_word(r)}
            for r in self.table.to_dict(orient="records")
        )
        spec = PERFORMANCE_TABLE if self.scenario.outcome.is_binary else PERFORMANCE_TABLE_SAME_TARGET
        notes = [note for r in records for note in _strategy_notes(r, self.n)]
        return [
            Heading(self.scenario.title),
            Paragraph(self._settings_lines()),
            Table(spec, records, "Estimates with their Monte Carlo SEs in brackets"),
            Bullets(tuple(notes), "Notes"),
            *self._also_parts(),
            *interaction_parts(self.scenario, self.arrays),
            Paragraph((REMINDER,)),
        ]

    def as_text(self) -> str:
        """A readable report: the settings, a table of estimates with their Monte Carlo SEs in brackets, the
        notes (selection rules, restrictions, matching, failed replicates) and the ``also`` figures."""
        return render_text(self.parts())

    def as_html(self) -> str:
        """The report of :meth:`as_text` as an HTML fragment (every name escaped)."""
        return render_html(self.parts())

    def _repr_html_(self) -> str:
        return self.as_html()

    def also_html(self) -> str:
        """The ``also`` variables' table as an HTML fragment ('' without ``also``)."""
        return render_html(self._also_parts())


# ---- scoring ------------------------------------------------------------------------------------------------
def _relative_change(estimate: np.ndarray, reference: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per strategy (column), the median relative change against the reference and the share over 10%."""
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


def _se_ratio_and_vif(arrays: ReplicateArrays, model_se: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Model SE over the reference's model SE (1 for a strategy that is its own reference), and the median
    variance inflation factor of the exposure."""
    with np.errstate(divide="ignore", invalid="ignore"):
        # the reference's model SE by the arithmetic of metrics.performance
        ok = ~np.isnan(arrays.reference_estimate)
        ref_var = np.where(ok, arrays.reference_se**2, np.nan)
        ref_model_se = np.sqrt(np.nansum(ref_var, axis=0) / ok.sum(axis=0))
        se_ratio = model_se / ref_model_se
        vif = np.array([np.nanmedian(col) if np.isfinite(col).any() else np.nan for col in arrays.vif.T])
    itself = np.array([ref == name for ref, name in zip(arrays.reference, arrays.strategies, strict=True)])
    se_ratio[itself & np.isfinite(se_ratio)] = 1.0
    return se_ratio, vif


def _selected_valid_share(scenario: Scenario, strategy: Strategy, arrays: ReplicateArrays, s: int, adjust):
    """For a selection rule, the share of fitted replicates whose chosen set is valid (restricted and matched
    variables counting as conditioned on); NaN for a fixed set."""
    if strategy.selection is None:
        return float("nan")
    # validity once per selected pattern
    codes, counts = np.unique(arrays.selected[:, s], return_counts=True)
    fitted = codes >= 0
    if not fitted.any():
        return float("nan")
    restricted = strategy.restricted + strategy.match
    valid = np.array(
        [is_valid_set(scenario, selected_names(int(c), adjust) + restricted) for c in codes[fitted]]
    )
    return float((counts[fitted] * valid).sum() / counts[fitted].sum())


def _strategy_row(scenario, f, s, arrays, measures, signals) -> dict:
    """The table row of reported fit ``f`` (column ``s`` of the arrays)."""
    strategy = scenario.strategy(f.name)
    median, share, se_ratio, vif = signals
    retained = arrays.retained_n[:, s]
    row = {
        "name": f.name,
        "adjust": list(f.adjust),
        "model": strategy.model,
        "standardize": strategy.standardize,
        "selection": strategy.selection,
        "restrict": {name: list(v) if isinstance(v, tuple) else v for name, v in strategy.restrict},
        "match": list(strategy.match),
        "selected_valid_share": _selected_valid_share(scenario, strategy, arrays, s, f.adjust),
        "selected_sets": [{"adjust": list(chosen), "share": p} for chosen, p in arrays.selected_sets(s)[:3]],
        "mean_retained_n": float(np.mean(retained)) if strategy.restrict or strategy.match else float("nan"),
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
    return row


def score_table(scenario: Scenario, arrays: ReplicateArrays) -> pd.DataFrame:
    """The per-strategy table of a run (:data:`TABLE_COLUMNS` and ``n_ok``) from its replicate arrays.

    Examples
    --------
    >>> from workbench import load_preset
    >>> sc = load_preset("common_cause")
    >>> list(score_table(sc, run_replicates(sc, 100, 200, seed=1))["name"])
    ['unadjusted', 'adjust_soil']
    """
    measures = arrays.score()
    median, share = _relative_change(arrays.estimate, arrays.reference_estimate)
    se_ratio, vif = _se_ratio_and_vif(arrays, measures["model_se"])
    signals = (median, share, se_ratio, vif)
    rows = [
        _strategy_row(scenario, f, s, arrays, measures, signals)
        for s, f in enumerate(fit_plan(scenario).reported)
    ]
    return pd.DataFrame(rows, columns=TABLE_COLUMNS + ["n_ok"])


def _settings(scenario: Scenario, n, replicates, alpha, engine) -> tuple[int, int, float, str]:
    """The run's n, replicates, alpha and engine: the arguments, or the study's where left at None, checked
    against :data:`workbench.scenario.constraints.STUDY_SETTINGS` and the widest strategy
    (:func:`workbench.engine.replicates.check_arguments`)."""
    study = scenario.study
    return check_arguments(
        scenario,
        study.n if n is None else n,
        study.replicates if replicates is None else replicates,
        study.alpha if alpha is None else alpha,
        engine,
    )


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
        Without strategies, the default strategies of its graph are simulated.
    n, replicates, alpha : optional
        Left at None, taken from the scenario's ``[study]``.
    seed : None, int, numpy.random.SeedSequence or numpy.random.Generator, optional
        The root of the random streams (:func:`workbench.engine.streams.seed_sequence`). None draws fresh
        entropy, as numpy does; ``result.seed`` records it, and ``simulate(scenario, seed=result.seed)``
        repeats the run. Pass ``scenario.study.seed`` for the file's seed.
    engine : {"auto", "exact", "raw"}
    progress : callable, optional
        ``progress(done_replicates, total_replicates)``; may raise :class:`~workbench.errors.Cancelled`.

    Returns
    -------
    SimulationResult

    Raises
    ------
    SimulationError
        Before any work, for a bad ``n``, ``replicates``, ``alpha``, ``seed`` or ``engine``.

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
    >>> result.n, result.replicates, result.truth, result.seed
    (100, 300, 0.25, 2)
    >>> '"strategies"' in result.to_json()
    True
    >>> fresh = simulate(load_preset("common_cause"), n=100, replicates=50)
    >>> again = simulate(load_preset("common_cause"), n=100, replicates=50, seed=fresh.seed)
    >>> fresh.table["bias"].equals(again.table["bias"])
    True
    """
    scenario = with_default_strategies(scenario)
    n, replicates, alpha, engine = _settings(scenario, n, replicates, alpha, engine)
    root = seed_sequence(seed)
    arrays = run_replicates(scenario, n, replicates, root, engine=engine, alpha=alpha, progress=progress)
    plan = fit_plan(scenario)
    truth: Truth = plan.truths[scenario.question.scale]
    return SimulationResult(
        scenario=scenario,
        n=n,
        replicates=replicates,
        seed=seed_entropy(root),
        alpha=alpha,
        engine=arrays.engine,
        truth=float(truth.value),
        truth_mcse=float(truth.mcse),
        truth_method=truth.method,
        truth_description=truth.description,
        table=with_model_verdicts(scenario, score_table(scenario, arrays)),
        arrays=arrays,
        conditional_log_odds_ratio=conditional_log_odds_ratio(scenario) if plan.binary_outcome else None,
    )
