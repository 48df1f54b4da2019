"""Field, vector potential and flux linkage of whole coils."""

from __future__ import annotations

import magpylib as magpy
import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil import spiral
from tracecoil.errors import SpecError
from tracecoil.layout import Coil, Stackup, Step, Trace
from tracecoil.physics.conductors import conductors
from tracecoil.physics.field import field, flux_linkage, vector_potential
from tracecoil.physics.kernels import MU0

RNG = np.random.default_rng(7)


def loop_coil(n=256, radius_mm=10.0, width_mm=0.3):
    t = np.linspace(0, 2 * np.pi, n + 1)
    ring = Trace(1, radius_mm * np.column_stack([np.cos(t), np.sin(t)]), width_mm)
    return Coil(Stackup((35.0,), ()), (ring,), (), (), (Step("trace", 0),))


def test_field_of_a_generated_spiral_matches_magpylib():
    # Same filaments (the conductor centrelines) given to magpylib 6's
    # current.Polyline: both exact, agreement 1e-9 relative (magpylib:
    # Ortner & Bandeira, SoftwareX 11, 2020).
    c = spiral(shape="square", outer_mm=15, turns=4, width_mm=0.3, gap_mm=0.3, layers=2, board={"layers": 2})
    cd = conductors(c)
    verts = np.vstack([cd.start_m, cd.end_m[-1:]])
    src = magpy.current.Polyline(current=0.7, vertices=verts)
    pts_mm = RNG.normal(size=(300, 3)) * 8 + [0, 0, 2]
    ref = src.getB(pts_mm * 1e-3)
    got = field(c, pts_mm, current_a=0.7)
    err = np.linalg.norm(got - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert err.max() < 1e-9


def test_field_on_axis_of_loop():
    # Regular polygon on its axis (exact, see test_kernels) -> 1e-12; the
    # trace's z is the copper mid-plane, 17.5 um below the board surface.
    n, R = 256, 10e-3
    c = loop_coil(n)
    zc = c.z_mm(1) * 1e-3
    z = np.array([0.0, 5e-3, -12e-3])
    B = field(c, np.column_stack([0 * z, 0 * z, z]) * 1e3, current_a=2.0)
    a, h = R * np.cos(np.pi / n), R * np.sin(np.pi / n)
    d2 = a * a + (z - zc) ** 2
    ref = 2.0 * n * MU0 * 2 * h * a / (4 * np.pi * d2 * np.sqrt(h * h + d2))
    assert_allclose(B[:, 2], ref, rtol=1e-12)


def test_field_keeps_the_point_array_shape():
    c = loop_coil(32)
    grid = np.zeros((4, 5, 3))
    grid[..., 2] = np.linspace(1, 4, 4)[:, None]
    assert field(c, grid).shape == (4, 5, 3)
    assert field(c, [0, 0, 1.0]).shape == (3,)


def test_flux_of_uniform_field_is_the_enclosed_area():
    # A = B0/2 (-y, x, 0) is linear, so 2-point Gauss is exact on every segment;
    # the flux of the closed polygon equals B0 times its shoelace area.
    c = loop_coil(64)
    B0 = 0.37

    def uniform(p):
        return 0.5 * B0 * np.column_stack([-p[:, 1], p[:, 0], np.zeros(len(p))])

    area = 0.5 * 64 * (10e-3) ** 2 * np.sin(2 * np.pi / 64)
    assert_allclose(flux_linkage(c, uniform, order=2), B0 * area, rtol=1e-12)


def test_flux_of_a_dipole_through_a_coaxial_loop():
    # Dipole m on the axis at distance z: Phi = mu0 m R^2 / (2 (R^2 + z^2)^1.5)
    # (references: magnetic dipole); A = mu0/(4 pi) (m x r)/r^3. A 2048-gon
    # loses (pi/N)^2 ~ 2.4e-6 of the circle's flux: tolerance 1e-5.
    c = loop_coil(2048)
    R = 10e-3
    zc = c.z_mm(1) * 1e-3
    m = np.array([0.0, 0.0, 0.05])  # A m^2
    src = np.array([0.0, 0.0, 6e-3])

    def dipole_A(p):
        r = p - src
        return MU0 / (4 * np.pi) * np.cross(m, r) / np.linalg.norm(r, axis=1)[:, None] ** 3

    z = src[2] - zc
    ref = MU0 * m[2] * R * R / (2 * (R * R + z * z) ** 1.5)
    assert_allclose(flux_linkage(c, dipole_A, order=4), ref, rtol=1e-5)


def test_line_integral_of_own_potential_over_another_loop_is_mutual_inductance():
    # Stokes: the flux of coil a through loop b is the integral of A_a along
    # b; per ampere that is Maxwell's M for coaxial circles (1873):
    # mu0 sqrt(ab)[(2/k - k) K - (2/k) E], k^2 = 4ab/((a+b)^2 + d^2).
    from scipy.special import ellipe, ellipk

    a = loop_coil(1024, 10.0)
    b = loop_coil(1024, 6.0).placed(offset_mm=(0, 0, 4.0))
    cb = conductors(b)

    def A_of_a(p):
        return vector_potential(a, p * 1e3)

    M = flux_linkage(cb, A_of_a, order=3)
    k2 = 4 * 10e-3 * 6e-3 / ((16e-3) ** 2 + (4e-3) ** 2)
    k = np.sqrt(k2)
    ref = MU0 * np.sqrt(60e-6) * ((2 / k - k) * ellipk(k2) - 2 / k * ellipe(k2))
    # polygons of 1024 sides: (pi/N)^2 ~ 1e-5 relative
    assert_allclose(M, ref, rtol=3e-5)


@pytest.mark.parametrize("bad", [[1, 2], [[1, 2, 3, 4]], [[np.nan, 0, 0]]])
def test_bad_points_are_reported(bad):
    with pytest.raises(SpecError, match="points_mm"):
        field(loop_coil(8), bad)


def test_bad_potential_callable_is_reported():
    with pytest.raises(SpecError, match="potential"):
        flux_linkage(loop_coil(8), 3.0)
    with pytest.raises(SpecError, match="shape"):
        flux_linkage(loop_coil(8), lambda p: p[:, :2])
