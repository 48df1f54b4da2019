"""Resistance: DC of traces and vias, temperature, skin depth, AC estimate."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

import tracecoil
from physics_helpers import parallel_traces, straight_trace
from tracecoil.errors import SpecError
from tracecoil.physics import resistance as res
from tracecoil.physics.materials import COPPER_RESISTIVITY_20C, copper_resistivity

# Handbook copper: 1.7241e-8 ohm m at 20 degC (100 % IACS, IEC 60028, from
# memory), temperature coefficient 0.00393 / K (from memory).
RHO_20 = 1.7241e-8
ALPHA = 0.00393


def test_straight_trace_dc_matches_rho_l_over_wt():
    # 100 mm x 1 mm x 35 um: R = rho l / (w t) with the handbook resistivity.
    coil = straight_trace(length_mm=100.0, width_mm=1.0, copper_um=35.0)
    expected = RHO_20 * 0.1 / (1e-3 * 35e-6)
    # Same formula evaluated independently; only float rounding differs.
    assert_allclose(res.dc_resistance(coil), expected, rtol=1e-12)
    assert_allclose(res.dc_resistance(coil, method="path"), expected, rtol=1e-12)


def test_one_ounce_sheet_resistance():
    # Common practice: 1 oz (35 um) copper is about 0.49 mOhm per square at
    # 20 degC. 100 squares (100 mm x 1 mm); 3 % covers the rounding of the
    # quoted figure.
    coil = straight_trace(length_mm=100.0, width_mm=1.0, copper_um=35.0)
    assert_allclose(res.dc_resistance(coil) / 100.0, 0.49e-3, rtol=0.03)


def test_temperature_coefficient():
    coil = straight_trace()
    r20 = res.dc_resistance(coil, temperature_c=20.0)
    r85 = res.dc_resistance(coil, temperature_c=85.0)
    # Linear law with the handbook coefficient; exact up to rounding.
    assert_allclose(r85 / r20, 1.0 + ALPHA * 65.0, rtol=1e-12)
    assert_allclose(copper_resistivity(20.0), COPPER_RESISTIVITY_20C, rtol=0)


def test_temperature_outside_linear_range_warns_and_absurd_fails():
    with pytest.warns(UserWarning, match="outside"):
        copper_resistivity(180.0)
    with pytest.raises(SpecError, match="temperature_c"), pytest.warns(UserWarning):
        copper_resistivity(-250.0)


def test_skin_depth_of_copper_handbook_values():
    # Handbook skin depth of copper: 66 um at 1 MHz and 21 um at 10 MHz
    # (e.g. Reference Data for Radio Engineers, ITT, 1975; from memory).
    # The handbook rounds to 2 significant figures: 1 % and 1.5 % tolerance.
    assert_allclose(res.skin_depth(RHO_20, 1e6), 66e-6, rtol=0.01)
    assert_allclose(res.skin_depth(RHO_20, 10e6), 21e-6, rtol=0.015)
    # delta ~ f^-1/2 exactly.
    assert_allclose(res.skin_depth(RHO_20, 4e6) * 2, res.skin_depth(RHO_20, 1e6), rtol=1e-12)
    assert np.isinf(res.skin_depth(RHO_20, 0.0))


def test_plate_factor_matches_closed_real_form():
    # Independent route: Re[z coth z] (computed in the module with complex
    # arithmetic) against the real form D (sinh 2D + sin 2D) / (cosh 2D -
    # cos 2D), D = t / (2 delta), of Dowell 1966 (from memory).
    t = 35e-6
    delta = np.logspace(-6.5, -3, 60)
    d = t / (2 * delta)
    expected = d * (np.sinh(2 * d) + np.sin(2 * d)) / (np.cosh(2 * d) - np.cos(2 * d))
    # Cancellation in cosh 2D - cos 2D at small D limits the real form to
    # about 1e-8 here.
    assert_allclose(res.plate_ac_factor(t, delta), expected, rtol=1e-7)
    # Limits: 1 at DC, t / (2 delta) when delta << t.
    assert_allclose(res.plate_ac_factor(t, np.inf), 1.0, rtol=0)
    assert_allclose(res.plate_ac_factor(t, t / 1000), 500.0, rtol=1e-9)
    # One face of thickness h equals both faces of thickness 2 h.
    assert_allclose(res.plate_ac_factor(t, 20e-6, faces=1), res.plate_ac_factor(2 * t, 20e-6, faces=2), rtol=1e-12)


def test_ac_resistance_limits_on_a_coil():
    coil = tracecoil.spiral(turns=4, outer_mm=12, width_mm=0.25, gap_mm=0.2, layers=2)
    rdc = res.dc_resistance(coil)
    # Far below the skin-effect frequency AC equals DC (1 + 4 D^4 / 45 with
    # D ~ 1e-3 at 10 Hz).
    assert_allclose(res.ac_resistance(coil, 10.0), rdc, rtol=1e-9)
    r_f = [res.ac_resistance(coil, f) for f in (1e5, 1e6, 1e7, 1e8)]
    assert np.all(np.diff(r_f) > 0) and r_f[0] > rdc
    # At 1 GHz (delta ~ 2.1 um << 35 um) traces tend to t / (2 delta) R_dc.
    f = 1e9
    ratio = res.ac_resistance(coil, f) / rdc
    assert_allclose(ratio, 35e-6 / (2 * res.skin_depth(RHO_20, f)), rtol=0.02)


def test_via_barrel_dc():
    # A plated annulus: R = rho l / (pi (ro^2 - ri^2)), ro = drill / 2,
    # ri = ro - plating; l between the copper mid-planes.
    length, drill, plating = 1.6e-3, 0.3e-3, 25e-6
    ro, ri = drill / 2, drill / 2 - plating
    expected = RHO_20 * length / (np.pi * (ro**2 - ri**2))
    assert_allclose(res.barrel_resistance(length, drill, plating, RHO_20), expected, rtol=1e-12)


def test_series_coil_network_equals_path_sum_and_includes_vias():
    coil = tracecoil.spiral(turns=5, outer_mm=20, width_mm=0.3, gap_mm=0.2, layers=2)
    r_net = res.dc_resistance(coil)
    r_path = res.dc_resistance(coil, method="path")
    # Series path: both are the same sum; only summation order differs.
    assert_allclose(r_net, r_path, rtol=1e-9)
    parts = res.resistance_by_layer(coil)
    assert parts["vias"] > 0
    assert_allclose(sum(parts.values()), r_path, rtol=1e-12)
    # The traces alone, from their centreline lengths (layout) and rho/(w t).
    traces = sum(RHO_20 * t.length_mm * 1e-3 / (t.width_mm * 1e-3 * 35e-6) for t in coil.traces)
    assert_allclose(r_path - parts["vias"], traces, rtol=1e-9)


def test_unequal_parallel_branches():
    # Two traces in parallel, 35 um and 17.5 um thick: Kirchhoff gives
    # R1 R2 / (R1 + R2); the path sum with the stated 1/2 fractions gives
    # (R1 + R2) / 4, larger (Thomson's theorem).
    coil = parallel_traces(length_mm=50.0, width_mm=0.5, copper_um=(35.0, 17.5))
    r1 = RHO_20 * 0.05 / (0.5e-3 * 35e-6)
    r2 = RHO_20 * 0.05 / (0.5e-3 * 17.5e-6)
    assert_allclose(res.dc_resistance(coil), r1 * r2 / (r1 + r2), rtol=1e-9)
    assert_allclose(res.dc_resistance(coil, method="path"), (r1 + r2) / 4, rtol=1e-12)


def test_parallel_spiral_halves_resistance():
    series1 = tracecoil.spiral(turns=5, outer_mm=20, width_mm=0.3, gap_mm=0.2, layers=1)
    par2 = tracecoil.spiral(turns=5, outer_mm=20, width_mm=0.3, gap_mm=0.2, layers=2, wiring="parallel")
    parts1 = res.resistance_by_layer(series1)
    # The winding layer of the single-layer coil carries all the current;
    # two equal layers in parallel carry half each: 1/4 the power each.
    r_par = res.resistance_by_layer(par2)
    assert_allclose(r_par[1], parts1[1] / 4, rtol=1e-9)
    # Identical branches: Kirchhoff and the path sum agree to the small
    # asymmetry of the via barrels feeding each layer.
    assert_allclose(res.dc_resistance(par2), res.dc_resistance(par2, method="path"), rtol=1e-3)


def test_bad_inputs():
    coil = straight_trace()
    with pytest.raises(SpecError, match="method"):
        res.dc_resistance(coil, method="magic")
    with pytest.raises(SpecError, match="freq_hz"):
        res.ac_resistance(coil, -1.0)
