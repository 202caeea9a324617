"""The formatting layer: what every output shares, below the computation so results can render themselves.

Modules: :mod:`~workbench.formatting.numbers` (numbers for tables; Monte Carlo estimates rounded to their
MCSE), :mod:`~workbench.formatting.phrases` (how a strategy, its selection rule, restriction and matching
read in words), :mod:`~workbench.formatting.jsonable` (the one JSON cleaner) and
:mod:`~workbench.formatting.tables` (a table spec rendered as aligned text and as escaped HTML). No Bokeh,
no Panel, no pandas.
"""
