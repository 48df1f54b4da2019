"""Lumped equivalent circuit of a coil: self-resonance, Q, tank, SPICE.

The coil is modelled as R in series with L, the pair shunted by the
parasitic capacitance C (the usual single-resonance model of an inductor,
e.g. C. P. Yue and S. S. Wong, IEEE Trans. Electron Devices 47(3), 2000,
without the substrate branches; from memory):

    Z(w) = (R + j w L) || 1 / (j w C).

Functions take and return SI numbers or arrays (broadcast).
"""

from __future__ import annotations

import re

import numpy as np

from ..errors import SpecError


def resonant_frequency(inductance_h, capacitance_f):
    """f0 = 1 / (2 pi sqrt(L C)) (Hz), the lossless resonance.

    Parameters
    ----------
    inductance_h, capacitance_f : float or ndarray
        L (H) and C (F), broadcast.

    Returns
    -------
    ndarray
        Frequency (Hz); inf where C is 0.

    >>> round(float(resonant_frequency(1e-6, 1e-9)) / 1e6, 4)
    5.0329
    """
    lc = np.asarray(inductance_h, dtype=float) * np.asarray(capacitance_f, dtype=float)
    with np.errstate(divide="ignore"):
        return 1.0 / (2.0 * np.pi * np.sqrt(lc))


def quality_factor(freq_hz, inductance_h, resistance_ohm):
    """Q = w L / R, the coil alone (no capacitance).

    >>> round(float(quality_factor(1e6, 1e-6, 0.5)), 4)
    12.5664
    """
    w = 2.0 * np.pi * np.asarray(freq_hz, dtype=float)
    return w * np.asarray(inductance_h, dtype=float) / np.asarray(resistance_ohm, dtype=float)


def coil_impedance(freq_hz, inductance_h, resistance_ohm, capacitance_f=0.0):
    """Terminal impedance (R + j w L) || 1/(j w C) (ohm, complex).

    Parameters
    ----------
    freq_hz : float or ndarray
        Frequency (Hz).
    inductance_h, resistance_ohm, capacitance_f : float or ndarray
        Series L and R, shunt C; broadcast with ``freq_hz``.

    Returns
    -------
    ndarray of complex
        Impedance (ohm).

    >>> z = coil_impedance(1e6, 1e-6, 0.5)
    >>> round(float(z.real), 3), round(float(z.imag), 3)
    (0.5, 6.283)
    """
    w = 2.0 * np.pi * np.asarray(freq_hz, dtype=float)
    zs = np.asarray(resistance_ohm, dtype=float) + 1j * w * np.asarray(inductance_h, dtype=float)
    return zs / (1.0 + 1j * w * np.asarray(capacitance_f, dtype=float) * zs)


def loaded_quality_factor(freq_hz, inductance_h, resistance_ohm, capacitance_f):
    """Q of the coil as seen at its terminals, Im Z / Re Z, C included.

    Equals (w L / R) (1 - w^2 L C - R^2 C / L): it falls to zero at the
    self-resonance and is negative above it, where the coil looks
    capacitive.

    >>> round(float(loaded_quality_factor(1e6, 1e-6, 0.5, 1e-9)), 3)
    12.067
    """
    z = coil_impedance(freq_hz, inductance_h, resistance_ohm, capacitance_f)
    return z.imag / z.real


def apparent_inductance(freq_hz, inductance_h, resistance_ohm, capacitance_f):
    """Im Z / w (H): the inductance a meter reads at the terminals; it
    rises towards the self-resonance as L / (1 - w^2 L C).

    >>> round(float(apparent_inductance(1e6, 1e-6, 0.0, 1e-9)) * 1e6, 4)
    1.0411
    """
    z = coil_impedance(freq_hz, inductance_h, resistance_ohm, capacitance_f)
    return z.imag / (2.0 * np.pi * np.asarray(freq_hz, dtype=float))


def tank_frequency(inductance_h, resistance_ohm, coil_capacitance_f, tank_capacitance_f):
    """Resonances of the coil with a parallel tank capacitor.

    Returns the lossless f0 = 1 / (2 pi sqrt(L (C_coil + C_tank))) and the
    zero-phase frequency of the lossy tank, w^2 = 1 / (L C) - (R / L)^2
    (C = C_coil + C_tank); NaN when the tank is so lossy it has none.

    Returns
    -------
    f0_hz, f_zero_phase_hz : float

    >>> f0, fz = tank_frequency(1e-6, 1.0, 0.0, 1e-9)
    >>> round(f0 / 1e6, 4), round(fz / 1e6, 4)
    (5.0329, 5.0304)
    """
    c = float(coil_capacitance_f) + float(tank_capacitance_f)
    if not (c > 0):
        raise SpecError(f"tank_capacitance_f must be > 0 F; got {tank_capacitance_f!r}")
    f0 = float(resonant_frequency(inductance_h, c))
    w2 = 1.0 / (inductance_h * c) - (resistance_ohm / inductance_h) ** 2
    fz = float(np.sqrt(w2) / (2.0 * np.pi)) if w2 > 0 else float("nan")
    return f0, fz


_SPICE_NAME = re.compile(r"[^A-Za-z0-9_]")


def spice_name(name: str) -> str:
    """A name SPICE accepts: letters, digits and underscores, starting with a
    letter.

    >>> spice_name("my coil-2")
    'my_coil_2'
    """
    s = _SPICE_NAME.sub("_", str(name)) or "coil"
    return s if s[0].isalpha() else "c_" + s


def spice_subcircuit(name, *, inductance_h, resistance_ohm, capacitance_f, comment_lines=()):
    """A two-pin SPICE subcircuit of the coil: R in series with L, C across.

    Parameters
    ----------
    name : str
        Subcircuit name (sanitised with :func:`spice_name`).
    inductance_h, resistance_ohm, capacitance_f : float
        Element values (SI); the capacitor is left out when 0.
    comment_lines : iterable of str
        Extra comment lines written at the top.

    Returns
    -------
    str
        Netlist text: ``.subckt NAME a b`` ... ``.ends NAME``. Pin ``a`` is
        terminal A, pin ``b`` terminal B.

    >>> print(spice_subcircuit("demo", inductance_h=1e-6, resistance_ohm=0.5, capacitance_f=2e-12))
    * demo: coil equivalent circuit, R in series with L, C across the pins
    .subckt demo a b
    R1 a n1 0.5
    L1 n1 b 1e-06
    C1 a b 2e-12
    .ends demo
    <BLANKLINE>
    """
    for key, val in (("inductance_h", inductance_h), ("resistance_ohm", resistance_ohm), ("capacitance_f", capacitance_f)):
        if not (np.isfinite(val) and val >= 0):
            raise SpecError(f"{key} must be a finite number >= 0; got {val!r}")
    if not inductance_h > 0:
        raise SpecError(f"inductance_h must be > 0; got {inductance_h!r}")
    n = spice_name(name)
    lines = [f"* {name}: coil equivalent circuit, R in series with L, C across the pins"]
    lines += [f"* {c}" for c in comment_lines]
    lines.append(f".subckt {n} a b")
    # A zero resistance would short SPICE's inductor loop check; keep a floor.
    lines.append(f"R1 a n1 {max(float(resistance_ohm), 1e-12):.12g}")
    lines.append(f"L1 n1 b {float(inductance_h):.12g}")
    if capacitance_f > 0:
        lines.append(f"C1 a b {float(capacitance_f):.12g}")
    lines.append(f".ends {n}")
    return "\n".join(lines) + "\n"
