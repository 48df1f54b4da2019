"""Copper outlines: the polygons of copper on each layer, in millimetres.

Derived from a :class:`~tracecoil.layout.Coil` only. Exporters and the rule
checker read these; they never rebuild geometry from design parameters.

Traces become their centreline buffered by half the width with mitred joins
(the copper of a straight-sided spiral keeps sharp corners, so the pitch is
exact everywhere) and round ends; pads are discs; plated holes are removed
from the copper (the copper around a hole is the annular ring). Curves are
polygons whose chord error is at most ``tolerance_mm``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import LineString, MultiPolygon, Point, Polygon

from .layout import Coil

DEFAULT_TOLERANCE_MM = 0.005


def _quad_segs(radius_mm: float, tolerance_mm: float) -> int:
    """Segments per quarter circle for a chord error <= tolerance."""
    if radius_mm <= tolerance_mm:
        return 1
    step = 2 * math.acos(1 - tolerance_mm / radius_mm)
    return max(1, int(math.ceil((math.pi / 2) / step)))


def disc(x: float, y: float, diameter_mm: float, tolerance_mm: float) -> Polygon:
    """A disc as a polygon inscribed with chord error <= ``tolerance_mm``."""
    r = diameter_mm / 2
    return Point(x, y).buffer(r, quad_segs=_quad_segs(r, tolerance_mm))


def as_multipolygon(geom) -> MultiPolygon:
    """Normalise a shapely result to a MultiPolygon (dropping slivers of
    zero area that set operations can leave)."""
    if geom.is_empty:
        return MultiPolygon()
    if isinstance(geom, Polygon):
        return MultiPolygon([geom])
    if isinstance(geom, MultiPolygon):
        return geom
    polys = [g for g in getattr(geom, "geoms", []) if isinstance(g, Polygon) and g.area > 0]
    return MultiPolygon(polys)


@dataclass(frozen=True)
class Outlines:
    """Copper per layer, drilled holes and the board edge (all mm).

    ``copper`` maps copper layer number (1 = top) to a MultiPolygon;
    ``drills`` is an (n, 3) array of hole x, y, diameter; ``plated`` marks
    plated holes; ``board`` is the board edge polygon or None.
    """

    copper: dict
    drills: np.ndarray
    plated: np.ndarray
    board: Polygon | None
    layer_names: dict
    tolerance_mm: float

    def area_mm2(self, layer: int) -> float:
        return float(self.copper[layer].area) if layer in self.copper else 0.0


def trace_polygon(points_mm: np.ndarray, width_mm: float, tolerance_mm: float):
    """Copper of one trace: centreline buffered by width/2, mitred joins."""
    line = LineString(points_mm)
    return line.buffer(
        width_mm / 2,
        quad_segs=_quad_segs(width_mm / 2, tolerance_mm),
        cap_style="round",
        join_style="mitre",
        mitre_limit=10.0,
    )


def outlines(coil: Coil, *, tolerance_mm: float = DEFAULT_TOLERANCE_MM) -> Outlines:
    """Copper outlines of every layer of ``coil``.

    >>> from tracecoil import spiral
    >>> o = outlines(spiral(shape="square", outer_mm=10, turns=3, width_mm=0.3, gap_mm=0.3))
    >>> sorted(o.copper), all(g.is_valid for g in o.copper.values())
    ([1, 2], True)
    """
    per_layer: dict[int, list] = {}
    for t in coil.traces:
        per_layer.setdefault(t.layer, []).append(trace_polygon(t.points_mm, t.width_mm, tolerance_mm))
    holes = []
    for v in coil.vias:
        for layer in v.layers:
            per_layer.setdefault(layer, []).append(disc(v.x_mm, v.y_mm, v.pad_mm, tolerance_mm))
        holes.append(disc(v.x_mm, v.y_mm, v.drill_mm, tolerance_mm))
    drilled = shapely.union_all(holes) if holes else None
    copper = {}
    for layer in sorted(per_layer):
        g = shapely.union_all(per_layer[layer])
        if drilled is not None:
            g = g.difference(drilled)
        g = shapely.make_valid(g) if not g.is_valid else g
        copper[layer] = as_multipolygon(g)
    drills = np.array([[v.x_mm, v.y_mm, v.drill_mm] for v in coil.vias]).reshape(-1, 3)
    board = None if coil.board_outline_mm is None else Polygon(coil.board_outline_mm)
    names = {l: coil.stackup.layer_name(l) for l in range(1, coil.stackup.n_layers + 1)}
    return Outlines(copper=copper, drills=drills, plated=np.ones(len(drills), bool), board=board, layer_names=names, tolerance_mm=tolerance_mm)
