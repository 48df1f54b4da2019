"""Geometric rule checks on copper polygons: seeded defects are found at the
right place with the right measured value; layouts exactly at the limits
pass; layouts 1 um below fail.

The expected values are the sizes the layouts were drawn with
(tests/rules_layouts.py), so the reference is the construction itself.
Tolerances: straight edges are exact up to float rounding (~1e-12 mm), so
measured lengths are compared with atol = 1e-9 mm; locations are compared
with the seeded region.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from shapely.geometry import box

from rules_layouts import RULES, bulged_pair, disc, make_outlines, meander, narrowed_trace, rotate_point, two_traces
from tracecoil.rules import LIMIT_TOL_MM, check
from tracecoil.rules.geometry import ring_distance

ATOL = 1e-9  # mm: float rounding of straight edges, far below any rule value


def only(result, rule):
    fs = [f for f in result.findings if f.rule == rule]
    others = [f for f in result.findings if f.rule != rule]
    assert not others, f"unexpected findings: {others}"
    return fs


# ------------------------------------------------------------- seeded defects
@pytest.mark.parametrize("rot", [0.0, 37.0])
def test_narrowed_trace_found_at_notch_with_its_width(rot):
    g, where = narrowed_trace(width=0.25, narrow_to=0.18, x0=4.0, x1=5.0)
    res = check(make_outlines({1: g}, rotate_deg=rot), RULES)
    (f,) = only(res, "MIN_WIDTH")
    assert f.layer == "top"
    assert_allclose(f.measured, 0.18, atol=ATOL)
    assert f.limit == 0.2
    x, y = rotate_point(f.at, -rot)  # back into the drawing's frame
    assert 4.0 - ATOL <= x <= 5.0 + ATOL
    assert_allclose(y, 0.09, atol=1e-6)  # the middle of the narrowed copper


@pytest.mark.parametrize("rot", [0.0, 37.0])
def test_bulge_closing_a_gap_found_with_remaining_gap(rot):
    g, where = bulged_pair(width=0.25, gap=0.25, bump=0.06, x0=6.0, x1=6.5)
    res = check(make_outlines({1: g}, rotate_deg=rot), RULES)
    (f,) = only(res, "MIN_GAP")
    assert_allclose(f.measured, 0.19, atol=ATOL)
    x, y = rotate_point(f.at, -rot)
    assert 6.0 - ATOL <= x <= 6.5 + ATOL
    assert_allclose(y, where[1], atol=1e-6)


def test_bulge_between_turns_of_one_connected_polygon():
    # A meander is one polygon: its legs face each other across the gap.
    g = meander(width=0.2, gap=0.2, legs=6)
    assert g.geom_type == "Polygon"
    assert check(make_outlines({1: g}), RULES).ok
    bumped = g.union(box(2.0, 0.6 - 1e-3, 2.3, 0.6 + 0.015))  # leg 1 (y 0.4..0.6) bulges 15 um up
    (f,) = only(check(make_outlines({1: bumped}), RULES), "MIN_GAP")
    assert_allclose(f.measured, 0.185, atol=ATOL)
    assert 2.0 <= f.at[0] <= 2.3 and 0.6 < f.at[1] < 0.8


def test_thin_annular_ring_found_at_hole():
    # pad 0.56 around a 0.3 hole: ring 0.13 < 0.15
    cu = disc(2, 1, 0.56).union(box(2, 0.9, 5, 1.1).union(disc(5, 1, 0.7)))
    res = check(make_outlines({1: cu, 2: disc(2, 1, 0.56)}, drills=[(2, 1, 0.3), (5, 1, 0.3)]), RULES)
    fs = only(res, "ANNULAR_RING")
    assert sorted(f.layer for f in fs) == ["bottom", "top"]
    for f in fs:
        assert_allclose(f.measured, 0.13, atol=2e-6)  # arcs recovered from chords of 1e-5 mm sag
        assert_allclose(f.at, (2, 1), atol=ATOL)


def test_off_centre_pad_ring_and_breakout():
    # pad 0.6 shifted 0.05 from the 0.3 hole: narrowest ring 0.1
    res = check(make_outlines({1: disc(2.05, 1, 0.6)}, drills=[(2, 1, 0.3)], n_layers=1), RULES)
    (f,) = only(res, "ANNULAR_RING")
    # the pad is a polygon inside its circle by up to its 1e-5 mm chord sag;
    # off centre, its chords are not arcs about the hole and count as drawn
    assert_allclose(f.measured, 0.1, atol=1.1e-5)
    # shifted 0.2: the hole breaks out of the pad -> ring 0
    res = check(make_outlines({1: disc(2.2, 1, 0.6)}, drills=[(2, 1, 0.3)], n_layers=1), RULES)
    (f,) = only(res, "ANNULAR_RING")
    assert f.measured == 0.0 and "without a complete ring" in f.message


def test_copper_near_board_edge_found():
    board = box(-1, -1, 11, 3)
    g = box(0, 0, 10, 0.25).union(box(5, 0.25, 5.3, 2.7))  # a stub reaching 0.3 mm from the top edge
    res = check(make_outlines({1: g}, board=board), RULES)
    (f,) = only(res, "EDGE_CLEARANCE")
    assert_allclose(f.measured, 0.3, atol=ATOL)
    assert 5.0 <= f.at[0] <= 5.3 and 2.7 <= f.at[1] <= 3.0


def test_copper_crossing_board_edge_measures_zero():
    res = check(make_outlines({1: box(0, 0, 10, 0.25)}, board=box(1, -1, 12, 2)), RULES)
    (f,) = only(res, "EDGE_CLEARANCE")
    assert f.measured == 0.0 and "crosses the board edge" in f.message


def test_hole_spacing_and_hole_to_foreign_copper():
    pads = disc(0, 0, 0.7).union(disc(0.6, 0, 0.7))  # holes 0.3, centres 0.6 apart: edges 0.3 apart (= limit)
    ok = check(make_outlines({1: pads}, drills=[(0, 0, 0.3), (0.6, 0, 0.3)], n_layers=1), RULES)
    assert ok.ok, ok.findings
    close = check(make_outlines({1: disc(0, 0, 0.7).union(disc(0.55, 0, 0.7))}, drills=[(0, 0, 0.3), (0.55, 0, 0.3)], n_layers=1), RULES)
    (f,) = only(close, "VIA_TO_VIA")
    assert_allclose(f.measured, 0.25, atol=ATOL)
    assert_allclose(f.at, (0.275, 0), atol=ATOL)
    # layer 2 has no pad at the hole; a trace passes 0.2 mm from the hole edge
    cu = {1: disc(0, 0, 0.7), 2: box(-3, 0.35, 3, 0.6)}
    (f,) = only(check(make_outlines(cu, drills=[(0, 0, 0.3)]), RULES), "VIA_TO_TRACE")
    assert f.layer == "bottom"
    assert_allclose(f.measured, 0.2, atol=ATOL)


def test_small_drill():
    res = check(make_outlines({1: disc(0, 0, 0.6)}, drills=[(0, 0, 0.25)], n_layers=1), RULES)
    assert {f.rule for f in res.findings} == {"MIN_DRILL"}
    assert_allclose(res.findings[0].measured, 0.25, atol=ATOL)


# ------------------------------------------------------ limits and tolerance
def limit_layout(delta_mm=0.0, rot=0.0):
    """Every rule exactly at its limit, less ``delta_mm``: two traces (width,
    gap), a pad (ring, drill), two bare holes (hole to hole), a hole with a
    pad on layer 2 only and a layer-1 trace beside it (hole to copper), and
    the board edge beside the traces (edge clearance)."""
    R = RULES
    w, g = R.min_width_outer_mm - delta_mm, R.min_gap_outer_mm - delta_mm
    drill = R.min_drill_mm - delta_mm
    ring = R.min_annular_ring_mm - delta_mm
    vv, vt, edge = R.via_to_via_mm - delta_mm, R.via_to_trace_mm - delta_mm, R.edge_clearance_mm - delta_mm
    traces = box(0, 0, 8, w).union(box(0, w + g, 8, 2 * w + g))
    y = -3.0
    pad = disc(10, y, drill + 2 * ring)
    holes = [(10, y, drill), (20, y, drill), (20 + drill + vv, y, drill), (30, y, drill)]
    beside = box(28, y + drill / 2 + vt, 32, y + drill / 2 + vt + 0.3)
    layer1 = traces.union(pad).union(beside)
    layer2 = disc(30, y, drill + 2 * R.min_annular_ring_mm)
    board = box(-edge, -10, 40, 2 * w + g + edge)
    return make_outlines({1: layer1, 2: layer2}, drills=holes, board=board, rotate_deg=rot)


@pytest.mark.parametrize("rot", [0.0, 23.0, 90.0])
def test_layout_exactly_at_limits_passes(rot):
    res = check(limit_layout(0.0, rot), RULES)
    assert res.ok, res.findings


@pytest.mark.parametrize("rot", [0.0, 23.0])
def test_layout_one_micron_below_fails_every_rule(rot):
    res = check(limit_layout(1e-3, rot), RULES)
    rules = {f.rule for f in res.findings}
    assert rules == {"MIN_WIDTH", "MIN_GAP", "ANNULAR_RING", "MIN_DRILL", "VIA_TO_VIA", "VIA_TO_TRACE", "EDGE_CLEARANCE"}
    for f in res.findings:
        # 1 um below; discs are polygons with 1e-5 mm sag, recovered as arcs
        # for the ring, and lying inside their circles for the rest
        assert_allclose(f.measured, f.limit - 1e-3, atol=2e-6)


def test_tolerance_is_a_tenth_of_a_micron():
    # 0.05 um below passes, 0.2 um below fails
    assert LIMIT_TOL_MM == 1e-4
    g = two_traces(width=0.25, gap=0.2 - 0.5e-4)
    assert check(make_outlines({1: g}), RULES).ok
    g = two_traces(width=0.25, gap=0.2 - 2e-4)
    assert not check(make_outlines({1: g}), RULES).ok


def test_inner_layers_use_inner_limits():
    # 0.17 mm copper: too narrow outside (0.2), fine inside (0.15)
    g = box(0, 0, 5, 0.17)
    res = check(make_outlines({1: g, 2: g, 3: g}, n_layers=3), RULES)
    assert sorted(f.layer for f in res.findings) == ["bottom", "top"]


# ------------------------------------------------------- corners and clusters
def test_square_corners_are_not_width_or_gap_problems():
    # a square spiral-like path with 90-degree convex and concave corners
    g = meander(width=0.2, gap=0.2, legs=8, length=3.0)
    assert check(make_outlines({1: g}, rotate_deg=45.0), RULES).ok


def test_lead_joining_at_75_degrees_is_a_corner_but_a_20_degree_wedge_is_not():
    from shapely.geometry import LineString

    trace = box(0, 0, 6, 0.25)

    def lead(angle_deg):
        a = np.radians(angle_deg)
        line = LineString([(3, 0.125), (3 + 3 * np.cos(a), 0.125 + 3 * np.sin(a))])
        return line.buffer(0.125, cap_style="flat")

    assert check(make_outlines({1: trace.union(lead(75.0))}), RULES).ok
    res = check(make_outlines({1: trace.union(lead(20.0))}), RULES)
    assert {f.rule for f in res.findings} == {"MIN_GAP"}  # the sharp wedge of space cannot be etched


def test_one_finding_per_defect():
    g, _ = narrowed_trace(x0=1.0, x1=2.0)
    g = g.difference(box(6.0, 0.18, 7.5, 1))  # a second notch further along
    res = check(make_outlines({1: g}), RULES)
    xs = sorted(f.at[0] for f in res.findings)
    assert len(xs) == 2 and 1 <= xs[0] <= 2 and 6 <= xs[1] <= 7.5


def test_uniformly_thin_trace_is_one_finding():
    res = check(make_outlines({1: meander(width=0.199, gap=0.3, legs=6)}), RULES)
    (f,) = only(res, "MIN_WIDTH")
    assert_allclose(f.measured, 0.199, atol=ATOL)


def test_narrow_stretch_continuing_round_a_corner_is_one_finding():
    # an L-shaped trace 1 um too narrow along both arms: the offending
    # stretch runs from one edge onto the next, so it is one place
    g = box(0, 0, 5, 0.199).union(box(4.801, 0, 5, 5))
    (f,) = only(check(make_outlines({1: g}), RULES), "MIN_WIDTH")
    assert_allclose(f.measured, 0.199, atol=ATOL)


def test_ring_distance_reads_chords_as_arcs_but_not_flats():
    # a 64-gon of radius 1 (sag 1.2e-3): within a 2e-3 tolerance it is the circle
    a = np.linspace(0, 2 * np.pi, 65)
    ring = np.column_stack([np.cos(a), np.sin(a)])
    assert_allclose(ring_distance(np.zeros(2), ring, 2e-3), 1.0, rtol=1e-12)
    # with a tolerance below the sag the chords count as straight
    assert_allclose(ring_distance(np.zeros(2), ring, 1e-4), np.cos(np.pi / 64), rtol=1e-12)


def test_findings_lie_where_opening_and_closing_change_the_copper():
    # A second route: morphological opening buffer(-r).buffer(+r) removes
    # copper narrower than 2r, closing buffer(+r).buffer(-r) fills gaps
    # narrower than 2r (GEOS buffers, r = (limit - 0.1 um) / 2). Every
    # width finding must lie in copper the opening removes, every gap
    # finding in space the closing fills.
    from shapely import affinity
    from shapely.geometry import Point

    notch, _ = narrowed_trace()
    bulge, _ = bulged_pair()
    g = notch.union(affinity.translate(bulge, 0, 2)).union(affinity.translate(meander(width=0.2, gap=0.2, legs=4, length=4), 0, 5))
    res = check(make_outlines({1: g}, n_layers=1), RULES)
    assert sorted(f.rule for f in res.findings) == ["MIN_GAP", "MIN_WIDTH"]
    r = (0.2 - LIMIT_TOL_MM) / 2
    removed = g.difference(g.buffer(-r, quad_segs=32).buffer(r, quad_segs=32))
    filled = g.buffer(r, quad_segs=32).buffer(-r, quad_segs=32).difference(g)
    for f in res.findings:
        region = removed if f.rule == "MIN_WIDTH" else filled
        assert region.distance(Point(f.at)) < 1e-6, f
