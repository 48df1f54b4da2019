"""Coils from user-supplied centrelines (shapes the spiral generator does
not cover): each path is a polyline on one copper layer, in current order.

Where a path ends on one layer and the next begins on another, a via joins
them (the two points must coincide). Terminal A is a through-hole pad at the
first point, terminal B one at the last point.
"""

from __future__ import annotations

import math

from ..design import BoardSpec, CoilSpec
from ..errors import GeometryError, SpecError
from ..layout import Coil, Step, Terminal, Trace, Via

JOIN_TOL_MM = 1e-6


def build_custom(spec: CoilSpec, board: BoardSpec, *, name: str = "coil") -> Coil:
    """Build a :class:`Coil` from ``spec.paths`` (shape 'custom')."""
    n = board.layers
    all_board = tuple(range(1, n + 1))
    traces, vias, path = [], [], []
    paths = spec.paths
    for i, p in enumerate(paths):
        if p["layer"] > n:
            raise SpecError(f"paths[{i}].layer = {p['layer']} is beyond board.layers = {n}")
    first = paths[0]["points"][0]
    vias.append(Via(first[0], first[1], spec.pad_drill_mm, spec.pad_mm, all_board, "terminal"))
    if paths[0]["layer"] != 1:
        path.append(Step("via", 0, 1.0, 1, paths[0]["layer"]))
    for i, p in enumerate(paths):
        if i > 0:
            prev = paths[i - 1]
            a, b = prev["points"][-1], p["points"][0]
            if math.dist(a, b) > JOIN_TOL_MM:
                raise GeometryError(f"paths[{i}] starts at {b} but paths[{i - 1}] ends at {a}; consecutive paths must meet (a via joins them when layers differ)")
            if prev["layer"] != p["layer"]:
                vias.append(Via(a[0], a[1], spec.via_drill_mm, spec.via_pad_mm, tuple(sorted((prev["layer"], p["layer"]))), "via"))
                path.append(Step("via", len(vias) - 1, 1.0, prev["layer"], p["layer"]))
        traces.append(Trace(layer=p["layer"], points_mm=p["points"], width_mm=spec.width_mm, role="winding"))
        path.append(Step("trace", len(traces) - 1, 1.0))
    last = paths[-1]["points"][-1]
    vias.append(Via(last[0], last[1], spec.pad_drill_mm, spec.pad_mm, all_board, "terminal"))
    terms = (Terminal("A", first[0], first[1], via=0), Terminal("B", last[0], last[1], via=len(vias) - 1))
    return Coil(stackup=board.stackup(), traces=tuple(traces), vias=tuple(vias), terminals=terms, path=tuple(path), spec=spec, name=name)


def custom_coil(paths, *, width_mm: float, board=None, name: str = "coil", **options) -> Coil:
    """A coil from centrelines: ``paths`` is a list of ``(layer, points)``
    or ``{"layer": n, "points": ...}`` in current order (points in mm).

    >>> c = custom_coil([(1, [[0, 0], [10, 0], [10, 10]]), (2, [[10, 10], [0, 10]])], width_mm=0.3)
    >>> [v.role for v in c.vias]
    ['terminal', 'via', 'terminal']
    """
    from ..design import make_board_spec, make_coil_spec

    items = [p if isinstance(p, dict) else {"layer": p[0], "points": [list(map(float, q)) for q in p[1]]} for p in paths]
    spec = make_coil_spec({"shape": "custom", "width_mm": width_mm, "gap_mm": options.pop("gap_mm", width_mm), "paths": items, **options})
    board = make_board_spec(board if board is not None else {"layers": max(2, max(p["layer"] for p in spec.paths))})
    return build_custom(spec, board, name=name)
