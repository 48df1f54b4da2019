"""Electrical limits: trace heating and conductor spacing (IPC-2221).

Trace current and temperature rise
----------------------------------
IPC-2221, *Generic Standard on Printed Board Design* (IPC, 1998), gives the
curve fit of its conductor-heating charts as

    I = k * dT**0.44 * A**0.725

with I in amperes, dT the temperature rise in kelvin, A the conductor
cross-section in square mils, k = 0.048 for external and 0.024 for internal
conductors (formula and constants from memory, as recalled in the project's
references; the charts go back to measurements made for the US National
Bureau of Standards in the 1950s). The fit is quoted for currents up to
about 35 A, widths up to about 400 mil, rises of 10-100 K and copper of
0.5-3 oz (from memory); outside that the functions still answer but the
caller gets a note. IPC-2152 (2009) replaced the charts with newer
measurements that also depend on board thickness and nearby copper planes
(from memory).

The formula describes one isolated trace. A coil packs many turns side by
side, and they heat one another: the real rise of a coil at a given
current can be several times the single-trace estimate. Measure it.

Conductor spacing against voltage
---------------------------------
IPC-2221 Table 6-1, *Electrical conductor spacing*, gives the minimum
spacing for a voltage between conductors (DC or AC peak). The values below
are recalled **from memory** (copies of the table in circulation differ);
columns: B1 internal conductors; B2 external, uncoated, sea level to
3050 m; B3 external, uncoated, above 3050 m; B4 external, with permanent
polymer coating. Above 500 V the per-volt rate of each column is added to
its 500 V value (from memory). Designs near these limits need the standard
itself, and product safety standards and local electrical codes govern
isolation and creepage, not this table.
"""

from __future__ import annotations

import numpy as np

MM_PER_MIL = 0.0254
UM_PER_MIL = 25.4
K_EXTERNAL = 0.048  # IPC-2221 trace formula, external conductors (from memory)
K_INTERNAL = 0.024  # internal conductors (from memory)
EXP_DT = 0.44
EXP_AREA = 0.725

# (upper voltage of the row, B1 internal, B2 external uncoated <= 3050 m,
#  B3 external uncoated > 3050 m, B4 external coated), spacing in mm.
# IPC-2221 Table 6-1 (from memory; copies differ).
SPACING_TABLE_MM = (
    (15.0, 0.05, 0.1, 0.1, 0.05),
    (30.0, 0.05, 0.1, 0.1, 0.05),
    (50.0, 0.1, 0.6, 0.6, 0.13),
    (100.0, 0.1, 0.6, 1.5, 0.13),
    (150.0, 0.2, 0.6, 3.2, 0.4),
    (170.0, 0.2, 1.25, 3.2, 0.4),
    (250.0, 0.2, 1.25, 6.4, 0.4),
    (300.0, 0.2, 1.25, 12.5, 0.4),
    (500.0, 0.25, 2.5, 12.5, 0.8),
)
# mm per volt above 500 V, added to the 500 V row (from memory).
SPACING_PER_VOLT_ABOVE_500 = (0.0025, 0.005, 0.025, 0.00305)
# Which column each condition uses on outer layers; inner layers use B1.
SPACING_CONDITIONS = {"uncoated": 2, "uncoated-high-altitude": 3, "coated": 4}
SPACING_SOURCE = "IPC-2221 Table 6-1, electrical conductor spacing (values recalled from memory; copies differ)"
TRACE_SOURCE = "IPC-2221 conductor heating fit I = k dT^0.44 A^0.725 (k = 0.048 external, 0.024 internal; from memory)"

# Thresholds above which a voltage is commonly treated as hazardous to
# touch in dry conditions: 30 V AC rms (42.4 V peak) or 60 V DC (common
# practice in safety standards, from memory). We compare the peak value.
HAZARD_PEAK_V = 42.4


def _k(internal):
    return np.where(np.asarray(internal, bool), K_INTERNAL, K_EXTERNAL)


def cross_section_mil2(width_mm, thickness_um):
    """Conductor cross-section in square mils.

    >>> round(float(cross_section_mil2(0.254, 35.0)), 4)
    13.7795
    """
    return (np.asarray(width_mm, float) / MM_PER_MIL) * (np.asarray(thickness_um, float) / UM_PER_MIL)


def trace_current_a(width_mm, thickness_um, temp_rise_c, *, internal=False):
    """Current (A) that raises a trace by ``temp_rise_c`` (IPC-2221 fit).

    Parameters
    ----------
    width_mm : array_like
        Trace width (mm).
    thickness_um : array_like
        Copper thickness (um).
    temp_rise_c : array_like
        Temperature rise (K).
    internal : bool or array_like of bool
        Internal layer (k = 0.024) rather than external (k = 0.048).

    Returns
    -------
    ndarray
        Current in amperes, broadcast over the inputs.

    >>> round(float(trace_current_a(0.254, 35.0, 10.0)), 3)  # 10 mil, 1 oz, 10 K, outer
    0.885
    """
    a = cross_section_mil2(width_mm, thickness_um)
    return _k(internal) * np.asarray(temp_rise_c, float) ** EXP_DT * a**EXP_AREA


def temperature_rise_c(current_a, width_mm, thickness_um, *, internal=False):
    """Temperature rise (K) of a trace carrying ``current_a`` (IPC-2221 fit
    solved for dT: dT = (I / (k A^0.725))^(1/0.44)).

    >>> i = trace_current_a(0.254, 35.0, 10.0)
    >>> round(float(temperature_rise_c(i, 0.254, 35.0)), 6)
    10.0
    """
    a = cross_section_mil2(width_mm, thickness_um)
    return (np.asarray(current_a, float) / (_k(internal) * a**EXP_AREA)) ** (1.0 / EXP_DT)


def trace_width_mm(current_a, thickness_um, temp_rise_c, *, internal=False):
    """Narrowest trace (mm) that carries ``current_a`` within ``temp_rise_c``
    (IPC-2221 fit solved for the cross-section).

    >>> round(float(trace_width_mm(trace_current_a(0.254, 35.0, 10.0), 35.0, 10.0)), 6)
    0.254
    """
    area = (np.asarray(current_a, float) / (_k(internal) * np.asarray(temp_rise_c, float) ** EXP_DT)) ** (1.0 / EXP_AREA)
    return area / (np.asarray(thickness_um, float) / UM_PER_MIL) * MM_PER_MIL


def validity_notes(*, current_a, width_mm, thickness_um, temp_rise_c) -> list[str]:
    """Notes for inputs outside the range the IPC-2221 fit is quoted for."""
    notes = []
    if current_a > 35.0:
        notes.append(f"current {current_a:g} A is above the ~35 A the IPC-2221 charts cover (from memory)")
    if width_mm / MM_PER_MIL > 400.0:
        notes.append(f"width {width_mm:g} mm is above the ~400 mil the IPC-2221 charts cover (from memory)")
    if not 17.0 <= thickness_um <= 106.0:
        notes.append(f"copper {thickness_um:g} um is outside the 0.5-3 oz the IPC-2221 charts cover (from memory)")
    if temp_rise_c > 100.0:
        notes.append(f"a rise of {temp_rise_c:.0f} K is beyond the 10-100 K the IPC-2221 charts cover (from memory)")
    return notes


def spacing_for_voltage_mm(voltage_v, *, internal: bool = False, condition: str = "uncoated") -> float:
    """Minimum conductor spacing (mm) for ``voltage_v`` (DC or AC peak)
    between conductors, from IPC-2221 Table 6-1 (values from memory).

    Parameters
    ----------
    voltage_v : float
        Voltage between the conductors (V); 0 gives 0 (no requirement).
    internal : bool
        Internal layer (column B1); otherwise ``condition`` picks the column.
    condition : {'uncoated', 'uncoated-high-altitude', 'coated'}

    >>> spacing_for_voltage_mm(12), spacing_for_voltage_mm(48), spacing_for_voltage_mm(48, internal=True)
    (0.1, 0.6, 0.1)
    >>> round(spacing_for_voltage_mm(600), 4)  # 500 V value + 100 V x 0.005 mm/V
    3.0
    """
    v = float(voltage_v)
    if v < 0 or not np.isfinite(v):
        raise ValueError(f"voltage_v must be a finite number >= 0; got {voltage_v!r}")
    if v == 0:
        return 0.0
    if condition not in SPACING_CONDITIONS:
        raise ValueError(f"condition must be one of {', '.join(repr(c) for c in SPACING_CONDITIONS)}; got {condition!r}")
    col = 1 if internal else SPACING_CONDITIONS[condition]
    for row in SPACING_TABLE_MM:
        if v <= row[0]:
            return row[col]
    return SPACING_TABLE_MM[-1][col] + (v - 500.0) * SPACING_PER_VOLT_ABOVE_500[col - 1]


def heating_cautions() -> list[str]:
    return [
        "Heating: the IPC-2221 figure is for one isolated trace in still air. A coil's turns lie side by side and heat one another, "
        "so the real rise can be several times higher; measure the built board at the design current (thermocouple or thermal camera) "
        "before relying on it, and keep hot copper away from parts and materials it can damage.",
        "The IPC-2221 constants here were recalled from memory; designs near the limit need the standard itself (and IPC-2152 for "
        "newer data), local codes and licensed practice.",
    ]


def voltage_cautions(voltage_v: float) -> list[str]:
    lines = [
        "Spacing for voltage uses IPC-2221 Table 6-1 values recalled from memory (copies of the table differ); designs near those "
        "limits need the standard itself and local codes.",
    ]
    if voltage_v > HAZARD_PEAK_V:
        lines.append(
            f"Voltage: {voltage_v:g} V is above the level commonly treated as safe to touch (30 V AC rms / 42.4 V peak, 60 V DC; "
            "from memory). Insulation, clearance and creepage for safety are set by the product safety standard that applies and by "
            "local electrical codes, not by IPC-2221 alone: follow them, and have the design and its testing done or reviewed by a "
            "qualified, where required licensed, person. Do not touch the board while it is powered."
        )
    return lines
