"""The package's shape, checked on every run: small modules and functions, no reach into private names.

Common practice, no source: the architecture issue sets the limits (no module over 700 lines, no function over
100 lines of code, docstrings not counted). The layer contract itself (which layer may import which, Panel
only in ``workbench.app``, Bokeh nowhere below ``workbench.report``) is checked by ``lint-imports`` in CI
(``[tool.importlinter]`` in pyproject.toml).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import workbench

PACKAGE = Path(__file__).resolve().parent.parent / "workbench"
MODULES = sorted(PACKAGE.rglob("*.py"))
MAX_MODULE_LINES = 700
MAX_FUNCTION_LINES = 100


def _code_lines(node: ast.AST) -> int:
    """Lines of a function without its docstring."""
    lines = node.end_lineno - node.lineno + 1
    body = node.body
    if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
        if isinstance(body[0].value.value, str):
            lines -= body[0].end_lineno - body[0].lineno + 1
    return lines


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_module_is_small(path):
    assert len(path.read_text().splitlines()) <= MAX_MODULE_LINES


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_functions_are_small(path):
    tree = ast.parse(path.read_text())
    long = [
        f"{node.name} ({_code_lines(node)} lines)"
        for node in ast.walk(tree)
        if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef) and _code_lines(node) > MAX_FUNCTION_LINES
    ]
    assert not long, f"split into named steps: {', '.join(long)}"


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_no_private_names_from_other_modules(path):
    """A module uses another module's public names only (a name starting with '_' stays in its module)."""
    tree = ast.parse(path.read_text())
    reached = [
        f"{node.module}.{alias.name}"
        for node in ast.walk(tree)
        if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("workbench")
        for alias in node.names
        if alias.name.startswith("_") and not alias.name.startswith("__")
    ]
    assert not reached


def test_every_public_name_resolves():
    """``import workbench`` is lazy (PEP 562); every name in ``__all__`` still resolves."""
    for name in workbench.__all__:
        assert getattr(workbench, name) is not None, name


def test_importing_the_package_loads_no_computation():
    """``import workbench`` alone imports none of the layers (the command line starts quickly)."""
    import subprocess
    import sys

    code = "import sys, workbench; print(sorted(m for m in sys.modules if m.startswith('workbench')))"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "['workbench']"


def test_developers_guide_lists_every_module():
    """DEVELOPERS.md shows the tree with one line per module; a new module must be added there."""
    guide = (PACKAGE.parent / "DEVELOPERS.md").read_text()
    missing = [
        str(p.relative_to(PACKAGE.parent)) for p in MODULES if str(p.relative_to(PACKAGE.parent)) not in guide
    ]
    assert not missing, f"add to the tree in DEVELOPERS.md: {missing}"
