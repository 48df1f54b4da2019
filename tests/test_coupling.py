"""Transmitter-receiver coupling through a conductive plate.

References (from memory): J. C. Maxwell, *A Treatise on Electricity and
Magnetism*, vol. 2, art. 701, 1873 (coaxial circles); the method of images
for a perfectly conducting plane (J. D. Jackson, *Classical
Electrodynamics*, 3rd ed., 1999); reciprocity of mutual inductance
(Neumann's formula is symmetric in the two circuits).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil.errors import SpecError
from tracecoil.layout import Coil, Stackup, Step, Trace
from tracecoil.physics.inductance import mutual_inductance
from tracecoil.targets.conductive import Plate, plate_signal
from tracecoil.targets.coupling import receiver_from_table, receiver_signal

from test_conductive import loop, maxwell, square


def figure_eight(half_w=4.0, half_h=3.0, gap=0.5, z_layer=1):
    """Two rectangles side by side wound in opposite senses (a differential receiver)."""
    x0, x1 = gap / 2, gap / 2 + 2 * half_w
    right = np.array([[x0, -half_h], [x1, -half_h], [x1, half_h], [x0, half_h], [x0, -half_h]])  # counter-clockwise
    left = right * np.array([-1.0, 1.0])  # mirror image: clockwise
    st = Stackup((1.0,), ())
    return Coil(st, (Trace(1, right, 0.05), Trace(1, left, 0.05)), (), (), (Step("trace", 0), Step("trace", 1)),
                name="figure8")


def test_reciprocity_of_the_effective_mutual_inductance():
    # Z_t is symmetric, so M_eff(tx -> rx) = M_eff(rx -> tx) to rounding; the
    # direct term comes from the PEEC mutual inductance, symmetric by Neumann.
    tx = loop(5.0, n=96)
    rx = loop(3.0, n=64).placed(offset_mm=(4.0, 1.0, -0.6))
    plate = Plate(square(16, centre=(2, 0)), 0.3, material="brass")
    pos = [[1.0, 0.0, 1.2], [3.0, -1.0, 2.0]]
    a = receiver_signal(tx, rx, plate, pos, freq_hz=3e5, cell_mm=0.8)
    b = receiver_signal(rx, tx, plate, pos, freq_hz=3e5, cell_mm=0.8)
    assert_allclose(b.m_eff_h, a.m_eff_h, rtol=1e-9)
    assert_allclose(mutual_inductance(rx, tx), mutual_inductance(tx, rx), rtol=1e-9)


def test_perfect_plate_adds_the_image_of_the_transmitter():
    # Coaxial loops: transmitter a = 5 mm at z = 0, receiver b = 4 mm at
    # z = -1 mm, a perfectly conducting plate with its face h = 1.5 mm above
    # the transmitter. Image theory: the plate adds -M_Maxwell(a, b, 2h + d)
    # (the image loop at z = 2h carries the opposite current). 1 %: as for the
    # mirror-loop check of a single loop (40 mm plate, 1 mm cells).
    tx = loop(5.0)
    rx = loop(4.0).placed(offset_mm=(0, 0, -1.0))
    zc = tx.z_mm(1)
    s = receiver_signal(tx, rx, Plate(square(40), 0.5, conductivity_s_m=1e12), [[0, 0, zc + 1.5]],
                        freq_hz=1e6, cell_mm=1.0, max_cells=1700, tx_current_a=0.01)
    image = -maxwell(5e-3, 4e-3, 2 * 1.5e-3 + 1e-3)
    assert_allclose(s.m_eff_h[0].real - s.mutual_free_h, image, rtol=0.01)
    assert abs(s.m_eff_h[0].imag) < 1e-3 * abs(image)  # no loss in a perfect conductor
    # the direct term against Maxwell: the 256-gons are within 0.1 % of circles
    assert_allclose(s.mutual_free_h, maxwell(5e-3, 4e-3, 1e-3), rtol=2e-3)
    # EMF = -j omega M_eff I (Faraday)
    assert_allclose(s.emf_v, -1j * 2 * math.pi * 1e6 * s.m_eff_h * 0.01, rtol=1e-12)


def test_resistive_plate_lags_and_far_plate_vanishes():
    # A resistive plate adds a loss term: for coaxial coils on one side the
    # eddy contribution -j omega m_rx^T Z_t^-1 m_tx has a negative imaginary
    # part (energy taken from the field). Far away it tends to zero like the
    # 1/h^3 image-dipole term (below 1e-4 of M_tx_rx at 60 mm).
    tx = loop(5.0, n=96)
    rx = loop(4.0, n=96).placed(offset_mm=(0, 0, -1.0))
    zc = tx.z_mm(1)
    s = receiver_signal(tx, rx, Plate(square(14), 0.2, material="stainless steel"),
                        [[0, 0, zc + 1.0], [0, 0, zc + 60.0]], freq_hz=2e5, cell_mm=0.7)
    eddy = s.m_eff_h - s.mutual_free_h
    assert eddy[0].imag < 0 and eddy[0].real < 0
    assert abs(eddy[1]) < 1e-4 * abs(s.mutual_free_h)
    assert s.emf_amplitude_v[0] < s.emf_amplitude_v[1]


def test_differential_receiver_is_zero_when_the_target_is_centred():
    # A transmitter loop centred on a figure-eight receiver: by mirror
    # symmetry (x -> -x maps the receiver onto minus itself) M_tx_rx = 0 and
    # the target gives zero when centred; moved left or right it gives
    # equal and opposite EMFs.
    tx = loop(6.0, n=128)
    rx = figure_eight().placed(offset_mm=(0, 0, -0.5))
    plate = Plate(square(6), 0.5, material="aluminium")
    zc = tx.z_mm(1)
    pos = [[-3.0, 0, zc + 1.0], [0.0, 0, zc + 1.0], [3.0, 0, zc + 1.0]]
    s = receiver_signal(tx, rx, plate, pos, freq_hz=1e6, cell_mm=0.5, use_grid=False)
    scale = abs(s.m_eff_h[0])
    assert scale > 0.01 * abs(mutual_inductance(tx, loop(6.0, n=128).placed(offset_mm=(0, 0, -0.5))))
    assert abs(s.mutual_free_h) < 1e-6 * scale
    assert abs(s.m_eff_h[1]) < 1e-6 * scale
    assert_allclose(s.m_eff_h[2], -s.m_eff_h[0], rtol=1e-6)
    assert abs(np.angle(s.emf_v[2] / s.emf_v[0], deg=True)) == pytest.approx(180.0, abs=1e-3)


def test_plate_signal_carries_the_receiver():
    tx = loop(5.0, n=96)
    rx = loop(4.0, n=96).placed(offset_mm=(0, 0, -1.0))
    zc = tx.z_mm(1)
    pos = [[0, 0, zc + 1.0], [2, 0, zc + 1.0]]
    plate = Plate(square(10), 0.3, material="copper")
    r = plate_signal(tx, plate, pos, freq_hz=5e5, receiver=rx, tx_current_a=0.02, cell_mm=0.7,
                     coil_inductance_h=1e-7, coil_resistance_ohm=0.1)
    s = receiver_signal(tx, rx, plate, pos, freq_hz=5e5, tx_current_a=0.02, cell_mm=0.7)
    assert_allclose(r.receiver.emf_v, s.emf_v, rtol=1e-10)
    cols = r.columns()
    assert {"receiver_emf_v", "receiver_phase_deg", "inductance_h", "resistance_ohm"} <= set(cols)


def test_receiver_from_table():
    rx, opts = receiver_from_table({"shape": "square", "outer_mm": 8, "turns": 3, "width_mm": 0.2, "gap_mm": 0.2,
                                    "offset_mm": [10, "1 mm", -1.6], "rotation_deg": 90, "tx_current_a": 0.1},
                                   {"layers": 2})
    x0, y0, x1, y1 = rx.bounds_mm()
    assert_allclose([(x0 + x1) / 2, (y0 + y1) / 2], [10, 1], atol=1.0)
    assert rx.offset_z_mm == -1.6 and opts == {"tx_current_a": 0.1}
    with pytest.raises(SpecError, match="offset"):
        receiver_from_table({"shape": "square", "outer_mm": 8, "turns": 3, "width_mm": 0.2, "gap_mm": 0.2,
                             "ofset_mm": [1, 0, 0]})
    with pytest.raises(SpecError, match="same side"):
        zc = loop(5.0).z_mm(1)
        receiver_signal(loop(5.0), loop(5.0).placed(offset_mm=(0, 0, 5)), Plate(square(5), 0.5),
                        [[0, 0, zc + 1.0]], freq_hz=1e5)
