"""``sweep()``: one simulation per cell of a grid of scenario values, run on Dask, with common random numbers.

Every cell is checked before any work (:mod:`workbench.analysis.sweep_params`), then the cells are grouped
into tasks of several cells and run on a ``dask.distributed`` cluster: by default a LocalCluster of worker
processes on this machine, listening on the loopback interface only, or an existing cluster given by its
address (``"tcp://host:port"``) or a ``Client``. Every cell uses the same seed (common random numbers), so a
cell's rows equal ``simulate(cell_scenario, seed=seed)`` exactly and the table is the same at any worker count
or task size: the differences between cells are the scenario's, not Monte Carlo noise.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.analysis.sweep_params import build_cells
>>> cells = build_cells(load_preset("common_cause"), {"study.n": [100, 200]}, replicates=50)
>>> rows = run_cells(cells, seed=1, engine="auto", names=["study.n"])
>>> sorted(set(rows["cell"])), "bias" in set(rows["measure"])
([0, 1], True)
"""

from __future__ import annotations

import contextlib
import logging
import math
import os
import sys
from collections.abc import Mapping

import numpy as np
import pandas as pd

from workbench.analysis.simulate import simulate
from workbench.analysis.sweep_params import Cell, build_cells
from workbench.analysis.sweep_result import SweepResult, sort_rows
from workbench.engine.streams import seed_entropy, seed_sequence
from workbench.errors import UsageError
from workbench.scenario.model import Scenario

__all__ = ["sweep", "iter_sweep", "run_cells", "connect", "MEASURES", "CONNECT_TIMEOUT"]

MEASURES = (
    "truth",
    "mean",
    "bias",
    "relative_bias",
    "emp_se",
    "model_se",
    "relative_error_model_se",
    "rmse",
    "coverage",
    "be_coverage",
    "power",
    "failures",
    "change_in_estimate_median",
    "share_change_over_10pct",
    "se_ratio",
    "vif",
    "df",
)
"""The measures of a sweep's table, each with its Monte Carlo SE where :func:`workbench.simulate` gives one."""

CONNECT_TIMEOUT = 5.0
"""Seconds to wait for a scheduler given by address before giving up (before any work)."""


def run_cells(cells: list[Cell], *, seed, engine: str, names: list[str]) -> pd.DataFrame:
    """Simulate each cell with ``seed`` and return its long rows: ``cell``, one column per parameter,
    ``strategy``, ``valid``, ``measure``, ``value``, ``mcse``. Runs on a worker (one task)."""
    frames = []
    for cell in cells:
        table = simulate(cell.scenario, seed=seed, engine=engine).table
        k = len(table)
        value = np.column_stack([table[m].to_numpy(dtype=float) for m in MEASURES])
        mcse = np.column_stack(
            [
                table[f"{m}_mcse"].to_numpy(dtype=float) if f"{m}_mcse" in table else np.full(k, np.nan)
                for m in MEASURES
            ]
        )
        frame = pd.DataFrame(
            {
                "cell": cell.index,
                **{name: cell.values[name] for name in names},
                "strategy": np.repeat(table["name"].to_numpy(dtype=object), len(MEASURES)),
                "valid": np.repeat(table["valid"].to_numpy(dtype=bool), len(MEASURES)),
                "measure": np.tile(np.array(MEASURES, dtype=object), k),
                "value": value.ravel(),
                "mcse": mcse.ravel(),
            }
        )
        frames.append(frame)
    return pd.concat(frames, ignore_index=True)


@contextlib.contextmanager
def _main_hidden():
    """While worker processes start: the ``__main__`` module's file and spec hidden, so that the spawned
    workers do not run the user's script again (a script calling :func:`sweep` need not guard it with
    ``if __name__ == "__main__"``; the workers need only the workbench's own functions)."""
    main = sys.modules.get("__main__")
    saved = {k: main.__dict__[k] for k in ("__file__", "__spec__") if main is not None and k in main.__dict__}
    try:
        for key in saved:
            if key == "__file__":
                del main.__dict__[key]
            else:
                main.__dict__[key] = None
        yield
    finally:
        if main is not None:
            main.__dict__.update(saved)


def connect(scheduler=None, workers: int | None = None):
    """A context manager giving a ``dask.distributed.Client``: ``scheduler`` itself when it is one, a client
    of the cluster at an address (one line and :class:`~workbench.errors.UsageError` when it cannot be reached
    within :data:`CONNECT_TIMEOUT` seconds), or of a new LocalCluster of ``workers`` processes on loopback."""
    from distributed import Client, LocalCluster

    @contextlib.contextmanager
    def opened():
        if isinstance(scheduler, Client):
            yield scheduler
            return
        if scheduler is not None:
            if not isinstance(scheduler, str):
                raise UsageError(
                    f"give an address 'tcp://host:port' or a Client, got {type(scheduler).__name__}",
                    where="scheduler",
                )
            try:
                client = Client(scheduler, timeout=f"{CONNECT_TIMEOUT}s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise UsageError(
                    f"cannot reach the scheduler at {scheduler!r} within {CONNECT_TIMEOUT:g} s "
                    f"({type(exc).__name__})",
                    where="scheduler",
                ) from None
            try:
                yield client
            finally:
                client.close()
            return
        count = workers if workers is not None else max(1, min(os.cpu_count() or 1, 4))
        if count < 1:
            raise UsageError(f"must be at least 1, got {count}", where="workers")
        with _main_hidden():
            cluster = LocalCluster(
                n_workers=count,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
                silence_logs=logging.ERROR,
            )
        client = Client(cluster)
        try:
            yield client
        finally:
            client.close()
            cluster.close()

    return opened()


def _tasks(cells: list[Cell], workers: int, cells_per_task: int | None) -> list[list[Cell]]:
    size = cells_per_task or max(1, min(32, math.ceil(len(cells) / (4 * max(workers, 1)))))
    return [cells[i : i + size] for i in range(0, len(cells), size)]


def iter_sweep(cells, *, names, seed, engine="auto", scheduler=None, workers=None, cells_per_task=None):
    """Run ``cells`` on Dask and yield each task's rows as it finishes (in the order tasks finish).

    Leaving the loop early (an exception, Ctrl-C, ``close()``) cancels the tasks not yet done and closes a
    cluster this function started."""
    from distributed import as_completed

    if not cells:
        return
    with connect(scheduler, workers) as client:
        count = len(client.scheduler_info().get("workers", {})) or 1
        futures = [
            client.submit(run_cells, task, seed=seed, engine=engine, names=names, pure=False)
            for task in _tasks(cells, count, cells_per_task)
        ]
        try:
            for future in as_completed(futures):
                yield future.result()
        finally:
            client.cancel(futures)


def sweep(
    scenario: Scenario,
    vary: Mapping,
    replicates: int | None = None,
    seed=None,
    scheduler=None,
    *,
    workers: int | None = None,
    engine: str = "auto",
    cells_per_task: int | None = None,
    progress=None,
) -> SweepResult:
    """Simulate the scenario at every cell of a grid of its values, on Dask.

    Parameters
    ----------
    scenario : Scenario
    vary : mapping of str to list or str
        Parameter name (its place in the file: ``"study.n"``, ``"variables.rainfall.noise_sd"``,
        ``"arrows.rainfall->irrigation.effect"``) to its values: a list, ``"v1,v2"`` or ``"start:stop:count"``
        (:mod:`workbench.analysis.sweep_params`).
    replicates : int, optional
        Simulated studies per cell (default: the scenario's ``study.replicates``).
    seed : None, int, SeedSequence or Generator, optional
        The seed of every cell (common random numbers); None means the scenario's ``study.seed``.
    scheduler : None, str or distributed.Client
        None starts a LocalCluster of ``workers`` processes on loopback; ``"tcp://host:port"`` connects to a
        running scheduler; a ``Client`` is used as it is.
    workers : int, optional
        Worker processes of the LocalCluster (default: the CPUs, at most 4).
    engine : {"auto", "exact", "raw"}
    cells_per_task : int, optional
        Cells per Dask task (default: about four tasks per worker, at most 32 cells each). The table does
        not depend on it.
    progress : callable, optional
        ``progress(done_cells, total_cells)``.

    Returns
    -------
    SweepResult
        ``table``: one row per cell x strategy x measure (long form).

    Raises
    ------
    UsageError, ScenarioError, SimulationError
        Before any work: an unknown parameter, a bad value in a cell, an unreachable scheduler.

    Examples
    --------
    >>> from workbench import load_preset
    >>> res = sweep(load_preset("common_cause"), {"study.n": [100, 200]}, replicates=50, workers=1)
    >>> list(res.table.columns[:3]), res.cells
    (['cell', 'study.n', 'strategy'], 2)
    """
    cells = build_cells(scenario, vary, replicates, engine)
    names = list(cells[0].values)
    seed = seed_entropy(seed_sequence(scenario.study.seed if seed is None else seed))
    frames, done = [], 0
    for frame in iter_sweep(
        cells,
        names=names,
        seed=seed,
        engine=engine,
        scheduler=scheduler,
        workers=workers,
        cells_per_task=cells_per_task,
    ):
        frames.append(frame)
        done += frame["cell"].nunique()
        if progress is not None:
            progress(done, len(cells))
    return SweepResult(
        scenario=scenario,
        parameters=tuple(names),
        seed=seed,
        replicates=replicates if replicates is not None else scenario.study.replicates,
        engine=engine,
        cells=len(cells),
        table=sort_rows(pd.concat(frames, ignore_index=True)),
    )
