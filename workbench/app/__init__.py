"""The browser dashboard: a Panel application over the same library functions the command line uses.

The package is split so that the logic can be tested without a browser. The state is plain ``param``
(no Panel import), usable in a notebook or a test:

- :mod:`workbench.app.state`: the scenario being edited (:class:`~workbench.app.state.ScenarioState`, every
  edit validated at once; the editing rules are :mod:`workbench.scenario.edit`) and the
  :class:`~workbench.app.state.Workbench` that ties it to the runs;
- :mod:`workbench.app.runs`: background simulation and plan runs with progress, cancel and a cache;
- :mod:`workbench.app.dataset`: one simulated dataset for the one-dataset view;
- :mod:`workbench.app.settings`: the study settings as small ``param`` objects the inputs bind to.

The views are thin ``pn.viewable.Viewer`` classes over that state: :mod:`~workbench.app.widgets` (shared
pieces), :mod:`~workbench.app.sidebar`, :mod:`~workbench.app.graph_tab` with :mod:`~workbench.app.editors`
and :mod:`~workbench.app.strategies_editor`, :mod:`~workbench.app.estimates_tab`,
:mod:`~workbench.app.plan_tab`, :mod:`~workbench.app.explain_tab` and :mod:`~workbench.app.export_tab`.
:mod:`workbench.app.app` composes the page and :mod:`workbench.app.serve` serves it. Figures and tables
come from :mod:`workbench.report`, which the standalone HTML report uses too.

Importing this package does not import Panel.
"""

from __future__ import annotations

__all__ = ["serve"]


def serve(preset=None, port=5006, address="127.0.0.1", show=True):
    """Serve the dashboard (see :func:`workbench.app.serve.serve`)."""
    from workbench.app.serve import serve as _serve

    return _serve(preset=preset, port=port, address=address, show=show)
