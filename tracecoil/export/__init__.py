"""Exporters: DXF, GDSII, SVG/PNG previews and the JSON geometry summary.

All read :class:`~tracecoil.outline.Outlines` (millimetres) and write
atomically (:mod:`tracecoil.export.atomic`). :func:`build` writes them all
for one coil. The format modules load their libraries (ezdxf, gdstk,
matplotlib) only when first used, so importing this package stays cheap.
"""

from __future__ import annotations

import importlib

from .atomic import Staging, atomic_open, atomic_path, write_bytes, write_json, write_text
from .build import FORMATS, build, coil_from
from .summary import fill_ratio, summary

_LAZY = {
    "write_dxf": "dxf",
    "dxf_document": "dxf",
    "write_gds": "gds",
    "gds_library": "gds",
    "default_layer_map": "gds",
    "write_preview": "preview",
    "preview_figure": "preview",
}

__all__ = [
    "FORMATS",
    "Staging",
    "atomic_open",
    "atomic_path",
    "build",
    "coil_from",
    "fill_ratio",
    "summary",
    "write_bytes",
    "write_json",
    "write_text",
    *_LAZY,
]


def __getattr__(name):
    if name in _LAZY:
        module = importlib.import_module(f".{_LAZY[name]}", __name__)
        return getattr(module, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
