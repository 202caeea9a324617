"""The result of :func:`workbench.analysis.plan.plan`: curves, smallest n, ``also`` figures and the search.

A :class:`PlanResult` holds its tables as data frames (their columns are :data:`TABLE_COLUMNS`,
:data:`SMALLEST_COLUMNS`, :data:`ALSO_COLUMNS`, :data:`ALSO_SMALLEST_COLUMNS`, :data:`SEARCH_COLUMNS`), writes
them as JSON (NaN as ``null``) and CSV, and renders them for people as text (:meth:`PlanResult.as_text`) and
HTML (:meth:`PlanResult.as_html`, shown by notebooks), both from the table specs of this module.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.analysis.plan import plan
>>> result = plan(load_preset("common_cause"), sample_sizes=[50, 100], replicates=200, seed=1)
>>> "Smallest n" in result.as_text(), result.as_html().startswith("<div")
(True, True)
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import pandas as pd

from workbench.formatting.jsonable import to_jsonable
from workbench.formatting.numbers import effect_digits, estimate_decimals, fmt, fmt_mcse
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
    significant,
)
from workbench.scenario.write import write_text_atomically

__all__ = [
    "PlanResult",
    "TABLE_COLUMNS",
    "SMALLEST_COLUMNS",
    "ALSO_COLUMNS",
    "ALSO_SMALLEST_COLUMNS",
    "SEARCH_COLUMNS",
    "ALL_EFFECTS_COLUMNS",
]

TABLE_COLUMNS = [
    "n",
    "strategy",
    "power",
    "power_mcse",
    "bias",
    "bias_mcse",
    "emp_se",
    "model_se",
    "coverage",
    "coverage_mcse",
    "rmse",
    "power_all",
    "power_all_mcse",
    "type_s",
    "type_s_mcse",
    "exaggeration",
    "exaggeration_mcse",
    "mean_ci_halfwidth",
    "analytic_power",
    "analytic_se",
    "analytic_ci_halfwidth",
    "failures",
    "valid",
    "flag",
]
"""Columns of :attr:`PlanResult.table` (and of its CSV)."""
SMALLEST_COLUMNS = [
    "strategy",
    "n_for_power",
    "n_for_halfwidth",
    "valid",
    "note",
    "analytic_n_for_power",
    "analytic_n_for_halfwidth",
    "estimand",
]
"""Columns of :attr:`PlanResult.smallest_n`."""
ALSO_COLUMNS = [
    "n",
    "strategy",
    "variable",
    "truth",
    "power",
    "power_mcse",
    "bias",
    "bias_mcse",
    "emp_se",
    "coverage",
    "coverage_mcse",
    "mean_ci_halfwidth",
    "correlation",
    "analytic_power",
    "valid",
    "flag",
]
"""Columns of :attr:`PlanResult.also_table`."""
ALSO_SMALLEST_COLUMNS = ["strategy", "variable", "n_for_power", "valid", "note", "analytic_n_for_power"]
"""Columns of :attr:`PlanResult.also_smallest_n`."""
SEARCH_COLUMNS = ["n", "strategy", "variable", "power", "power_mcse", "mean_ci_halfwidth", "on_grid"]
"""Columns of :attr:`PlanResult.search`."""
ALL_EFFECTS_COLUMNS = ["strategy", "n_for_all_effects", "n_for_joint_power", "valid", "note"]
"""Columns of :attr:`PlanResult.n_for_all_effects`."""


def _digits(record) -> int:
    return effect_digits(record.get("emp_se"))


# ---- the result's tables, each specified once ------------------------------------------------------------
CURVES_TABLE = TableSpec(
    (
        Column("n", "n", integer, "right"),
        Column("label", "strategy"),
        Column("power", "power (MCSE)", align="right", mcse="power_mcse"),
        Column("analytic_power", "analytic power", number(3), "right"),
        Column("type_s", "type S (MCSE)", align="right", mcse="type_s_mcse"),
        Column("exaggeration", "exaggeration (MCSE)", align="right", mcse="exaggeration_mcse"),
        Column("mean_ci_halfwidth", "mean CI half-width", significant(4), "right"),
        Column("analytic_ci_halfwidth", "analytic half-width", significant(4), "right"),
        Column("bias", "bias (MCSE)", align="right", mcse="bias_mcse", digits=_digits),
        Column("emp_se", "emp SE", align="right", digits=_digits),
        Column("model_se", "model SE", align="right", digits=_digits),
        Column("coverage", "coverage (MCSE)", align="right", mcse="coverage_mcse"),
        Column("rmse", "RMSE", align="right", digits=_digits),
    )
)
"""The curves: one row per grid size and strategy (analytic figures where the closed form applies)."""
SMALLEST_TABLE = TableSpec(
    (
        Column("label", "strategy"),
        Column("n_for_power", "n for power", integer, "right"),
        Column("n_for_halfwidth", "n for half-width", integer, "right"),
        Column("analytic_n_for_power", "analytic n for power", integer, "right"),
        Column("analytic_n_for_halfwidth", "analytic n for half-width", integer, "right"),
    )
)
"""The smallest n per strategy (notes below the table)."""
ALSO_TABLE = TableSpec(
    (
        Column("n", "n", integer, "right"),
        Column("strategy", "strategy"),
        Column("variable", "variable"),
        Column("truth", "truth", significant(4), "right"),
        Column("power", "power (MCSE)", align="right", mcse="power_mcse"),
        Column("analytic_power", "analytic power", number(3), "right"),
        Column("bias", "bias (MCSE)", align="right", mcse="bias_mcse", digits=_digits),
        Column("mean_ci_halfwidth", "mean CI half-width", significant(4), "right"),
        Column("correlation", "correlation", number(2), "right"),
    )
)
"""The ``also`` variables' figures at every grid size."""
ALSO_SMALLEST_TABLE = TableSpec(
    (
        Column("strategy", "strategy"),
        Column("variable", "variable"),
        Column("n_for_power", "n for power", integer, "right"),
        Column("analytic_n_for_power", "analytic n for power", integer, "right"),
    )
)
"""The smallest n for each ``also`` variable's power."""
ALL_EFFECTS_TABLE = TableSpec(
    (
        Column("label", "strategy"),
        Column("n_for_all_effects", "n for every effect", integer, "right"),
        Column("n_for_joint_power", "n for joint power", integer, "right"),
        Column("note", "note"),
    )
)
"""The smallest n for every effect at once, per strategy."""


def _records(frame: pd.DataFrame | None) -> list[dict]:
    return [] if frame is None else frame.to_dict(orient="records")


def _labelled(records: list[dict]) -> tuple[dict, ...]:
    """Records with a ``label``: the strategy's name, marked when the graph says it is invalid."""
    return tuple({**r, "label": r["strategy"] + ("" if r["valid"] else " (invalid!)")} for r in records)


def _notes(records: list[dict], key: str = "note") -> tuple[str, ...]:
    return tuple(
        f"{r['strategy']}{' (' + r['variable'] + ')' if 'variable' in r else ''}: {r[key]}"
        for r in records
        if r[key]
    )


@dataclass
class PlanResult:
    """The outcome of :func:`~workbench.analysis.plan.plan`.

    Attributes
    ----------
    title : str
    replicates : int
        Simulated studies at every size.
    seed : int or list of int
        The entropy of the one seed sequence used at every size (common random numbers); passing it back as
        ``seed`` repeats the plan.
    alpha : float
    target_power : float
    target_halfwidth : float or None
    sample_sizes : list of int
        The grid.
    truth, truth_mcse : float
        The target effect and its Monte Carlo error (0 for a closed form).
    engine : str
        The engine that ran (``"exact"`` or ``"raw"``; ``"exact, raw"`` when the search went below the sizes
        the exact engine handles).
    table : DataFrame
        Long, one row per grid size and strategy: ``n, strategy, power, power_mcse, bias, bias_mcse, emp_se,
        model_se, coverage, coverage_mcse, rmse, mean_ci_halfwidth, analytic_power, analytic_se,
        analytic_ci_halfwidth, failures, valid, flag`` (analytic columns NaN where the closed form does not
        apply; ``flag`` empty for a valid strategy).
    smallest_n : DataFrame
        One row per strategy: ``strategy, n_for_power, n_for_halfwidth, valid, note, analytic_n_for_power,
        analytic_n_for_halfwidth, estimand`` (sizes are nullable integers, missing where not reached;
        ``estimand`` says in words what the strategy's estimate targets).
    also_table : DataFrame or None
        When the question names ``also`` variables: ``n, strategy, variable, truth, power, power_mcse, bias,
        bias_mcse, emp_se, coverage, coverage_mcse, mean_ci_halfwidth, correlation, analytic_power, valid,
        flag`` for every strategy whose model contains the variable.
    also_smallest_n : DataFrame or None
        ``strategy, variable, n_for_power, valid, note, analytic_n_for_power``.
    search : DataFrame
        Every size simulated (grid and bisection): ``n, strategy, variable, power, power_mcse,
        mean_ci_halfwidth, on_grid`` (``variable`` is the exposure or an ``also`` variable). With the raw
        engine a bisection size fits only the strategies whose search needs it.
    elapsed : float
        Seconds taken.
    """

    title: str
    replicates: int
    seed: int | list[int]
    alpha: float
    target_power: float
    target_halfwidth: float | None
    sample_sizes: list[int]
    truth: float
    truth_mcse: float
    engine: str
    exposure: str
    outcome: str
    table: pd.DataFrame
    smallest_n: pd.DataFrame
    also_table: pd.DataFrame | None = None
    also_smallest_n: pd.DataFrame | None = None
    search: pd.DataFrame = field(default_factory=pd.DataFrame)
    elapsed: float = 0.0

    @property
    def n_for_all_effects(self) -> pd.DataFrame:
        """Per strategy, the smallest n that reaches the target power for the exposure *and* every ``also``
        effect: :data:`ALL_EFFECTS_COLUMNS`.

        ``n_for_all_effects`` is the largest of the strategy's ``n_for_power`` and its ``also`` variables'
        ``n_for_power`` (each found by the bisection); missing where one is not reached or the strategy's model
        lacks a variable. ``n_for_joint_power`` is the smallest n for the joint event that all are significant
        in the same study (``power_all`` of :attr:`table`): the smallest grid size from which every larger grid
        size reaches the target (grid resolution, no bisection), and never below ``n_for_all_effects``, since
        the joint event is rarer than each of its parts. Without ``also`` both equal ``n_for_power``.
        """
        also = self.also_smallest_n
        rows = []
        for r in _records(self.smallest_n):
            name, sizes, notes = r["strategy"], [r["n_for_power"]], []
            mine = [] if also is None else _records(also[also["strategy"] == name])
            wanted = [] if also is None else sorted(set(also["variable"]))
            missing = [v for v in wanted if v not in {m["variable"] for m in mine}]
            if missing:
                notes.append(f"its model does not estimate {', '.join(missing)}")
            sizes += [m["n_for_power"] for m in mine]
            reached = not missing and all(not pd.isna(x) for x in sizes)
            n_all = int(max(sizes)) if reached else None
            n_joint = n_all if also is None else self._joint_n(name, n_all)
            if reached and n_joint is None:
                notes.append("joint power not reached on the grid")
            rows.append(
                {
                    "strategy": name,
                    "n_for_all_effects": n_all,
                    "n_for_joint_power": n_joint,
                    "valid": r["valid"],
                    "note": "; ".join(notes),
                }
            )
        frame = pd.DataFrame(rows, columns=ALL_EFFECTS_COLUMNS)
        for column in ("n_for_all_effects", "n_for_joint_power"):
            frame[column] = frame[column].astype("Int64")
        return frame

    def _joint_n(self, strategy: str, floor: int | None) -> int | None:
        """The smallest grid size from which every larger one reaches the target joint power (at least
        ``floor``), None when not reached or ``floor`` is None."""
        if floor is None:
            return None
        curve = self.table[self.table["strategy"] == strategy].sort_values("n")
        reached = (curve["power_all"] >= self.target_power).to_numpy()
        if not reached.size or not reached[-1]:
            return None
        last_miss = [i for i, ok in enumerate(reached) if not ok]
        first = int(curve["n"].iloc[last_miss[-1] + 1 if last_miss else 0])
        return max(first, floor)

    def _short_of(self, strategy: str, joint: int) -> str:
        """What the sentence says of a joint-power n found at grid resolution: the grid size below it that
        falls short, when there is one."""
        sizes = self.table.loc[self.table["strategy"] == strategy, "n"]
        short = max((int(n) for n in sizes if int(n) < joint), default=None)
        below = f"; {short} falls short" if short is not None else ""
        return f" (a size of the grid, not searched between sizes{below})"

    def all_effects_sentence(self) -> str:
        """One sentence: the n needed to detect the exposure's and every ``also`` effect with the target
        power, for the valid strategy needing the fewest units ('' without ``also`` or when none reaches it).

        Examples
        --------
        >>> from workbench import load_preset
        >>> from workbench.analysis.plan import plan
        >>> r = plan(load_preset("two_exposures"), sample_sizes=[100, 400], replicates=200, seed=1)
        >>> r.all_effects_sentence().startswith("To detect both")
        True
        """
        if self.also_table is None or not len(self.also_table):
            return ""
        table = self.n_for_all_effects
        table = table[table["valid"] & table["n_for_all_effects"].notna()]
        if table.empty:
            return ""
        best = table.sort_values("n_for_all_effects", kind="stable").iloc[0]
        names = [self.exposure, *sorted(set(self.also_table["variable"]))]
        effects = " and the ".join([", ".join(names[:-1]), names[-1]]) if len(names) > 1 else names[0]
        both = "both" if len(names) == 2 else "all of"
        joint = best["n_for_joint_power"]
        together = ""
        if not pd.isna(joint) and int(joint) > int(best["n_for_all_effects"]):
            together = (
                f"; for {'both' if len(names) == 2 else 'all'} to be significant in the same study, at most "
                f"{int(joint)}{self._short_of(best['strategy'], int(joint))}"
            )
        return (
            f"To detect {both} the {effects} effect with {self.target_power:.0%} power you need about "
            f"{int(best['n_for_all_effects'])} units (strategy {best['strategy']}){together}."
        )

    def to_dict(self) -> dict:
        """The result as JSON-ready nested dicts and lists (NaN as None).

        Keys: ``title, exposure, outcome, replicates, seed, alpha, target_power, target_halfwidth,
        sample_sizes, truth, truth_mcse, engine, table, smallest_n`` and, when the question names ``also``
        variables, ``also`` and ``also_smallest_n``; each table is a list of row dicts keyed by column name.
        """
        out = {
            "title": self.title,
            "exposure": self.exposure,
            "outcome": self.outcome,
            "replicates": int(self.replicates),
            "seed": self.seed,
            "alpha": float(self.alpha),
            "target_power": float(self.target_power),
            "target_halfwidth": self.target_halfwidth,
            "sample_sizes": [int(n) for n in self.sample_sizes],
            "truth": float(self.truth),
            "truth_mcse": float(self.truth_mcse),
            "engine": self.engine,
            "table": _records(self.table),
            "smallest_n": _records(self.smallest_n),
        }
        if self.also_table is not None:
            out["also"] = _records(self.also_table)
            out["also_smallest_n"] = _records(self.also_smallest_n)
        out["n_for_all_effects"] = _records(self.n_for_all_effects)
        return to_jsonable(out)

    def to_json(self, indent: int | None = 2) -> str:
        """The result as JSON text (see :meth:`to_dict`); NaN is written as ``null``."""
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def to_csv(self, path=None) -> str | None:
        """Write :attr:`table` as CSV, atomically (temporary file and rename); with ``path=None`` return the
        CSV text instead."""
        if path is None:
            return self.table.to_csv(index=False)
        write_text_atomically(path, self.table.to_csv(index=False))
        return None

    # ---- rendering ---------------------------------------------------------------------------------------
    def _settings_lines(self) -> tuple[str, ...]:
        truth = f"{self.truth:.4g}"
        if self.truth_mcse:
            value = fmt(self.truth, estimate_decimals(self.truth_mcse, 4))
            truth = f"{value} (MCSE {fmt_mcse(self.truth_mcse)})"
        target = f"target power {self.target_power:g}"
        if self.target_halfwidth is not None:
            target += f", target CI half-width {self.target_halfwidth:g}"
        return (
            f"effect of {self.exposure} on {self.outcome}: truth {truth}; {self.replicates:,} "
            f"replicates per size, seed {self.seed}, alpha {self.alpha:g}, engine {self.engine}",
            target,
        )

    def _also_parts(self) -> list:
        if self.also_table is None or not len(self.also_table):
            return []
        smallest = _records(self.also_smallest_n)
        return [
            Table(
                ALSO_TABLE,
                tuple(_records(self.also_table)),
                "Separating the effects (direct effects of the 'also' variables)",
            ),
            Table(ALSO_SMALLEST_TABLE, tuple(smallest), "Smallest n for the 'also' variables"),
            Bullets(_notes(smallest), mark="!"),
            Table(
                ALL_EFFECTS_TABLE, _labelled(_records(self.n_for_all_effects)), "Smallest n for every effect"
            ),
            Paragraph((self.all_effects_sentence(),)),
        ]

    def parts(self) -> list:
        """The result as parts (:mod:`workbench.formatting.tables`), the one source of :meth:`as_text` and
        :meth:`as_html`: settings, the curves, the smallest n with its notes and flags, the ``also``
        figures."""
        curves = _labelled(_records(self.table))
        smallest = _records(self.smallest_n)
        flags = {r["strategy"]: r["flag"] for r in curves if r["flag"]}
        return [
            Heading(self.title),
            Paragraph(self._settings_lines()),
            Table(CURVES_TABLE, curves, "Power, precision, bias and coverage by sample size"),
            Table(SMALLEST_TABLE, _labelled(smallest), "Smallest n"),
            Bullets(_notes(smallest), "Notes on the smallest n", mark="!"),
            Bullets(tuple(f"{name}: {flag}" for name, flag in flags.items()), "Flags", mark="!"),
            *self._also_parts(),
        ]

    def as_text(self) -> str:
        """Readable tables: the power and precision curves, the smallest n per strategy with its notes, and
        the ``also`` figures."""
        return render_text(self.parts())

    def as_html(self) -> str:
        """The tables of :meth:`as_text` as an HTML fragment (every name escaped)."""
        return render_html(self.parts())

    def _repr_html_(self) -> str:
        return self.as_html()
