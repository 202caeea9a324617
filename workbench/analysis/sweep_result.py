"""The result of :func:`workbench.analysis.sweep.sweep`: the long table, its files (Parquet, CSV, JSON) and its HTML.

The table has one row per cell x strategy x measure: ``cell`` (the index in the grid), one column per varied
parameter named as given (``study.n``, ``arrows.c->x.effect``), ``strategy``, ``valid``, ``measure``,
``value`` and ``mcse`` (NaN where the measure has no Monte Carlo SE). :meth:`SweepResult.wide` pivots it to
one row per cell x strategy. Files are written atomically (a temporary file in the same folder, then a
rename), so a file on disk is always a whole table, also after Ctrl-C.

Examples
--------
>>> import pandas as pd
>>> rows = pd.DataFrame({"cell": [1, 0], "study.n": [80, 50], "strategy": ["a", "a"], "valid": [True, True],
...                      "measure": ["bias", "bias"], "value": [0.1, 0.2], "mcse": [0.01, 0.02]})
>>> list(sort_rows(rows)["cell"])
[0, 1]
"""

from __future__ import annotations

import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from workbench.errors import UsageError, shown
from workbench.formatting.jsonable import to_jsonable
from workbench.formatting.markup import text_html
from workbench.formatting.numbers import with_mcse
from workbench.scenario.model import Scenario

__all__ = ["SweepResult", "sort_rows", "write_table", "read_table", "FORMATS", "SHOWN_MEASURES"]

FORMATS = {".parquet": "parquet", ".csv": "csv", ".json": "json"}
"""Output formats by file suffix."""

SHOWN_MEASURES = ("bias", "coverage", "power", "emp_se")
"""The measures :meth:`SweepResult.as_html` shows, each with its MCSE."""

_META_KEY = b"workbench.sweep"


def sort_rows(rows: pd.DataFrame) -> pd.DataFrame:
    """Rows in grid order (stable: within a cell, the order :func:`workbench.simulate` gives)."""
    return rows.sort_values("cell", kind="stable").reset_index(drop=True)


def _format(path) -> str:
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        raise UsageError(f"{shown(str(path))}: give a name ending in .parquet, .csv or .json", where="--out")
    return FORMATS[suffix]


def write_table(rows: pd.DataFrame, path, meta: dict) -> None:
    """Write the long table to ``path`` (format by suffix) atomically; ``meta`` goes in the Parquet schema
    metadata and the JSON object."""
    kind = _format(path)
    real = os.path.realpath(path)
    fd, tmp = tempfile.mkstemp(prefix=".wb-sweep-", dir=os.path.dirname(real) or ".")
    os.close(fd)
    try:
        if kind == "parquet":
            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.Table.from_pandas(rows, preserve_index=False)
            table = table.replace_schema_metadata(
                {**(table.schema.metadata or {}), _META_KEY: json.dumps(meta)}
            )
            pq.write_table(table, tmp)
        elif kind == "csv":
            rows.to_csv(tmp, index=False)
        else:
            data = {**meta, "rows": to_jsonable(rows.to_dict(orient="records"))}
            Path(tmp).write_text(json.dumps(data, allow_nan=False), encoding="utf-8")
        os.chmod(tmp, 0o644)
        os.replace(tmp, real)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def read_table(path) -> tuple[pd.DataFrame, dict]:
    """The long table and metadata of a sweep file written by :func:`write_table` (``{}`` for CSV)."""
    kind = _format(path)
    try:
        if kind == "parquet":
            import pyarrow.parquet as pq

            table = pq.read_table(path)
            meta = json.loads((table.schema.metadata or {}).get(_META_KEY, b"{}"))
            return table.to_pandas(), meta
        if kind == "csv":
            return pd.read_csv(path), {}
        data = json.loads(Path(path).read_text(encoding="utf-8"))
        rows = pd.DataFrame(data.pop("rows"))
        return rows.astype({"value": float, "mcse": float}), data
    except (OSError, ValueError, KeyError) as exc:
        raise UsageError(
            f"cannot read {shown(str(path))} as a sweep table ({exc})", where="--resume"
        ) from None


@dataclass
class SweepResult:
    """What :func:`~workbench.analysis.sweep.sweep` returns.

    Attributes
    ----------
    scenario : Scenario
        The scenario swept (before any cell's changes).
    parameters : tuple of str
        The varied parameters, in grid order (the last varies fastest).
    seed : int or list of int
        The seed every cell used.
    replicates : int
    engine : str
        The engine asked for (``"auto"`` lets each cell choose: the exact engine for a linear-Gaussian cell,
        the raw one otherwise, as :func:`workbench.simulate` does).
    cells : int
        Cells in the grid.
    table : pandas.DataFrame
        One row per cell x strategy x measure (see the module docstring).
    """

    scenario: Scenario
    parameters: tuple
    seed: object
    replicates: int
    engine: str
    cells: int
    table: pd.DataFrame

    def meta(self) -> dict:
        """The settings stored beside the table in its files."""
        return {
            "title": self.scenario.title,
            "parameters": list(self.parameters),
            "seed": self.seed,
            "replicates": self.replicates,
            "engine": self.engine,
            "cells": self.cells,
        }

    def wide(self) -> pd.DataFrame:
        """One row per cell x strategy: the parameters, then ``<measure>`` and ``<measure>_mcse`` columns."""
        keys = ["cell", *self.parameters, "strategy", "valid"]
        table = self.table
        order = list(dict.fromkeys(table["measure"]))
        wide = table.loc[table["measure"] == order[0], keys].reset_index(drop=True)
        for m in order:  # every strategy of every cell lists the measures in the same order
            part = table[table["measure"] == m]
            wide[m] = part["value"].to_numpy()
            wide[f"{m}_mcse"] = part["mcse"].to_numpy()
        return wide

    def to_dict(self) -> dict:
        return to_jsonable({**self.meta(), "rows": self.table.to_dict(orient="records")})

    def to_json(self, indent: int | None = 2) -> str:
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def save(self, path) -> None:
        """Write the table to ``path`` (``.parquet``, ``.csv`` or ``.json``) atomically."""
        write_table(self.table, path, self.meta())

    def as_html(self) -> str:
        """An HTML table: one row per cell x strategy, the :data:`SHOWN_MEASURES` rounded to their MCSE."""
        wide = self.wide()
        head = "".join(f"<th>{text_html(c)}</th>" for c in [*self.parameters, "strategy", *SHOWN_MEASURES])
        body = []
        for _, row in wide.iterrows():
            cells = [f"<td>{row[p]:g}</td>" for p in self.parameters] + [
                f"<td>{text_html(row['strategy'])}</td>"
            ]
            for m in SHOWN_MEASURES:
                cells.append(
                    f"<td>{text_html(with_mcse(row[m], row[m + '_mcse']).replace('Monte Carlo SE ', ''))}</td>"
                )
            body.append("<tr>" + "".join(cells) + "</tr>")
        return (
            f"<div><b>Sweep of {text_html(self.scenario.title)}</b>: {self.cells} cells, "
            f"{self.replicates} replicates each, seed {text_html(str(self.seed))} (common random numbers); "
            "estimates (Monte Carlo SE)</div>"
            f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"
        )

    def _repr_html_(self) -> str:
        return self.as_html()
