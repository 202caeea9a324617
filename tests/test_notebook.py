"""The example notebook runs from top to bottom with no error (nbclient, the current interpreter's kernel).

Also: every result renders itself in a notebook (``_repr_html_``) and ``wb.show`` returns a Panel object.
"""

from __future__ import annotations

from pathlib import Path

import pytest

NOTEBOOK = Path(__file__).resolve().parent.parent / "docs" / "examples" / "workbench_tour.ipynb"


def test_example_notebook_runs():
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")
    pytest.importorskip("ipykernel")
    nb = nbformat.read(NOTEBOOK, as_version=4)
    # "python3" is the native kernel spec ipykernel provides: the interpreter running the tests, no install step
    client = nbclient.NotebookClient(
        nb, timeout=240, kernel_name="python3", resources={"metadata": {"path": str(NOTEBOOK.parent)}}
    )
    client.execute()  # raises CellExecutionError on any error in any cell
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])]
    assert not [o for o in outputs if o.get("output_type") == "error"]
    html = [o for o in outputs if "text/html" in o.get("data", {})]
    assert len(html) >= 4  # check, simulate, plan and sweep render as HTML


def test_show_returns_a_panel_object():
    import panel as pn

    import workbench as wb

    page = wb.show(wb.load_preset("common_cause"))
    assert isinstance(page, pn.viewable.Viewable)
