"""Benchmark of the planner on a raw-engine scenario (issue 12, item 3).

Runs ``workbench.plan`` on the ``binary_outcome`` preset with its defaults (the same work as
``workbench plan --preset binary_outcome``, with the scenario's seed) in child processes, one BLAS thread, alternating between a
previous copy of the package (``--before DIR``, e.g. made with
``git -C /work/main archive HEAD | tar -x -C /tmp/plan-before``) and this checkout. Each child reports its
CPU time (``time.process_time``, so other work on the machine counts little) and the smallest n per strategy;
the script prints the ratio of the CPU times and the differences in n, beside the documented resolution
(``max(5, 2% of n)``) and the Monte Carlo error of n (``power_mcse / slope`` near the target).

Usage: ``python benchmarks/plan_binary.py --before /tmp/plan-before [--rounds K]``.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent.parent

CHILD = """
import json, os, sys, time
if os.environ.get("PLAN_SHARE"):
    import workbench.analysis.plan_search as search
    search.FIRST_STAGE_SHARE = int(os.environ["PLAN_SHARE"])
from workbench.engine.threads import blas_threads
from workbench import load_preset
from workbench.analysis.plan import plan
with blas_threads():
    start = time.process_time()
    scenario = load_preset("binary_outcome")
    result = plan(scenario, seed=scenario.study.seed)  # as the CLI: the scenario's seed
    cpu = time.process_time() - start
search = result.search[result.search["variable"] == result.exposure]
print(json.dumps({
    "cpu": cpu,
    "target": float(result.target_power),
    "n": {s: int(n) for s, n in zip(result.smallest_n["strategy"], result.smallest_n["n_for_power"])},
    "sizes": int(len(search)),
    "search": search[["n", "strategy", "power", "power_mcse"]].to_dict("records"),
}))
"""


def run(path: Path, share: int | None = None) -> dict:
    env = dict(os.environ, PYTHONPATH=str(path), OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    if share:
        env["PLAN_SHARE"] = str(share)
    out = subprocess.run(
        [sys.executable, "-c", CHILD], env=env, capture_output=True, text=True, check=True, cwd="/tmp"
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def mc_error(record: dict, strategy: str, target: float) -> float:
    """``power_mcse / slope`` near the target, from the sizes simulated for ``strategy``."""
    rows = sorted((r for r in record["search"] if r["strategy"] == strategy), key=lambda r: r["n"])
    below = [r for r in rows if r["power"] < target]
    above = [r for r in rows if r["power"] >= target]
    if not below or not above:
        return float("nan")
    lo = max(below, key=lambda r: r["n"])
    hi = max((r for r in rows if r["n"] >= lo["n"] + 100), key=lambda r: -r["n"], default=above[-1])
    slope = (hi["power"] - lo["power"]) / max(hi["n"] - lo["n"], 1)
    return lo["power_mcse"] / slope if slope > 0 else float("nan")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", type=Path, required=True, help="a copy of the previous package")
    parser.add_argument(
        "--planner-only",
        type=Path,
        help="optional: the previous copy with only this checkout's planner files (isolates the planner's share)",
    )
    parser.add_argument("--shares", default="4,8", help="first-stage shares to time on this checkout")
    parser.add_argument("--rounds", type=int, default=1)
    args = parser.parse_args()
    print(f"machine: {platform.processor() or platform.machine()}, {os.cpu_count()} cores, 1 BLAS thread")
    variants = [("before", args.before, None)]
    if args.planner_only:
        variants.append(("planner only", args.planner_only, None))
    variants += [(f"this checkout, share 1/{k}", HERE, int(k)) for k in args.shares.split(",")]
    records: dict[str, list[dict]] = {name: [] for name, _, _ in variants}
    for _ in range(args.rounds):
        for name, path, share in variants:
            records[name].append(run(path, share))
    base = min(r["cpu"] for r in records["before"])
    first = records["before"][0]
    print(f"{'variant':28s} {'CPU s':>7s} {'ratio':>6s} {'sizes':>6s}  smallest n per strategy")
    for name, _, _ in variants:
        cpu = min(r["cpu"] for r in records[name])
        rec = records[name][0]
        ns = " ".join(f"{n:5d}" for n in rec["n"].values())
        print(f"{name:28s} {cpu:7.2f} {base / cpu:5.2f}x {rec['sizes']:6d}  {ns}")
    print(f"{'strategy':32s} {'resolution':>10s} {'MC error of n':>14s}")
    for strategy, n_before in first["n"].items():
        error = mc_error(first, strategy, first["target"])
        print(f"{strategy:32s} {max(5, 0.02 * n_before):10.0f} {error:14.0f}")


if __name__ == "__main__":
    main()
