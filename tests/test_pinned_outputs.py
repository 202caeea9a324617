"""Same seed, same JSON: outputs pinned before the package was reorganised into layers.

Common practice, no source: a refactoring must not change a result. The files in ``tests/data/pinned`` were
written by the command line; each test writes the same output again and compares it with the pinned file:
every pinned key in the same order (keys may be added, never renamed or dropped: the JSON is a contract),
the same strings, the same integers and booleans, and every other number
equal to a relative 1e-9 (the batched Cholesky fits of the exact engine reorder floating-point sums, which
moves the last digits, not the figures). Regenerate the files only for a change that is meant to alter
results, and say so in the commit message.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from workbench.cli import main

PINNED = Path(__file__).parent / "data" / "pinned"

CHECKS = [
    "common_cause",
    "binary_outcome",
    "restriction",
    "selection_by_significance",
    "two_exposures",
    "m_bias",
    "larger_graph",
]
RUNS = ["common_cause", "binary_outcome", "restriction", "selection_by_significance", "two_exposures"]


def _differences(new, old, where: str = "") -> list[str]:
    """Where two JSON values differ beyond a relative 1e-9 on floating-point numbers."""
    if isinstance(old, dict):
        if not isinstance(new, dict) or [k for k in new if k in old] != list(old):
            return [f"{where}: keys {list(new) if isinstance(new, dict) else new!r} do not keep {list(old)}"]
        return [d for k in old for d in _differences(new[k], old[k], f"{where}.{k}")]
    if isinstance(old, list):
        if not isinstance(new, list) or len(new) != len(old):
            return [f"{where}: length differs"]
        return [
            d
            for i, (a, b) in enumerate(zip(new, old, strict=True))
            for d in _differences(a, b, f"{where}[{i}]")
        ]
    if isinstance(old, float) and isinstance(new, int | float) and not isinstance(new, bool):
        if math.isclose(new, old, rel_tol=1e-9, abs_tol=1e-12):
            return []
    elif type(new) is type(old) and new == old:
        return []
    return [f"{where}: {new!r} != {old!r}"]


def _same_text(text: str, name: str) -> None:
    differences = _differences(json.loads(text), json.loads((PINNED / name).read_text()))
    assert not differences, f"{name} changed: " + "; ".join(differences[:5])


def _same(path: Path, name: str) -> None:
    _same_text(path.read_text(), name)


@pytest.mark.parametrize("preset", CHECKS)
def test_check_json_is_unchanged(preset, capsys):
    assert main(["check", "--preset", preset, "--json"]) == 0
    _same_text(capsys.readouterr().out, f"check_{preset}.json")


@pytest.mark.parametrize("preset", RUNS)
def test_run_json_is_unchanged(preset, tmp_path):
    out = tmp_path / "run.json"
    assert main(["run", "--preset", preset, "--replicates", "300", "--seed", "7", "--json", str(out)]) == 0
    _same(out, f"run_{preset}.json")


def test_raw_engine_run_json_is_unchanged(tmp_path):
    out = tmp_path / "run.json"
    args = ["run", "--preset", "binary_exposure", "--replicates", "300", "--seed", "7", "--engine", "raw"]
    assert main([*args, "--json", str(out)]) == 0
    _same(out, "run_binary_exposure_raw.json")


@pytest.mark.parametrize(
    ("preset", "extra"), [("common_cause", []), ("two_exposures", ["--sizes", "100,200"])]
)
def test_plan_json_is_unchanged(preset, extra, tmp_path):
    out = tmp_path / "plan.json"
    assert (
        main(["plan", "--preset", preset, "--replicates", "200", "--seed", "3", *extra, "--json", str(out)])
        == 0
    )
    _same(out, f"plan_{preset}.json")
