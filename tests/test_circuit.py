"""Equivalent circuit: resonance, Q, tank, SPICE subcircuit through ngspice."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from physics_helpers import ngspice_impedance, peak_frequency
from tracecoil.errors import SpecError
from tracecoil.physics import circuit as cc

L, R, C = 4.7e-6, 2.2, 6.8e-12  # an invented coil: Q ~ 70 at its resonance


def test_loaded_q_closed_form():
    # Two routes to Q at the terminals: Im Z / Re Z of the complex
    # impedance, and the expanded form (wL/R)(1 - w^2 L C - R^2 C / L)
    # (algebra of (R + jwL) || 1/(jwC)). Identical up to rounding.
    f = np.logspace(4, 7.5, 50)
    w = 2 * np.pi * f
    expected = w * L / R * (1 - w**2 * L * C - R**2 * C / L)
    assert_allclose(cc.loaded_quality_factor(f, L, R, C), expected, rtol=1e-9)
    # Without C it is the plain w L / R.
    assert_allclose(cc.loaded_quality_factor(f, L, R, 0.0), cc.quality_factor(f, L, R), rtol=1e-12)


def test_apparent_inductance_rises_towards_resonance():
    f0 = float(cc.resonant_frequency(L, C))
    # Lossless: L / (1 - (f/f0)^2) exactly.
    f = np.array([0.1, 0.5, 0.9]) * f0
    assert_allclose(cc.apparent_inductance(f, L, 0.0, C), L / (1 - (f / f0) ** 2), rtol=1e-9)


def test_tank_zero_phase():
    ct = 1e-9
    f0, fz = cc.tank_frequency(L, R, C, ct)
    assert_allclose(f0, 1 / (2 * np.pi * np.sqrt(L * (C + ct))), rtol=1e-12)
    # At the zero-phase frequency the tank's impedance is real.
    z = cc.coil_impedance(fz, L, R, C + ct)
    assert abs(z.imag) < 1e-9 * abs(z.real)
    # A tank too lossy to ring has no zero-phase frequency.
    assert np.isnan(cc.tank_frequency(1e-6, 1e3, 0.0, 1e-9)[1])
    with pytest.raises(SpecError, match="tank_capacitance_f"):
        cc.tank_frequency(L, R, 0.0, 0.0)


def test_subcircuit_text():
    text = cc.spice_subcircuit("coil 1 (top)", inductance_h=L, resistance_ohm=R, capacitance_f=C, comment_lines=["made by a test"])
    lines = [ln for ln in text.splitlines() if ln and not ln.startswith("*")]
    assert lines[0] == ".subckt coil_1__top_ a b"
    assert lines[-1] == ".ends coil_1__top_"
    values = {ln.split()[0]: float(ln.split()[3]) for ln in lines[1:-1]}
    assert values == {"R1": R, "L1": L, "C1": C}
    with pytest.raises(SpecError, match="inductance_h"):
        cc.spice_subcircuit("x", inductance_h=0.0, resistance_ohm=1.0, capacitance_f=0.0)


@pytest.mark.parametrize("tank", [0.0, 100e-12])
def test_ngspice_resonance_matches_prediction(tank):
    # ngspice (an outside circuit simulator) in batch mode: 1 A AC into the
    # subcircuit; the |Z| peak must sit within 1 % of the predicted
    # resonance 1/(2 pi sqrt(L C)). With Q ~ 70 the loss shifts the peak by
    # ~1e-4, the sweep step is 1e-4 of f0: 1 % is the tolerance.
    text = cc.spice_subcircuit("tank", inductance_h=L, resistance_ohm=R, capacitance_f=C + tank)
    f_pred = float(cc.resonant_frequency(L, C + tank))
    f, z = ngspice_impedance(text, "tank", 0.8 * f_pred, 1.2 * f_pred, points=4001)
    assert_allclose(peak_frequency(f, z), f_pred, rtol=0.01)
    # The peak impedance of a high-Q tank is about Q^2 R = L / (R C).
    assert_allclose(z.max(), L / (R * (C + tank)), rtol=0.02)
