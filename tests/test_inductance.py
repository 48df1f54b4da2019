"""Inductance, mutual inductance and impedance against published results.

References are named beside each check with the reason for its tolerance.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.special import ellipe, ellipk

from tracecoil import spiral
from tracecoil.errors import SpecError
from tracecoil.layout import Coil, Stackup, Step, Terminal, Trace, Via
from tracecoil.physics import kernels as K
from tracecoil.physics.conductors import Conductors, conductors
from tracecoil.physics.inductance import (
    coupling,
    impedance,
    inductance,
    mutual_inductance,
    partial_matrix,
)
from tracecoil.physics.kernels import MU0
from tracecoil.physics.materials import copper_resistivity


def ring(radius_mm, n=256, width_mm=0.3, layer=1, stackup=None):
    """A closed regular n-gon trace (circumradius radius_mm) on one layer."""
    st = stackup or Stackup((35.0,), ())
    t = np.linspace(0, 2 * np.pi, n + 1)
    pts = radius_mm * np.column_stack([np.cos(t), np.sin(t)])
    return Coil(st, (Trace(layer, pts, width_mm),), (), (), (Step("trace", 0),))


def maxwell(a, b, d):
    """Coaxial circular filaments, Maxwell (Treatise vol. 2, art. 701, 1873), in
    the Landen form that stays accurate for distant loops:
    M = mu0 (r1 + r2)[K(k1) - E(k1)], k1 = (r2 - r1)/(r2 + r1) (references.md);
    scipy's ellipk/ellipe take m = k^2."""
    r1, r2 = np.hypot(a - b, d), np.hypot(a + b, d)
    k1 = (r2 - r1) / (r2 + r1)
    return MU0 * (r1 + r2) * (ellipk(k1 * k1) - ellipe(k1 * k1))


def test_maxwell_landen_form_matches_classical_form():
    # the reference itself: the classical (2/k - k)K - (2/k)E form
    a, b, d = 0.01, 0.006, 0.004
    k2 = 4 * a * b / ((a + b) ** 2 + d * d)
    k = np.sqrt(k2)
    classic = MU0 * np.sqrt(a * b) * ((2 / k - k) * ellipk(k2) - 2 / k * ellipe(k2))
    assert_allclose(maxwell(a, b, d), classic, rtol=1e-12)


@pytest.mark.parametrize("ra, rb", [(10.0, 10.0), (10.0, 6.0), (5.0, 5.0)])
def test_coaxial_loops_on_two_layers_match_maxwell(ra, rb):
    # Two traces 0.3 mm wide on layers 1.5 mm apart. Differences from
    # Maxwell's filaments: 256-gon areas (~1e-4) and the finite widths
    # (GMD ~ w^2/(12 d^2) in the logarithm, <= 0.2 %): tolerance 0.5 %
    # as the issue asks.
    st = Stackup((35.0, 35.0), (1.5,))
    a = ring(ra, stackup=st, layer=1)
    b = ring(rb, stackup=st, layer=2)
    d = abs(st.z_mm(1) - st.z_mm(2)) * 1e-3
    assert_allclose(mutual_inductance(a, b), maxwell(ra * 1e-3, rb * 1e-3, d), rtol=5e-3)


def test_single_loop_matches_rosa_with_rectangle_gmd():
    # Circular loop of a conductor with geometric mean distance g:
    # L = mu0 R [ln(8R/g) - 2] (E. B. Rosa, Bull. Bureau of Standards 4, 1908;
    # Grover 1946; from memory), g of the 0.5 mm x 35 um section from
    # Rosa & Grover's rectangle formula. Valid to O((w/R)^2); the issue asks
    # for 1 %. Polygons of 64 and 512 sides both must agree.
    R, w, t = 10e-3, 0.5e-3, 35e-6
    ref = MU0 * R * (np.log(8 * R / K.rect_gmd(w, t)) - 2)
    for n in (64, 512):
        L = inductance(ring(10.0, n=n, width_mm=0.5)).inductance_h
        # the polygon's own flux area is smaller by (pi/n)^2/3 ~ 8e-5 at n = 64
        assert_allclose(L, ref, rtol=1e-2)


# Mohan, Hershenson, Boyd & Lee, "Simple accurate expressions for planar
# spiral inductances", IEEE JSSC 34(10), 1999 (coefficients from
# references.md, from memory): current sheet and modified Wheeler.
CURRENT_SHEET = {"square": (1.27, 2.07, 0.18, 0.13), "hexagon": (1.09, 2.23, 0.0, 0.17),
                 "octagon": (1.07, 2.29, 0.0, 0.19), "circle": (1.00, 2.46, 0.0, 0.20)}
WHEELER = {"square": (2.34, 2.75), "hexagon": (2.33, 3.82), "octagon": (2.25, 3.55)}


def winding_only(c):
    """The winding trace(s) of a generated coil as conductors (leads dropped):
    Mohan's expressions describe the spiral itself."""
    cd = conductors(c)
    roles = np.array([c.traces[c.path[s].index].role if c.path[s].kind == "trace" else "via" for s in cd.step])
    return cd.subset(roles == "winding")


SPIRALS = [
    # shape, turns, width, gap, outer (mm). Fill ratios 0.18 .. 0.66 for
    # squares and circles, 0.31 for hexagons and 0.46 for octagons: beyond that our
    # results for those two shapes drift above both expressions (hexagon at
    # fill 0.46: +3.5 % current sheet, +7.8 % Wheeler; at 0.66: +6 % and
    # +13 %; octagon at 0.66: +2 % and +7 %), converged and confirmed by a
    # plain centreline Neumann sum. The disagreement is left open (reported)
    # rather than hidden by a wider tolerance.
    ("square", 3, 0.3, 0.3, 10), ("square", 8, 0.15, 0.15, 12), ("square", 10, 0.2, 0.2, 10),
    ("square", 12, 0.2, 0.1, 10), ("hexagon", 5, 0.2, 0.2, 12), ("hexagon", 10, 0.25, 0.25, 30),
    ("hexagon", 12, 0.2, 0.2, 20), ("octagon", 4, 0.5, 0.25, 15), ("octagon", 15, 0.15, 0.15, 20),
    ("octagon", 12, 0.2, 0.2, 20), ("circle", 3, 0.3, 0.3, 10), ("circle", 8, 0.15, 0.15, 12),
    ("circle", 6, 0.3, 0.3, 10), ("circle", 10, 0.2, 0.2, 10),
]


@pytest.mark.parametrize("shape, n, w, s, outer", SPIRALS)
def test_planar_spirals_match_mohan_expressions(shape, n, w, s, outer):
    # d_out and d_in are edge to edge (Mohan et al. Fig. 1). The generated
    # spiral starts at outer_mm and moves in by one pitch per turn, so
    # averaged over each turn its copper sits half a pitch inside a
    # concentric-ring winding: d_out = outer_mm - pitch is the outer
    # diameter of the equivalent concentric turns, d_in = d_out - 2(n w +
    # (n - 1) s). Mohan et al. claim ~2-3 % typical error (current sheet and
    # modified Wheeler for s <= 3w); we allow 3.5 % for the current sheet and
    # 4 % for Wheeler (whose fit is looser at low fill ratio), the extra 1 %
    # covering the spiral-versus-concentric layout and the corner model.
    c = spiral(shape=shape, outer_mm=outer, turns=n, width_mm=w, gap_mm=s, return_lead="none", pad_mm=0.4,
               pad_drill_mm=0.2)
    d_out = (outer - (w + s)) * 1e-3
    d_in = d_out - 2 * (n * w + (n - 1) * s) * 1e-3
    d_avg, rho = 0.5 * (d_out + d_in), (d_out - d_in) / (d_out + d_in)
    L = inductance(winding_only(c)).inductance_h
    c1, c2, c3, c4 = CURRENT_SHEET[shape]
    sheet = MU0 * n * n * d_avg * c1 / 2 * (np.log(c2 / rho) + c3 * rho + c4 * rho * rho)
    assert_allclose(L, sheet, rtol=0.035)
    if shape in WHEELER:
        k1, k2 = WHEELER[shape]
        assert_allclose(L, k1 * MU0 * n * n * d_avg / (1 + k2 * rho), rtol=0.04)


@pytest.mark.parametrize("kw", [
    dict(shape="circle", outer_mm=12, turns=8, width_mm=0.2, gap_mm=0.2, layers=2, board={"layers": 2}),
    dict(shape="octagon", outer_mm=15, turns=6, width_mm=0.5, gap_mm=0.2),
    dict(shape="hexagon", outer_mm=10, turns=5, width_mm=0.2, gap_mm=0.4, layers=2, board={"layers": 2}),
])
def test_refinement_changes_inductance_by_less_than_0p2_percent(kw):
    # Convergence (issue 3): doubling the filaments and widening both the
    # near-field zone and the far-field rule must move L by < 0.2 %.
    c = spiral(**kw)
    base = inductance(c).inductance_h
    finer, _, _ = partial_matrix(c, filaments=8, near_lengths=3.0, bulk_order=3)
    assert abs(finer.sum() / base - 1) < 2e-3


def test_mutual_is_symmetric_and_sign_follows_current():
    a = spiral(shape="square", outer_mm=10, turns=4, width_mm=0.3, gap_mm=0.3)
    b = spiral(shape="circle", outer_mm=8, turns=3, width_mm=0.2, gap_mm=0.3).placed(offset_mm=(2, 1, 1.0),
                                                                                      rotation_deg=30)
    m_ab, m_ba = mutual_inductance(a, b), mutual_inductance(b, a)
    # same sums in the other order: rounding only
    assert_allclose(m_ab, m_ba, rtol=1e-10)
    flipped = b.placed(flip=True, offset_mm=(0, 0, 0))  # turned over: circulation reverses seen from +z
    assert mutual_inductance(a, flipped) * m_ab < 0


def test_lengths_scale_inductance():
    # Neumann's and Hoer & Love's formulas are homogeneous of degree 1 in
    # length and the discretisation is scale free: L(s x geometry) = s L.
    cd = conductors(spiral(shape="circle", outer_mm=10, turns=4, width_mm=0.25, gap_mm=0.25, layers=2,
                           board={"layers": 2}))
    s = 3.7
    big = Conductors(cd.start_m * s, cd.end_m * s, cd.width_m * s, cd.thickness_m * s, cd.fraction.copy(),
                     cd.layer.copy(), cd.kind.copy(), cd.width_dir.copy(), cd.step.copy())
    assert_allclose(inductance(big).inductance_h, s * inductance(cd).inductance_h, rtol=1e-9)


def test_far_coaxial_loops_tend_to_dipoles():
    # Far field of two coaxial loops: M -> mu0 A_a A_b / (2 pi d^3) (two
    # dipoles on a common axis, references.md) with corrections of order
    # (a/d)^2: the relative error must fall ~4x when d doubles.
    a = ring(2.0, n=64)
    area = 0.5 * 64 * (2e-3) ** 2 * np.sin(2 * np.pi / 64)
    errs = []
    for d in (40.0, 80.0, 160.0):
        M = mutual_inductance(a, a.placed(offset_mm=(0, 0, d)))
        dip = MU0 * area * area / (2 * np.pi * (d * 1e-3) ** 3)
        errs.append(M / dip - 1)
    assert abs(errs[-1]) < 3 * (2 / 160) ** 2
    assert 3.0 < errs[0] / errs[1] < 5.0 and 3.0 < errs[1] / errs[2] < 5.0


def test_side_by_side_loops_have_negative_dipole_mutual():
    # Coplanar dipoles at distance d: M = -mu0 A_a A_b / (4 pi d^3); at
    # d = 40 a the (a/d)^2 corrections are ~0.3 %: tolerance 1 %.
    a = ring(1.0, n=64)
    area = 0.5 * 64 * (1e-3) ** 2 * np.sin(2 * np.pi / 64)
    d = 40.0
    M = mutual_inductance(a, a.placed(offset_mm=(d, 0, 0)))
    assert_allclose(M, -MU0 * area * area / (4 * np.pi * (d * 1e-3) ** 3), rtol=1e-2)


def test_layer_split_sums_to_total_and_parallel_wiring_combines_layers():
    # Two identical turns in parallel on layers 1 and 2 (fraction 1/2 each):
    # L = (L1 + L2 + 2 M12)/4 from the single-turn values (circuit theory).
    st = Stackup((35.0, 35.0), (0.5,))
    pts = 8.0 * np.column_stack([np.cos(np.linspace(0, 2 * np.pi, 97)), np.sin(np.linspace(0, 2 * np.pi, 97))])
    t1, t2 = Trace(1, pts, 0.4), Trace(2, pts, 0.4)
    both = Coil(st, (t1, t2), (), (), (Step("trace", 0, 0.5), Step("trace", 1, 0.5)))
    one = Coil(st, (t1,), (), (), (Step("trace", 0),))
    two = Coil(st, (t2,), (), (), (Step("trace", 0),))
    r = inductance(both)
    assert_allclose(r.matrix_h.sum(), r.inductance_h, rtol=1e-14)
    assert r.layers == ("top", "bottom")
    l1, l2, m = inductance(one).inductance_h, inductance(two).inductance_h, mutual_inductance(one, two)
    assert_allclose(r.inductance_h, (l1 + l2 + 2 * m) / 4, rtol=1e-9)
    assert_allclose(2 * r.matrix_h[0, 1], 2 * m / 4, rtol=1e-9)


def test_series_four_layer_coil_layers_add_up():
    c = spiral(shape="circle", outer_mm=10, turns=4, width_mm=0.2, gap_mm=0.2, layers=4, board={"layers": 4})
    r = inductance(c)
    assert set(r.self_h) == {"top", "inner1", "inner2", "bottom", "vias"}
    assert all(v > 0 for k, v in r.self_h.items() if k != "vias")
    # series layers circulate the same way: all layer-layer mutuals positive
    assert all(v > 0 for (a, b), v in r.mutual_h.items() if "vias" not in (a, b))
    assert_allclose(sum(r.self_h.values()) + sum(r.mutual_h.values()), r.inductance_h, rtol=1e-12)


def test_coupling_factor():
    a = spiral(shape="circle", outer_mm=10, turns=4, width_mm=0.25, gap_mm=0.25)
    k_near = coupling(a, a.placed(offset_mm=(0, 0, 1.0)))
    k_far = coupling(a, a.placed(offset_mm=(0, 0, 5.0)))
    assert 0 < k_far < k_near < 1


# ----------------------------------------------------------------------------
# frequency dependence
# ----------------------------------------------------------------------------

def parallel_plates(length_mm=40.0, width_mm=10.0, gap_mm=0.05, copper_um=35.0):
    """Out on layer 1, back on layer 2 directly beneath: a parallel-plate line."""
    st = Stackup((copper_um, copper_um), (gap_mm,))
    t0 = Trace(1, np.array([[0.0, 0.0], [length_mm, 0.0]]), width_mm)
    t1 = Trace(2, np.array([[length_mm, 0.0], [0.0, 0.0]]), width_mm)
    vias = (Via(0.0, 0.0, 0.3, 0.5, (1,), "terminal"), Via(length_mm, 0.0, 0.3, 0.6, (1, 2)),
            Via(0.0, 0.0, 0.3, 0.5, (2,), "terminal"))
    path = (Step("trace", 0), Step("via", 1, 1.0, 1, 2), Step("trace", 1))
    return Coil(st, (t0, t1), vias, (Terminal("A", 0, 0, 0), Terminal("B", 0, 0, 2)), path)


def test_parallel_plate_resistance_matches_plane_conductor_impedance():
    # Internal impedance of a plane conductor of thickness t carrying current
    # on one face (field on that side only): Z = rho gamma coth(gamma t) / w
    # per length, gamma = (1 + j)/delta (S. Ramo, J. R. Whinnery, T. Van Duzer,
    # Fields and Waves in Communication Electronics, 3rd ed., 1994, from
    # memory). Both plates of a wide parallel-plate line obey it up to edge
    # effects of order gap/width = 0.5 %; with 12 x 6 cells the
    # discretisation adds ~1 % at t/delta = 1.2: tolerance 2 %.
    c = parallel_plates()
    f = np.array([1e5, 1e6, 3e6, 5e6])
    z = impedance(c, f, cross_section=(12, 6))
    rho = float(copper_resistivity(20.0))
    delta = np.sqrt(rho / (np.pi * f * MU0))
    g = (1 + 1j) / delta
    plates = 2 * rho * g / 10e-3 / np.tanh(g * 35e-6) * 40e-3
    via_r = z.resistance_dc_ohm - 2 * rho * 40e-3 / (10e-3 * 35e-6)
    assert_allclose(z.resistance_ohm - via_r, plates.real, rtol=2e-2)


def test_impedance_tends_to_dc_values_and_is_passive():
    # f -> 0: R -> sum f_i^2 rho l_i / A_i (Ohm's law with IEC 60028 copper)
    # and L -> the DC model; with rising frequency R grows and L falls
    # (current retreats to where it links less flux).
    c = spiral(shape="circle", outer_mm=10, turns=5, width_mm=0.3, gap_mm=0.2, layers=2, board={"layers": 2})
    cd = conductors(c)
    rho = float(copper_resistivity(20.0))
    tr = ~cd.is_via
    area = np.where(tr, cd.width_m * cd.thickness_m, np.pi * cd.thickness_m * (cd.width_m - cd.thickness_m))
    r_dc = float(np.sum(cd.fraction**2 * rho * cd.length_m / area))
    z = impedance(c, [0.0, 10.0, 1e5, 1e6, 1e7], cross_section=(4, 3))
    assert_allclose(z.resistance_dc_ohm, r_dc, rtol=1e-12)
    assert_allclose(z.resistance_ohm[:2], r_dc, rtol=1e-9)
    assert_allclose(z.inductance_h[:2], inductance(c).inductance_h, rtol=1e-9)
    assert np.all(np.diff(z.resistance_ohm[1:]) > 0)
    assert np.all(np.diff(z.inductance_h[1:]) < 0)


def test_inductance_at_frequency_returns_l_and_r():
    c = ring(5.0, n=48, width_mm=0.5)
    r = inductance(c, freq_hz=1e6, cross_section=(4, 3))
    z = impedance(c, 1e6, cross_section=(4, 3))
    assert_allclose(r.inductance_h, z.inductance_h[0], rtol=1e-12)
    assert_allclose(r.resistance_ohm, z.resistance_ohm[0], rtol=1e-12)
    assert r.freq_hz == 1e6 and r.inductance_dc_h > r.inductance_h


def test_intra_segment_interpolation_matches_direct_evaluation():
    # The sub-bar matrices of many different lengths come from a Chebyshev
    # interpolation in log length; against direct Hoer-Love evaluation it
    # must hold to 1e-9 of the block's scale.
    from tracecoil.physics import inductance as ind

    pts = 6.0 * np.column_stack([np.cos(np.linspace(0, 5 * np.pi, 90)), np.sin(np.linspace(0, 5 * np.pi, 90))])
    pts *= np.linspace(1.0, 0.5, 90)[:, None]  # a spiral: all lengths differ
    c = Coil(Stackup((35.0,), ()), (Trace(1, pts, 0.3),), (), (), (Step("trace", 0),))
    cd = conductors(c)
    sb = ind._subdivide(cd, 4, 3)
    tr, blocks = ind._intra_blocks(cd, sb, 4, 3)
    ew, et = ind._graded(4), ind._graded(3)
    for m in (0, 37, 88):
        direct = ind._hl_block(cd.length_m[tr[m]], (ew[:-1] * 0.3e-3).repeat(3), np.tile(et[:-1] * 35e-6, 4),
                               (np.diff(ew) * 0.3e-3).repeat(3), np.tile(np.diff(et) * 35e-6, 4))
        assert_allclose(blocks[m], direct, rtol=0, atol=1e-9 * np.abs(direct).max())


# ----------------------------------------------------------------------------
# input checks
# ----------------------------------------------------------------------------

@pytest.mark.parametrize("kwargs, match", [
    (dict(method="wheeler"), "method"),
    (dict(filaments=0), "filaments"),
    (dict(filaments=2.5), "filaments"),
    (dict(freq_hz=[1e3, 1e4]), "freq_hz"),
    (dict(bogus=1), "options"),
])
def test_bad_options_raise_spec_errors(kwargs, match):
    with pytest.raises(SpecError, match=match):
        inductance(ring(5.0, n=16), **kwargs)


def test_bad_impedance_inputs_raise():
    c = ring(5.0, n=16)
    with pytest.raises(SpecError, match="freq_hz"):
        impedance(c, -1.0)
    with pytest.raises(SpecError, match="cross_section"):
        impedance(c, 1e6, cross_section=(0, 2))
