"""Spiral generators: pitch, circulation, connectivity and hole clearance.

Closed forms used here need no outside source: the distance between
parallel lines and the shoelace signed area.
"""

import math
import os

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from shapely.geometry import LineString, Point

from tracecoil import GeometryError, SpecError, spiral
from tracecoil.generators import max_turns
from tracecoil.generators.tracks import outline_for
from tracecoil.layout import polyline_signed_area
from tracecoil.outline import outlines


def other_turn_distances(points, exclude_mm, step_mm):
    """Distance from samples along a polyline to the part of the same
    polyline more than ``exclude_mm`` away in arc length (vectorised:
    every sample against every segment, segments near the sample masked)."""
    p = np.asarray(points, float)
    seg = np.diff(p, axis=0)
    seg_len = np.hypot(*seg.T)
    cum = np.concatenate([[0.0], np.cumsum(seg_len)])
    total = cum[-1]
    s = np.arange(exclude_mm, total - exclude_mm, step_mm)
    if len(s) == 0:
        return s
    k = np.clip(np.searchsorted(cum, s, side="right") - 1, 0, len(seg) - 1)
    q = p[k] + seg[k] * ((s - cum[k]) / seg_len[k])[:, None]
    out = np.empty(len(s))
    for i0 in range(0, len(s), 256):
        qq = q[i0 : i0 + 256, None, :]
        t = np.clip(np.einsum("ijk,jk->ij", qq - p[:-1], seg) / (seg_len**2), 0.0, 1.0)
        d = np.hypot(*(qq - (p[:-1] + t[..., None] * seg)).transpose(2, 0, 1))
        # segments wholly within the window around the sample are the same turn
        near = (cum[1:][None, :] > s[i0 : i0 + 256, None] - exclude_mm) & (cum[:-1][None, :] < s[i0 : i0 + 256, None] + exclude_mm)
        d[near] = np.inf
        out[i0 : i0 + 256] = d.min(axis=1)
    return out


def inner_perimeter(coil):
    spec = coil.spec
    r_in = spec.outer_mm / 2 - spec.width_mm / 2 - spec.pitch_mm * (spec.turns + 0.25)
    return 2 * r_in


def check_pitch(coil, exact):
    p = coil.spec.pitch_mm
    # circles: vertices of all turns share rays and the radial pitch is
    # stretched by 1/cos(step/2), so chords keep the full pitch; treated
    # corners are arcs sampled within the chord tolerance
    slack = 2 * coil.spec.tolerance_mm if coil.spec.corner != "sharp" else 0.0
    for t in coil.winding_traces():
        d = other_turn_distances(t.points_mm, inner_perimeter(coil), p / 3)
        if len(d) == 0:
            continue
        assert d.min() >= p - slack - 1e-9, (d.min(), p)
        if exact:  # straight sides: parallel lines exactly one pitch apart
            assert_allclose(np.median(d), p, rtol=1e-9)


@pytest.mark.parametrize("shape, extra", [("square", {}), ("hexagon", {}), ("octagon", {}), ("polygon", {"sides": 5}), ("rectangle", {"outer_height_mm": 12})])
def test_polygon_pitch_is_exact(shape, extra):
    c = spiral(shape=shape, outer_mm=20, turns=6, width_mm=0.25, gap_mm=0.2, **extra)
    check_pitch(c, exact=True)


def test_circle_pitch_within_chord_error():
    c = spiral(shape="circle", outer_mm=20, turns=8, width_mm=0.2, gap_mm=0.2, tolerance_mm=0.005)
    check_pitch(c, exact=False)
    # Archimedean spiral: the radius falls by one radial pitch per turn; the
    # radial pitch is the design pitch stretched just enough that chords
    # keep the full design pitch (a fraction of a percent here)
    pts = c.winding_traces()[0].points_mm
    r = np.hypot(*pts.T)
    phi = np.unwrap(np.arctan2(pts[:, 1], pts[:, 0]))
    step = np.diff(phi)[:-1]
    assert_allclose(step, step[0], rtol=1e-9)
    assert_allclose(2 * np.pi / step[0], round(2 * np.pi / step[0]), rtol=1e-9)  # whole steps per turn
    pitch_r = (r[0] - r[-2]) / ((phi[-2] - phi[0]) / (2 * np.pi))
    # every vertex but the end (which sits on the last whole chord) is on the spiral
    assert_allclose((r[0] - r)[:-1], (pitch_r * (phi - phi[0]) / (2 * np.pi))[:-1], atol=1e-9)
    assert 1.0 < pitch_r / c.spec.pitch_mm < 1.005


def test_chord_tolerance_controls_sampling():
    coarse = spiral(shape="circle", outer_mm=20, turns=3, width_mm=0.2, gap_mm=0.2, tolerance_mm=0.05)
    fine = spiral(shape="circle", outer_mm=20, turns=3, width_mm=0.2, gap_mm=0.2, tolerance_mm=0.001)
    pc, pf = coarse.winding_traces()[0].points_mm, fine.winding_traces()[0].points_mm
    assert len(pf) > 5 * len(pc)
    # sagitta of every chord of the coarse polyline is within its tolerance
    r = np.hypot(*pc.T)
    step = np.abs(np.diff(np.unwrap(np.arctan2(pc[:, 1], pc[:, 0]))))
    assert (r[:-1] * (1 - np.cos(step / 2))).max() <= 0.05 + 1e-12


def test_outer_size_is_measured_at_the_copper_edge():
    for shape in ("circle", "square", "hexagon"):
        c = spiral(shape=shape, outer_mm=18, turns=4, width_mm=0.3, gap_mm=0.2)
        cu = shapely.union_all([outlines(c).copper[1]])
        winding = shapely.LineString(c.winding_traces()[0].points_mm).buffer(0.15, join_style="mitre")
        xmin, ymin, xmax, ymax = winding.bounds
        assert_allclose(xmax, 9.0, atol=0.01 if shape == "circle" else 1e-9)
        assert cu.is_valid


def test_round_and_chamfer_corners_keep_the_gap():
    for corner in ("round", "chamfer"):
        c = spiral(shape="square", outer_mm=16, turns=5, width_mm=0.2, gap_mm=0.2, corner=corner, corner_mm=0.5, tolerance_mm=0.002)
        check_pitch(c, exact=False)
        sharp = spiral(shape="square", outer_mm=16, turns=5, width_mm=0.2, gap_mm=0.2)
        assert c.winding_traces()[0].length_mm < sharp.winding_traces()[0].length_mm


def test_corner_too_large_is_explained():
    with pytest.raises(GeometryError, match="corner_mm"):
        spiral(shape="square", outer_mm=10, turns=8, width_mm=0.2, gap_mm=0.2, corner="round", corner_mm=2.0)


def check_connected(coil):
    """The current path is one continuous chain from terminal A to B."""
    a, b = coil.terminals
    known = [np.array([a.x_mm, a.y_mm])]
    pos = known[0]
    for step in coil.path:
        if step.kind == "trace":
            start = coil.traces[step.index].points_mm[0]
            assert min(np.hypot(*(start - k)) for k in known + [pos]) < 1e-9
            pos = coil.traces[step.index].points_mm[-1]
        else:
            v = coil.vias[step.index]
            assert min(np.hypot(*(v.xy - k)) for k in known + [pos]) < 1e-9
            assert step.from_layer in v.layers and step.to_layer in v.layers
        known.append(pos)
        known.extend(v.xy for v in coil.vias if np.hypot(*(v.xy - pos)) < 1e-9)
    assert np.hypot(pos[0] - b.x_mm, pos[1] - b.y_mm) < 1e-9


def check_circulation(coil):
    sign = 1 if coil.spec.direction == "ccw" else -1
    for t in coil.winding_traces():
        assert sign * polyline_signed_area(t.points_mm) > 0


def check_holes_clear(coil):
    """Plated holes keep gap_mm from copper they do not connect, on every
    layer; separate copper pieces on a layer keep gap_mm from each other."""
    o = outlines(coil)
    gap = coil.spec.gap_mm
    for layer, cu in o.copper.items():
        pieces = list(cu.geoms)
        for i in range(len(pieces)):
            for j in range(i + 1, len(pieces)):
                assert pieces[i].distance(pieces[j]) >= gap - 1e-6, (layer, i, j)
    for v in coil.vias:
        for layer, cu in o.copper.items():
            if layer not in v.layers:
                assert Point(v.xy).distance(cu) >= v.pad_mm / 2 + gap - 1e-6, (v, layer)


def check_terminals_outside(coil):
    """Terminal pads lie clear outside the outer copper edge (or, for a coil
    left to end at its centre, inside the hollow)."""
    s = coil.spec
    edge = outline_for(s.shape, s.outer_mm, outer_height_mm=s.outer_height_mm, sides=s.sides)
    ends_inside = s.return_lead == "none" and (s.layers % 2 == 1 or s.wiring == "parallel")
    for name, t in zip("AB", coil.terminals):
        r = math.hypot(t.x_mm, t.y_mm)
        r_edge = float(edge.radius_at(math.atan2(t.y_mm, t.x_mm)))
        if name == "B" and ends_inside:
            assert r < r_edge - s.turns * s.pitch_mm
        else:
            assert r > r_edge + s.gap_mm


@pytest.mark.parametrize(
    "kw",
    [
        dict(layers=1),
        dict(layers=2),
        dict(layers=3, board={"layers": 4}),
        dict(layers=4, board={"layers": 4}),
        dict(layers=2, wiring="parallel"),
        dict(layers=1, return_lead="none"),
        dict(layers=2, direction="cw", start_angle_deg=45),
    ],
)
def test_assembly(kw):
    c = spiral(shape="circle", outer_mm=20, turns=6, width_mm=0.2, gap_mm=0.2, **kw)
    check_connected(c)
    check_circulation(c)
    check_holes_clear(c)
    check_terminals_outside(c)
    assert all(g.is_valid for g in outlines(c).copper.values())


def test_series_layers_alternate_direction_of_travel():
    c = spiral(shape="square", outer_mm=20, turns=5, width_mm=0.2, gap_mm=0.2, layers=4, board={"layers": 4})
    r = [np.hypot(*t.points_mm[[0, -1]].T) for t in c.winding_traces()]
    inward = [ri[0] > ri[1] for ri in r]
    assert inward == [True, False, True, False]


def test_parallel_layers_share_current():
    c = spiral(shape="square", outer_mm=20, turns=5, width_mm=0.2, gap_mm=0.2, layers=2, wiring="parallel")
    fr = [s.fraction for s in c.path if s.kind == "trace" and c.traces[s.index].role == "winding"]
    assert fr == [0.5, 0.5]


def test_placed_moves_everything():
    c = spiral(shape="square", outer_mm=10, turns=3, width_mm=0.2, gap_mm=0.2)
    m = c.placed(offset_mm=(5, -2, 1.0), rotation_deg=90)
    assert_allclose(m.traces[1].points_mm[0], [5 - c.traces[1].points_mm[0][1], -2 + c.traces[1].points_mm[0][0]])
    assert m.z_mm(1) == pytest.approx(c.z_mm(1) + 1.0)
    f = c.placed(flip=True)
    assert f.z_mm(1) == pytest.approx(-c.z_mm(1))
    # flipping mirrors the winding, so seen from +z the circulation reverses
    assert np.sign(polyline_signed_area(f.winding_traces()[0].points_mm)) == -np.sign(polyline_signed_area(c.winding_traces()[0].points_mm))


def test_max_turns_is_the_boundary():
    from tracecoil.design import CoilSpec

    spec = CoilSpec(shape="circle", outer_mm=10, turns=1, width_mm=0.2, gap_mm=0.2)
    n = max_turns(spec)
    spiral(shape="circle", outer_mm=10, turns=n, width_mm=0.2, gap_mm=0.2)
    with pytest.raises(GeometryError):
        spiral(shape="circle", outer_mm=10, turns=n + 0.125, width_mm=0.2, gap_mm=0.2)


designs = st.fixed_dictionaries(
    {
        "shape": st.sampled_from(["circle", "square", "hexagon", "octagon", "rectangle", "polygon"]),
        "outer_mm": st.floats(8, 40),
        "width_mm": st.floats(0.1, 0.5),
        "gap_mm": st.floats(0.1, 0.5),
        "turns_frac": st.floats(0.1, 0.95),
        "layers": st.sampled_from([1, 2, 3, 4]),
        "wiring": st.sampled_from(["series", "parallel"]),
        "direction": st.sampled_from(["ccw", "cw"]),
        "start_angle_deg": st.floats(-180, 180),
    }
)


@settings(max_examples=int(os.environ.get("TRACECOIL_EXAMPLES", 40)), deadline=None, derandomize=True, database=None, suppress_health_check=[HealthCheck.too_slow])
@given(designs)
def test_random_designs_are_sound(d):
    turns_frac = d.pop("turns_frac")
    extra = {}
    if d["shape"] == "rectangle":
        extra["outer_height_mm"] = d["outer_mm"] * 0.6
    if d["shape"] == "polygon":
        extra["sides"] = 5
    pitch = d["width_mm"] + d["gap_mm"]
    room = min(d["outer_mm"], extra.get("outer_height_mm", d["outer_mm"])) / 2
    d["turns"] = max(0.5, round(turns_frac * room / pitch * 4) / 4)
    try:
        c = spiral(board={"layers": 6}, tolerance_mm=0.01, **d, **extra)
    except GeometryError:
        return  # a design that does not fit is rejected with a message (tested elsewhere)
    check_connected(c)
    check_circulation(c)
    check_holes_clear(c)
    check_terminals_outside(c)
    check_pitch(c, exact=False)
    assert all(g.is_valid for g in outlines(c).copper.values())


def test_custom_paths_become_a_coil(tmp_path):
    from tracecoil import custom_coil, load_design
    from tracecoil.generators import coil_from_design

    # a figure-eight style path on two layers (invented example)
    pts1 = [[0, 0], [8, 0], [8, 8], [2, 8], [2, 2]]
    pts2 = [[2, 2], [6, 2], [6, 6], [0, 6]]
    c = custom_coil([(1, pts1), (2, pts2)], width_mm=0.3)
    check_connected(c)
    assert [v.role for v in c.vias] == ["terminal", "via", "terminal"]
    assert c.traces[0].length_mm == pytest.approx(8 + 8 + 6 + 6)
    f = tmp_path / "c.toml"
    f.write_text('[coil]\nshape = "custom"\nwidth_mm = 0.3\npaths = [{layer = 1, points = [[0, 0], [8, 0], [8, 8], [2, 8], [2, 2]]}, {layer = 2, points = [[2, 2], [6, 2], [6, 6], [0, 6]]}]\n')
    c2 = coil_from_design(load_design(f))
    assert_allclose(c2.traces[1].points_mm, c.traces[1].points_mm)


def test_custom_paths_must_meet():
    from tracecoil import custom_coil

    with pytest.raises(GeometryError, match=r"paths\[1\] starts at"):
        custom_coil([(1, [[0, 0], [5, 0]]), (2, [[5, 1], [0, 1]])], width_mm=0.2)
    with pytest.raises(SpecError, match="at least 2 points"):
        custom_coil([(1, [[0, 0]])], width_mm=0.2)


def test_start_just_short_of_a_corner_keeps_the_direction():
    # found by the property test: a start 0.6 degrees before a rectangle's
    # corner lies beyond the next side (a pitch/4 further in); the winding
    # must still run counter-clockwise for the half turn asked for
    c = spiral(shape="rectangle", outer_mm=8, outer_height_mm=4.8, width_mm=0.25, gap_mm=0.125, turns=0.5, start_angle_deg=149)
    check_circulation(c)
    pts = c.winding_traces()[0].points_mm
    phi = np.unwrap(np.arctan2(pts[:, 1], pts[:, 0]))
    assert_allclose(phi[-1] - phi[0], np.pi, rtol=1e-9)
    assert np.all(np.diff(phi) > 0)


def test_outer_pads_clear_every_layer_when_a_winding_starts_inside():
    # found by the property test: a start just short of a corner begins on
    # the next side, a quarter pitch inside the outer edge; terminal A must
    # still clear the other layer's outermost copper by the gap
    c = spiral(shape="rectangle", outer_mm=8, outer_height_mm=4.8, width_mm=0.25, gap_mm=0.140625, turns=3, layers=2, direction="cw", start_angle_deg=150, board={"layers": 2})
    check_holes_clear(c)
    check_terminals_outside(c)
