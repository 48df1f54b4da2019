"""Hand-made copper layouts with seeded defects for the rule-check tests.

Every layout is built from shapely boxes and discs whose sizes are the
numbers the tests expect back, so a measured value can be compared with the
value that was drawn.
"""

from __future__ import annotations

import numpy as np
import shapely
from shapely import affinity
from shapely.geometry import Point, box

from tracecoil.outline import Outlines, as_multipolygon
from tracecoil.rules import RuleSet

# Round limits so that seeded numbers are easy to read.
RULES = RuleSet(
    name="test",
    min_width_outer_mm=0.2,
    min_width_inner_mm=0.15,
    min_gap_outer_mm=0.2,
    min_gap_inner_mm=0.15,
    min_drill_mm=0.3,
    min_annular_ring_mm=0.15,
    via_to_via_mm=0.3,
    via_to_trace_mm=0.25,
    edge_clearance_mm=0.5,
    design_current_a=0.0,
    working_voltage_v=0.0,
)
FINE_TOL_MM = 1e-5  # chord error of the discs drawn here


def disc(x, y, d):
    r = d / 2
    step = 2 * np.arccos(1 - FINE_TOL_MM / r)
    return Point(x, y).buffer(r, quad_segs=int(np.ceil((np.pi / 2) / step)))


def make_outlines(copper: dict, *, drills=(), board=None, n_layers=2, rotate_deg=0.0) -> Outlines:
    """Outlines from {layer: geometry}, holes (x, y, d) and a board polygon,
    optionally rotated about the origin (to exercise rounding)."""
    d = np.array(drills, float).reshape(-1, 3)
    holes = [disc(x, y, dd) for x, y, dd in d]
    out = {}
    for layer, g in copper.items():
        if holes:
            g = g.difference(shapely.union_all(holes))
        out[layer] = g
    if rotate_deg:
        out = {k: affinity.rotate(g, rotate_deg, origin=(0, 0)) for k, g in out.items()}
        if len(d):
            a = np.radians(rotate_deg)
            rot = np.array([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]])
            d = np.column_stack([d[:, :2] @ rot.T, d[:, 2]])
        if board is not None:
            board = affinity.rotate(board, rotate_deg, origin=(0, 0))
    names = {l: ("top" if l == 1 else "bottom" if l == n_layers else f"inner{l - 1}") for l in range(1, n_layers + 1)}
    return Outlines(
        copper={k: as_multipolygon(g) for k, g in out.items()},
        drills=d,
        plated=np.ones(len(d), bool),
        board=board,
        layer_names=names,
        tolerance_mm=FINE_TOL_MM,
    )


def rotate_point(p, deg):
    a = np.radians(deg)
    return np.array([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]]) @ np.asarray(p, float)


def narrowed_trace(width=0.25, narrow_to=0.18, x0=4.0, x1=5.0):
    """A 10 mm trace of ``width`` along x whose top edge is notched down to
    leave ``narrow_to`` between x0 and x1. Returns (geometry, where)."""
    g = box(0, 0, 10, width).difference(box(x0, narrow_to, x1, width + 1))
    return g, ((x0 + x1) / 2, narrow_to / 2)


def two_traces(width=0.25, gap=0.25):
    """Two parallel 10 mm traces ``gap`` apart."""
    return box(0, 0, 10, width).union(box(0, width + gap, 10, 2 * width + gap))


def bulged_pair(width=0.25, gap=0.25, bump=0.06, x0=6.0, x1=6.5):
    """Two parallel traces; the lower one bulges ``bump`` into the gap
    between x0 and x1. Returns (geometry, where)."""
    g = two_traces(width, gap).union(box(x0, width - 1e-3, x1, width + bump))
    return g, ((x0 + x1) / 2, width + bump + (gap - bump) / 2)


def meander(width=0.2, gap=0.2, legs=6, length=5.0):
    """One connected meander (a single polygon) whose legs are ``gap``
    apart: the gap check must work between parts of the same polygon."""
    pitch = width + gap
    parts = [box(0, k * pitch, length, k * pitch + width) for k in range(legs)]
    for k in range(legs - 1):  # join the legs alternately at the right and left ends
        x = length - width if k % 2 == 0 else 0.0
        parts.append(box(x, k * pitch, x + width, (k + 1) * pitch + width))
    return shapely.union_all(parts)
