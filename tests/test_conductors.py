"""The conductor model: a Coil (mm) as straight 3D segments in SI units."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil import spiral
from tracecoil.errors import GeometryError
from tracecoil.layout import Coil, Stackup, Step, Terminal, Trace, Via
from tracecoil.physics.conductors import KIND_TRACE, KIND_VIA, conductors


def two_layer_coil():
    """A square turn on layer 1, a via, a smaller square turn on layer 2."""
    st = Stackup(copper_um=(35.0, 18.0), dielectric_mm=(1.5,), plating_um=20.0)
    outer = np.array([[5, 0], [5, 5], [-5, 5], [-5, -5], [5, -5], [5, -1]], float)
    inner = np.array([[5, -1], [3, -1], [3, 3], [-3, 3], [-3, -3], [4, -3]], float)
    traces = (Trace(1, np.array([[7.0, 0.0], [5.0, 0.0]]), 0.3, "lead"), Trace(1, outer, 0.3), Trace(2, inner, 0.2))
    vias = (Via(7.0, 0.0, 0.8, 1.6, (1, 2), "terminal"), Via(5.0, -1.0, 0.3, 0.6, (1, 2)),
            Via(4.0, -3.0, 0.8, 1.6, (1, 2), "terminal"))
    terms = (Terminal("A", 7.0, 0.0, 0), Terminal("B", 4.0, -3.0, 2))
    path = (Step("trace", 0), Step("trace", 1), Step("via", 1, 1.0, 1, 2), Step("trace", 2))
    return Coil(st, traces, vias, terms, path, name="two_layer")


def test_segments_units_order_and_layers():
    c = two_layer_coil()
    cd = conductors(c)
    # 1 lead + 5 outer + 1 via + 5 inner segments; the terminal barrels carry
    # no current along the hole and are left out.
    assert len(cd) == 12
    assert cd.kind.tolist() == [KIND_TRACE] * 6 + [KIND_VIA] + [KIND_TRACE] * 5
    assert cd.layer.tolist() == [1] * 6 + [0] + [2] * 5
    # millimetres -> metres, z at the copper mid-planes of the stack-up
    z1, z2 = c.stackup.z_mm(1) * 1e-3, c.stackup.z_mm(2) * 1e-3
    assert_allclose(cd.start_m[0], [7e-3, 0, z1], rtol=1e-15)
    assert_allclose(cd.start_m[6], [5e-3, -1e-3, z1])
    assert_allclose(cd.end_m[6], [5e-3, -1e-3, z2])
    assert_allclose(cd.start_m[-1, 2], z2)
    # the path is continuous from terminal A to terminal B
    assert_allclose(cd.end_m[:-1], cd.start_m[1:], atol=1e-15)
    # cross-sections: trace width x copper; via: drill diameter x plating
    assert_allclose(cd.width_m[[0, 6, 7]], [0.3e-3, 0.3e-3, 0.2e-3])
    assert_allclose(cd.thickness_m[[0, 6, 7]], [35e-6, 20e-6, 18e-6])
    assert_allclose(cd.length_m.sum(), 1e-3 * (2 + 5 + 10 + 10 + 10 + 4 + (z1 - z2) * 1e3 + 2 + 4 + 6 + 6 + 7))


def test_width_and_thickness_directions():
    cd = conductors(two_layer_coil())
    assert_allclose(np.linalg.norm(cd.width_dir, axis=1), 1.0)
    assert_allclose(np.einsum("ij,ij->i", cd.width_dir, cd.direction), 0.0, atol=1e-15)
    traces = cd.kind == KIND_TRACE
    assert_allclose(cd.width_dir[traces, 2], 0.0)
    assert_allclose(cd.thickness_dir[traces], np.tile([0, 0, 1.0], (traces.sum(), 1)), atol=1e-15)


def test_placement_moves_and_flips():
    c = two_layer_coil()
    moved = c.placed(offset_mm=(1.0, 2.0, 3.0), rotation_deg=90.0)
    a, b = conductors(c), conductors(moved)
    # rotation by 90 degrees about z, then the offset
    rot = np.array([[0, -1, 0], [1, 0, 0], [0, 0, 1.0]])
    assert_allclose(b.start_m, a.start_m @ rot.T + [1e-3, 2e-3, 3e-3], atol=1e-15)
    flipped = conductors(c.placed(flip=True))
    # upside down: every z changes sign (the top surface stays at z = 0)
    assert_allclose(flipped.start_m[:, 2], -a.start_m[:, 2], atol=1e-18)
    assert_allclose(flipped.length_m, a.length_m, rtol=1e-14)


def test_zero_length_pieces_are_dropped():
    st = Stackup(copper_um=(35.0,), dielectric_mm=())
    tr = Trace(1, np.array([[0, 0], [1, 0], [1, 0], [1, 1]], float), 0.2)
    c = Coil(st, (tr,), (), (), (Step("trace", 0),))
    assert len(conductors(c)) == 2


def test_unknown_step_kind_and_empty_path_raise():
    st = Stackup(copper_um=(35.0,), dielectric_mm=())
    tr = Trace(1, np.array([[0, 0], [1, 0]], float), 0.2)
    with pytest.raises(GeometryError, match="kind"):
        conductors(Coil(st, (tr,), (), (), (Step("wire", 0),)))
    with pytest.raises(GeometryError, match="no copper"):
        conductors(Coil(st, (tr,), (), (), ()))


def test_generated_four_layer_spiral_is_one_continuous_path():
    c = spiral(shape="circle", outer_mm=12, turns=5, width_mm=0.2, gap_mm=0.2, layers=4, board={"layers": 4})
    cd = conductors(c)
    assert_allclose(cd.end_m[:-1], cd.start_m[1:], atol=1e-12)
    assert set(cd.layer[cd.kind == KIND_TRACE].tolist()) == {1, 2, 3, 4}
    assert (cd.kind == KIND_VIA).sum() == 3
    assert np.all(cd.fraction == 1.0)


def test_conductors_are_read_only():
    cd = conductors(two_layer_coil())
    with pytest.raises(ValueError):
        cd.start_m[0, 0] = 1.0
