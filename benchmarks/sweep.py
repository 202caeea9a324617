"""Benchmark of sweeps on Dask: the 2-worker speed-up of a 200-cell raw-engine sweep, and the overhead per cell.

Run: ``python benchmarks/sweep.py [--cells 200] [--replicates 2000] [--rounds 2]``. The clusters are started
before timing (their start-up is reported apart); the two worker counts are timed alternately, best of
``--rounds``. The overhead per cell compares a 1-worker sweep on the exact engine with a plain loop of
``simulate()`` over the same cells in this process. Copy the figures, the machine, the load and the date into
docs/performance.md.
"""

from __future__ import annotations

import argparse
import os
import time

from distributed import Client, LocalCluster

import workbench as wb
from workbench.analysis.sweep_params import build_cells
from workbench.engine.threads import blas_threads

SCENARIO = wb.load_preset("common_cause")


def _cluster(workers: int):
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, host="127.0.0.1", dashboard_address=None)
    return cluster, Client(cluster)


def _timed(client, vary, replicates, engine) -> float:
    start = time.perf_counter()
    wb.sweep(SCENARIO, vary, replicates=replicates, seed=1, scheduler=client, engine=engine)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--cells", type=int, default=200)
    parser.add_argument("--replicates", type=int, default=2000)
    parser.add_argument("--rounds", type=int, default=2)
    args = parser.parse_args()
    vary = {"arrows.soil_quality->fertiliser.effect": f"0:1:{args.cells}"}
    print(f"load average at start: {os.getloadavg()}")
    t0 = time.perf_counter()
    one = _cluster(1)
    two = _cluster(2)
    print(f"two clusters started in {time.perf_counter() - t0:.1f} s")
    for _, client in (one, two):  # warm the workers' imports
        wb.sweep(
            SCENARIO, {"study.n": [100, 200, 300, 400]}, replicates=50, scheduler=client, cells_per_task=1
        )
    times = {1: [], 2: []}
    for _ in range(args.rounds):
        for workers, (_, client) in ((1, one), (2, two)):
            times[workers].append(_timed(client, vary, args.replicates, "raw"))
    best1, best2 = min(times[1]), min(times[2])
    print(
        f"raw engine, {args.cells} cells x {args.replicates} replicates: 1 worker {best1:.2f} s, "
        f"2 workers {best2:.2f} s (best of {args.rounds}), speed-up {best1 / best2:.2f}x"
    )
    cells = build_cells(SCENARIO, vary, replicates=200, engine="exact")
    loop, sweep_time = [], []
    for _ in range(args.rounds):
        start = time.perf_counter()
        with blas_threads():
            for cell in cells:
                wb.simulate(cell.scenario, seed=1, engine="exact")
        loop.append(time.perf_counter() - start)
        sweep_time.append(_timed(one[1], vary, 200, "exact"))
    overhead = (min(sweep_time) - min(loop)) / len(cells) * 1e3
    print(
        f"exact engine, {len(cells)} cells x 200 replicates: loop of simulate() {min(loop):.2f} s, "
        f"1-worker sweep {min(sweep_time):.2f} s, overhead per cell {overhead:.1f} ms"
    )
    print(f"load average at end: {os.getloadavg()}")
    for cluster, client in (one, two):
        client.close()
        cluster.close()


if __name__ == "__main__":
    main()
