"""Checks of the magnetostatic kernels against results from outside the project.

Each test names its reference. Tolerances: where both sides are exact
formulas the tolerance is a small multiple of the rounding error of the
slower-converging side; otherwise it is explained beside the check.
"""

from __future__ import annotations

import tracemalloc

import magpylib as magpy
import mpmath as mp
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad

from tracecoil.physics import kernels as K

RNG = np.random.default_rng(20240601)


def regular_polygon(n, radius, z=0.0):
    t = np.linspace(0.0, 2 * np.pi, n + 1)
    return np.column_stack([radius * np.cos(t), radius * np.sin(t), np.full(n + 1, z)])


# --------------------------------------------------------------------------
# Biot-Savart
# --------------------------------------------------------------------------

def finite_wire_field(p, a, b, current=1.0):
    """Field of a finite straight wire in its textbook angle form:
    |B| = mu0 I / (4 pi rho) (cos t1 - cos t2), direction u x rho_hat
    (J. D. Jackson, Classical Electrodynamics, 3rd ed., 1999, from memory)."""
    u = (b - a) / np.linalg.norm(b - a)
    s1 = np.dot(p - a, u)
    s2 = np.dot(p - b, u)
    foot = a + s1 * u
    rho_vec = p - foot
    rho = np.linalg.norm(rho_vec)
    cos1 = s1 / np.hypot(s1, rho)
    cos2 = s2 / np.hypot(s2, rho)
    return K.MU0 * current / (4 * np.pi * rho) * (cos1 - cos2) * np.cross(u, rho_vec / rho)


def test_segment_field_matches_angle_form_of_a_finite_wire():
    # Exact formula both ways; agreement to rounding (1e-12 relative).
    a, b = np.array([0.1, -0.2, 0.05]), np.array([0.4, 0.3, -0.1])
    pts = RNG.normal(size=(50, 3)) * 0.5
    got = K.segment_field(pts, a[None], b[None], np.array([2.0]))
    ref = np.array([finite_wire_field(p, a, b, 2.0) for p in pts])
    assert_allclose(got, ref, rtol=1e-11, atol=1e-12 * np.abs(ref).max())


def test_segment_field_on_axis_of_regular_polygon_is_exact():
    # On the axis of a regular N-gon (circumradius R, apothem a, half side h)
    # each side contributes B_z = mu0 I 2 h a / (4 pi d^2 sqrt(h^2 + d^2)),
    # d^2 = a^2 + z^2: the finite-wire law summed by symmetry. Exact -> 1e-12.
    n, R = 12, 0.01
    a, h = R * np.cos(np.pi / n), R * np.sin(np.pi / n)
    z = np.array([0.0, 0.003, -0.02, 0.1])
    pts = np.column_stack([np.zeros_like(z), np.zeros_like(z), z])
    poly = regular_polygon(n, R)
    B = K.segment_field(pts, poly[:-1], poly[1:], np.ones(n))
    d2 = a * a + z * z
    ref = n * K.MU0 * 2 * h * a / (4 * np.pi * d2 * np.sqrt(h * h + d2))
    assert_allclose(B[:, 2], ref, rtol=1e-12)
    assert_allclose(B[:, :2], 0.0, atol=1e-12 * ref.max())


def test_fine_polygon_approaches_circular_loop_on_axis():
    # Circular loop on axis: Bz = mu0 I R^2 / (2 (R^2 + z^2)^1.5) (Jackson
    # 1999). A 4096-gon differs by O((pi/N)^2) ~ 6e-7: tolerance 2e-6.
    R = 0.01
    poly = regular_polygon(4096, R)
    z = np.linspace(-0.03, 0.03, 7)
    pts = np.column_stack([0 * z, 0 * z, z])
    B = K.segment_field(pts, poly[:-1], poly[1:], np.ones(4096))
    ref = K.MU0 * R * R / (2 * (R * R + z * z) ** 1.5)
    assert_allclose(B[:, 2], ref, rtol=2e-6)


def test_segment_field_matches_magpylib_polyline():
    # magpylib 6 (M. Ortner, L. Bandeira, "Magpylib: A free Python package for
    # magnetic field computation", SoftwareX 11, 2020): exact finite-segment
    # field too, so agreement to 1e-9 relative at points off the wires.
    poly = np.vstack([regular_polygon(60, 0.01), regular_polygon(60, 0.006, z=-0.0015)[::-1]])
    src = magpy.current.Polyline(current=1.3, vertices=poly)
    pts = RNG.normal(size=(400, 3)) * 0.012
    ref = src.getB(pts)
    got = K.segment_field(pts, poly[:-1], poly[1:], np.full(len(poly) - 1, 1.3))
    err = np.linalg.norm(got - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert err.max() < 1e-9


def test_segment_field_random_segments_match_magpylib():
    # Unconnected random segments (a sum of exact per-segment fields both
    # ways): 1e-9 relative, as above.
    a = RNG.normal(size=(30, 3))
    b = a + RNG.normal(size=(30, 3)) * 0.3
    cur = RNG.uniform(-2, 2, size=30)
    pts = RNG.normal(size=(200, 3)) * 1.5
    ref = np.zeros((200, 3))
    for s, e, i in zip(a, b, cur):
        ref += K.MU0 * magpy.core.current_polyline_Hfield(pts, np.tile(s, (200, 1)), np.tile(e, (200, 1)), np.full(200, i))
    got = K.segment_field(pts, a, b, cur)
    err = np.linalg.norm(got - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert err.max() < 1e-9


def test_segment_field_on_the_line():
    # Documented behaviour: on the segment's own line outside it the exact
    # field is zero; on the segment (singular) the kernel returns zero.
    a, b = np.array([[0.0, 0, 0]]), np.array([[1.0, 0, 0]])
    pts = np.array([[2.0, 0, 0], [-0.5, 0, 0], [0.5, 0, 0], [0.0, 0, 0], [1.0, 0, 0]])
    B = K.segment_field(pts, a, b, np.array([1.0]))
    assert np.all(np.isfinite(B))
    assert_allclose(B, 0.0, atol=0)


def test_segment_field_far_points_keep_precision():
    # Far from a short segment the field tends to the current-element law
    # mu0 I (dl x r) / (4 pi r^3) with relative correction O((l/r)^2):
    # at r = 1e4 l that is 1e-8; a naive difference of cosines would lose
    # about 8 digits here.
    a, b = np.array([[0.0, 0, 0]]), np.array([[1e-3, 0, 0]])
    p = np.array([[5e-4, 10.0, 0.0]])
    B = K.segment_field(p, a, b, np.array([1.0]))
    r = p[0] - 0.5 * (a[0] + b[0])
    ref = K.MU0 / (4 * np.pi) * np.cross(b[0] - a[0], r) / np.linalg.norm(r) ** 3
    assert_allclose(B[0], ref, rtol=1e-8, atol=1e-30)


def test_segment_field_block_size_and_threads_do_not_change_result():
    poly = regular_polygon(700, 0.01)
    pts = RNG.normal(size=(300, 3)) * 0.01
    ref = K.segment_field(pts, poly[:-1], poly[1:], np.ones(700), block=1 << 18, threads=1)
    got = K.segment_field(pts, poly[:-1], poly[1:], np.ones(700), block=1000, threads=2)
    assert_allclose(got, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())


def test_segment_field_memory_is_bounded_by_the_block():
    # 20k points x 3k segments = 6e7 pairs: unchunked temporaries would take
    # ~5 GB; the blocked kernel keeps its scratch near 14 x 8 x block bytes
    # per thread. Allow 40 MB including outputs.
    poly = regular_polygon(3000, 0.01)
    pts = RNG.normal(size=(20000, 3)) * 0.01
    tracemalloc.start()
    K.segment_field(pts, poly[:-1], poly[1:], np.ones(3000), threads=2)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 40e6


# --------------------------------------------------------------------------
# Vector potential
# --------------------------------------------------------------------------

def test_segment_potential_matches_quadrature_of_coulomb_integral():
    # A = mu0 I / (4 pi) int dl / |p - l| (Jackson 1999), by adaptive
    # quadrature to 1e-13: agreement 1e-10.
    a, b = np.array([0.0, 0.0, 0.0]), np.array([0.01, 0.002, -0.003])
    L = b - a
    ln = np.linalg.norm(L)
    pts = RNG.normal(size=(20, 3)) * 0.01
    got = K.segment_potential(pts, a[None], b[None], np.array([1.0]))
    for p, g in zip(pts, got):
        s = quad(lambda t: 1.0 / np.linalg.norm(p - a - t * L / ln), 0, ln, epsabs=0, epsrel=1e-13, limit=200)[0]
        assert_allclose(g, K.MU0 / (4 * np.pi) * s * L / ln, rtol=1e-10)


def test_curl_of_potential_is_field():
    # B = curl A (definition): central differences with h = 1e-6 m on a
    # 1 cm coil have truncation ~1e-8 and rounding ~1e-7 relative.
    poly = regular_polygon(40, 0.01)
    p0 = np.array([0.004, -0.003, 0.005])
    h = 1e-6
    curl = np.zeros(3)
    grads = np.zeros((3, 3))  # grads[i, j] = dA_j / dx_i
    for i in range(3):
        e = np.zeros(3)
        e[i] = h
        Ap = K.segment_potential((p0 + e)[None], poly[:-1], poly[1:], np.ones(40))[0]
        Am = K.segment_potential((p0 - e)[None], poly[:-1], poly[1:], np.ones(40))[0]
        grads[i] = (Ap - Am) / (2 * h)
    curl = np.array([grads[1, 2] - grads[2, 1], grads[2, 0] - grads[0, 2], grads[0, 1] - grads[1, 0]])
    B = K.segment_field(p0[None], poly[:-1], poly[1:], np.ones(40))[0]
    assert_allclose(curl, B, rtol=1e-6, atol=1e-6 * np.linalg.norm(B))


def test_segment_potential_on_the_segment_returns_zero_and_outside_is_finite():
    a, b = np.array([[0.0, 0, 0]]), np.array([[1.0, 0, 0]])
    A = K.segment_potential(np.array([[0.5, 0, 0], [3.0, 0, 0]]), a, b, np.array([1.0]))
    assert_allclose(A[0], 0.0, atol=0)
    # on the extension: ln((R1 + R2 + l)/(R1 + R2 - l)) = ln(2) at x = 3
    assert_allclose(A[1, 0], K.MU0 / (4 * np.pi) * np.log((3 + 2 + 1) / (3 + 2 - 1)), rtol=1e-14)


# --------------------------------------------------------------------------
# Neumann mutual inductance of filaments
# --------------------------------------------------------------------------

def neumann_mp(a1, b1, a2, b2, breaks=(0.5,)):
    """Neumann's double integral by 30-digit quadrature: outer numerical,
    inner in closed form ln((R1 + R2 + l)/(R1 + R2 - l))."""
    mp.mp.dps = 30
    a1, b1, a2, b2 = ([mp.mpf(float(x)) for x in v] for v in (a1, b1, a2, b2))
    u = [y - x for x, y in zip(a1, b1)]
    v = [y - x for x, y in zip(a2, b2)]
    l2 = mp.sqrt(sum(x * x for x in v))

    def inner(s):
        P = [x + s * d for x, d in zip(a1, u)]
        R1 = mp.sqrt(sum((p - q) ** 2 for p, q in zip(P, a2)))
        R2 = mp.sqrt(sum((p - q) ** 2 for p, q in zip(P, b2)))
        return mp.log(abs((R1 + R2 + l2) / (R1 + R2 - l2)))

    dot = sum(x * y for x, y in zip(u, v)) / l2
    val = mp.quad(inner, [0, *breaks, 1])
    return float(K.MU0 / (4 * mp.pi) * dot * val)


CONFIGS = {
    "skew": ([0, 0, 0], [1, 0.2, 0], [0.3, 0.5, 0.2], [1.1, -0.3, 0.9], (0.5,)),
    "coplanar inclined": ([0, 0, 0], [1, 0, 0], [0.2, 0.3, 0], [1.0, 0.9, 0], (0.5,)),
    "touching at 30 deg": ([0, 0, 0], [1, 0, 0], [1, 0, 0], [1 + np.cos(0.5), np.sin(0.5), 0], (0.5,)),
    "crossing": ([0, 0, 0], [1, 0, 0], [0.5, -0.5, 0], [0.6, 0.5, 0], (0.55,)),
    "parallel offset": ([0, 0, 0], [1, 0, 0], [0.3, 0.1, 0.05], [1.5, 0.1, 0.05], (0.3,)),
    "antiparallel": ([0, 0, 0], [1, 0, 0], [1.5, 0.1, 0.05], [0.3, 0.1, 0.05], (0.3,)),
    "collinear with gap": ([0, 0, 0], [1, 0, 0], [1.2, 0, 0], [2.0, 0, 0], (0.5,)),
    "far apart": ([0, 0, 0], [1, 0, 0], [30, 20, 5], [31, 20.5, 5], (0.5,)),
    "long and short": ([0, 0, 0], [100, 0, 0], [50, 0.3, 0], [50.2, 0.5, 0.1], (0.5, 0.502)),
    "nearly parallel 1e-4": ([0, 0, 0], [1, 0, 0], [0.3, 0.1, 0], [1.3, 0.1001, 0], (0.3,)),
    "nearly parallel 1e-6": ([0, 0, 0], [1, 0, 0], [0.7, 0.01, 0], [1.7, 0.010001, 0], (0.7,)),
}


@pytest.mark.parametrize("name", list(CONFIGS))
def test_filament_mutual_matches_high_precision_quadrature(name):
    # Independent route: 30-digit quadrature of Neumann's formula. General
    # positions agree to ~1e-13 (tolerance 1e-10); nearly parallel pairs go
    # through the split-parallel route documented at 2e-8 (tolerance 1e-7).
    a1, b1, a2, b2, br = CONFIGS[name]
    got = K.filament_mutual(*(np.array([x], float) for x in (a1, b1, a2, b2)))[0]
    ref = neumann_mp(a1, b1, a2, b2, br)
    assert_allclose(got, ref, rtol=1e-7 if "nearly" in name else 1e-10)


def test_filament_mutual_touching_matches_grover_corner_formula():
    # Two filaments from a common point at angle theta (Grover 1946, from
    # memory): M = mu0/(2 pi) cos(theta) [l atanh(m/(l+R)) + m atanh(l/(m+R))],
    # R^2 = l^2 + m^2 - 2 l m cos(theta). Exact both ways: 1e-12.
    for th in (0.2, 1.0, 2.0, 2.9):
        for l, m in ((1.0, 1.0), (0.3, 2.0)):
            R = np.sqrt(l * l + m * m - 2 * l * m * np.cos(th))
            ref = K.MU0 / (2 * np.pi) * np.cos(th) * (l * np.arctanh(m / (l + R)) + m * np.arctanh(l / (m + R)))
            got = K.filament_mutual(np.zeros((1, 3)), np.array([[l, 0, 0]]), np.zeros((1, 3)),
                                    np.array([[m * np.cos(th), m * np.sin(th), 0]]))[0]
            assert_allclose(got, ref, rtol=1e-12)


def test_filament_mutual_parallel_closed_form():
    # Parallel filaments (references: Grover 1946): M = mu0/(4 pi) [G(x2b - x1a)
    # - G(x2b - x1b) - G(x2a - x1a) + G(x2a - x1b)], G(u) = u asinh(u/d) - sqrt(u^2 + d^2).
    def G(u, d):
        return u * np.arcsinh(u / d) - np.hypot(u, d)

    for (x2a, x2b, d) in ((0.2, 1.7, 0.05), (-3.0, -1.0, 0.4), (0.0, 1.0, 1e-3)):
        ref = K.MU0 / (4 * np.pi) * (G(x2b, d) - G(x2b - 1, d) - G(x2a, d) + G(x2a - 1, d))
        got = K.filament_mutual(np.zeros((1, 3)), np.array([[1.0, 0, 0]]), np.array([[x2a, d, 0]]),
                                np.array([[x2b, d, 0]]))[0]
        assert_allclose(got, ref, rtol=1e-11)


def test_filament_mutual_symmetry_sign_and_scaling():
    # Neumann's formula is symmetric, odd in each current direction and
    # homogeneous of degree 1 in length.
    a1, b1 = RNG.normal(size=(40, 3)), RNG.normal(size=(40, 3))
    a2, b2 = RNG.normal(size=(40, 3)), RNG.normal(size=(40, 3))
    m = K.filament_mutual(a1, b1, a2, b2)
    assert_allclose(K.filament_mutual(a2, b2, a1, b1), m, rtol=1e-11, atol=1e-22)
    assert_allclose(K.filament_mutual(a1, b1, b2, a2), -m, rtol=1e-11, atol=1e-22)
    assert_allclose(K.filament_mutual(3e-3 * a1, 3e-3 * b1, 3e-3 * a2, 3e-3 * b2), 3e-3 * m, rtol=1e-11, atol=1e-25)


def test_perpendicular_filaments_have_zero_mutual():
    M = K.filament_mutual(np.array([[0.0, 0, 0]]), np.array([[1.0, 0, 0]]),
                          np.array([[0.3, -1, 0.2]]), np.array([[0.3, 1, 0.2]]))
    assert abs(M[0]) < 1e-22


def test_segment_distance_cases():
    a1, b1 = np.array([[0.0, 0, 0]] * 3), np.array([[1.0, 0, 0]] * 3)
    a2 = np.array([[2.0, 1, 0], [0.5, 1, 1], [0.5, -1, 0]])
    b2 = np.array([[3.0, 1, 0], [0.5, -1, 1], [0.5, 1, 0]])
    assert_allclose(K.segment_distance(a1, b1, a2, b2), [np.sqrt(2), 1.0, 0.0], atol=1e-15)


# --------------------------------------------------------------------------
# Rectangular bars (Hoer & Love) and tubes
# --------------------------------------------------------------------------

def hoer_love_mp(size, dps=50):
    """Self-inductance of a bar by the same 64-term sum in 50-digit arithmetic."""
    mp.mp.dps = dps
    l, w, t = (mp.mpf(x) for x in size)

    def f(x, y, z):
        x, y, z = abs(x), abs(y), abs(z)
        r = mp.sqrt(x * x + y * y + z * z)

        def lt(p, q2):
            return 0 if p == 0 or q2 == 0 else p * mp.asinh(p / mp.sqrt(q2))

        v = (y**2 * z**2 / 4 - y**4 / 24 - z**4 / 24) * lt(x, y * y + z * z)
        v += (x**2 * z**2 / 4 - x**4 / 24 - z**4 / 24) * lt(y, x * x + z * z)
        v += (x**2 * y**2 / 4 - x**4 / 24 - y**4 / 24) * lt(z, x * x + y * y)
        v += (x**4 + y**4 + z**4 - 3 * x * x * y * y - 3 * y * y * z * z - 3 * x * x * z * z) * r / 60
        v -= x * y * z**3 / 6 * mp.atan2(x * y, z * r) + x * y**3 * z / 6 * mp.atan2(x * z, y * r)
        v -= x**3 * y * z / 6 * mp.atan2(y * z, x * r)
        return v

    tot = 0
    for x, cx in ((l, 2), (0, -2)):
        for y, cy in ((w, 2), (0, -2)):
            for z, cz in ((t, 2), (0, -2)):
                tot += cx * cy * cz * f(x, y, z)
    return float(K.MU0 / (4 * mp.pi) * tot / (w * w * t * t))


def bar_self_by_quadrature(l, w, t):
    """Independent route: average the exact double length integral of two
    parallel filaments, g(rho) = 2[l asinh(l/rho) - sqrt(l^2+rho^2) + rho],
    over the cross-section, reduced to the distribution of the offset
    (triangular weights), with adaptive quadrature."""

    def g(r):
        return 2 * (l * np.arcsinh(l / r) - np.hypot(l, r) + r)

    def integrand(v, u):
        return 4 * (w - u) * (t - v) * g(np.hypot(u, v))

    from scipy.integrate import dblquad

    val = dblquad(integrand, 0, w, 0, t, epsabs=0, epsrel=1e-12)[0]
    return K.MU0 / (4 * np.pi) * val / (w * w * t * t)


def test_long_thin_bar_self_inductance_keeps_precision():
    # 100 mm x 0.1 mm x 18 um: plain float64 evaluation of the Hoer-Love sum
    # errs by ~2e-5; the kernel must agree with the 50-digit evaluation of
    # the same exact formula to 1e-9.
    size = (0.1, 1e-4, 18e-6)
    assert_allclose(K.bar_self(*size)[0], hoer_love_mp(size), rtol=1e-9)
    assert_allclose(K.box_mutual(np.array([size]), np.array([size]), np.zeros((1, 3)))[0], hoer_love_mp(size),
                    rtol=1e-7)  # longdouble route: ~1e-8 documented


@pytest.mark.parametrize("size", [(1e-3, 2e-4, 35e-6), (0.3e-3, 0.3e-3, 35e-6), (5e-3, 0.15e-3, 35e-6)])
def test_bar_self_matches_independent_quadrature(size):
    # Hoer & Love vs the filament-kernel average by adaptive quadrature
    # (relative accuracy ~1e-10): tolerance 1e-8.
    assert_allclose(K.bar_self(*size)[0], bar_self_by_quadrature(*size), rtol=1e-8)


def test_bar_self_branches_agree_at_the_switch():
    # Long bars use the GMD/AMD expansion, short ones the Hoer-Love sum;
    # just around length = 20 x diagonal both must agree to 1e-8.
    w, t = 0.2e-3, 35e-6
    l = 20 * np.hypot(w, t)
    long_ = K.bar_self(l * (1 + 1e-12), w, t)[0]
    short = K.box_mutual(np.array([[l, w, t]]), np.array([[l, w, t]]), np.zeros((1, 3)))[0]
    assert_allclose(long_, short, rtol=1e-8)


def test_bar_self_close_to_grover_approximation():
    # Grover's Lp = mu0 l/(2 pi)[ln(2l/(w+t)) + 1/2 + 0.2235 (w+t)/l] is good to
    # ~1% for long bars (Grover 1946, from memory): tolerance 1%.
    for l, w, t in ((20e-3, 0.5e-3, 35e-6), (50e-3, 0.2e-3, 18e-6)):
        ref = K.MU0 * l / (2 * np.pi) * (np.log(2 * l / (w + t)) + 0.5 + 0.2235 * (w + t) / l)
        assert_allclose(K.bar_self(l, w, t)[0], ref, rtol=0.01)


def test_box_mutual_matches_fine_filament_average():
    # Two parallel bars side by side and offset: the cross-section average of
    # exact filament mutuals on a 24 x 6 midpoint grid per bar converges as
    # h^2; its estimated error is below 1e-4 here, tolerance 3e-4.
    s1 = np.array([1e-3, 0.2e-3, 35e-6])
    s2 = np.array([0.8e-3, 0.15e-3, 35e-6])
    off = np.array([0.3e-3, 0.35e-3, 0.1e-3])
    M = K.box_mutual(s1[None], s2[None], off[None])[0]

    def grid(size, origin, nw, nt):
        ys = origin[1] + (np.arange(nw) + 0.5) / nw * size[1]
        zs = origin[2] + (np.arange(nt) + 0.5) / nt * size[2]
        Y, Z = np.meshgrid(ys, zs, indexing="ij")
        a = np.column_stack([np.full(Y.size, origin[0]), Y.ravel(), Z.ravel()])
        return a, a + [size[0], 0, 0]

    a1, b1 = grid(s1, np.zeros(3), 24, 6)
    a2, b2 = grid(s2, off, 24, 6)
    n1, n2 = len(a1), len(a2)
    F = K.filament_mutual(np.repeat(a1, n2, 0), np.repeat(b1, n2, 0), np.tile(a2, (n1, 1)), np.tile(b2, (n1, 1)))
    assert_allclose(M, F.mean(), rtol=3e-4)
    # symmetric in the two bars
    assert_allclose(K.box_mutual(s2[None], s1[None], -off[None])[0], M, rtol=1e-12)


def test_tube_self_solid_rod_limit():
    # Straight round wire, uniform current, l >> r:
    # L = mu0 l/(2 pi)[ln(2 l/r) - 3/4] (Rosa 1908, from memory), which is the
    # GMD form to O(r/l): at l = 1000 r the difference is ~1e-3/7: tolerance 5e-4.
    l, r = 0.1, 1e-4
    ref = K.MU0 * l / (2 * np.pi) * (np.log(2 * l / r) - 0.75)
    assert_allclose(K.tube_self(l, r, r)[0], ref, rtol=5e-4)


def test_rectangle_gmd_limits():
    # Maxwell: square of side a has g = 0.44705 a; a thin strip of width w has
    # g = w exp(-3/2) = 0.22313 w (from memory).
    assert_allclose(K.rect_gmd(1.0, 1.0), 0.44705, rtol=2e-5)
    assert_allclose(K.rect_gmd(1.0, 1e-6), np.exp(-1.5), rtol=1e-5)


def test_pair_energy_matches_brute_force():
    x = RNG.normal(size=(37, 3))
    j = RNG.normal(size=(37, 3))
    g = RNG.integers(0, 3, size=37)
    x2 = RNG.normal(size=(23, 3)) + 4
    j2 = RNG.normal(size=(23, 3))
    g2 = RNG.integers(0, 2, size=23)
    E = K.pair_energy(x, j, g, 3, block=8)
    ref = np.zeros((3, 3))
    for p in range(37):
        for q in range(37):
            if p != q:
                ref[g[p], g[q]] += j[p] @ j[q] / np.linalg.norm(x[p] - x[q])
    assert_allclose(E, ref, rtol=1e-12)
    E2 = K.pair_energy(x, j, g, 3, x2=x2, j2=j2, groups2=g2, n_groups2=2, block=8)
    ref2 = np.zeros((3, 2))
    for p in range(37):
        for q in range(23):
            ref2[g[p], g2[q]] += j[p] @ j2[q] / np.linalg.norm(x[p] - x2[q])
    assert_allclose(E2, ref2, rtol=1e-12)
