"""Many designs at once: parameter sweeps, sizing a coil to a target and
fabrication-tolerance spread, run serially, on local processes or on a
Dask cluster. :func:`~tracecoil.variants.metrics.evaluate` is the shared
piece: it computes named metrics of one design the same way everywhere.
"""

from .metrics import METRICS, MetricOptions, MetricUnavailable, evaluate, metric

__all__ = ["METRICS", "MetricOptions", "MetricUnavailable", "evaluate", "metric"]
