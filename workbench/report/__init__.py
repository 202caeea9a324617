"""The report layer: what a person sees of a scenario and its results, as Bokeh figures and HTML.

Nothing here imports Panel, so the dashboard (:mod:`workbench.app`) and the standalone report share it.
Modules: :mod:`~workbench.report.style` (the Okabe-Ito palette and the figures' look),
:mod:`~workbench.report.graph_drawing` (the causal graph), :mod:`~workbench.report.figures` (simulation and
plan results), :mod:`~workbench.report.dataset_figures` (one simulated dataset),
:mod:`~workbench.report.tables` (HTML tables with Monte Carlo SEs and flags),
:mod:`~workbench.report.explain` (plain-language stories per strategy) and :mod:`~workbench.report.html`
(the standalone HTML report, rendered from ``templates/report.html.j2``). Import the modules themselves;
this package re-exports nothing.

Examples
--------
>>> from workbench import load_preset
>>> from workbench.report.html import build_report
>>> "<h2>The graph</h2>" in build_report(load_preset("common_cause"))
True
"""

__all__: list[str] = []
