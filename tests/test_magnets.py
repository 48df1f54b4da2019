"""Magnet models: closed-form fields and vector potentials against
independent references.

References used here
--------------------
* magpylib 6 (M. Ortner and L. G. Coliado Bandeira, "Magpylib: a free
  Python package for magnetic field computation", SoftwareX 11, 2020):
  its own closed forms for cylinders and cuboids (polarisation J = Br in
  tesla, lengths in metres), an implementation independent of ours.
* On-axis field of an axially magnetised cylinder,
  Bz = Br/2 [(z+L/2)/sqrt((z+L/2)^2+R^2) - (z-L/2)/sqrt((z-L/2)^2+R^2)]
  (N. Derby and S. Olbert, Am. J. Phys. 78, 2010, from memory; it is also
  the Biot-Savart field of a finite solenoid integrated in closed form).
* Point dipole fields (J. D. Jackson, Classical Electrodynamics, 3rd ed.,
  1999, from memory).
* Complete elliptic integrals in Carlson form (B. C. Carlson, "Numerical
  computation of real or complex elliptic integrals", Numer. Algorithms
  10, 1995, from memory) as implemented in scipy.special.
"""

import magpylib as magpy
import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import special
from scipy.spatial.transform import Rotation

from tracecoil.errors import SpecError
from tracecoil.targets.magnets import (
    GRADES,
    MU0,
    BlockMagnet,
    CylinderMagnet,
    Dipole,
    cel,
    cuboid_field,
    cylinder_field,
    cylinder_potential,
    dipole_field,
    dipole_potential,
    magnet_from_table,
    remanence,
)

RNG = np.random.default_rng(20240611)


def curl(f, points_mm, h_mm=1e-4):
    """Fourth-order central-difference curl of f (T m per mm of step -> T)."""
    p = np.asarray(points_mm, float)
    jac = np.zeros(p.shape + (3,))
    for i in range(3):
        e = np.zeros(3)
        e[i] = h_mm
        jac[:, :, i] = (-f(p + 2 * e) + 8 * f(p + e) - 8 * f(p - e) + f(p - 2 * e)) / (12 * h_mm * 1e-3)
    return np.stack([jac[:, 2, 1] - jac[:, 1, 2], jac[:, 0, 2] - jac[:, 2, 0], jac[:, 1, 0] - jac[:, 0, 1]], axis=1)


def points_outside(magnet, n, scale_mm, min_gap_mm):
    """Random world points at least min_gap_mm from the magnet's surface."""
    out = []
    while len(out) < n:
        p = magnet.position_mm + RNG.normal(size=(4 * n, 3)) * scale_mm
        loc = (p - magnet.position_mm) @ magnet.rotation
        keep = magnet.distance_local_mm(loc) > min_gap_mm
        out.extend(p[keep])
    return np.array(out[:n])


# ---------------------------------------------------------------- elliptic


def test_cel_against_carlson_integrals():
    # K = R_F(0, 1-m, 1), E = K - m/3 R_D(0, 1-m, 1),
    # Pi(n, m) = K + n/3 R_J(0, 1-m, 1, 1-n)  (Carlson 1995, from memory)
    m = RNG.uniform(0, 0.999, 200)
    n = RNG.uniform(-0.9, 0.999, 200)
    kc = np.sqrt(1 - m)
    K = special.elliprf(0, 1 - m, 1)
    E = K - m / 3 * special.elliprd(0, 1 - m, 1)
    Pi = K + n / 3 * special.elliprj(0, 1 - m, 1, 1 - n)
    # rtol: both sides are double-precision evaluations of the same integrals
    assert_allclose(cel(kc, 1.0, 1.0, 1.0), K, rtol=1e-13)
    assert_allclose(cel(kc, 1.0, 1.0, kc**2), E, rtol=1e-13)
    assert_allclose(cel(kc, 1 - n, 1.0, 1.0), Pi, rtol=1e-12)
    assert_allclose(K, special.ellipk(m), rtol=1e-13)


def test_cel_near_singular_parameters():
    # kc -> 0 (logarithmic K) and p -> 0 (p * Pi -> finite): scipy's
    # ellipkm1 and Carlson R_J are the references.
    kc = 10.0 ** -RNG.uniform(1, 7, 50)
    assert_allclose(cel(kc, 1.0, 1.0, 1.0), special.ellipkm1(kc**2), rtol=1e-12)
    p = 10.0 ** -RNG.uniform(1, 250, 50)
    m = RNG.uniform(0, 0.9, 50)
    pi_minus_k = (1 - p) / 3 * special.elliprj(0, 1 - m, 1, p)  # Pi - K with n = 1 - p
    assert_allclose(p * cel(np.sqrt(1 - m), p, 0.0, 1.0), p * pi_minus_k / (1 - p), rtol=1e-11)


# ---------------------------------------------------------------- cylinder


def test_cylinder_on_axis_closed_form():
    R, L, br = 3e-3, 2e-3, 1.25
    z = np.array([-9e-3, -1.5e-3, -0.3e-3, 0.0, 0.7e-3, 1e-3 + 1e-9, 4e-3, 30e-3])
    pts = np.column_stack([0 * z, 0 * z, z])
    exact = br / 2 * ((z + L / 2) / np.hypot(z + L / 2, R) - (z - L / 2) / np.hypot(z - L / 2, R))
    # rtol: closed forms on both sides; only rounding differs
    assert_allclose(cylinder_field(pts, R, L, br)[:, 2], exact, rtol=1e-12)
    assert np.all(cylinder_field(pts, R, L, br)[:, :2] == 0)


def test_cylinder_potential_long_solenoid_limits():
    # A very long magnet: A_phi = Br rho/2 inside, Br a^2/(2 rho) outside
    # (Ampere's law and Stokes, exact as L -> infinity; ends 500 radii away).
    a, L, br = 1.0, 1000.0, 0.8
    rho = np.array([0.1, 0.5, 0.99, 1.01, 2.0, 5.0])
    pts = np.column_stack([rho, 0 * rho, 0 * rho])
    expect = np.where(rho < a, br * rho / 2, br * a**2 / (2 * rho))
    # rtol: the ends 500 units away change A by about (rho / (L/2))^2 / 2 = 5e-5 at rho = 5
    assert_allclose(cylinder_potential(pts, a, L, br)[:, 1], expect, rtol=1e-4)


@pytest.mark.parametrize("axis", [(0, 0, 1), (1, -2, 0.5), (0, 0, -1)])
def test_cylinder_field_against_magpylib(axis):
    m = CylinderMagnet(diameter_mm=6, length_mm=3, remanence_t=1.2, position_mm=(1.0, -2.0, 4.0), axis=axis)
    ref = magpy.magnet.Cylinder(polarization=(0, 0, 1.2), dimension=(6e-3, 3e-3), position=m.position_m,
                                orientation=Rotation.from_matrix(m.rotation))
    pts = points_outside(m, 300, 5.0, 0.05)
    inside = m.position_mm + (RNG.uniform(-0.9, 0.9, (50, 3)) * [2.0, 2.0, 1.4]) @ m.rotation.T
    pts = np.vstack([pts, inside])
    # rtol/atol: two independent closed forms in double precision
    assert_allclose(m.field(pts), ref.getB(pts * 1e-3), rtol=1e-9, atol=1e-12)


def test_cylinder_potential_curl_matches_magpylib():
    m = CylinderMagnet(radius_mm=2, length_mm=5, grade="N42", position_mm=(0.5, 0, 1), axis=(0.3, 0.2, 1))
    ref = magpy.magnet.Cylinder(polarization=(0, 0, m.remanence_t), dimension=(4e-3, 5e-3), position=m.position_m,
                                orientation=Rotation.from_matrix(m.rotation))
    pts = points_outside(m, 200, 4.0, 0.2)
    # rtol: fourth-order differences with h = 0.1 um, truncation ~ (h/d)^4, rounding ~ 1e-16 A/h
    assert_allclose(curl(m.potential, pts), ref.getB(pts * 1e-3), rtol=1e-6, atol=1e-9)


# ------------------------------------------------------------------- block


@pytest.mark.parametrize("magnetization, angles", [((0, 0, 1), (0, 0, 0)), ((1, 0.5, -0.3), (20, -35, 70)),
                                                   ((0, 1, 0), (90, 0, 0))])
def test_block_field_against_magpylib(magnetization, angles):
    b = BlockMagnet(size_mm=(4, 2.5, 1.5), remanence_t=1.3, magnetization=magnetization, rotation_deg=angles,
                    position_mm=(-1.0, 0.5, 3.0))
    ref = magpy.magnet.Cuboid(polarization=b.polarization_local, dimension=np.asarray(b.size_mm) * 1e-3,
                              position=b.position_m, orientation=Rotation.from_matrix(b.rotation))
    pts = points_outside(b, 300, 4.0, 0.05)
    inside = b.position_mm + (RNG.uniform(-0.45, 0.45, (50, 3)) * b.size_mm) @ b.rotation.T
    pts = np.vstack([pts, inside])
    # rtol/atol: two independent closed forms in double precision
    assert_allclose(b.field(pts), ref.getB(pts * 1e-3), rtol=1e-9, atol=1e-12)


def test_block_potential_curl_matches_magpylib():
    b = BlockMagnet(size_mm=(3, 5, 2), remanence_t=0.4, magnetization=(0.2, 1, 0.7), rotation_deg=(10, 20, 30))
    ref = magpy.magnet.Cuboid(polarization=b.polarization_local, dimension=np.asarray(b.size_mm) * 1e-3,
                              position=b.position_m, orientation=Rotation.from_matrix(b.rotation))
    pts = points_outside(b, 200, 4.0, 0.2)
    # rtol: as for the cylinder (finite-difference curl)
    assert_allclose(curl(b.potential, pts), ref.getB(pts * 1e-3), rtol=1e-6, atol=1e-10)


def test_cube_centre_field():
    # By symmetry the demagnetising factor of a cube is 1/3 at its centre: B = J (1 - 1/3)
    B = cuboid_field(np.zeros((2, 3)), (2e-3, 2e-3, 2e-3), np.array([0.0, 0.0, 1.2]))
    assert_allclose(B[:, 2], 0.8, rtol=1e-13)  # rtol: exact closed form


# ------------------------------------------------------------------ dipole


def test_dipole_against_magpylib_and_curl():
    m = np.array([0.02, -0.01, 0.05])
    d = Dipole(moment_am2=m, position_mm=(1, 2, 3))
    ref = magpy.misc.Dipole(moment=m, position=d.position_m)
    pts = points_outside(d, 100, 5.0, 0.5)
    # rtol: closed forms; the curl by finite differences (h = 0.1 um at >= 0.5 mm)
    assert_allclose(d.field(pts), ref.getB(pts * 1e-3), rtol=1e-12)
    assert_allclose(curl(d.potential, pts), ref.getB(pts * 1e-3), rtol=1e-7)


def test_dipole_kernels_at_origin_are_zero():
    z = np.zeros((2, 3))
    assert np.all(dipole_potential(z, [0, 0, 1.0]) == 0) and np.all(dipole_field(z, [0, 0, 1.0]) == 0)


# --------------------------------------------------------------- far field


@pytest.mark.parametrize("magnet", [
    CylinderMagnet(diameter_mm=4, length_mm=3, remanence_t=1.2, axis=(1, 1, 0)),
    BlockMagnet(size_mm=(3, 2, 4), remanence_t=0.38, magnetization=(0, 1, 1), rotation_deg=(0, 30, 0)),
])
def test_far_field_is_the_dipole_br_v_over_mu0(magnet):
    # m = Br V / mu0 (uniform magnetisation M = Br / mu0 times the volume).
    # A centred, point-symmetric body has no quadrupole: the relative
    # difference falls like (size / r)^2.
    d = Dipole(moment_am2=magnet.moment_am2)
    assert_allclose(np.linalg.norm(magnet.moment_am2), magnet.remanence_t * magnet.volume_m3 / MU0, rtol=1e-14)
    for r_mm in (60.0, 240.0):
        u = RNG.normal(size=(40, 3))
        pts = r_mm * u / np.linalg.norm(u, axis=1)[:, None]
        ratio2 = (magnet.extent_mm / r_mm) ** 2
        for f, g in ((magnet.field, d.field), (magnet.potential, d.potential)):
            a, b = f(pts), g(pts)
            err = np.linalg.norm(a - b, axis=1) / np.linalg.norm(b, axis=1)
            # tolerance: octupole term <= (size/r)^2 with a margin of 2
            assert err.max() < 2 * ratio2
    # and the difference is the octupole term: it falls like r^-4, so ten
    # times farther it is 1e-4 times smaller (next term r^-6: +-2 %)
    p = np.array([[50.0, 30.0, 20.0]])
    near = np.linalg.norm(magnet.potential(p) - d.potential(p))
    far = np.linalg.norm(magnet.potential(10 * p) - d.potential(10 * p))
    assert_allclose(far / near, 1e-4, rtol=0.05)


# ---------------------------------------------------------- grades, errors


def test_grade_table_ranges_and_sources():
    # Ranges stated in the shared references (sintered NdFeB 1.1-1.45 T,
    # hard ferrite 0.2-0.45 T, from memory) bracket the table's values.
    for g in GRADES.values():
        assert g.br_min_t < g.br_max_t and g.source
        if "NdFeB" in g.material:
            assert 1.1 <= g.br_min_t and g.br_max_t <= 1.5
        if "ferrite" in g.material:
            assert 0.2 <= g.br_min_t and g.br_max_t <= 0.45
    assert 1.28 <= remanence("N42") <= 1.32
    assert remanence("c5") == remanence("Y30")


def test_unknown_grade_suggests_the_closest():
    with pytest.raises(SpecError, match="unknown magnet grade 'N422'.*did you mean 'N42'"):
        CylinderMagnet(diameter_mm=5, length_mm=2, grade="N422")


@pytest.mark.parametrize("kwargs, words", [
    (dict(diameter_mm=5, length_mm=2), "exactly one of remanence_t"),
    (dict(diameter_mm=5, length_mm=2, remanence_t=1.2, grade="N42"), "exactly one of remanence_t"),
    (dict(diameter_mm=5, radius_mm=2, length_mm=2, remanence_t=1.2), "exactly one of diameter_mm"),
    (dict(diameter_mm=-5, length_mm=2, remanence_t=1.2), "diameter_mm must be > 0"),
    (dict(diameter_mm=5, length_mm=2, remanence_t=3.0), "remanence_t must be > 0 and <= 2.0"),
    (dict(diameter_mm=5, length_mm=2, remanence_t=1.0, axis=(0, 0, 0)), "non-zero direction"),
])
def test_cylinder_validation(kwargs, words):
    with pytest.raises(SpecError, match=words):
        CylinderMagnet(**kwargs)


def test_block_and_dipole_validation():
    with pytest.raises(SpecError, match="size_mm must be a list of 3"):
        BlockMagnet(size_mm=(1, 2), remanence_t=1.0)
    with pytest.raises(SpecError, match="moment_am2 must be non-zero"):
        Dipole(moment_am2=(0, 0, 0))


def test_magnet_from_table():
    b = magnet_from_table({"kind": "block", "size_mm": ["4 mm", 2, 1], "grade": "Y30", "rotation_deg": [0, 0, 45]})
    assert b.size_mm == (4.0, 2.0, 1.0) and b.remanence_t == remanence("Y30")
    with pytest.raises(SpecError, match="did you mean 'magnetization'"):
        magnet_from_table({"kind": "block", "magnetisation": [0, 0, 1]})
    with pytest.raises(SpecError, match="kind must be one of"):
        magnet_from_table({"kind": "sphere"})
