"""Benchmark: start-up time of the command line against importing numpy, measured in the same run.

Targets (architecture issue): ``workbench --help`` at most 2.5x the time of ``python -c "import numpy"``;
``workbench check --preset common_cause`` at most 5x. Each command is run ``ROUNDS`` times, interleaved so that
a change of machine load hits all three alike; the median wall time of each is reported with the ratio to
numpy's, and the spread (lowest-highest) so that a noisy run shows.

    python benchmarks/startup.py
"""

from __future__ import annotations

import shutil
import statistics
import subprocess
import sys
import time

ROUNDS = 15
COMMANDS = {
    "import numpy": [sys.executable, "-c", "import numpy"],
    "workbench --help": [shutil.which("workbench") or "workbench", "--help"],
    "workbench check --preset common_cause": [
        shutil.which("workbench") or "workbench",
        "check",
        "--preset",
        "common_cause",
    ],
}
TARGETS = {"workbench --help": 2.5, "workbench check --preset common_cause": 5.0}


def wall(command: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start


def main() -> None:
    for command in COMMANDS.values():  # warm the file cache
        wall(command)
    times: dict[str, list[float]] = {name: [] for name in COMMANDS}
    for _ in range(ROUNDS):
        for name, command in COMMANDS.items():
            times[name].append(wall(command))
    base = statistics.median(times["import numpy"])
    print(f"{ROUNDS} interleaved rounds; median wall time (lowest-highest)")
    for name, values in times.items():
        median = statistics.median(values)
        line = f"{name:40s} {median * 1000:7.0f} ms ({min(values) * 1000:.0f}-{max(values) * 1000:.0f})"
        if name in TARGETS:
            ratio = median / base
            verdict = "met" if ratio <= TARGETS[name] else "NOT met"
            line += f"  {ratio:4.2f}x numpy (target <= {TARGETS[name]}x: {verdict})"
        print(line)


if __name__ == "__main__":
    main()
