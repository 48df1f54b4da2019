"""Permanent magnets: point dipole, axially magnetised cylinder, block.

Each magnet has its own frame ("local"): origin at the magnet's centre,
magnetisation along local +z for the dipole and the cylinder, and along
``magnetization`` for the block, whose edges lie along the local axes. A
pose places that frame in the world: ``position_mm`` (the centre) and
``rotation`` (a 3 x 3 matrix taking local vectors to world vectors).

Models
------
Uniform magnetisation, no demagnetisation or recoil-permeability effects:
the magnet is a rigid polarisation J = Br (tesla) along its axis, which
is how a hard magnet with relative recoil permeability near 1 (sintered
NdFeB about 1.05, hard ferrite about 1.05-1.3) behaves to within a few
percent (common practice). Its field is that of the equivalent (Amperian)
surface current K = J x n / mu0 on the faces parallel to J, or
equivalently of the magnetic charges J.n on the faces across it.

Pure kernels (SI units, local frame, arrays in and out)
-------------------------------------------------------
cel
    Bulirsch's general complete elliptic integral.
dipole_potential, dipole_field
    A = mu0/(4 pi) (m x r)/r^3 and B = mu0/(4 pi) [3 (m.r) r / r^5 - m / r^3]
    (J. D. Jackson, *Classical Electrodynamics*, 3rd ed., 1999, from memory).
cylinder_potential, cylinder_field
    Axially magnetised cylinder as a solenoidal current sheet, in closed
    form with ``cel`` (derived below; the field agrees with N. Derby and
    S. Olbert, "Cylindrical magnets and ideal solenoids", Am. J. Phys. 78,
    2010, from memory, and with magpylib in tests/test_magnets.py).
cuboid_potential, cuboid_field
    Block with uniform polarisation in any direction: the potential of its
    four current sheets, and the field of its two charged faces, both in
    closed form from the antiderivative of 1/r over a rectangle.

Cylinder closed form
--------------------
A side-wall sheet of radius a and surface current K = Br/mu0 over
z' in [-L/2, L/2] has, at (rho, z) (zeta = z - z', integrated from
zeta- = z - L/2 to zeta+ = z + L/2)::

    A_phi = Br a / (2 pi) [F(zeta+) - F(zeta-)]
    F(zeta) = (2 zeta / q) [cel(kc, 1, 0, 1) - p cel(kc, p, 0, 1)]
    B_rho = -Br a / (2 pi) [F'(zeta+) - F'(zeta-)],  F'(zeta) = (2/q) cel(kc, 1, -1, 1)
    B_z   = Br a / pi [zeta / (q (a+rho)^2) cel(kc, p, a + rho, a - rho)]  (between zeta- and zeta+)

with q^2 = (a+rho)^2 + zeta^2, kc^2 = ((a-rho)^2 + zeta^2) / q^2 and
p = ((a-rho)/(a+rho))^2. Obtained by integrating the loop potential
A_phi = mu0 I a/(4 pi) int cos(phi) dphi / R over zeta first (an asinh),
integrating by parts in phi and substituting phi = pi - 2 theta (the
same route gives B_z from the loop's Biot-Savart integral). Limits that
check it: on the axis B_z = Br/2 [zeta+/sqrt(zeta+^2 + a^2) - zeta-/...];
for L -> infinity A_phi = Br rho / 2 inside and Br a^2 / (2 rho) outside.
The expressions have no division by rho and stay finite on the axis;
they are singular only on the two edge circles (rho = a, z = +-L/2).

Cuboid closed form
------------------
With G(U, V, W) = U asinh(V / sqrt(U^2 + W^2)) + V asinh(U / sqrt(V^2 + W^2))
- |W| atan(U V / (|W| R)), R^2 = U^2 + V^2 + W^2, the integral of 1/r over a
rectangle is the alternating sum of G over its four corners (the potential
of a uniformly charged rectangle; E. Durand, *Electrostatique*, 1964, and
many texts, from memory); dG/dU = asinh(V / sqrt(U^2 + W^2)) and
dG/dW = -sign(W) atan(U V / (|W| R)). Far from the magnet (distance r much
larger than its size s) the corner sums lose about 2 log10(r/s) digits.

Remanence table
---------------
:data:`GRADES` lists common grades with their remanence range and where
the numbers come from.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, replace

import numpy as np

from ..errors import SpecError
from ..physics.kernels import MU0
from ..units import to_mm

__all__ = [
    "GRADES",
    "MagnetGrade",
    "remanence",
    "Magnet",
    "Dipole",
    "CylinderMagnet",
    "BlockMagnet",
    "MAGNET_KINDS",
    "magnet_from_table",
    "rotation_from_axis",
    "rotation_from_euler",
    "cel",
    "cel_multi",
    "dipole_potential",
    "dipole_field",
    "cylinder_potential",
    "cylinder_field",
    "cuboid_potential",
    "cuboid_field",
]

K_MU = MU0 / (4.0 * np.pi)
MM = 1e-3  # metres per millimetre

# --------------------------------------------------------------------------
# Remanence of common grades
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class MagnetGrade:
    """A magnet material grade: remanence range (T) and its source."""

    name: str
    material: str
    br_min_t: float
    br_max_t: float
    source: str

    @property
    def br_t(self) -> float:
        """Nominal remanence used when a grade is named: mid-range (T)."""
        return 0.5 * (self.br_min_t + self.br_max_t)


_NDFEB_SRC = ("sintered NdFeB grade table (min/max Br) of a magnet maker's published data, "
              "en.shanghaimagnet.com 'NdFeB Performance Parameter Table' (read)")
_FERRITE_SRC = ("sintered hard ferrite grades to the SJ285-77 standard (min/typical Br) in a magnet "
                "maker's published table, metalmat.net 'Hard ferrite permanent magnets' (read)")
_MEMORY = "typical datasheet range (from memory)"

#: Common grades. Sintered NdFeB: N-series at room temperature (the M, H,
#: SH... variants with higher coercivity have the same Br ranges). Hard
#: ferrite: strontium/barium ferrite. Others from memory.
GRADES: dict[str, MagnetGrade] = {
    g.name: g
    for g in (
        MagnetGrade("N35", "sintered NdFeB", 1.17, 1.22, _NDFEB_SRC),
        MagnetGrade("N38", "sintered NdFeB", 1.22, 1.25, _NDFEB_SRC),
        MagnetGrade("N40", "sintered NdFeB", 1.25, 1.28, _NDFEB_SRC),
        MagnetGrade("N42", "sintered NdFeB", 1.28, 1.32, _NDFEB_SRC),
        MagnetGrade("N45", "sintered NdFeB", 1.32, 1.37, _NDFEB_SRC),
        MagnetGrade("N48", "sintered NdFeB", 1.37, 1.42, _NDFEB_SRC),
        MagnetGrade("N50", "sintered NdFeB", 1.39, 1.44, _NDFEB_SRC),
        MagnetGrade("N52", "sintered NdFeB", 1.42, 1.46, _NDFEB_SRC),
        MagnetGrade("Y10T", "isotropic hard ferrite (C1)", 0.200, 0.218, _FERRITE_SRC),
        MagnetGrade("Y25", "hard ferrite", 0.360, 0.370, _FERRITE_SRC),
        MagnetGrade("Y30", "hard ferrite (C5)", 0.380, 0.385, _FERRITE_SRC),
        MagnetGrade("Y30BH", "hard ferrite", 0.380, 0.390, _FERRITE_SRC),
        MagnetGrade("Y33", "hard ferrite", 0.410, 0.420, _FERRITE_SRC),
        MagnetGrade("Y35", "hard ferrite", 0.400, 0.410, _FERRITE_SRC),
        MagnetGrade("C8", "hard ferrite (C8A)", 0.385, 0.390, _FERRITE_SRC),
        MagnetGrade("SmCo5", "sintered SmCo5", 0.85, 0.95, _MEMORY),
        MagnetGrade("Sm2Co17", "sintered Sm2Co17", 1.00, 1.12, _MEMORY),
        MagnetGrade("AlNiCo5", "cast AlNiCo 5", 1.20, 1.30, _MEMORY),
    )
}
# Aliases used in catalogues for the same ferrite grades.
_ALIASES = {"C1": "Y10T", "C5": "Y30", "C8A": "C8"}

BR_MAX_T = 2.0  # no permanent magnet comes near this (NdFeB saturates near 1.6 T)


def remanence(grade: str) -> float:
    """Nominal remanence (T) of a named grade (case-insensitive).

    >>> remanence("n42")
    1.3
    >>> remanence("C5")
    0.3825
    """
    if not isinstance(grade, str):
        raise SpecError(f"grade must be a grade name such as 'N42' or 'Y30'; got {grade!r}")
    names = {k.lower(): k for k in list(GRADES) + list(_ALIASES)}
    key = names.get(grade.strip().lower())
    if key is None:
        close = difflib.get_close_matches(grade.strip().upper(), [k.upper() for k in names.values()], n=1, cutoff=0.5)
        hint = f"; did you mean {names[close[0].lower()]!r}?" if close else ""
        raise SpecError(f"unknown magnet grade {grade!r}{hint} (known grades: {', '.join(GRADES)}; "
                        f"or give remanence_t in tesla)")
    return GRADES[_ALIASES.get(key, key)].br_t


def _br(remanence_t, grade, where):
    if remanence_t is not None and grade is not None and remanence_t == remanence(grade):
        return remanence_t  # both, consistent: a copy made by ``placed``
    if (remanence_t is None) == (grade is None):
        raise SpecError(f"{where}: give exactly one of remanence_t (T) or grade (e.g. 'N42'); "
                        f"got remanence_t={remanence_t!r}, grade={grade!r}")
    if grade is not None:
        return remanence(grade)
    br = _finite(remanence_t, f"{where}.remanence_t")
    if not 0.0 < br <= BR_MAX_T:
        raise SpecError(f"{where}.remanence_t must be > 0 and <= {BR_MAX_T} T; got {remanence_t!r}")
    return br


# --------------------------------------------------------------------------
# Small validation helpers
# --------------------------------------------------------------------------


def _finite(value, name):
    if isinstance(value, bool):
        raise SpecError(f"{name} must be a number; got {value!r}")
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise SpecError(f"{name} must be a number; got {value!r}") from None
    if not math.isfinite(v):
        raise SpecError(f"{name} must be finite; got {value!r}")
    return v


def _vector(value, name, *, unit_length=False, mm=False):
    """A 3-vector from a sequence (lengths may carry units when ``mm``)."""
    try:
        items = list(value)
    except TypeError:
        raise SpecError(f"{name} must be a list of 3 numbers; got {value!r}") from None
    if len(items) != 3:
        raise SpecError(f"{name} must be a list of 3 numbers; got {value!r}")
    v = np.array([to_mm(x, name) if mm else _finite(x, name) for x in items], dtype=float)
    if not np.all(np.isfinite(v)):
        raise SpecError(f"{name} must be finite; got {value!r}")
    if unit_length:
        n = float(np.linalg.norm(v))
        if n == 0.0:
            raise SpecError(f"{name} must be a non-zero direction; got {value!r}")
        v = v / n
    return v


def _length(value, name, lo=0.0, hi=1000.0):
    v = to_mm(value, name)
    if not math.isfinite(v) or not lo < v <= hi:
        raise SpecError(f"{name} must be > {lo} and <= {hi} mm; got {value!r}")
    return v


def rotation_from_axis(axis) -> np.ndarray:
    """Rotation matrix taking local +z onto the unit vector ``axis``.

    The smallest rotation (about z x axis); for axis = -z, a half turn
    about x.

    >>> rotation_from_axis([0, 0, 1]).tolist() == np.eye(3).tolist()
    True
    >>> np.round(rotation_from_axis([1, 0, 0]) @ [0, 0, 1], 12).tolist()
    [1.0, 0.0, 0.0]
    """
    a = np.asarray(axis, float)
    a = a / np.linalg.norm(a)
    z = np.array([0.0, 0.0, 1.0])
    c = float(a @ z)
    if c < -1.0 + 1e-15:
        return np.diag([1.0, -1.0, -1.0])
    v = np.cross(z, a)
    vx = np.array([[0, -v[2], v[1]], [v[2], 0, -v[0]], [-v[1], v[0], 0]])
    return np.eye(3) + vx + vx @ vx / (1.0 + c)


def rotation_from_euler(angles_deg) -> np.ndarray:
    """Rotation matrix for rotations about the world x, then y, then z axes
    (extrinsic x-y-z angles in degrees): R = Rz @ Ry @ Rx.

    >>> np.round(rotation_from_euler([0, 0, 90]) @ [1, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    ax, ay, az = np.deg2rad(np.asarray(angles_deg, float))
    rx = np.array([[1, 0, 0], [0, np.cos(ax), -np.sin(ax)], [0, np.sin(ax), np.cos(ax)]])
    ry = np.array([[np.cos(ay), 0, np.sin(ay)], [0, 1, 0], [-np.sin(ay), 0, np.cos(ay)]])
    rz = np.array([[np.cos(az), -np.sin(az), 0], [np.sin(az), np.cos(az), 0], [0, 0, 1]])
    return rz @ ry @ rx


def _check_rotation(r, name="rotation"):
    r = np.asarray(r, dtype=float)
    if r.shape != (3, 3) or not np.all(np.isfinite(r)):
        raise SpecError(f"{name} must be a finite 3 x 3 rotation matrix; got shape {r.shape}")
    if not np.allclose(r.T @ r, np.eye(3), atol=1e-9) or np.linalg.det(r) < 0:
        raise SpecError(f"{name} must be a proper rotation matrix (orthonormal, determinant +1)")
    return r


# --------------------------------------------------------------------------
# Kernels (SI, local frame)
# --------------------------------------------------------------------------


def cel(kc, p, c, s, *, tol=1e-8):
    """Bulirsch's general complete elliptic integral.

    cel(kc, p, c, s) = int_0^{pi/2} (c cos^2 t + s sin^2 t) /
    ((cos^2 t + p sin^2 t) sqrt(cos^2 t + kc^2 sin^2 t)) dt

    R. Bulirsch, "Numerical calculation of elliptic integrals and elliptic
    functions III", Numer. Math. 13, 1969 (algorithm as reprinted by Derby
    & Olbert 2010, from memory; checked against scipy's Carlson integrals
    in tests/test_magnets.py). K(k) = cel(kc, 1, 1, 1),
    E(k) = cel(kc, 1, 1, kc^2), Pi(n, k) = cel(kc, 1 - n, 1, 1), kc^2 = 1 - k^2.

    Parameters
    ----------
    kc, p : ndarray, shape (n,)
        Complementary modulus (kc != 0) and parameter (p > 0).
    c, s : ndarray, shape (n,) or scalars
        Numerator coefficients.
    tol : float
        Stop when the arithmetic-geometric means agree to ``tol``
        (relative); the error then is about tol^2.

    Returns
    -------
    ndarray, shape (n,)

    Examples
    --------
    >>> round(float(cel(np.sqrt(0.5), 1.0, 1.0, 1.0)), 12)  # K(m = 1/2)
    1.854074677301
    """
    return cel_multi(kc, [(p, c, s)], tol=tol)[0]


def cel_multi(kc, terms, *, tol=1e-8):
    """Several :func:`cel` integrals sharing the same ``kc`` in one pass.

    The arithmetic-geometric mean sequence of Bulirsch's algorithm depends
    on kc only; each (p, c, s) adds three running arrays. Roughly 30 %
    cheaper than separate calls for two terms.

    Parameters
    ----------
    kc : ndarray, shape (n,)
    terms : list of (p, c, s)
        Each entry broadcastable to shape (n,).

    Returns
    -------
    list of ndarray, shape (n,)

    >>> a, b = cel_multi(np.array([0.6]), [(1.0, 1.0, 1.0), (0.3, 1.0, 1.0)])
    >>> bool(abs(a[0] - cel(np.array([0.6]), 1.0, 1.0, 1.0)[0]) < 1e-15)
    True
    """
    k = np.abs(np.atleast_1d(np.asarray(kc, dtype=float)))
    scalar = np.ndim(kc) == 0
    shape = k.shape
    states = []
    for p, c, s in terms:
        pp = np.sqrt(np.broadcast_to(np.asarray(p, dtype=float), shape))
        s = np.broadcast_to(np.asarray(s, dtype=float), shape) / pp
        c = np.broadcast_to(np.asarray(c, dtype=float), shape)
        g = k / pp
        c_new = c + s / pp
        s = 2.0 * (s + c * g)
        states.append([pp + g, c_new, s])
    em = k + 1.0
    g = np.ones(shape)
    kk = k.copy()
    t1, t2, t3 = np.empty(shape), np.empty(shape), np.empty(shape)
    for _ in range(60):  # quadratic convergence: 4-7 passes in practice
        np.subtract(g, k, out=t1)
        np.abs(t1, out=t1)
        np.multiply(g, tol, out=t2)
        if not np.any(t1 > t2):
            break
        np.sqrt(kk, out=k)
        k *= 2.0
        np.multiply(k, em, out=kk)
        for pp, c, s in states:
            np.divide(s, pp, out=t1)
            np.divide(kk, pp, out=t2)
            np.multiply(c, t2, out=t3)
            s += t3
            s *= 2.0
            c += t1
            pp += t2
        g[...] = em
        em += k
    out = []
    for pp, c, s in states:
        c *= em
        c += s
        pp += em
        pp *= em
        c /= pp
        c *= 0.5 * np.pi
        out.append(c[0] if scalar else c)
    return out


def dipole_potential(points, moment):
    """Vector potential of a point dipole at the origin.

    A = mu0/(4 pi) (m x r) / |r|^3 (Jackson 1999, from memory); zero at r = 0.

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Points (m).
    moment : ndarray, shape (3,)
        Magnetic moment (A m^2).

    Returns
    -------
    ndarray, shape (k, 3)
        A (T m).

    Examples
    --------
    >>> A = dipole_potential(np.array([[0.01, 0, 0]]), np.array([0, 0, 1.0]))
    >>> round(float(A[0, 1] / (1e-7 / 1e-4)), 9)  # mu0/(4 pi) m / r^2 along +y
    1.0
    """
    r = np.asarray(points, float)
    r2 = np.einsum("ij,ij->i", r, r)
    inv = np.zeros_like(r2)
    np.divide(1.0, r2 * np.sqrt(r2), out=inv, where=r2 > 0)
    return K_MU * np.cross(np.asarray(moment, float), r) * inv[:, None]


def dipole_field(points, moment):
    """Flux density of a point dipole at the origin (T); zero at r = 0.

    B = mu0/(4 pi) [3 (m.r) r / r^5 - m / r^3] (Jackson 1999, from memory).

    >>> B = dipole_field(np.array([[0, 0, 0.01]]), np.array([0, 0, 1.0]))
    >>> round(float(B[0, 2] / (2e-7 / 1e-6)), 9)
    1.0
    """
    r = np.asarray(points, float)
    m = np.asarray(moment, float)
    r2 = np.einsum("ij,ij->i", r, r)
    ok = r2 > 0
    inv3 = np.zeros_like(r2)
    np.divide(1.0, r2 * np.sqrt(r2), out=inv3, where=ok)
    inv5 = np.zeros_like(r2)
    np.divide(inv3, r2, out=inv5, where=ok)
    mr = r @ m
    return K_MU * (3.0 * (mr * inv5)[:, None] * r - inv3[:, None] * m)


def _cyl_coords(points):
    p = np.asarray(points, float)
    rho = np.hypot(p[:, 0], p[:, 1])
    return p, rho


def _cyl_terms(rho, z, radius, length):
    """Per end (axis 0: zeta+, zeta-): zeta, q, kc, p of the closed forms."""
    a = float(radius)
    zeta = np.stack([z + 0.5 * length, z - 0.5 * length])  # (2, k)
    rho = np.broadcast_to(rho, zeta.shape)
    apr = a + rho
    q = np.sqrt(apr * apr + zeta * zeta)
    amr = a - rho
    kc = np.sqrt(amr * amr + zeta * zeta) / q
    pr = amr / apr
    p = np.maximum(pr * pr, 1e-300)  # rho = a: p -> 0 (finite limits)
    return zeta, q, kc, p, apr, amr


def cylinder_potential(points, radius, length, polarization):
    """Vector potential of an axially magnetised cylinder (local frame).

    The cylinder has its centre at the origin and its axis (and its
    magnetisation) along +z. Closed form of the module docstring; exact
    for uniform magnetisation. On the edge circles (rho = radius,
    z = +-length/2) the potential has a logarithmic singularity.

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Points (m).
    radius, length : float
        Cylinder radius and length (m).
    polarization : float
        J = Br (T); negative reverses the magnetisation.

    Returns
    -------
    ndarray, shape (k, 3)
        A (T m), azimuthal.

    Examples
    --------
    A long magnet has A_phi = Br rho / 2 inside near its middle:

    >>> A = cylinder_potential(np.array([[0.5, 0, 0]]), 1.0, 4000.0, 1.0)
    >>> round(float(A[0, 1]), 6)
    0.25
    """
    p3, rho = _cyl_coords(points)
    zeta, q, kc, p, _, _ = _cyl_terms(rho, p3[:, 2], radius, length)
    c1, c2 = cel_multi(kc, [(1.0, 0.0, 1.0), (p, 0.0, 1.0)])
    F = 2.0 * zeta / q * (c1 - p * c2)
    a_phi = polarization * radius / (2.0 * np.pi) * (F[0] - F[1])
    return _azimuthal(p3, rho, a_phi)


def _azimuthal(p3, rho, a_phi):
    out = np.zeros_like(p3)
    ok = rho > 0
    s = np.zeros_like(rho)
    np.divide(a_phi, rho, out=s, where=ok)
    out[:, 0] = -s * p3[:, 1]
    out[:, 1] = s * p3[:, 0]
    return out


def cylinder_field(points, radius, length, polarization):
    """Flux density of an axially magnetised cylinder (local frame), in T.

    Closed form of the module docstring (inside the magnet the result is
    B, including the polarisation). Singular on the edge circles; on the
    side wall and the end faces the value is the mean of the two sides.

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Points (m).
    radius, length : float
        Cylinder radius and length (m).
    polarization : float
        J = Br (T).

    Returns
    -------
    ndarray, shape (k, 3)

    Examples
    --------
    On the axis at the face centre, Bz = Br/2 L / sqrt(L^2 + R^2):

    >>> B = cylinder_field(np.array([[0, 0, 0.5]]), 1.0, 1.0, 1.0)
    >>> bool(round(float(B[0, 2]), 12) == round(0.5 / np.sqrt(2), 12))
    True
    """
    p3, rho = _cyl_coords(points)
    zeta, q, kc, p, apr, amr = _cyl_terms(rho, p3[:, 2], radius, length)
    c1, c2 = cel_multi(kc, [(1.0, -1.0, 1.0), (p, apr, amr)])
    fprime = 2.0 / q * c1
    b_rho = -polarization * radius / (2.0 * np.pi) * (fprime[0] - fprime[1])
    t = zeta / (q * apr * apr) * c2
    b_z = polarization * radius / np.pi * (t[0] - t[1])
    out = np.zeros_like(p3)
    ok = rho > 0
    s = np.zeros_like(rho)
    np.divide(b_rho, rho, out=s, where=ok)
    out[:, 0] = s * p3[:, 0]
    out[:, 1] = s * p3[:, 1]
    out[:, 2] = b_z
    return out


_VERTEX_SIGNS = np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)], dtype=float)
_VERTEX_PARITY = _VERTEX_SIGNS.prod(axis=1)  # corner sign of the alternating sums
_PERMS = ((1, 2, 0), (2, 0, 1), (0, 1, 2))  # local axes (x', y', z') for polarisation along x, y, z
_CUBOID_CHUNK = 2048  # points per pass (keeps the (8, k, 3) temporaries in cache)


def _vertex_terms(p, size):
    """Per-vertex terms of the cuboid closed forms (module docstring).

    D = vertex - point, shape (8, k, 3), R = |D|. Instead of
    asinh(D_i / rho_i) (rho_i^2 = R^2 - D_i^2) it returns
    L_i = asinh(D_i / rho_i) + ln(rho_i) = ln(R + D_i), evaluated as
    ln(rho_i^2 / (R - D_i)) for D_i < 0 (no cancellation): the added
    ln(rho_i) does not depend on the sign of the vertex along axis i, so
    it cancels in every alternating vertex sum the kernels form (each
    multiplies L_i by a factor equally independent of it). Where
    R + D_i = 0 (on the line of an edge, beyond the vertex) L_i is set to
    0; its factor vanishes there, or the field is singular.

    Returns D (8, k, 3), |D| (8, k, 3), R (8, k, 1), L (8, k, 3).
    """
    D = _VERTEX_SIGNS[:, None, :] * (0.5 * np.asarray(size, float)) - p[None, :, :]
    D2 = D * D
    R2 = D2.sum(axis=2)[..., None]
    R = np.sqrt(R2)
    aD = np.abs(D)
    arg = R + D
    neg = D < 0
    # D < 0: R + D = rho^2 / (R - D) = (R^2 - D^2) / (R + |D|)
    alt = np.maximum(R2 - D2, 0.0)
    alt /= R + aD
    np.copyto(arg, alt, where=neg)
    L = np.zeros_like(arg)
    np.log(arg, out=L, where=arg > 0)
    return D, aD, R, L


def _vertex_atan(D, aD, R, i):
    """T_i = atan(D_j D_k / (|D_i| R)) for axis i, shape (8, k); 0 where undefined."""
    j, k = [a for a in range(3) if a != i]
    num = D[..., j] * D[..., k]
    den = aD[..., i] * R[..., 0]
    t = np.zeros_like(num)
    np.divide(num, den, out=t, where=den > 0)
    return np.arctan(t, out=t)


def _cuboid_chunks(kernel, points, size, polarization):
    p = np.asarray(points, float)
    pol = np.asarray(polarization, float)
    out = np.zeros_like(p)
    for i0 in range(0, len(p), _CUBOID_CHUNK):
        out[i0:i0 + _CUBOID_CHUNK] = kernel(p[i0:i0 + _CUBOID_CHUNK], size, pol)
    return out


def _cuboid_potential_block(p, size, pol):
    D, aD, R, L = _vertex_terms(p, size)
    s = _VERTEX_PARITY
    out = np.zeros_like(p)
    for axis, (x, y, z) in enumerate(_PERMS):
        j = float(pol[axis])
        if j == 0.0:
            continue
        # sheets on the faces normal to x' (current along y') and y' (current along -x')
        ay = s @ (D[..., y] * L[..., z] + D[..., z] * L[..., y] - aD[..., x] * _vertex_atan(D, aD, R, x))
        ax = s @ (D[..., x] * L[..., z] + D[..., z] * L[..., x] - aD[..., y] * _vertex_atan(D, aD, R, y))
        out[:, y] += (j / (4.0 * np.pi)) * ay
        out[:, x] -= (j / (4.0 * np.pi)) * ax
    return out


def _cuboid_field_block(p, size, pol):
    D, aD, R, L = _vertex_terms(p, size)
    s = _VERTEX_PARITY
    out = np.zeros_like(p)
    for axis, (x, y, z) in enumerate(_PERMS):
        j = float(pol[axis])
        if j == 0.0:
            continue
        # charges on the faces normal to z': H = -grad of their potential
        f = j / (4.0 * np.pi)
        out[:, x] += f * (s @ L[..., y])
        out[:, y] += f * (s @ L[..., x])
        out[:, z] -= f * (s @ (np.sign(D[..., z]) * _vertex_atan(D, aD, R, z)))
    inside = np.all(np.abs(p) < 0.5 * np.asarray(size, float), axis=1)
    out[inside] += pol
    return out


def cuboid_potential(points, size, polarization):
    """Vector potential of a uniformly polarised cuboid (local frame).

    Edges along the local axes, centre at the origin. For each component
    of the polarisation, the four current sheets on the faces parallel to
    it, in the closed form of the module docstring (summed over the eight
    vertices).

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Points (m).
    size : sequence of 3 floats
        Edge lengths along x, y, z (m).
    polarization : ndarray, shape (3,)
        J (T), any direction.

    Returns
    -------
    ndarray, shape (k, 3)
        A (T m).

    Examples
    --------
    Far away (100 sizes) it approaches the dipole m = J V / mu0:

    >>> pt = np.array([[0.3, 0.2, 0.1]])
    >>> A = cuboid_potential(pt, (1e-3, 2e-3, 3e-3), np.array([0, 0, 1.0]))
    >>> Ad = dipole_potential(pt, np.array([0, 0, 6e-9 / MU0]))
    >>> round(float(np.linalg.norm(A - Ad) / np.linalg.norm(Ad)), 4)
    0.0
    """
    return _cuboid_chunks(_cuboid_potential_block, points, size, polarization)


def cuboid_field(points, size, polarization):
    """Flux density of a uniformly polarised cuboid (local frame), in T.

    Charge model (faces across J carry the magnetic charge J.n / mu0),
    closed form; inside the magnet B = mu0 H + J. Singular on the edges.

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Points (m).
    size : sequence of 3 floats
        Edge lengths (m).
    polarization : ndarray, shape (3,)
        J (T).

    Returns
    -------
    ndarray, shape (k, 3)

    Examples
    --------
    At the centre of a cube the demagnetising factor is 1/3 by symmetry,
    so B = J - J/3:

    >>> B = cuboid_field(np.zeros((1, 3)), (1.0, 1.0, 1.0), np.array([0, 0, 1.0]))
    >>> round(float(B[0, 2]), 12) == round(2 / 3, 12)
    True
    """
    return _cuboid_chunks(_cuboid_field_block, points, size, polarization)


# --------------------------------------------------------------------------
# Magnet objects
# --------------------------------------------------------------------------


@dataclass(frozen=True, eq=False, kw_only=True)
class Magnet:
    """Base of the magnet targets: a pose and the world-frame evaluators.

    Subclasses define the local kernels ``_potential_local`` and
    ``_field_local`` (SI), the convex hull used for overlap checks, the
    exact distance from points to the magnet, and ``moment_am2``.
    """

    position_mm: tuple = (0.0, 0.0, 0.0)

    kind = "magnet"

    def _set_position(self):
        object.__setattr__(self, "position_mm", tuple(_vector(self.position_mm, "position_mm", mm=True)))

    @property
    def position_m(self) -> np.ndarray:
        return np.asarray(self.position_mm, float) * MM

    @property
    def rotation(self) -> np.ndarray:  # pragma: no cover - overridden
        return np.eye(3)

    def placed(self, **changes) -> "Magnet":
        """A copy with some parameters changed (validated again)."""
        return replace(self, **changes)

    def _to_local(self, points_mm):
        p = np.asarray(points_mm, float)
        if p.shape[-1:] != (3,):
            raise SpecError(f"points_mm must have shape (..., 3); got {p.shape}")
        flat = p.reshape(-1, 3) * MM
        return (flat - self.position_m) @ self.rotation, p.shape[:-1]

    def potential(self, points_mm) -> np.ndarray:
        """Vector potential A (T m) at world points (mm), shape (..., 3).

        >>> d = Dipole(moment_am2=(0, 0, 1.0), position_mm=(0, 0, 10))
        >>> A = d.potential([10, 0, 10])
        >>> round(float(A[1] / 1e-3), 9)  # mu0/(4 pi) m / r^2, r = 10 mm
        1.0
        """
        loc, shape = self._to_local(points_mm)
        return (self._potential_local(loc) @ self.rotation.T).reshape(shape + (3,))

    def field(self, points_mm) -> np.ndarray:
        """Flux density B (T) at world points (mm), shape (..., 3)."""
        loc, shape = self._to_local(points_mm)
        return (self._field_local(loc) @ self.rotation.T).reshape(shape + (3,))

    def describe(self) -> dict:
        """Parameters as plain JSON-ready values."""
        raise NotImplementedError  # pragma: no cover


@dataclass(frozen=True, eq=False, kw_only=True)
class Dipole(Magnet):
    """A point magnetic dipole.

    Parameters
    ----------
    moment_am2 : sequence of 3 floats
        Magnetic moment in the world frame (A m^2). A magnet of volume V and
        remanence Br has |m| = Br V / mu0 (e.g. 1 mm^3 of 1.3 T: 1.03e-3 A m^2).
    position_mm : sequence of 3 floats
        Where the dipole is (mm).

    Examples
    --------
    >>> d = Dipole(moment_am2=(0, 0, 0.01))
    >>> d.extent_mm, d.moment_am2.tolist()
    (0.0, [0.0, 0.0, 0.01])
    """

    moment_am2: tuple = (0.0, 0.0, 1.0)

    kind = "dipole"

    def __post_init__(self):
        self._set_position()
        m = _vector(self.moment_am2, "dipole.moment_am2")
        if not np.any(m):
            raise SpecError(f"dipole.moment_am2 must be non-zero; got {self.moment_am2!r}")
        m.setflags(write=False)
        object.__setattr__(self, "moment_am2", m)  # world frame = local frame (A m^2)

    @property
    def rotation(self) -> np.ndarray:
        return np.eye(3)

    @property
    def extent_mm(self) -> float:
        """Largest dimension (mm): 0 for a point dipole."""
        return 0.0

    def _potential_local(self, pts):
        return dipole_potential(pts, self.moment_am2)

    def _field_local(self, pts):
        return dipole_field(pts, self.moment_am2)

    def hull_local_mm(self) -> np.ndarray:
        return np.zeros((1, 3))

    def distance_local_mm(self, pts_mm) -> np.ndarray:
        return np.linalg.norm(pts_mm, axis=-1)

    def describe(self) -> dict:
        return {"kind": "dipole", "moment_am2": self.moment_am2.tolist()}


@dataclass(frozen=True, eq=False, kw_only=True)
class CylinderMagnet(Magnet):
    """An axially magnetised cylinder (disc or rod) magnet.

    Parameters
    ----------
    diameter_mm, radius_mm : float
        Give one of them.
    length_mm : float
        Length along the axis (the magnetisation direction).
    remanence_t : float, optional
        Remanence Br (T); or give ``grade`` (see :data:`GRADES`).
    grade : str, optional
        Material grade such as 'N42' or 'Y30'.
    position_mm : sequence of 3 floats
        Centre of the magnet (mm).
    axis : sequence of 3 floats
        Direction of the magnetisation (the north-pole end points along
        +axis), world frame; normalised.

    Examples
    --------
    >>> m = CylinderMagnet(diameter_mm=6, length_mm=3, grade="N42")
    >>> round(m.remanence_t, 3), round(float(m.moment_am2[2]), 5)  # Br V / mu0
    (1.3, 0.08775)
    """

    diameter_mm: float | None = None
    radius_mm: float | None = None
    length_mm: float = 1.0
    remanence_t: float | None = None
    grade: str | None = None
    axis: tuple = (0.0, 0.0, 1.0)

    kind = "cylinder"

    def __post_init__(self):
        self._set_position()
        if self.diameter_mm is not None and self.radius_mm is not None and self.diameter_mm == 2 * self.radius_mm:
            object.__setattr__(self, "radius_mm", None)  # both, consistent: a copy made by ``placed``
        if (self.diameter_mm is None) == (self.radius_mm is None):
            raise SpecError("cylinder: give exactly one of diameter_mm or radius_mm")
        if self.diameter_mm is not None:
            d = _length(self.diameter_mm, "cylinder.diameter_mm")
            object.__setattr__(self, "diameter_mm", d)
            object.__setattr__(self, "radius_mm", d / 2)
        else:
            r = _length(self.radius_mm, "cylinder.radius_mm", hi=500.0)
            object.__setattr__(self, "radius_mm", r)
            object.__setattr__(self, "diameter_mm", 2 * r)
        object.__setattr__(self, "length_mm", _length(self.length_mm, "cylinder.length_mm"))
        object.__setattr__(self, "remanence_t", _br(self.remanence_t, self.grade, "cylinder"))
        object.__setattr__(self, "axis", tuple(_vector(self.axis, "cylinder.axis", unit_length=True)))

    @property
    def rotation(self) -> np.ndarray:
        return rotation_from_axis(self.axis)

    @property
    def extent_mm(self) -> float:
        """Largest dimension (mm)."""
        return max(self.diameter_mm, self.length_mm)

    @property
    def volume_m3(self) -> float:
        return math.pi * (self.radius_mm * MM) ** 2 * self.length_mm * MM

    @property
    def moment_am2(self) -> np.ndarray:
        """Br V / mu0 along the axis (A m^2), world frame."""
        return self.remanence_t * self.volume_m3 / MU0 * np.asarray(self.axis)

    def _potential_local(self, pts):
        return cylinder_potential(pts, self.radius_mm * MM, self.length_mm * MM, self.remanence_t)

    def _field_local(self, pts):
        return cylinder_field(pts, self.radius_mm * MM, self.length_mm * MM, self.remanence_t)

    def hull_local_mm(self, sides: int = 64) -> np.ndarray:
        """Vertices (2*sides, 3) of a prism circumscribing the cylinder (mm).

        The prism reaches at most radius (1/cos(pi/sides) - 1) beyond the
        cylinder (0.12 % of the radius for 64 sides).
        """
        t = np.arange(sides) * (2 * np.pi / sides)
        r = self.radius_mm / np.cos(np.pi / sides)
        ring = np.column_stack([r * np.cos(t), r * np.sin(t)])
        h = self.length_mm / 2
        return np.vstack([np.column_stack([ring, np.full(sides, -h)]), np.column_stack([ring, np.full(sides, h)])])

    def distance_local_mm(self, pts_mm) -> np.ndarray:
        """Exact distance (mm) from local points to the solid cylinder (0 inside)."""
        x, y, z = pts_mm[..., 0], pts_mm[..., 1], pts_mm[..., 2]
        dr = np.maximum(np.sqrt(x * x + y * y) - self.radius_mm, 0.0)
        dz = np.maximum(np.abs(z) - self.length_mm / 2, 0.0)
        return np.sqrt(dr * dr + dz * dz)

    def describe(self) -> dict:
        d = {"kind": "cylinder", "diameter_mm": self.diameter_mm, "length_mm": self.length_mm,
             "remanence_t": self.remanence_t, "axis": list(self.axis)}
        if self.grade is not None:
            d["grade"] = self.grade
        return d


@dataclass(frozen=True, eq=False, kw_only=True)
class BlockMagnet(Magnet):
    """A cuboid (block) magnet, uniformly magnetised in any direction.

    Parameters
    ----------
    size_mm : sequence of 3 floats
        Edge lengths along the block's own x, y, z axes (mm).
    remanence_t : float, optional
        Remanence Br (T); or give ``grade``.
    grade : str, optional
        Material grade such as 'N42'.
    magnetization : sequence of 3 floats
        Direction of the magnetisation in the block's own frame (default
        +z, through the thickness); normalised.
    rotation_deg : sequence of 3 floats
        Orientation of the block: rotations about the world x, then y,
        then z axes, in degrees (see :func:`rotation_from_euler`).
    position_mm : sequence of 3 floats
        Centre of the block (mm).

    Examples
    --------
    >>> b = BlockMagnet(size_mm=(10, 5, 2), remanence_t=1.2, rotation_deg=(90, 0, 0))
    >>> np.round(b.moment_am2 / (1.2 * 1e-7 / MU0), 9).tolist()  # 100 mm^3, +z turned to -y
    [0.0, -1.0, 0.0]
    """

    size_mm: tuple = (1.0, 1.0, 1.0)
    remanence_t: float | None = None
    grade: str | None = None
    magnetization: tuple = (0.0, 0.0, 1.0)
    rotation_deg: tuple = (0.0, 0.0, 0.0)

    kind = "block"

    def __post_init__(self):
        self._set_position()
        try:
            sizes = list(self.size_mm)
        except TypeError:
            raise SpecError(f"block.size_mm must be a list of 3 lengths; got {self.size_mm!r}") from None
        if len(sizes) != 3:
            raise SpecError(f"block.size_mm must be a list of 3 lengths; got {self.size_mm!r}")
        object.__setattr__(self, "size_mm", tuple(_length(s, "block.size_mm") for s in sizes))
        object.__setattr__(self, "remanence_t", _br(self.remanence_t, self.grade, "block"))
        object.__setattr__(self, "magnetization", tuple(_vector(self.magnetization, "block.magnetization", unit_length=True)))
        ang = _vector(self.rotation_deg, "block.rotation_deg")
        object.__setattr__(self, "rotation_deg", tuple(float(a) for a in ang))

    @property
    def rotation(self) -> np.ndarray:
        return rotation_from_euler(self.rotation_deg)

    @property
    def extent_mm(self) -> float:
        """Largest dimension (mm)."""
        return max(self.size_mm)

    @property
    def volume_m3(self) -> float:
        return float(np.prod(np.asarray(self.size_mm) * MM))

    @property
    def polarization_local(self) -> np.ndarray:
        return self.remanence_t * np.asarray(self.magnetization)

    @property
    def moment_am2(self) -> np.ndarray:
        """Br V / mu0 along the magnetisation (A m^2), world frame."""
        return self.rotation @ (self.polarization_local * self.volume_m3 / MU0)

    def _potential_local(self, pts):
        return cuboid_potential(pts, np.asarray(self.size_mm) * MM, self.polarization_local)

    def _field_local(self, pts):
        return cuboid_field(pts, np.asarray(self.size_mm) * MM, self.polarization_local)

    def hull_local_mm(self) -> np.ndarray:
        h = np.asarray(self.size_mm) / 2
        return np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)]) * h

    def distance_local_mm(self, pts_mm) -> np.ndarray:
        """Exact distance (mm) from local points to the solid block (0 inside)."""
        d = np.maximum(np.abs(pts_mm) - np.asarray(self.size_mm) / 2, 0.0)
        return np.linalg.norm(d, axis=-1)

    def describe(self) -> dict:
        d = {"kind": "block", "size_mm": list(self.size_mm), "remanence_t": self.remanence_t,
             "magnetization": list(self.magnetization), "rotation_deg": list(self.rotation_deg)}
        if self.grade is not None:
            d["grade"] = self.grade
        return d


# --------------------------------------------------------------------------
# Design-file tables
# --------------------------------------------------------------------------

MAGNET_KINDS = ("dipole", "cylinder", "block")
_TABLE_KEYS = {
    "dipole": ("kind", "moment_am2"),
    "cylinder": ("kind", "diameter_mm", "radius_mm", "length_mm", "remanence_t", "grade", "axis"),
    "block": ("kind", "size_mm", "remanence_t", "grade", "magnetization", "rotation_deg"),
}
_CLASSES = {"dipole": Dipole, "cylinder": CylinderMagnet, "block": BlockMagnet}


def magnet_from_table(values: dict) -> Magnet:
    """Build a magnet from a design file's ``[target]`` table.

    ``kind`` is 'dipole' (``moment_am2``), 'cylinder' (``diameter_mm`` or
    ``radius_mm``, ``length_mm``, ``remanence_t`` or ``grade``, ``axis``)
    or 'block' (``size_mm``, ``remanence_t`` or ``grade``,
    ``magnetization``, ``rotation_deg``). The motion places the magnet, so
    the table has no position.

    >>> m = magnet_from_table({"kind": "cylinder", "diameter_mm": 6, "length_mm": 3, "grade": "N42"})
    >>> type(m).__name__, m.radius_mm
    ('CylinderMagnet', 3.0)
    >>> magnet_from_table({"kind": "cylinder", "diametre_mm": 6})
    Traceback (most recent call last):
    ...
    tracecoil.errors.SpecError: unknown key 'diametre_mm' in [target]; did you mean 'diameter_mm'? (valid keys: axis, diameter_mm, grade, kind, length_mm, radius_mm, remanence_t)
    """
    from ..errors import unknown_key_message

    if not isinstance(values, dict):
        raise SpecError(f"[target] must be a table of keys; got {type(values).__name__}")
    kind = values.get("kind")
    if kind not in MAGNET_KINDS:
        raise SpecError(f"[target] kind must be one of {', '.join(repr(k) for k in MAGNET_KINDS)} for a magnet; got {kind!r}")
    keys = _TABLE_KEYS[kind]
    for k in values:
        if k not in keys:
            raise SpecError(unknown_key_message("target", k, keys))
    args = {k: v for k, v in values.items() if k != "kind"}
    return _CLASSES[kind](**args)
