"""Same seed, same JSON, byte for byte: outputs pinned before the package was reorganised into layers.

Common practice, no source: a refactoring must not change a single number. The files in ``tests/data/pinned``
were written by the command line before the reorganisation; each test writes the same output again and
compares the bytes. Regenerate them only for a change that is meant to alter results, and say so in the
commit message.
"""

from __future__ import annotations

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


def _same(path: Path, name: str) -> None:
    assert path.read_bytes() == (PINNED / name).read_bytes(), f"{name} changed"


@pytest.mark.parametrize("preset", CHECKS)
def test_check_json_is_unchanged(preset, capsys):
    assert main(["check", "--preset", preset, "--json"]) == 0
    out = capsys.readouterr().out
    assert out.encode() == (PINNED / f"check_{preset}.json").read_bytes()


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
