"""The engine layer: simulating many studies from a scenario and fitting every strategy, batched over replicates.

Modules, bottom up: :mod:`~workbench.engine.streams` (random streams: one seed normaliser, block streams),
:mod:`~workbench.engine.generate` (the structural equations; calibration of binary intercepts; drawing data),
:mod:`~workbench.engine.wishart` (Wishart cross-products by the Bartlett decomposition),
:mod:`~workbench.engine.ols`, :mod:`~workbench.engine.robust`, :mod:`~workbench.engine.logistic` and
:mod:`~workbench.engine.standardize` (batched estimators), :mod:`~workbench.engine.design` (restriction and
matching masks), :mod:`~workbench.engine.truth` (the true effect each strategy is scored against),
:mod:`~workbench.engine.fitplan` (what is fitted for each strategy), :mod:`~workbench.engine.chunks` and
:mod:`~workbench.engine.fitting` (drawing and fitting chunk by chunk within a memory budget),
:mod:`~workbench.engine.replicates` (``run_replicates``: the whole loop) and :mod:`~workbench.engine.metrics`
(performance measures and their Monte Carlo SEs; the one "biased" rule).

Nothing here imports Bokeh or Panel; nothing here knows the command line or the dashboard.
"""
