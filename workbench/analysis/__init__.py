"""The analysis layer: the public verbs and the result objects they return.

- :func:`~workbench.analysis.check.check` (:mod:`~workbench.analysis.check`): what the graph alone says, as a
  :class:`~workbench.analysis.check.CheckReport` of :class:`~workbench.analysis.check.StrategyCheck` records;
- :func:`~workbench.analysis.simulate.simulate` (:mod:`~workbench.analysis.simulate`): many simulated studies,
  every strategy scored with Monte Carlo SEs, as a :class:`~workbench.analysis.simulate.SimulationResult`;
- :func:`~workbench.analysis.estimate.estimate` (:mod:`~workbench.analysis.estimate`): every strategy fitted
  to one data frame;
- :mod:`~workbench.analysis.power`: the analytic power and precision of a regression coefficient;
- :func:`~workbench.analysis.plan.plan` (:mod:`~workbench.analysis.plan`, with the search in
  :mod:`~workbench.analysis.plan_search`): power and precision curves and the smallest n, as a
  :class:`~workbench.analysis.plan_result.PlanResult`;
- :func:`~workbench.analysis.sensitivity.sensitivity` (:mod:`~workbench.analysis.sensitivity`): what a latent
  confounder of given strengths (partial R^2) would do to one strategy's estimate, as a
  :class:`~workbench.analysis.sensitivity_result.SensitivityResult`;
- :func:`~workbench.analysis.sweep.sweep` (:mod:`~workbench.analysis.sweep`, the parameters in
  :mod:`~workbench.analysis.sweep_params`): one simulation per cell of a grid of scenario values, on Dask,
  as a :class:`~workbench.analysis.sweep_result.SweepResult`.

Every verb fills in the default strategies of a scenario that lists none
(:func:`workbench.graph.defaults.with_default_strategies`); ``simulate`` and ``plan`` take ``seed`` as numpy
does (None: fresh entropy, recorded in ``result.seed``). Every result renders as text (``as_text()``), HTML
(``as_html()``, which notebooks show) and JSON (``to_dict()``, ``to_json()``), the text and HTML from the same
table specs (:mod:`workbench.formatting.tables`).

Examples
--------
>>> import workbench as wb
>>> report = wb.check(wb.load_preset("common_cause"))
>>> [c.name for c in report.checks if c.valid]
['adjust_soil']
"""
