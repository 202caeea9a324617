"""``workbench sweep``: one simulation per cell of a grid of scenario values, on Dask, streamed to a file.

Before any work the command checks every cell (:func:`workbench.analysis.sweep_params.build_cells`), the
output paths (:func:`workbench.cli.outputs.check_file_output`), the file to resume and the scheduler (a
short connection timeout). The results stream to ``--out`` as tasks finish: the file is rewritten atomically
at most once a second, so it is a whole, valid table at any moment; Ctrl-C cancels the tasks, writes what
has finished and exits 130; ``--resume`` skips the cells already in ``--out``.
"""

from __future__ import annotations

import argparse
import sys
import time

from workbench.cli.progress import ProgressBar
from workbench.errors import Cancelled, UsageError

__all__ = ["add_parser", "sweep", "SweepProgress"]

_WRITE_EVERY = 1.0
"""Seconds between two rewrites of the output while a sweep runs."""


class SweepProgress(ProgressBar):
    """The progress bar with the estimated time left, from the cells done in this run.

    Examples
    --------
    >>> import io
    >>> stream = io.StringIO()
    >>> bar = SweepProgress("sweep", stream=stream, delay=0.0, first=0)
    >>> bar(5, 10); bar.close()
    >>> "left" in stream.getvalue()
    True
    """

    def __init__(self, label: str, *, first: int = 0, **options):
        super().__init__(label, **options)
        self.first = first

    def __call__(self, done: int, total: int) -> None:
        super().__call__(done, total)
        if self.shown:
            elapsed = time.monotonic() - self.start
            new = done - self.first
            left = elapsed / new * (total - done) if new > 0 else float("nan")
            self.stream.write(f"  ~{left:.0f}s left " if left == left else "  ")
            self.stream.flush()


def add_parser(sub, add_source, whole) -> argparse.ArgumentParser:
    """Register ``workbench sweep`` on the subparsers ``sub``."""
    p = sub.add_parser(
        "sweep",
        help="simulate the scenario over a grid of its values (on Dask), one row per cell x strategy x measure",
        description=(
            "Vary values of the scenario, named by their place in the file (study.n, "
            "variables.NAME.noise_sd, variables.NAME.proportion, variables.NAME.baseline, "
            "arrows.FROM->TO.effect), over the product of the lists; every cell uses the same seed (common "
            "random numbers), so a cell equals 'workbench run' on that cell's scenario."
        ),
    )
    add_source(p)
    p.add_argument(
        "--vary",
        action="append",
        default=[],
        metavar="PARAM=V1,V2,...",
        help="a parameter and its values, or start:stop:count (repeatable)",
    )
    p.add_argument("--replicates", type=whole, help="simulated studies per cell (default: the scenario's)")
    p.add_argument("--seed", type=whole, help="the seed of every cell (default: the scenario's)")
    p.add_argument("--engine", choices=["auto", "exact", "raw"], default="auto")
    p.add_argument("--scheduler", metavar="ADDRESS", help="a running Dask scheduler, tcp://host:port")
    p.add_argument(
        "--workers", type=whole, help="worker processes of the local cluster (default: CPUs, <= 4)"
    )
    p.add_argument("--cells-per-task", type=whole, help="cells per Dask task (does not change the results)")
    p.add_argument("--resume", action="store_true", help="skip the cells already in --out")
    p.add_argument("--html", metavar="OUT", help="also write a standalone HTML report of the sweep")
    p.add_argument("--out", metavar="FILE", required=True, help="results.parquet, .csv or .json")
    p.set_defaults(func=sweep)
    return p


def _vary(items: list[str]) -> dict:
    if not items:
        raise UsageError("give at least one --vary PARAM=V1,V2,...", where="--vary")
    vary = {}
    for item in items:
        name, sep, values = item.partition("=")
        if not sep or not name.strip():
            raise UsageError(f"write PARAM=V1,V2,... or PARAM=start:stop:count, got {item!r}", where="--vary")
        if name.strip() in vary:
            raise UsageError(f"{name.strip()!r} is given twice", where="--vary")
        vary[name.strip()] = values
    return vary


def _resumed(path: str, names: list[str], cells, seed, replicates):
    """The rows already in ``path`` and the cells still to run; refuses a file of another sweep."""
    import os

    import pandas as pd

    from workbench.analysis.sweep_result import read_table

    if not os.path.exists(path):
        return None, cells
    rows, meta = read_table(path)
    params = [c for c in rows.columns if c not in ("cell", "strategy", "valid", "measure", "value", "mcse")]
    if params != names:
        raise UsageError(f"{path} holds a sweep of {params}, not of {names}", where="--resume")
    for key, value in (("seed", seed), ("replicates", replicates)):
        if key in meta and meta[key] != value:
            raise UsageError(f"{path} was run with {key} {meta[key]}, not {value}", where="--resume")

    def key_of(values):
        return tuple(float(f"{float(v):.12g}") for v in values)

    index = {key_of(c.values.values()): c.index for c in cells}
    found = rows[names].drop_duplicates().apply(lambda r: key_of(r.to_numpy()), axis=1)
    missing = [k for k in found if k not in index]
    if missing:
        raise UsageError(f"{path} holds cells not in this grid, e.g. {missing[0]}", where="--resume")
    done = {index[k] for k in found}
    rows = rows.copy()
    rows["cell"] = [index[key_of(v)] for v in rows[names].to_numpy()]
    return pd.DataFrame(rows), [c for c in cells if c.index not in done]


def sweep(args) -> int:
    """Run ``workbench sweep`` (see :func:`add_parser`)."""
    import pandas as pd

    from workbench.analysis.sweep import iter_sweep
    from workbench.analysis.sweep_params import build_cells
    from workbench.analysis.sweep_result import SweepResult, sort_rows, write_table
    from workbench.cli.commands import scenario_argument
    from workbench.cli.outputs import check_file_output
    from workbench.engine.streams import seed_entropy, seed_sequence
    from workbench.scenario.constraints import check_setting

    scenario = scenario_argument(args)
    replicates = args.replicates
    if replicates is not None:
        replicates = check_setting("replicates", replicates, where="--replicates", error=UsageError)
    if args.workers is not None and args.scheduler:
        raise UsageError("applies to the local cluster only, not with --scheduler", where="--workers")
    if args.workers is not None and not 1 <= args.workers <= 256:
        raise UsageError(f"must be from 1 to 256, got {args.workers}", where="--workers")
    cells = build_cells(scenario, _vary(args.vary), replicates, args.engine)
    names = list(cells[0].values)
    check_file_output("out", args.out, args.file)
    from pathlib import Path

    from workbench.analysis.sweep_result import FORMATS  # the suffix is checked before any work

    if Path(args.out).suffix.lower() not in FORMATS:
        raise UsageError(f"{args.out!r}: give a name ending in .parquet, .csv or .json", where="--out")
    if args.html:
        check_file_output("html", args.html, args.file)
    seed = seed_entropy(seed_sequence(scenario.study.seed if args.seed is None else args.seed))
    reps = replicates if replicates is not None else scenario.study.replicates
    old, todo = (None, cells)
    if args.resume:
        old, todo = _resumed(args.out, names, cells, seed, reps)
    result = SweepResult(scenario, tuple(names), seed, reps, args.engine, len(cells), pd.DataFrame())
    frames = [] if old is None else [old]
    done = len(cells) - len(todo)
    bar = SweepProgress(f"sweep of {len(cells)} cells", first=done)
    last = time.monotonic()

    def save():
        table = sort_rows(pd.concat(frames, ignore_index=True)) if frames else pd.DataFrame()
        if len(table):
            write_table(table, args.out, result.meta())
        return table

    runs = iter_sweep(
        todo,
        names=names,
        seed=seed,
        engine=args.engine,
        scheduler=args.scheduler,
        workers=args.workers,
        cells_per_task=args.cells_per_task,
    )
    try:
        for frame in runs:
            frames.append(frame)
            done += frame["cell"].nunique()
            bar(done, len(cells))
            if time.monotonic() - last >= _WRITE_EVERY:
                save()
                last = time.monotonic()
    except KeyboardInterrupt:
        runs.close()
        bar.close()
        save()
        raise Cancelled(
            f"{done} of {len(cells)} cells are in {args.out}; run again with --resume to go on"
        ) from None
    finally:
        bar.close()
    result.table = save()
    if args.html:
        from workbench.report.sweep_figures import write_sweep_report

        write_sweep_report(result, args.html)
    print(
        f"sweep: {len(cells)} cells ({len(cells) - len(todo)} resumed) written to {args.out}", file=sys.stderr
    )
    return 0
