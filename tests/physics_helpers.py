"""Hand-built coils and an ngspice runner for the resistance, capacitance,
circuit and predict tests.

The coils here are built directly as :class:`tracecoil.layout.Coil`
objects (not by the generators), so each test knows its geometry exactly.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from tracecoil.layout import Coil, Stackup, Step, Terminal, Trace, Via


def pad(x, y, layers, drill=0.8, size=1.6):
    return Via(x_mm=float(x), y_mm=float(y), drill_mm=drill, pad_mm=size, layers=tuple(layers), role="terminal")


def straight_trace(length_mm=100.0, width_mm=1.0, copper_um=35.0) -> Coil:
    """One straight trace between two single-layer pads."""
    st = Stackup(copper_um=(copper_um,), dielectric_mm=())
    tr = Trace(layer=1, points_mm=np.array([[0.0, 0.0], [length_mm, 0.0]]), width_mm=width_mm, role="winding")
    vias = (pad(0, 0, (1,)), pad(length_mm, 0, (1,)))
    terms = (Terminal("A", 0.0, 0.0, 0), Terminal("B", length_mm, 0.0, 1))
    return Coil(st, (tr,), vias, terms, (Step("trace", 0),), name="straight")


def parallel_traces(length_mm=50.0, width_mm=0.5, copper_um=(35.0, 17.5), dielectric_mm=0.2) -> Coil:
    """Two straight traces on layers 1 and 2 joining the same two
    through-hole pads: a parallel pair with unequal copper thickness."""
    st = Stackup(copper_um=tuple(copper_um), dielectric_mm=(dielectric_mm,))
    pts = np.array([[0.0, 0.0], [length_mm, 0.0]])
    traces = (Trace(1, pts, width_mm), Trace(2, pts, width_mm))
    vias = (pad(0, 0, (1, 2)), pad(length_mm, 0, (1, 2)))
    terms = (Terminal("A", 0.0, 0.0, 0), Terminal("B", length_mm, 0.0, 1))
    path = (Step("trace", 0, 0.5), Step("trace", 1, 0.5))
    return Coil(st, traces, vias, terms, path, name="parallel_pair")


def hairpin(length_mm=200.0, width_mm=0.3, gap_mm=0.2, permittivity=4.5) -> Coil:
    """Two long parallel traces on one layer, joined at the far end by a
    short perpendicular trace: out along y = +p/2, back along y = -p/2."""
    p = width_mm + gap_mm
    st = Stackup(copper_um=(35.0, 35.0), dielectric_mm=(1.5,), permittivity=permittivity)
    t0 = Trace(1, np.array([[0.0, p / 2], [length_mm, p / 2]]), width_mm)
    t1 = Trace(1, np.array([[length_mm, p / 2], [length_mm, -p / 2]]), width_mm, role="lead")
    t2 = Trace(1, np.array([[length_mm, -p / 2], [0.0, -p / 2]]), width_mm)
    vias = (pad(-1.0, p / 2 + 1.0, (1,)), pad(-1.0, -p / 2 - 1.0, (1,)))
    # Terminal pads sit away from the strips; the strips' ends touch them
    # through short leads that are perpendicular to the strips.
    la = Trace(1, np.array([[-1.0, p / 2 + 1.0], [0.0, p / 2]]), width_mm, role="lead")
    lb = Trace(1, np.array([[0.0, -p / 2], [-1.0, -p / 2 - 1.0]]), width_mm, role="lead")
    traces = (la, t0, t1, t2, lb)
    terms = (Terminal("A", -1.0, p / 2 + 1.0, 0), Terminal("B", -1.0, -p / 2 - 1.0, 1))
    path = tuple(Step("trace", i) for i in range(5))
    return Coil(st, traces, vias, terms, path, name="hairpin")


def folded_pair(length_mm=50.0, width_mm=2.0, dielectric_mm=0.1, permittivity=4.5) -> Coil:
    """A trace out along x on layer 1, a via, and back along the same line
    on layer 2: the two layers' copper overlaps over its whole length."""
    st = Stackup(copper_um=(35.0, 35.0), dielectric_mm=(dielectric_mm,), permittivity=permittivity)
    t0 = Trace(1, np.array([[0.0, 0.0], [length_mm, 0.0]]), width_mm)
    t1 = Trace(2, np.array([[length_mm, 0.0], [0.0, 0.0]]), width_mm)
    vias = (
        pad(0.0, 0.0, (1,), size=0.5, drill=0.3),
        Via(length_mm, 0.0, 0.3, 0.6, (1, 2)),
        pad(0.0, 0.0, (2,), size=0.5, drill=0.3),
    )
    terms = (Terminal("A", 0.0, 0.0, 0), Terminal("B", 0.0, 0.0, 2))
    path = (Step("trace", 0), Step("via", 1, 1.0, 1, 2), Step("trace", 1))
    return Coil(st, (t0, t1), vias, terms, path, name="folded")


def scaled(coil: Coil, factor: float) -> Coil:
    """Every length of the coil (plan and stack-up) multiplied by ``factor``."""
    st = coil.stackup
    st2 = replace(
        st,
        copper_um=tuple(c * factor for c in st.copper_um),
        dielectric_mm=tuple(d * factor for d in st.dielectric_mm),
        plating_um=st.plating_um * factor,
    )
    traces = tuple(replace(t, points_mm=t.points_mm * factor, width_mm=t.width_mm * factor) for t in coil.traces)
    vias = tuple(replace(v, x_mm=v.x_mm * factor, y_mm=v.y_mm * factor, drill_mm=v.drill_mm * factor, pad_mm=v.pad_mm * factor) for v in coil.vias)
    terms = tuple(replace(t, x_mm=t.x_mm * factor, y_mm=t.y_mm * factor) for t in coil.terminals)
    return replace(coil, stackup=st2, traces=traces, vias=vias, terminals=terms)


# ----------------------------------------------------------------------------
# ngspice
# ----------------------------------------------------------------------------


def require_ngspice() -> str:
    """Path of ngspice; skip without it, but fail under CI=true."""
    exe = shutil.which("ngspice")
    if exe is None:
        if os.environ.get("CI", "").strip().lower() == "true":
            pytest.fail("ngspice is required under CI=true (Debian package 'ngspice') but is not on PATH")
        pytest.skip("ngspice not installed (Debian package 'ngspice'); the SPICE resonance check needs it")
    return exe


def ngspice_impedance(subcircuit: str, subckt_name: str, f_start: float, f_stop: float, points: int = 4001):
    """|Z| between the subcircuit's pins over a linear AC sweep, by ngspice
    in batch mode: 1 A AC into pin a, pin b grounded.

    Returns
    -------
    freq_hz, z_mag : ndarray, shape (points,)
    """
    exe = require_ngspice()
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "z.txt"
        deck = (
            "* tracecoil test: impedance of a subcircuit\n"
            f"{subcircuit}\n"
            f"X1 1 0 {subckt_name}\n"
            "I1 0 1 DC 0 AC 1\n"
            ".control\n"
            "set noaskquit\n"
            f"ac lin {points} {f_start:.12g} {f_stop:.12g}\n"
            "let zm = mag(v(1))\n"
            f"wrdata {out} zm\n"
            "quit\n"
            ".endc\n"
            ".end\n"
        )
        cir = Path(tmp) / "deck.cir"
        cir.write_text(deck)
        proc = subprocess.run([exe, "-b", str(cir)], capture_output=True, text=True, timeout=120)
        if proc.returncode != 0 or not out.exists():
            raise AssertionError(f"ngspice failed ({proc.returncode}):\n{proc.stdout}\n{proc.stderr}")
        data = np.loadtxt(out)
    return data[:, 0], data[:, 1]


def peak_frequency(freq_hz, values) -> float:
    """Frequency of the maximum, refined by a parabola through the three
    samples around it."""
    i = int(np.argmax(values))
    if 0 < i < len(values) - 1:
        y0, y1, y2 = values[i - 1], values[i], values[i + 1]
        shift = 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2)
        return float(freq_hz[i] + shift * (freq_hz[i + 1] - freq_hz[i]))
    return float(freq_hz[i])
