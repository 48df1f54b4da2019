"""Flux linkage of a coil with a magnet, against independent routes.

References used here
--------------------
* Flux of a point dipole m on the axis of a coaxial circular loop of
  radius R at distance z: Phi = mu0 m R^2 / (2 (R^2 + z^2)^(3/2))
  (J. D. Jackson, Classical Electrodynamics, 3rd ed., 1999, from memory).
* Maxwell's mutual inductance of coaxial circles,
  M = mu0 sqrt(ab) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4ab/((a+b)^2 + d^2)
  (J. C. Maxwell, Treatise, vol. 2, art. 701, 1873, from memory): an
  axially magnetised cylinder is a sheet of circular currents Br/mu0 per
  metre of length, so its flux through a loop is (Br/mu0) int M du.
* The flux as a surface integral of B: magpylib's B over the loop's area,
  integrated with Gauss-Legendre panels (independent of our potential).
* Reciprocity: the linkage equals (1/I) int_V M . B_coil dV over the
  magnet, with B_coil the coil's own Biot-Savart field.

Polygon loops of N sides inscribed in a circle differ from the circle by
O((pi/N)^2) in flux; with N = 4096 that is below 1e-6.
"""

import magpylib as magpy
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, special
from scipy.spatial.transform import Rotation

from tracecoil.design import load_design
from tracecoil.generators import coil_from_design
from tracecoil.layout import Coil, Stackup, Step, Trace
from tracecoil.physics import kernels
from tracecoil.physics.conductors import conductors
from tracecoil.targets.flux import copper_box_mm, flux_linkage, overlapping_poses, quadrature
from tracecoil.targets.magnets import MU0, BlockMagnet, CylinderMagnet, Dipole
from tracecoil.templates import template_path


def ring_coil(radii_mm, layers=None, n=4096, copper_um=35.0):
    """Coaxial circular loops (inscribed n-gons), counter-clockwise, in series."""
    layers = layers or [1] * len(radii_mm)
    nl = max(layers)
    st = Stackup(copper_um=(copper_um,) * nl, dielectric_mm=(0.2,) * (nl - 1))
    t = np.linspace(0, 2 * np.pi, n + 1)
    traces = tuple(Trace(lay, r * np.column_stack([np.cos(t), np.sin(t)]), 0.2) for r, lay in zip(radii_mm, layers))
    return Coil(st, traces, (), (), tuple(Step("trace", i) for i in range(len(traces))))


def dipole_loop_flux(m, R_m, z_m):
    return MU0 * m * R_m**2 / (2 * (R_m**2 + z_m**2) ** 1.5)


def maxwell_m(a, b, d):
    k2 = 4 * a * b / ((a + b) ** 2 + d**2)
    k = np.sqrt(k2)
    return MU0 * np.sqrt(a * b) * ((2 / k - k) * special.ellipk(k2) - 2 / k * special.ellipe(k2))


def test_dipole_on_axis_of_loops_matches_the_closed_form():
    coil = ring_coil([3.0, 5.0, 4.0], layers=[1, 1, 2])
    m = 0.03
    zs = np.array([1.0, 2.5, 7.0, -4.0])  # dipole heights (mm); below the board too
    pos = np.column_stack([0 * zs, 0 * zs, zs])
    lam = flux_linkage(coil, Dipole(moment_am2=(0, 0, m)), pos)
    expect = []
    for z in zs:
        expect.append(sum(dipole_loop_flux(m, R * 1e-3, (z - coil.z_mm(lay)) * 1e-3)
                          for R, lay in ((3.0, 1), (5.0, 1), (4.0, 2))))
    # rtol: 4096-gons against circles, O((pi/N)^2) < 1e-6
    assert_allclose(lam, expect, rtol=2e-6)


def test_cylinder_flux_equals_the_maxwell_integral_over_its_length():
    coil = ring_coil([4.0])
    zl = coil.z_mm(1) * 1e-3
    R, L, br = 3e-3, 4e-3, 1.3
    for zc_mm, rl in ((4.0, 4e-3), (-3.5, 4e-3)):
        mag = CylinderMagnet(radius_mm=R * 1e3, length_mm=L * 1e3, remanence_t=br, position_mm=(0, 0, zc_mm))
        lam = flux_linkage(coil, mag)
        zc = zc_mm * 1e-3
        ref, _ = integrate.quad(lambda u: maxwell_m(R, rl, zc + u - zl), -L / 2, L / 2, epsabs=0, epsrel=1e-13)
        # rtol: 4096-gon against the circle, as above
        assert_allclose(lam, br / MU0 * ref, rtol=2e-6)


def _square_coil(side_mm=8.0, n_per_side=1):
    s = side_mm / 2
    pts = np.array([[-s, -s], [s, -s], [s, s], [-s, s], [-s, -s]], float)
    return Coil(Stackup((35.0,), ()), (Trace(1, pts, 0.3),), (), (), (Step("trace", 0),)), s


def _surface_flux(source, half_mm, z_mm, panels=16, order=8):
    """int B_z dx dy over the square |x|, |y| <= half at height z (magpylib B)."""
    x, w = np.polynomial.legendre.leggauss(order)
    edges = np.linspace(-half_mm, half_mm, panels + 1)
    h = np.diff(edges)[0]
    nodes = (edges[:-1, None] + h * (x[None, :] + 1) / 2).ravel()
    weights = np.tile(w * h / 2, panels)
    X, Y = np.meshgrid(nodes, nodes, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, z_mm)]) * 1e-3
    Bz = source.getB(pts)[:, 2]
    return float((np.outer(weights, weights).ravel() * Bz).sum()) * 1e-6


@pytest.mark.parametrize("magnet", [
    CylinderMagnet(diameter_mm=5, length_mm=2, remanence_t=1.2, position_mm=(1.5, -1.0, 3.0), axis=(0.4, -0.2, 1)),
    BlockMagnet(size_mm=(4, 3, 1.5), remanence_t=0.4, magnetization=(1, 0, 1), rotation_deg=(15, -10, 35),
                position_mm=(-2.0, 1.0, 2.7)),
])
def test_line_integral_of_a_equals_surface_integral_of_b(magnet):
    coil, half = _square_coil()
    if magnet.kind == "cylinder":
        ref = magpy.magnet.Cylinder(polarization=(0, 0, magnet.remanence_t),
                                    dimension=(magnet.diameter_mm * 1e-3, magnet.length_mm * 1e-3))
    else:
        ref = magpy.magnet.Cuboid(polarization=magnet.polarization_local, dimension=np.asarray(magnet.size_mm) * 1e-3)
    ref.position = magnet.position_m
    ref.orientation = Rotation.from_matrix(magnet.rotation)
    phi = _surface_flux(ref, half, coil.z_mm(1))
    # The surface rule: 128 x 128 Gauss-Legendre points over the square with
    # the magnet >= 0.75 mm away; doubling the panels changes it by < 1e-12.
    assert_allclose(_surface_flux(ref, half, coil.z_mm(1), panels=32), phi, rtol=1e-12)
    # rtol: the default line quadrature (4 points per piece no longer than
    # the distance to the magnet) is good to ~1e-7 here; a refined rule
    # (8 points, pieces of a quarter of it) to rounding.
    assert_allclose(flux_linkage(coil, magnet), phi, rtol=1e-7)
    assert_allclose(flux_linkage(coil, magnet, order=8, piece_factor=0.25), phi, rtol=1e-12)


def test_linkage_with_a_generated_coil_by_reciprocity():
    # The speed-pickup template: 4 layers in series, vias and leads, round corners.
    coil = coil_from_design(load_design(template_path("speed-pickup")))
    cd = conductors(coil)
    R, L, br = 3.0, 3.0, 1.2
    mag = CylinderMagnet(radius_mm=R, length_mm=L, remanence_t=br, position_mm=(0.7, -0.4, 2.6), axis=(0.2, 0.1, 1))
    lam = flux_linkage(coil, mag)
    # (1/I) int_V M . B_coil dV, M = Br/mu0 along the axis, in cylinder coordinates
    xr, wr = np.polynomial.legendre.leggauss(20)
    rho, wrho = R * (xr + 1) / 2, R / 2 * wr * R * (xr + 1) / 2
    xz, wz = np.polynomial.legendre.leggauss(12)
    z, wzz = L / 2 * xz, L / 2 * wz
    nphi = 64
    phi = np.arange(nphi) * 2 * np.pi / nphi
    P, F, Z = np.meshgrid(rho, phi, z, indexing="ij")
    W = np.meshgrid(wrho, np.full(nphi, 2 * np.pi / nphi), wzz, indexing="ij")
    W = W[0] * W[1] * W[2]
    loc = np.column_stack([(P * np.cos(F)).ravel(), (P * np.sin(F)).ravel(), Z.ravel()])
    world = (loc @ mag.rotation.T + mag.position_mm) * 1e-3
    B = kernels.segment_field(world, cd.start_m, cd.end_m, cd.fraction)
    axis = np.asarray(mag.axis)
    ref = br / MU0 * float((W.ravel() * (B @ axis)).sum()) * 1e-9
    # rtol: volume quadrature of a smooth field (the magnet's bottom is
    # 1.1 mm above a 0.3 mm pitch winding; the trace ripple there is below
    # exp(-2 pi 1.1/0.3) ~ 1e-10) against the line quadrature (~1e-9)
    assert_allclose(lam, ref, rtol=1e-7)


def test_quadrature_refinement_converges():
    coil = coil_from_design(load_design(template_path("speed-pickup")))
    mag = BlockMagnet(size_mm=(4, 4, 2), remanence_t=1.3, position_mm=(1, 0.5, 1.2))
    pos = np.array([[x, 0.5, 1.2] for x in np.linspace(-8, 8, 9)])
    base = flux_linkage(coil, mag, pos)
    fine = flux_linkage(coil, mag, pos, order=6, piece_factor=0.5)
    # tolerance: with the block's edges 0.2 mm from the copper the defaults
    # agree with the refined rule to about 1e-8 of the largest linkage
    assert_allclose(base, fine, rtol=0, atol=3e-8 * np.abs(fine).max())
    assert np.abs(fine).max() > 0


def test_many_poses_equal_single_poses():
    coil = ring_coil([3.0, 4.5], n=256)
    mag = CylinderMagnet(diameter_mm=2, length_mm=2, remanence_t=1.0, axis=(1, 0, 1))
    pos = np.array([[0.5, 0.0, 2.0], [2.0, 1.0, 3.0], [-1.0, 4.0, 2.5]])
    rots = np.stack([Rotation.from_euler("xyz", a, degrees=True).as_matrix() for a in ((0, 0, 0), (10, 20, 30), (90, 0, 45))])
    many = flux_linkage(coil, mag, pos, rots @ mag.rotation)
    for p, r, lam in zip(pos, rots, many):
        # a Dipole-free check: place the same magnet by its own parameters
        axis = r @ np.asarray(mag.axis)
        single = flux_linkage(coil, mag.placed(position_mm=tuple(p), axis=tuple(axis)))
        # rtol: same arithmetic, different grouping (a cylinder is symmetric about its axis)
        assert_allclose(lam, single, rtol=1e-12)


def test_quadrature_of_a_uniform_field_is_exact():
    coil = ring_coil([5.0], n=12)
    x, dl = quadrature(coil, 10.0, order=1)
    a = 0.5 * np.column_stack([-x[:, 1], x[:, 0], 0 * x[:, 0]])  # B = 1 T along z
    area = 0.5 * 12 * 25e-6 * np.sin(2 * np.pi / 12)  # regular 12-gon of circumradius 5 mm
    assert_allclose(float(np.sum(a * dl)), area, rtol=1e-13)  # rtol: exact for linear A


def test_overlap_with_the_copper_region():
    coil, half = _square_coil(side_mm=10)
    lo, hi = copper_box_mm(coil)
    assert_allclose([lo[2], hi[2]], [-0.035, 0.0], atol=1e-12)
    blk = BlockMagnet(size_mm=(2, 2, 2), remanence_t=1.0)
    pos = np.array([[0, 0, 1.0], [0, 0, 0.999], [5.5, 0, 0.0], [6.2, 0, 0.0], [0, 0, -1.036]])
    got = overlapping_poses(coil, blk, pos, np.broadcast_to(np.eye(3), (5, 3, 3)))
    # resting on the copper top (touching) is clear; 1 um lower overlaps; 1 um below the bottom is clear;
    # beside the copper box (its x extent is 5.15 mm with the half width) clear only beyond 6.15
    assert got.tolist() == [False, True, True, False, False]
    # a cylinder tilted 45 degrees just clear of the corner of the copper box
    cyl = CylinderMagnet(diameter_mm=2, length_mm=2, remanence_t=1.0, axis=(1, 0, 1))
    reach = np.sqrt(2)  # half-diagonal of its 2 x 2 axial section, pointing down along -z after the tilt
    clear = overlapping_poses(coil, cyl, np.array([[0, 0, reach + 0.02], [0, 0, reach - 0.05]]),
                              np.broadcast_to(cyl.rotation, (2, 3, 3)))
    assert clear.tolist() == [False, True]
    dip = Dipole(moment_am2=(0, 0, 1))
    assert overlapping_poses(coil, dip, np.array([[0, 0, -0.01], [0, 0, 0.01]]), np.broadcast_to(np.eye(3), (2, 3, 3))).tolist() == [True, False]


def test_uniform_field_switched_through_n_turns():
    """Faraday relation, common practice: a uniform field B switched on
    linearly in dt through N turns of area A gives EMF = -N B A / dt.

    The coil is N series square turns of side 10 mm on alternate layers,
    joined by vias (a custom path), so every turn encloses the same area.
    The external field's vector potential is A = B/2 (-y, x, 0).
    """
    from tracecoil import custom_coil
    from tracecoil.physics.field import flux_linkage

    n_turns, side_mm, b_t, dt_s = 5, 10.0, 0.02, 1e-3
    square = [[0, 0], [side_mm, 0], [side_mm, side_mm], [0, side_mm], [0, 0]]
    paths = [(1 + (k % 2), square) for k in range(n_turns)]
    coil = custom_coil(paths, width_mm=0.3, board={"layers": 2})

    def uniform(b):
        return lambda p: 0.5 * b * np.stack([-p[:, 1], p[:, 0], np.zeros(len(p))], axis=1)

    t = np.linspace(0.0, dt_s, 11)
    lam = np.array([flux_linkage(coil, uniform(b_t * ti / dt_s)) for ti in t])
    emf = -np.gradient(lam, t)
    area_m2 = (side_mm * 1e-3) ** 2
    # the potential is linear, so the quadrature is exact: only rounding remains
    assert_allclose(lam[-1], n_turns * b_t * area_m2, rtol=1e-12)
    assert_allclose(emf, -n_turns * b_t * area_m2 / dt_s, rtol=1e-9)
    # and no change, no EMF (to rounding: 1e-12 of the switched EMF)
    still = np.array([flux_linkage(coil, uniform(b_t)) for _ in t])
    assert_allclose(np.gradient(still, t), 0.0, atol=1e-12 * n_turns * b_t * area_m2 / dt_s)
