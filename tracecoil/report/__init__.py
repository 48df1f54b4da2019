"""Reports: one self-contained HTML page per design (:func:`write_report`),
with its geometry, electrical prediction, signal, rule check and sweep
plots; pictures embedded, no external files."""

from .html import Report, collect, read_sweep_csv, write_report

__all__ = ["Report", "collect", "read_sweep_csv", "write_report"]
