"""IPC-2221 limits: the trace-heating fit against worked values computed by
hand from the published formula, and the spacing table's structure.

Source: IPC-2221, Generic Standard on Printed Board Design, IPC, 1998:
I = k * dT^0.44 * A^0.725, A in square mils, k = 0.048 external, 0.024
internal (formula and constants from memory). The worked values below were
computed by hand (logarithms to 6 digits), independently of the code, so
they carry about 1e-4 relative rounding: rtol = 2e-4.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil import spiral
from tracecoil.rules import check, load_rules
from tracecoil.rules import electrical as el

HAND_RTOL = 2e-4  # hand arithmetic to 5-6 significant digits

# (width mm, copper um, rise K, internal, current A worked by hand)
WORKED = [
    # 10 mil x 1 oz (35 um = 1.37795 mil): A = 13.7795 mil^2, ln A = 2.62319,
    # A^0.725 = e^1.90181 = 6.6981; 10^0.44 = e^1.013137 = 2.75423;
    # I = 0.048 * 2.75423 * 6.6981 = 0.88552 A
    (0.254, 35.0, 10.0, False, 0.88552),
    # 20 mil x 0.5 oz (17.5 um): same A = 13.7795 mil^2; 20^0.44 = e^1.318122
    # = 3.7365; I = 0.024 * 3.7365 * 6.6981 = 0.60065 A
    (0.508, 17.5, 20.0, True, 0.60065),
    # 100 mil x 2 oz (70 um = 2.75591 mil): A = 275.591 mil^2, ln A = 5.61891,
    # A^0.725 = e^4.07371 = 58.777; 30^0.44 = e^1.496527 = 4.46619;
    # I = 0.048 * 4.46619 * 58.777 = 12.601 A
    (2.54, 70.0, 30.0, False, 12.601),
]


@pytest.mark.parametrize("w, cu, dt, internal, amps", WORKED)
def test_trace_current_against_hand_worked_values(w, cu, dt, internal, amps):
    assert_allclose(el.trace_current_a(w, cu, dt, internal=internal), amps, rtol=HAND_RTOL)


@pytest.mark.parametrize("w, cu, dt, internal, amps", WORKED)
def test_inverse_forms_recover_the_inputs(w, cu, dt, internal, amps):
    # the hand value's rounding grows by 1/0.44 when solved for dT
    assert_allclose(el.temperature_rise_c(amps, w, cu, internal=internal), dt, rtol=HAND_RTOL / 0.44)
    # exact algebraic inverses: only float rounding, rtol 1e-12
    i = el.trace_current_a(w, cu, dt, internal=internal)
    assert_allclose(el.temperature_rise_c(i, w, cu, internal=internal), dt, rtol=1e-12)
    assert_allclose(el.trace_width_mm(i, cu, dt, internal=internal), w, rtol=1e-12)


def test_formula_against_plain_python_over_a_grid():
    # a second route: the formula typed out with math.pow, unit conversion by hand
    for w in (0.1, 0.3, 1.0):
        for cu in (17.5, 35.0, 105.0):
            for dt in (5.0, 10.0, 45.0):
                for internal in (False, True):
                    area_mil2 = (w / 0.0254) * (cu / 25.4)
                    ref = (0.024 if internal else 0.048) * math.pow(dt, 0.44) * math.pow(area_mil2, 0.725)
                    assert_allclose(el.trace_current_a(w, cu, dt, internal=internal), ref, rtol=1e-12)


def test_scaling_laws_of_the_fit():
    base = el.trace_current_a(0.3, 35.0, 10.0)
    assert_allclose(el.trace_current_a(0.3, 35.0, 20.0) / base, 2**0.44, rtol=1e-12)
    assert_allclose(el.trace_current_a(0.6, 35.0, 10.0) / base, 2**0.725, rtol=1e-12)
    assert_allclose(el.trace_current_a(0.3, 35.0, 10.0, internal=True) / base, 0.5, rtol=1e-12)


def test_one_amp_one_ounce_needs_about_twelve_mil():
    # a commonly quoted chart reading: ~12 mil for 1 A, 1 oz, 10 K outer
    # (from memory); the fit gives 11.8 mil
    assert 0.28 < float(el.trace_width_mm(1.0, 35.0, 10.0)) < 0.32


def test_arrays_broadcast():
    i = el.trace_current_a(np.array([0.1, 0.2, 0.4]), 35.0, 10.0, internal=np.array([False, True, False]))
    assert i.shape == (3,) and i[1] < i[0] * 2**0.725


# ------------------------------------------------------------------ spacing
VOLTS = np.concatenate([np.linspace(0.5, 520, 2000), [15, 16, 30, 31, 50, 51, 100, 101, 150, 151, 170, 171, 250, 251, 300, 301, 500, 501]])


@pytest.mark.parametrize("condition", ["uncoated", "uncoated-high-altitude", "coated"])
def test_spacing_never_falls_as_voltage_rises(condition):
    v = np.sort(VOLTS)
    s = [el.spacing_for_voltage_mm(x, condition=condition) for x in v]
    assert all(b >= a for a, b in zip(s, s[1:]))
    si = [el.spacing_for_voltage_mm(x, internal=True) for x in v]
    assert all(b >= a for a, b in zip(si, si[1:]))


def test_spacing_columns_order():
    # internal and coated need less than uncoated; high altitude needs more
    for v in VOLTS:
        sea = el.spacing_for_voltage_mm(v)
        assert el.spacing_for_voltage_mm(v, internal=True) <= sea
        assert el.spacing_for_voltage_mm(v, condition="coated") <= sea
        assert el.spacing_for_voltage_mm(v, condition="uncoated-high-altitude") >= sea


def test_spacing_above_500_volts_continues_from_the_500_volt_row():
    for cond in ("uncoated", "uncoated-high-altitude", "coated"):
        at = el.spacing_for_voltage_mm(500, condition=cond)
        assert_allclose(el.spacing_for_voltage_mm(500.001, condition=cond), at, atol=1e-4)
    # B2: 2.5 mm at 500 V is 500 V x 0.005 mm/V, so 1000 V gives 5 mm either way
    assert_allclose(el.spacing_for_voltage_mm(1000), 5.0, rtol=1e-12)


def test_spacing_rejects_bad_input():
    with pytest.raises(ValueError, match="voltage_v"):
        el.spacing_for_voltage_mm(-1)
    with pytest.raises(ValueError, match="condition"):
        el.spacing_for_voltage_mm(10, condition="wet")
    assert el.spacing_for_voltage_mm(0) == 0.0


# ----------------------------------------------------- in the rule check
def test_heating_finding_and_parallel_layers_share_current():
    rules = load_rules("standard").with_values(working_voltage_v=0.0)
    series = spiral(shape="square", outer_mm=12, turns=4, width_mm=0.15, gap_mm=0.2, layers=2)
    res = check(series, rules, current_a=1.0)
    hot = [f for f in res.findings if f.rule == "TEMPERATURE_RISE"]
    assert {f.layer for f in hot} == {"top", "bottom"}
    expect = el.temperature_rise_c(1.0, 0.15, 35.0)
    for f in hot:
        assert_allclose(f.measured, expect, rtol=1e-12)
        assert f.unit == "K" and f.limit == rules.max_temp_rise_c
    par = spiral(shape="square", outer_mm=12, turns=4, width_mm=0.15, gap_mm=0.2, layers=2, wiring="parallel", return_lead="none")
    rows = {r["layer"]: r for r in check(par, rules, current_a=1.0).electrical}
    assert_allclose(rows["top"]["current_a"], 0.5, rtol=1e-12)  # each of two parallel layers carries half
    assert any("Heating" in c for c in res.cautions)


def test_inner_layers_heat_more():
    coil = spiral(shape="square", outer_mm=12, turns=4, width_mm=0.2, gap_mm=0.2, layers=4, board={"layers": 4})
    rows = {r["layer"]: r for r in check(coil, "standard", current_a=0.3).electrical}
    assert rows["inner1"]["internal"] and not rows["top"]["internal"]
    # k halves inside: dT scales by 2^(1/0.44)
    assert_allclose(rows["inner1"]["temp_rise_c"] / rows["top"]["temp_rise_c"], 2 ** (1 / 0.44), rtol=1e-3)  # rounded to 4 decimals in the table


def test_voltage_spacing_finding_and_cautions():
    coil = spiral(shape="square", outer_mm=12, turns=4, width_mm=0.2, gap_mm=0.3, layers=2)
    low = check(coil, "standard", voltage_v=24)
    assert low.ok and not any("Voltage:" in c for c in low.cautions)
    high = check(coil, "standard", voltage_v=60)  # external uncoated needs 0.6 mm (Table 6-1, from memory)
    rules = {f.rule for f in high.findings}
    assert rules == {"VOLTAGE_SPACING"}
    assert all(f.limit == 0.6 for f in high.findings)
    assert any("Voltage:" in c and "licensed" in c for c in high.cautions)
    assert any("local codes" in c for c in high.cautions)
