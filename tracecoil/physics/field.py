"""Magnetic field, vector potential and flux linkage of a coil.

The coil is taken as its conductor segments (:func:`conductors`), each a
filament along its centreline carrying ``current_a * fraction``; the field
is the exact Biot-Savart field of those straight filaments
(:func:`tracecoil.physics.kernels.segment_field`). Closer to the copper
than about a trace width the finite cross-section matters and the
filament field is only an approximation (it diverges on the centreline,
where the kernel returns the other segments' contribution only).

Points are given in millimetres like the layout; fields are returned in SI
(tesla, T*m).
"""

from __future__ import annotations

import numpy as np

from ..errors import SpecError
from . import kernels
from .conductors import Conductors, conductors

__all__ = ["field", "vector_potential", "flux_linkage"]


def _segments(coil_or_conductors) -> Conductors:
    if isinstance(coil_or_conductors, Conductors):
        return coil_or_conductors
    return conductors(coil_or_conductors)


def _points_m(points_mm):
    p = np.asarray(points_mm, dtype=float)
    if p.shape[-1:] != (3,):
        raise SpecError(f"points_mm must have shape (..., 3) in millimetres; got shape {p.shape}")
    if not np.all(np.isfinite(p)):
        raise SpecError("points_mm must be finite")
    return p.reshape(-1, 3) * 1e-3, p.shape[:-1]


def _current(current_a):
    try:
        i = float(current_a)
    except (TypeError, ValueError):
        raise SpecError(f"current_a must be a number (A); got {current_a!r}") from None
    if not np.isfinite(i):
        raise SpecError(f"current_a must be finite; got {current_a!r}")
    return i


def field(coil, points_mm, current_a=1.0, *, threads=None) -> np.ndarray:
    """Magnetic flux density of a coil at points (Biot-Savart).

    Parameters
    ----------
    coil : Coil or Conductors
        The coil (placed where it should be, see ``Coil.placed``).
    points_mm : array_like, shape (..., 3)
        Observation points (mm).
    current_a : float
        Terminal current (A), entering at terminal A.
    threads : int, optional
        Worker threads for the kernel.

    Returns
    -------
    ndarray, shape (..., 3)
        B (T).

    Examples
    --------
    A 64-gon of radius 10 mm: at the centre B_z is close to the circle's
    mu0 I / (2 R) = 62.8 uT per ampere.

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> t = np.linspace(0, 2 * np.pi, 65)
    >>> ring = Trace(1, 10 * np.column_stack([np.cos(t), np.sin(t)]), 0.2)
    >>> c = Coil(Stackup((35.0,), ()), (ring,), (), (), (Step("trace", 0),))
    >>> round(float(field(c, [0, 0, 0])[2]) * 1e6, 2)
    62.88
    """
    cd = _segments(coil)
    p, shape = _points_m(points_mm)
    cur = _current(current_a) * cd.fraction
    B = kernels.segment_field(p, cd.start_m, cd.end_m, cur, threads=threads)
    return B.reshape(shape + (3,))


def vector_potential(coil, points_mm, current_a=1.0, *, threads=None) -> np.ndarray:
    """Magnetic vector potential of a coil at points (Coulomb gauge).

    A = mu0 I / (4 pi) sum_i f_i u_i ln((R1 + R2 + l)/(R1 + R2 - l)) over
    the straight segments (exact for filaments). On a segment's own
    centreline the kernel drops that segment's (infinite) contribution.

    Parameters
    ----------
    coil : Coil or Conductors
    points_mm : array_like, shape (..., 3)
        Observation points (mm).
    current_a : float
        Terminal current (A).

    Returns
    -------
    ndarray, shape (..., 3)
        A (T m).

    Examples
    --------
    The line integral of A around a closed path is the flux through it; for
    a small square probe far away the flux matches B times its area:

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> t = np.linspace(0, 2 * np.pi, 65)
    >>> ring = Trace(1, 10 * np.column_stack([np.cos(t), np.sin(t)]), 0.2)
    >>> c = Coil(Stackup((35.0,), ()), (ring,), (), (), (Step("trace", 0),))
    >>> A = vector_potential(c, [[30, 0, 5]])
    >>> bool(A[0, 1] > 0)  # counter-clockwise current: A runs counter-clockwise
    True
    """
    cd = _segments(coil)
    p, shape = _points_m(points_mm)
    cur = _current(current_a) * cd.fraction
    A = kernels.segment_potential(p, cd.start_m, cd.end_m, cur, threads=threads)
    return A.reshape(shape + (3,))


def flux_linkage(coil, potential, *, order=4) -> float:
    """Flux linkage of a coil with an external field given by its vector potential.

    Lambda = sum_i f_i int_segment A_ext . dl over the coil's conductor
    centrelines from terminal A to terminal B (Stokes: the line integral of
    A around a closed path is the flux through it). Each segment is
    integrated with ``order``-point Gauss-Legendre quadrature, exact for A
    polynomial of degree < 2*order along the segment.

    The coil's path is open between its terminals: the result is the
    linkage of the path closed by the straight line from B back to A, which
    is not included; keep the terminals close together (as generated
    coils do) so that line encloses no flux.

    A changing external field induces the EMF -d(Lambda)/dt along the
    path from A to B (Faraday's law); at open terminals it appears as
    V_B - V_A = -d(Lambda)/dt.

    Parameters
    ----------
    coil : Coil or Conductors
    potential : callable
        ``potential(points_m)`` with points of shape (k, 3) in metres,
        returning A of shape (k, 3) in T m (SI throughout).
    order : int
        Gauss-Legendre points per segment.

    Returns
    -------
    float
        Flux linkage (Wb) per ampere-turn of the coil's own path, i.e.
        weighted by each segment's current fraction.

    Examples
    --------
    A uniform field B0 along z has A = B0/2 (-y, x, 0); a square of side
    10 mm links B0 * 1e-4 m^2:

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> sq = np.array([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], float)
    >>> c = Coil(Stackup((35.0,), ()), (Trace(1, sq, 0.5),), (), (), (Step("trace", 0),))
    >>> uniform = lambda p: 0.5 * np.column_stack([-p[:, 1], p[:, 0], 0 * p[:, 0]])
    >>> round(flux_linkage(c, uniform) * 1e4, 12)
    1.0
    """
    if not callable(potential):
        raise SpecError(f"potential must be a callable taking points (k, 3) in metres; got {potential!r}")
    order = int(order)
    if not 1 <= order <= 64:
        raise SpecError(f"order must be 1..64; got {order}")
    cd = _segments(coil)
    x, w = kernels.gauss_legendre(order)
    d = cd.vector_m
    pts = cd.start_m[:, None, :] + x[None, :, None] * d[:, None, :]
    A = np.asarray(potential(pts.reshape(-1, 3)), dtype=float)
    if A.shape != (pts.shape[0] * order, 3):
        raise SpecError(f"potential must return shape ({pts.shape[0] * order}, 3); got {A.shape}")
    A = A.reshape(-1, order, 3)
    per_seg = np.einsum("sqk,sk,q->s", A, d, w)
    return float(np.sum(cd.fraction * per_seg))
