"""Word-length tuning: the cheapest configuration that still meets a regulation spec.

``evaluate`` (closed-loop runs of one configuration, model or ideal), ``runner`` (parallel
jobs, cache, Dask), ``search`` (``Tuner``), ``report`` (CSV, plots, summary) and
``range_check`` (the range analysis of a configuration's accumulators).
"""
