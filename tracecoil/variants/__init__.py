"""Many designs at once: parameter sweeps, sizing a coil to a target and
fabrication-tolerance spread, run serially, on local processes or on a
Dask cluster.

:func:`~tracecoil.variants.metrics.evaluate` is the shared piece: it
computes named metrics (:data:`~tracecoil.variants.metrics.METRICS`) of one
design the same way for sweeps, sizing, tolerance runs, comparisons and
reports.
"""

from .metrics import METRICS, MetricOptions, MetricUnavailable, evaluate, metric
from .sizing import SizingResult, Target, size, write_design
from .space import Space, make_space
from .sweep import sweep, to_columns
from .tolerance import ToleranceResult, Tolerances, make_tolerances, tolerance

__all__ = [
    "METRICS",
    "MetricOptions",
    "MetricUnavailable",
    "SizingResult",
    "Space",
    "Target",
    "ToleranceResult",
    "Tolerances",
    "evaluate",
    "make_space",
    "make_tolerances",
    "metric",
    "size",
    "sweep",
    "to_columns",
    "tolerance",
    "write_design",
]
