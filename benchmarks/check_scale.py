"""`check` of a 40-variable graph with 20 binary variables: time and peak memory (issue 12). A script, not a
test:

    python benchmarks/check_scale.py [--variables 40] [--binary 20]

It writes an invented scenario (sensors and alarms on a packing line: a chain of causes of the exposure and the
outcome, every other variable binary), runs ``workbench check`` on it in a fresh interpreter and prints the
wall time and the peak resident memory of that interpreter (``ru_maxrss``). Targets: <= 5 s and <= 400 MB.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def scenario_text(k: int, binary: int, seed: int = 7) -> str:
    """``k`` variables: ``k - 2`` covariates (``binary`` of them binary), exposure ``x``, outcome ``y``."""
    rng = np.random.default_rng(seed)
    covariates = [f"c{i}" for i in range(k - 2)]
    binaries = set(covariates[1::2][:binary])
    lines = [
        'title = "Sensors and alarms on a packing line"',
        "[question]",
        'exposure = "x"',
        'outcome = "y"',
    ]
    for name in [*covariates, "x", "y"]:
        lines.append(f"[variables.{name}]")
        if name in binaries:
            lines += ['type = "binary"', f"proportion = {round(float(rng.uniform(0.1, 0.6)), 2)}"]
    arrows = []
    for i, c in enumerate(covariates):
        if i and rng.random() < 0.5:
            arrows.append((covariates[i - 1], c, 0.3))
        if rng.random() < 0.6:
            arrows.append((c, "x", round(float(rng.uniform(0.1, 0.4)), 2)))
        arrows.append((c, "y", round(float(rng.uniform(-0.4, 0.4)), 2)))
    arrows.append(("x", "y", 0.5))
    for a, b, e in arrows:
        lines += ["[[arrows]]", f'from = "{a}"', f'to = "{b}"', f"effect = {e}"]
    lines += ["[[strategies]]", 'name = "unadjusted"', "[[strategies]]", 'name = "all_other"']
    lines.append(f"adjust = {covariates!r}".replace("'", '"'))
    return "\n".join(lines) + "\n"


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--variables", type=int, default=40)
    parser.add_argument("--binary", type=int, default=20)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "scale.toml"
        path.write_text(scenario_text(args.variables, args.binary), encoding="utf-8")
        code = (
            "import resource, sys, time; from workbench.cli import main; t = time.perf_counter(); "
            f"c = time.process_time(); rc = main(['check', {str(path)!r}]); "
            "print('SECONDS', time.perf_counter() - t, 'MAXRSS_KB', "
            "resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, 'RC', rc, 'CPU', time.process_time() - c, "
            "file=sys.stderr)"
        )
        start = time.perf_counter()
        done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False)
        wall = time.perf_counter() - start
    line = [x for x in done.stderr.splitlines() if x.startswith("SECONDS")]
    if not line:
        print(done.stderr)
        raise SystemExit(1)
    parts = line[-1].split()
    seconds, peak_kb, cpu = float(parts[1]), int(parts[3]), float(parts[7])
    print(
        f"check, {args.variables} variables ({args.binary} binary): {seconds:.2f} s inside check, "
        f"{cpu:.2f} s CPU "
        f"({wall:.2f} s with start-up), peak {peak_kb / 1024:.0f} MiB (targets <= 5 s, <= 400 MB)"
    )


if __name__ == "__main__":
    main()
