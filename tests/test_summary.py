"""Geometry summary against closed forms.

* Circular spiral: the generator's centreline follows the Archimedean
  spiral r = a*theta (a = pitch / 2 pi), whose arc length from theta0 to
  theta1 is L = (a/2) [theta sqrt(1 + theta^2) + asinh(theta)] evaluated
  between the two angles -- the polar arc-length integral
  L = int sqrt(r^2 + (dr/dtheta)^2) dtheta = a int sqrt(1 + theta^2) dtheta,
  as in any calculus text (e.g. G. B. Thomas, *Calculus*, the arc length in
  polar coordinates; from memory). A second route, scipy quadrature of the
  same integral, confirms the closed form in the test.
* Square and rectangular spirals: the centreline is a chain of straight
  sides; side k lies on the line at distance d_k = D_k - pitch*k/4 from the
  centre, so a full side between its two corners is d_{k-1} + d_{k+1} long
  (perpendicular neighbours), and the total is an exact finite sum.
* Turns, d_out and d_in of a square spiral against the definitions of
  S. S. Mohan et al., "Simple accurate expressions for planar spiral
  inductances", IEEE JSSC 34(10), 1999 (from memory):
  d_in = d_out - 2 n w - 2 (n - 1) s, rho = (d_out - d_in)/(d_out + d_in).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose
from scipy.integrate import quad

import tracecoil
from tracecoil.generators.tracks import circle_sampling
from tracecoil.export.summary import fill_ratio, summary, winding_sizes, winding_turns
from tracecoil.outline import outlines


def archimedes_length(r_outer: float, r_inner: float, pitch: float) -> float:
    """Arc length of r = a*theta between radii r_inner and r_outer."""
    a = pitch / (2 * np.pi)

    def F(t):
        return a / 2 * (t * np.sqrt(1 + t * t) + np.arcsinh(t))

    return F(r_outer / a) - F(r_inner / a)


def test_archimedes_closed_form_matches_quadrature():
    # independent route for the reference itself
    a = 0.5 / (2 * np.pi)
    num, _ = quad(lambda t: a * np.sqrt(1 + t * t), 10 / a, 20 / a, limit=500)
    assert_allclose(archimedes_length(20, 10, 0.5), num, rtol=1e-10)  # quadrature of a smooth integrand


@pytest.mark.parametrize("tol", [0.01, 0.0025])
def test_circular_spiral_length_vs_archimedes(tol):
    w, s, outer, turns = 0.25, 0.25, 40.0, 12
    coil = tracecoil.spiral(shape="circle", outer_mm=outer, turns=turns, width_mm=w, gap_mm=s, tolerance_mm=tol)
    summ = summary(coil)
    n = turns + coil.extra_turns[0]  # the generator may add a fraction of a turn for via room
    r0 = outer / 2 - w / 2
    # the radial pitch of a sampled circle is the design pitch stretched a
    # little so chords keep the full gap (tracks.circle_sampling)
    pitch = circle_sampling(r0, w + s, tol, turns + 0.25)[1]
    r1 = r0 - pitch * n
    exact = archimedes_length(r0, r1, pitch)
    got = summ["layers"][0]["winding_length_mm"]
    deficit = (exact - got) / exact
    # Chords are inscribed: shorter than the curve. A chord of half-angle x
    # on radius r sags r(1 - cos x) <= tol and is shorter than its arc by a
    # relative 1 - sin(x)/x ~ x^2/6 <= tol / (3 r): the chord-tolerance error.
    assert deficit > 0
    assert deficit <= tol / (3 * r1)
    assert_allclose(got, exact, rtol=tol / (3 * r1))


def test_circular_spiral_length_converges():
    w, s = 0.2, 0.3
    errs = []
    for tol in (0.02, 0.005):
        coil = tracecoil.spiral(shape="circle", outer_mm=30, turns=10, width_mm=w, gap_mm=s, tolerance_mm=tol)
        n = 10 + coil.extra_turns[0]
        pitch = circle_sampling(15 - w / 2, w + s, tol, 10 + 0.25)[1]
        exact = archimedes_length(15 - w / 2, 15 - w / 2 - pitch * n, pitch)
        errs.append(exact - summary(coil)["layers"][0]["winding_length_mm"])
    # error ~ tolerance: a quarter of the tolerance gives about a quarter of the error
    assert_allclose(errs[0] / errs[1], 4.0, rtol=0.1)


def rect_spiral_length(half_sizes, pitch, turns):
    """Exact centreline length of a rectangular spiral starting at polar
    angle 0 on the +x side and winding ``turns`` (possibly fractional)
    counter-clockwise; ``half_sizes`` = distances of the +x, +y, -x, -y
    side lines of the outermost track from the centre."""
    base = np.asarray(half_sizes, float)

    def d(k):
        return base[k % 4] - pitch * k / 4

    phi = 2 * np.pi * turns
    k_end = 0
    while (k_end * np.pi / 2 + math.atan2(d(k_end + 1), d(k_end))) < phi:
        k_end += 1  # the end lies on side k_end, before its corner with k_end + 1
    t_end = d(k_end) * math.tan(phi - k_end * np.pi / 2)  # along side k_end from its foot point
    if k_end == 0:
        return t_end
    return d(1) + sum(d(k - 1) + d(k + 1) for k in range(1, k_end)) + d(k_end - 1) + t_end


@pytest.mark.parametrize("direction", ["ccw", "cw"])
@pytest.mark.parametrize("shape, height", [("square", None), ("rectangle", 13.0)])
def test_square_and_rectangle_length_exact(shape, height, direction):
    w, s, outer, turns = 0.3, 0.2, 20.0, 6
    kw = {"outer_height_mm": height} if height else {}
    coil = tracecoil.spiral(shape=shape, outer_mm=outer, turns=turns, width_mm=w, gap_mm=s, direction=direction, **kw)
    h = height or outer
    half = np.array([outer, h, outer, h]) / 2 - w / 2
    # clockwise is the mirror image in the x axis: same side lengths
    exact = rect_spiral_length(half, w + s, turns + coil.extra_turns[0])
    got = summary(coil)["layers"][0]["winding_length_mm"]
    assert_allclose(got, exact, rtol=1e-12)  # straight sides: exact up to rounding


DESIGNS = {
    "circle1": dict(shape="circle", outer_mm=20, turns=6, width_mm=0.25, gap_mm=0.25),
    "square2": dict(shape="square", outer_mm=20, turns=5, width_mm=0.3, gap_mm=0.3, layers=2),
    "hex3": dict(shape="hexagon", outer_mm=24, turns=4.5, width_mm=0.3, gap_mm=0.2, layers=3, board={"layers": 4}),
    "oct_par": dict(shape="octagon", outer_mm=24, turns=4, width_mm=0.3, gap_mm=0.2, layers=2, wiring="parallel", board={"layers": 4}),
    "circle4cw": dict(shape="circle", outer_mm=30, turns=7.25, width_mm=0.2, gap_mm=0.2, layers=4, direction="cw", board={"layers": 4}),
}


@pytest.fixture(scope="module", params=sorted(DESIGNS))
def built(request):
    kw = dict(DESIGNS[request.param])
    coil = tracecoil.spiral(**kw)
    return coil, summary(coil)


def test_turns_match_spec(built):
    coil, summ = built
    spec = coil.spec
    want = [spec.turns + e for e in coil.extra_turns]
    # measured angle / 2 pi against the generator's own bookkeeping
    assert_allclose(summ["turns_per_winding"], want, rtol=1e-9)
    assert len(summ["turns_per_winding"]) == spec.layers
    assert all(0 <= e < 0.25 for e in coil.extra_turns)


def test_every_winding_circulates_as_specified(built):
    coil, summ = built
    dirs = [l["direction"] for l in summ["layers"] if l["direction"] is not None]
    assert dirs == [coil.spec.direction] * coil.spec.layers


def test_counts_lengths_and_areas(built):
    coil, summ = built
    spec = coil.spec
    outl = outlines(coil, tolerance_mm=spec.tolerance_mm)
    json.dumps(summ, allow_nan=False)  # strict JSON
    # vias: one per layer change of a series winding, plus the hollow via of
    # a return lead when the winding ends at the centre (parallel: one at
    # the centre joining all layers to the return lead)
    ends_inside = spec.wiring == "parallel" or spec.layers % 2 == 1
    layer_changes = spec.layers - 1 if spec.wiring == "series" else 0
    assert summ["via_count"] == layer_changes + (1 if ends_inside else 0)
    assert summ["terminal_pad_count"] == 2
    assert_allclose(summ["total_trace_length_mm"], sum(l["trace_length_mm"] for l in summ["layers"]), rtol=1e-12)
    assert_allclose(summ["total_winding_length_mm"], sum(l["winding_length_mm"] for l in summ["layers"]), rtol=1e-12)
    assert summ["total_winding_length_mm"] < summ["total_trace_length_mm"]
    for l in summ["layers"]:
        assert_allclose(l["copper_area_mm2"], outl.copper[l["layer"]].area, rtol=1e-12)
    # terminals sit on terminal pads (drill centres)
    for name, (x, y) in summ["terminals"].items():
        assert np.min(np.hypot(outl.drills[:, 0] - x, outl.drills[:, 1] - y)) < 1e-9, name
    # bounds: those of all copper (mitred corners and pads included); the
    # layout's centreline-based box lies within a trace width of them
    xb = np.array(shapely.union_all(list(outl.copper.values())).bounds)
    assert_allclose(summ["bounds_mm"], xb, rtol=1e-12)
    lb = np.array(coil.bounds_mm())
    assert np.all(np.abs(lb - xb) <= spec.width_mm)


def test_sizes_of_a_square_spiral_follow_mohan():
    w, s, outer, n = 0.3, 0.2, 20.0, 6
    coil = tracecoil.spiral(shape="square", outer_mm=outer, turns=n, width_mm=w, gap_mm=s)
    summ = summary(coil)
    d_in = outer - 2 * n * w - 2 * (n - 1) * s
    top = summ["layers"][0]
    assert_allclose(top["outer_mm"], outer, rtol=1e-12)  # straight sides: exact
    assert_allclose(top["inner_mm"], d_in, rtol=1e-12)
    assert_allclose(summ["fill_ratio"], (outer - d_in) / (outer + d_in), rtol=1e-12)


def test_sizes_of_a_circular_spiral():
    w, s, outer, n, tol = 0.25, 0.25, 30.0, 8, 0.01
    coil = tracecoil.spiral(shape="circle", outer_mm=outer, turns=n, width_mm=w, gap_mm=s, tolerance_mm=tol)
    summ = summary(coil)
    e = coil.extra_turns[0]
    d_in = outer - 2 * w - 2 * (w + s) * (n + e - 1)
    # segment lines lie up to the chord sag (tol) plus the radius drop along
    # a chord (< pitch * step / 2 pi, step < 0.1 rad here) inside the curve
    slack = 2 * (tol + (w + s) * 0.1 / (2 * np.pi))
    assert outer - slack <= summ["outer_mm"] <= outer
    assert d_in - slack <= summ["inner_mm"] <= d_in


def test_size_helpers_on_a_sampled_spiral():
    t = np.linspace(0, 3, 30001)
    r = 10 - 0.5 * t
    pts = np.stack([r * np.cos(2 * np.pi * t), r * np.sin(2 * np.pi * t)], axis=1)
    assert_allclose(winding_turns(pts), 3.0, rtol=1e-12)
    assert_allclose(winding_turns(pts[::-1]), 3.0, rtol=1e-12)
    d_out, d_in = winding_sizes(pts, 0.3)
    # Segment lines approach the tangents, at distance r^2/sqrt(r^2 + a^2)
    # from the centre (pedal equation of a polar curve, a = dr/dtheta);
    # the widest points are r = 10 (outermost) and r = 9 (one turn from
    # the inner end). 10000 chords a turn: sag ~ 5e-7 mm, and the radius
    # drops 5e-5 mm along a chord, hence atol 1.5e-4 on a diameter.
    a = 0.5 / (2 * np.pi)
    pedal = lambda r: r * r / np.sqrt(r * r + a * a)  # noqa: E731
    assert_allclose([d_out, d_in], [2 * pedal(10) + 0.3, 2 * pedal(9) - 0.3], atol=1.5e-4)
    assert_allclose(winding_sizes(pts[::-1], 0.3), [d_out, d_in], rtol=1e-12)
    assert_allclose(fill_ratio(20.3, 17.7), 2.6 / 38.0, rtol=1e-15)


@pytest.mark.parametrize("corner", ["round", "chamfer"])
def test_sizes_across_flats_ignore_corner_treatment(corner):
    # Rounded or chamfered corners must not change d_out and d_in measured
    # across flats: the same numbers as the sharp spiral (Mohan et al. 1999
    # definitions, as in test_sizes_of_a_square_spiral_follow_mohan).
    kw = dict(shape="square", outer_mm=10.0, turns=9.5, width_mm=0.15, gap_mm=0.15)
    sharp = summary(tracecoil.spiral(**kw))["layers"][0]
    treated = summary(tracecoil.spiral(corner=corner, corner_mm=0.3, **kw))["layers"][0]
    assert_allclose([treated["outer_mm"], treated["inner_mm"]], [sharp["outer_mm"], sharp["inner_mm"]], rtol=1e-12)
    assert_allclose(treated["outer_mm"], 10.0, rtol=1e-12)
