"""Parasitic capacitance: coplanar strips, the 2-D moment method, and the
energy-equivalent coil estimate."""

from dataclasses import replace

import numpy as np
import pytest
from numpy.testing import assert_allclose

import tracecoil
from physics_helpers import folded_pair, hairpin, scaled
from tracecoil.errors import SpecError
from tracecoil.physics import capacitance as cap
from tracecoil.physics.materials import EPS0


def hilberg_k_over_kp(k):
    """K(k)/K(k') by W. Hilberg's approximations, "From approximations to
    exact relations for characteristic impedances", IEEE Trans. MTT 17(5),
    1969 (from memory): pi / ln(2 (1 + sqrt k') / (1 - sqrt k')) for
    k <= 1/sqrt 2, ln(2 (1 + sqrt k) / (1 - sqrt k)) / pi above. Written
    without cancellation in 1 - sqrt(k) and 1 - sqrt(k')."""
    k = np.asarray(k, float)
    kp = np.sqrt((1 - k) * (1 + k))
    one_minus_skp = k * k / ((1 + kp) * (1 + np.sqrt(kp)))
    one_minus_sk = (1 - k) / (1 + np.sqrt(k))
    low = np.pi / np.log(2 * (1 + np.sqrt(kp)) / one_minus_skp)
    high = np.log(2 * (1 + np.sqrt(k)) / one_minus_sk) / np.pi
    return np.where(k <= 2**-0.5, low, high)


def palmer(width, distance):
    """Two parallel plates of width w at distance d, per length (F/m):
    eps0 w / d [1 + d / (pi w) (1 + ln(2 pi w / d))] (H. B. Palmer, "The
    capacitance of a parallel-plate capacitor by the Schwartz-Christoffel
    transformation", Trans. AIEE 56, 1937; from memory). Meant for w >~ d."""
    return EPS0 * width / distance * (1 + distance / (np.pi * width) * (1 + np.log(2 * np.pi * width / distance)))


def test_elliptic_ratio_against_hilberg():
    # Hilberg's formulas claim a relative error below about 3e-6 (from
    # memory); they are an independent route to K(k')/K(k).
    k = np.concatenate([np.logspace(-8, -0.16, 300), 1 - np.logspace(-12, -0.5, 300)])
    assert_allclose(1.0 / cap.elliptic_ratio(k), hilberg_k_over_kp(k), rtol=3e-6)
    # k = 1/sqrt(2) is self-complementary: the ratio is exactly 1.
    assert_allclose(cap.elliptic_ratio(2**-0.5), 1.0, rtol=1e-14)


@pytest.mark.parametrize("gap_mm, width_mm", [(0.2, 0.2), (0.1, 0.5), (1.0, 0.1), (0.05, 2.0)])
def test_coplanar_strips_closed_form_against_moment_method(gap_mm, width_mm):
    # Two strips in free space: conformal mapping (Gupta et al. 1996; Wen
    # 1969) against the 2-D moment method, a fully independent numerical
    # route. Its error falls as cells^-2 (measured 2e-4 to 7e-4 at 100
    # cells, the larger for a narrow gap between wide strips); 1e-3.
    s, w = gap_mm * 1e-3, width_mm * 1e-3
    m = cap.strips_capacitance_matrix(np.array([-s / 2 - w, s / 2]), np.array([-s / 2, s / 2 + w]), np.zeros(2), cells=100)
    assert_allclose(-m[0, 1], cap.coplanar_strips_capacitance(s, w), rtol=1e-3)
    # The Maxwell matrix is symmetric and neutral (rows sum to zero).
    assert_allclose(m.sum(axis=1), 0.0, atol=1e-6 * abs(m[0, 0]))


@pytest.mark.parametrize("ratio, rtol", [(10.0, 0.01), (20.0, 0.005)])
def test_stacked_strips_against_palmer(ratio, rtol):
    # Two plates of width w at distance d (w/d = 10, 20): Palmer 1937. The
    # formula itself is an asymptotic one (error ~d/w squared); 1 % at
    # w/d = 10, 0.5 % at 20.
    d = 0.1e-3
    w = ratio * d
    m = cap.strips_capacitance_matrix(np.array([0.0, 0.0]), np.array([w, w]), np.array([0.0, d]), cells=80)
    assert_allclose(-m[0, 1], palmer(w, d), rtol=rtol)


def test_hairpin_energy_against_integral():
    # Two long strips on the top layer, one going out and one coming back:
    # every cut is a coplanar pair, so C_eq = integral of C'(eps_eff)
    # (dV(x))^2 dx with dV linear in the path length (the model's stated
    # potential). 3 %: the moment method at 10 cells (0.5 %), the closed
    # end and the terminal leads (a few pitches out of 200 mm).
    length, w, g, er = 200.0, 0.3, 0.2, 4.5
    coil = hairpin(length_mm=length, width_mm=w, gap_mm=g, permittivity=er)
    lead = np.hypot(1.0, 1.0)
    total = 2 * lead + 2 * length + (w + g)
    x = np.linspace(0.0, length, 20001)
    v_out = 1 - (lead + x) / total
    v_back = 1 - (lead + length + (w + g) + (length - x)) / total
    # Plus the model's side-wall term eps0 t / s across the air gap.
    c_len = cap.coplanar_strips_capacitance(g * 1e-3, w * 1e-3, (er + 1) / 2) + EPS0 * 35e-6 / (g * 1e-3)
    expected = c_len * np.trapezoid((v_out - v_back) ** 2, x * 1e-3)
    est = cap.capacitance(coil, cuts=64)
    assert_allclose(est.total_f, expected, rtol=0.03)
    assert set(est.turn_to_turn_f) == {1} and not est.layer_to_layer_f


def test_folded_pair_against_palmer():
    # The same trace out on layer 1 and back on layer 2 (w/d = 20): every
    # cut is two stacked plates, dV = 1 - x/L, so C_eq = eps_r C'_Palmer L / 3.
    # 2 %: Palmer at w/d = 20 (0.5 %), moment method, the via end.
    length, w, d, er = 50.0, 2.0, 0.1, 4.5
    coil = folded_pair(length_mm=length, width_mm=w, dielectric_mm=d, permittivity=er)
    est = cap.capacitance(coil, cuts=32)
    expected = er * palmer(w * 1e-3, d * 1e-3) * length * 1e-3 / 3
    assert_allclose(est.total_f, expected, rtol=0.02)
    assert list(est.layer_to_layer_f) == [(1, 2)]


def test_scales_with_size_and_permittivity():
    coil = tracecoil.spiral(turns=4, outer_mm=10, width_mm=0.2, gap_mm=0.15, layers=2)
    c1 = cap.capacitance(coil).total_f
    # Electrostatics is scale-free: C is proportional to length when every
    # dimension (plan and stack-up) scales together. Only rounding differs.
    assert_allclose(cap.capacitance(scaled(coil, 3.0)).total_f, 3.0 * c1, rtol=1e-6)
    # A single-layer winding: every pair is on the outer layer, so the
    # sheet part goes exactly with (eps_r + 1) / 2 and the side walls face
    # air: C is affine in eps_r, with equal steps for equal increments.
    one = tracecoil.spiral(turns=6, outer_mm=12, width_mm=0.2, gap_mm=0.2, layers=1, return_lead="none")
    c = [cap.capacitance(replace(one, stackup=replace(one.stackup, permittivity=er))).total_f for er in (3.0, 4.5, 6.0)]
    assert_allclose(c[2] - c[1], c[1] - c[0], rtol=1e-9)
    assert c[1] > c[0]


def test_converges_with_more_cuts():
    # The cuts sample the winding: quadrupling them from the default moves
    # the estimate by far less than the model's own +-30-50 % uncertainty
    # (8 % allowed, the scatter the module documents for a square spiral
    # with few turns, whose corners make the samples differ most).
    coil = tracecoil.spiral(turns=4, outer_mm=12, width_mm=0.25, gap_mm=0.2, layers=2)
    c48 = cap.capacitance(coil).total_f
    c192 = cap.capacitance(coil, cuts=192).total_f
    assert_allclose(c48, c192, rtol=0.08)


def test_more_turns_store_more_between_layers_than_within():
    # Series layers: the top layer's outer turn (V ~ 1) lies over the
    # bottom layer's outer turn (V ~ 0), so the layer-to-layer share
    # dominates; a single layer has only the same-layer share.
    two = cap.capacitance(tracecoil.spiral(turns=4, outer_mm=12, width_mm=0.25, gap_mm=0.2, layers=2))
    assert two.layer_to_layer_f[(1, 2)] > sum(two.turn_to_turn_f.values())
    assert two.total_f > 0 and all(v >= 0 for v in two.turn_to_turn_f.values())


def test_bad_options():
    coil = hairpin()
    with pytest.raises(SpecError, match="cuts"):
        cap.capacitance(coil, cuts=2)
    with pytest.raises(SpecError, match="cells"):
        cap.capacitance(coil, cells=1)
