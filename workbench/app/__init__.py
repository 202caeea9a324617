"""The browser dashboard: a Panel application over the same library functions the command line uses.

The package is split so that the logic can be tested without a browser:

- :mod:`workbench.app.state` holds the state (``param.Parameterized`` classes, no Panel import): the
  scenario being edited, the background simulation and plan runs, and the one-dataset view.
- :mod:`workbench.report.figures` and :mod:`workbench.report.tables` build Bokeh figures and HTML
  tables from library results (no Panel import); the standalone HTML report uses them too.
- :mod:`workbench.app.views` holds thin ``pn.viewable.Viewer`` views over the state;
  :mod:`workbench.app.app` composes them and :mod:`workbench.app.serve` serves the page.

Importing this package does not import Panel.
"""

from __future__ import annotations

__all__ = ["serve"]


def serve(preset=None, port=5006, address="127.0.0.1", show=True):
    """Serve the dashboard (see :func:`workbench.app.serve.serve`)."""
    from workbench.app.serve import serve as _serve

    return _serve(preset=preset, port=port, address=address, show=show)
