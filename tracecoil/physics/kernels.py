"""Pure NumPy kernels for magnetostatics of straight conductors (SI units).

Every function takes and returns arrays: points and segment end points in
metres, currents in amperes, fields in tesla, vector potentials in T*m,
inductances in henries. No classes, no I/O, no input checks: the public
functions in :mod:`tracecoil.physics.field` and
:mod:`tracecoil.physics.inductance` validate and convert.

Array convention: points on axis 0, coordinates last.

Contents
--------
segment_field
    Biot-Savart flux density of many finite straight segments at many points.
segment_potential
    Vector potential of many finite straight segments at many points.
filament_mutual
    Neumann mutual inductance of pairs of straight filaments in any position.
segment_distance
    Shortest distance between pairs of segments.
box_mutual, bar_self
    Exact partial inductances of parallel rectangular bars (Hoer & Love 1965).
tube_self
    Partial self-inductance of a straight tube (via barrel).
pair_energy
    Blocked far-field double sum over quadrature points.
rect_gmd, rect_amd, rect_log_gmd
    Geometric and arithmetic mean distance of a rectangle from itself;
    geometric mean distance between two rectangles.

Sources
-------
* Biot-Savart law for a finite straight segment: J. D. Jackson, *Classical
  Electrodynamics*, 3rd ed., 1999 (from memory).
* Neumann's formula and the closed forms for parallel and inclined straight
  filaments: F. W. Grover, *Inductance Calculations*, 1946 (from memory).
  The antiderivative used here for non-parallel filaments was checked
  symbolically (d^2F/dx dy = 1/R) while writing this module.
* Rectangular bars: C. Hoer and C. Love, "Exact inductance equations for
  rectangular conductors with applications to more complicated geometries",
  J. Res. NBS 69C(2), 1965 (from memory); the antiderivative was checked
  symbolically (d^6 f / dx^2 dy^2 dz^2 = 1/r).
* Geometric mean distance of a rectangle: E. B. Rosa and F. W. Grover,
  "Formulas and tables for the calculation of mutual and self-inductance",
  Bull. Bureau of Standards 8, 1912 (from memory); arithmetic mean distance
  of a rectangle: the classical mean-distance formula (from memory; checked
  against 0.5214 for the unit square).
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np
from scipy.constants import mu_0 as MU0  # CODATA value shipped by SciPy (about 1.2566370621e-6 H/m)

__all__ = [
    "MU0",
    "segment_field",
    "segment_potential",
    "filament_mutual",
    "segment_distance",
    "box_mutual",
    "bar_self",
    "tube_self",
    "rect_gmd",
    "rect_amd",
    "gauss_legendre",
    "pair_energy",
    "rect_log_gmd",
]

K_MU = MU0 / (4.0 * np.pi)  # mu0 / 4 pi in H/m

# Relative distance to a segment's line below which a point counts as lying
# on the line (see segment_field): rho < 1e-7 * |p - start|.
ON_LINE_REL2 = 1e-14

_BLOCK = 1 << 14  # elements per (points x segments) block; fits the L2 cache


class _BlasThreads:
    """Context manager limiting OpenBLAS to one thread inside hot loops.

    The kernels call BLAS on thin matrices (k = 3 or a few columns), where
    OpenBLAS's own threads cost more than they give (measured 3 ns per
    element single-threaded against 25 ns with two threads on a loaded
    2-core machine). Works with the OpenBLAS builds that NumPy and SciPy
    wheels ship (found by name among the loaded libraries on Linux); does
    nothing elsewhere. The previous thread count is restored on exit.
    """

    _funcs = None

    @classmethod
    def _find(cls):
        if cls._funcs is None:
            cls._funcs = []
            try:
                import ctypes

                with open("/proc/self/maps") as fh:
                    paths = sorted({ln.split()[-1] for ln in fh if "openblas" in ln.lower() and ".so" in ln})
                for path in paths:
                    lib = ctypes.CDLL(path)
                    for pre in ("scipy_openblas", "openblas"):
                        for suf in ("64_", ""):
                            get = getattr(lib, f"{pre}_get_num_threads{suf}", None)
                            put = getattr(lib, f"{pre}_set_num_threads{suf}", None)
                            if get is not None and put is not None:
                                put.argtypes = [ctypes.c_int]
                                cls._funcs.append((get, put))
                                break
                        else:
                            continue
                        break
            except (OSError, AttributeError, ValueError):
                cls._funcs = []
        return cls._funcs

    def __enter__(self):
        self._saved = []
        for get, put in self._find():
            self._saved.append((put, int(get())))
            put(1)
        return self

    def __exit__(self, *exc):
        for put, n in self._saved:
            put(n)
        return False


def _threads(threads):
    """Worker threads for a kernel: the argument, else the environment
    variable ``TRACECOIL_THREADS`` (process pools set it to 1 in their
    workers so they do not oversubscribe the cores), else min(CPUs, 4)."""
    if threads is None:
        env = os.environ.get("TRACECOIL_THREADS", "")
        threads = int(env) if env.isdigit() and int(env) > 0 else min(os.cpu_count() or 1, 4)
    return max(1, int(threads))


def _tiles(n_points, n_segments, block):
    """Point and segment chunk sizes for a block of about ``block`` pairs."""
    seg_chunk = min(n_segments, max(256, block // 16))
    pt_chunk = max(1, block // max(seg_chunk, 1))
    return pt_chunk, seg_chunk


def _run_tiled(work, n_points, pt_chunk, threads):
    """Run ``work(lo, hi)`` over point ranges, in ``threads`` threads."""
    ranges = [(lo, min(lo + pt_chunk * 8, n_points)) for lo in range(0, n_points, pt_chunk * 8)]
    if threads == 1 or len(ranges) < 2:
        for lo, hi in ranges:
            work(lo, hi)
        return
    with ThreadPoolExecutor(max_workers=threads) as pool:
        list(pool.map(lambda r: work(*r), ranges))


class _Buffers:
    """Preallocated scratch arrays for one thread (reused for every block)."""

    def __init__(self, names, shape):
        self.shape = shape
        for n in names:
            setattr(self, n, np.empty(shape))
        self.mask = np.empty(shape, dtype=bool)
        self.mask2 = np.empty(shape, dtype=bool)
        self.mask3 = np.empty(shape, dtype=bool)

    def view(self, k, m):
        """Views of all buffers shaped (k, m) (k*m <= buffer size)."""
        out = {}
        for n, a in vars(self).items():
            if isinstance(a, np.ndarray):
                out[n] = a.reshape(-1)[: k * m].reshape(k, m)
        return out


def _segment_inputs(points, starts, ends, currents):
    """Arrays shared by the segment kernels: points (k, 3), starts a (m, 3),
    segment vectors L (m, 3), |L|^2 (m,), currents (m,), zeroed output (k, 3)."""
    points = np.asarray(points, dtype=float)
    a = np.asarray(starts, dtype=float)
    L = np.asarray(ends, dtype=float) - a
    cur = np.broadcast_to(np.asarray(currents, dtype=float), (len(a),))
    return points, a, L, np.einsum("ij,ij->i", L, L), cur, np.zeros((len(points), 3))


def segment_field(points, starts, ends, currents, *, block=_BLOCK, threads=None):
    """Magnetic flux density of straight current segments (Biot-Savart).

    For a segment from a to b carrying current I, at point p
    (L = b - a, r1 = p - a, r2 = p - b)::

        B = mu0 I / (4 pi) (L x r1) / |L x r1|^2 (L.r1/|r1| - L.r2/|r2|)

    evaluated in a cancellation-free form: when p lies beyond either end
    the bracket over |L x r1|^2 equals
    (L.r1 + L.r2) / (|r1| |r2| (L.r1 |r2| + L.r2 |r1|)), so far points and
    points on the extension of the segment keep full precision.

    Singular points: on the segment's own line *outside* the segment the
    exact field of that segment is zero and the kernel returns zero; on the
    segment itself (between a and b, including the end points) the field is
    singular and the kernel returns zero for that segment's contribution.
    A point counts as on the line when its distance from it is below
    1e-7 times its distance from the segment start. Beside a segment the
    relative rounding error grows like 1e-16 (L / rho)^2 as the point
    approaches the wire (rho is the distance from the line).

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Observation points (m).
    starts, ends : ndarray, shape (m, 3)
        Segment end points (m); the current flows from start to end.
        Segments must have non-zero length.
    currents : ndarray, shape (m,)
        Current in each segment (A).
    block : int, optional
        Number of point-segment pairs handled per block; memory use is
        about 14 * 8 * block bytes per thread, independent of k and m.
    threads : int, optional
        Worker threads (NumPy releases the GIL); default: CPU count, max 4.

    Returns
    -------
    B : ndarray, shape (k, 3)
        Flux density (T).

    Examples
    --------
    A square loop of side 2 m with 1 A: at the centre
    B = 2 sqrt(2) mu0 I / (pi a) with a = 2 m.

    >>> sq = np.array([[1, -1, 0], [1, 1, 0], [-1, 1, 0], [-1, -1, 0]], float)
    >>> B = segment_field(np.zeros((1, 3)), sq, np.roll(sq, -1, axis=0), np.ones(4))
    >>> round(float(B[0, 2] / (2 * np.sqrt(2) * MU0 / (np.pi * 2))), 12)
    1.0
    """
    points, a, L, L2, cur, out = _segment_inputs(points, starts, ends, currents)
    if len(points) == 0 or len(a) == 0:
        return out
    k, m = len(points), len(a)
    thr = ON_LINE_REL2 * L2
    IL = (L * cur[:, None]) * K_MU  # current-weighted segment vectors
    pt_chunk, seg_chunk = _tiles(k, m, block)
    names = ["X", "Y", "Z", "T", "T2", "R1", "R2", "C2", "P", "Q", "W", "V"]
    nthreads = _threads(threads)
    import threading

    local = threading.local()

    def work(lo, hi):
        buf = getattr(local, "buf", None)
        if buf is None:
            buf = local.buf = _Buffers(names, pt_chunk * seg_chunk)
            local.G = np.empty((3, pt_chunk * seg_chunk))
        for p0 in range(lo, hi, pt_chunk):
            p1 = min(p0 + pt_chunk, hi)
            pts = points[p0:p1]
            kk = p1 - p0
            acc = np.zeros((kk, 3))
            for s0 in range(0, m, seg_chunk):
                s1 = min(s0 + seg_chunk, m)
                mm = s1 - s0
                _field_block(pts, a[s0:s1], L[s0:s1], L2[s0:s1], thr[s0:s1], IL[s0:s1], buf.view(kk, mm),
                             local.G[:, : kk * mm].reshape(3, kk, mm), acc)
            out[p0:p1] = acc

    with _BlasThreads():
        _run_tiled(work, k, pt_chunk, nthreads)
    return out


def _field_block(pts, a, L, L2, thr, IL, b, G, acc):
    """One (points x segments) block of :func:`segment_field`; adds to acc."""
    X, Y, Z, T, T2, R1, R2, C2, P, Q, W, V = (b[n] for n in ("X", "Y", "Z", "T", "T2", "R1", "R2", "C2", "P", "Q", "W", "V"))
    same, ok = b["mask"], b["mask2"]
    np.subtract(pts[:, 0:1], a[:, 0], out=X)
    np.subtract(pts[:, 1:2], a[:, 1], out=Y)
    np.subtract(pts[:, 2:3], a[:, 2], out=Z)
    # T = L.r1 ; R1 = |r1|^2
    np.multiply(X, L[:, 0], out=T)
    np.multiply(Y, L[:, 1], out=W)
    T += W
    np.multiply(Z, L[:, 2], out=W)
    T += W
    np.multiply(X, X, out=R1)
    np.multiply(Y, Y, out=W)
    R1 += W
    np.multiply(Z, Z, out=W)
    R1 += W
    np.subtract(T, L2, out=T2)  # L.r2
    np.subtract(R1, T, out=R2)
    R2 -= T2  # |r2|^2 = |r1|^2 - 2 L.r1 + |L|^2
    np.multiply(R1, L2, out=C2)
    np.multiply(T, T, out=W)
    C2 -= W  # |L x r1|^2
    np.multiply(R1, thr, out=V)  # on-line threshold for C2
    np.sqrt(R1, out=R1)
    np.sqrt(R2, out=R2)
    np.multiply(T, R2, out=P)
    np.multiply(T2, R1, out=Q)
    np.multiply(T, T2, out=W)
    np.greater(W, 0.0, out=same)  # point beyond either end of the segment
    np.greater(C2, V, out=ok)  # beside the segment and off its line
    # numerator: beside -> T R2 - T2 R1 ; beyond -> T + T2
    np.subtract(P, Q, out=V)
    np.add(T, T2, out=W)
    np.copyto(V, W, where=same)
    # denominator: beside -> C2 ; beyond -> T R2 + T2 R1 (no cancellation;
    # zero only at the end points)
    np.add(P, Q, out=W)
    np.copyto(C2, W, where=same)
    np.multiply(R1, R2, out=W)
    C2 *= W
    np.not_equal(C2, 0.0, out=b["mask3"])
    np.copyto(ok, b["mask3"], where=same)
    W.fill(0.0)
    np.divide(V, C2, out=W, where=ok)
    np.multiply(W, X, out=G[0])
    np.multiply(W, Y, out=G[1])
    np.multiply(W, Z, out=G[2])
    kk = G.shape[1]
    S = (G.reshape(3 * kk, -1) @ IL).reshape(3, kk, 3)  # S[a][:, b] = sum_m G_a I L_b
    acc[:, 0] += S[2][:, 1] - S[1][:, 2]
    acc[:, 1] += S[0][:, 2] - S[2][:, 0]
    acc[:, 2] += S[1][:, 0] - S[0][:, 1]


def segment_potential(points, starts, ends, currents, *, block=_BLOCK, threads=None):
    """Magnetic vector potential of straight current segments.

    For a segment a -> b of length l and unit vector u carrying current I::

        A = mu0 I / (4 pi) u ln((R1 + R2 + l) / (R1 + R2 - l)),

    R1 = |p - a|, R2 = |p - b|. The small denominator R1 + R2 - l is
    evaluated without cancellation beside the segment as
    rho^2/(R1 + s1) + rho^2/(R2 + l - s1) (s1 = distance along the segment,
    rho = distance from its line).

    Singular points: on the segment itself (distance below 1e-7 times the
    distance from its start, between its end points) A is infinite; the
    kernel returns zero for that segment's contribution. On the line
    outside the segment A is finite and returned exactly.

    Parameters
    ----------
    points : ndarray, shape (k, 3)
        Observation points (m).
    starts, ends : ndarray, shape (m, 3)
        Segment end points (m), non-zero length.
    currents : ndarray, shape (m,)
        Current in each segment (A).
    block, threads : int, optional
        As in :func:`segment_field`.

    Returns
    -------
    A : ndarray, shape (k, 3)
        Vector potential (T m = Wb/m).

    Examples
    --------
    The flux through a closed loop equals the line integral of A around any
    closed path; for a point on the axis of a long straight wire
    A_z = mu0 I / (2 pi) ln(2 h / d) for half-length h >> d.

    >>> A = segment_potential(np.array([[0.001, 0, 0]]), np.array([[0, 0, -50.0]]),
    ...                       np.array([[0, 0, 50.0]]), np.array([1.0]))
    >>> round(float(A[0, 2] / (MU0 / (2 * np.pi) * np.log(2 * 50 / 0.001))), 6)
    1.0
    """
    points, a, L, L2, cur, out = _segment_inputs(points, starts, ends, currents)
    if len(points) == 0 or len(a) == 0:
        return out
    k, m = len(points), len(a)
    ln_ = np.sqrt(L2)
    U = L / ln_[:, None] * (cur * K_MU)[:, None]
    pt_chunk, seg_chunk = _tiles(k, m, block)
    names = ["X", "Y", "Z", "T", "R1", "R2", "W", "V"]
    import threading

    local = threading.local()

    def work(lo, hi):
        buf = getattr(local, "buf", None)
        if buf is None:
            buf = local.buf = _Buffers(names, pt_chunk * seg_chunk)
        for p0 in range(lo, hi, pt_chunk):
            p1 = min(p0 + pt_chunk, hi)
            kk = p1 - p0
            acc = np.zeros((kk, 3))
            for s0 in range(0, m, seg_chunk):
                s1 = min(s0 + seg_chunk, m)
                g = _inv_r_line_block(points[p0:p1], a[s0:s1], L[s0:s1], L2[s0:s1], ln_[s0:s1],
                                      buf.view(kk, s1 - s0))
                acc += g @ U[s0:s1]
            out[p0:p1] = acc

    with _BlasThreads():
        _run_tiled(work, k, pt_chunk, _threads(threads))
    return out


def _inv_r_line_block(pts, a, L, L2, ln_, b):
    """Block of integrals int_0^l dt / |p - (a + t u)| (returns a view of b['W']).

    Zero where the point lies on the segment (singular).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return _inv_r_line_block_raw(pts, a, L, L2, ln_, b)


def _inv_r_line_block_raw(pts, a, L, L2, ln_, b):
    X, Y, Z, T, R1, R2, W, V = (b[n] for n in ("X", "Y", "Z", "T", "R1", "R2", "W", "V"))
    beside, ok = b["mask"], b["mask2"]
    np.subtract(pts[:, 0:1], a[:, 0], out=X)
    np.subtract(pts[:, 1:2], a[:, 1], out=Y)
    np.subtract(pts[:, 2:3], a[:, 2], out=Z)
    np.multiply(X, L[:, 0], out=T)
    np.multiply(Y, L[:, 1], out=W)
    T += W
    np.multiply(Z, L[:, 2], out=W)
    T += W
    T /= ln_  # s1: distance along the segment from its start
    np.multiply(X, X, out=R1)
    np.multiply(Y, Y, out=W)
    R1 += W
    np.multiply(Z, Z, out=W)
    R1 += W
    # rho^2 = |r1|^2 - s1^2 (the threshold below keeps its rounding harmless)
    np.multiply(T, T, out=W)
    np.subtract(R1, W, out=V)
    np.multiply(R1, ON_LINE_REL2, out=W)
    np.greater(V, W, out=ok)
    np.maximum(V, 0.0, out=V)
    # |r2|^2 = |r1|^2 - 2 l s1 + l^2
    np.multiply(T, -2.0 * ln_, out=R2)
    R2 += R1
    R2 += L2
    np.maximum(R2, 0.0, out=R2)
    np.sqrt(R1, out=R1)
    np.sqrt(R2, out=R2)
    # beside: 0 < s1 < l
    np.greater(T, 0.0, out=beside)
    np.less(T, ln_, out=b["mask3"])
    np.logical_and(beside, b["mask3"], out=beside)
    # h = R1 + R2 - l, accurate beside the segment
    np.add(R1, R2, out=W)
    W -= ln_
    # beside version: rho^2/(R1 + s1) + rho^2/(R2 + l - s1)
    np.add(R1, T, out=X)
    np.divide(V, X, out=X)
    np.subtract(ln_, T, out=Y)
    Y += R2
    np.divide(V, Y, out=Y)
    X += Y
    np.copyto(W, X, where=beside)
    # on the segment itself: singular -> 0 contribution
    np.logical_or(ok, ~beside, out=ok)
    np.greater(W, 0.0, out=beside)
    np.logical_and(ok, beside, out=ok)
    # log((h + 2l) / h) = log1p(2 l / h)
    np.divide(2.0 * ln_, W, out=Y, where=ok)
    Y[~ok] = 0.0
    np.log1p(Y, out=W)
    return W


# --------------------------------------------------------------------------
# Neumann mutual inductance of straight filaments
# --------------------------------------------------------------------------

def gauss_legendre(n):
    """Gauss-Legendre nodes and weights on [0, 1] (n points).

    >>> x, w = gauss_legendre(3)
    >>> round(float(w @ x**5), 15)  # exact for degree <= 5: 1/6
    0.166666666666667
    """
    x, w = np.polynomial.legendre.leggauss(int(n))
    return 0.5 * (x + 1.0), 0.5 * w


def _dot(a, b):
    return np.einsum("...i,...i->...", a, b)


def _point_segment_distance(p, a, b):
    d = b - a
    dd = _dot(d, d)
    t = np.clip(_dot(p - a, d) / np.where(dd > 0, dd, 1.0), 0.0, 1.0)
    return np.linalg.norm(p - (a + t[..., None] * d), axis=-1)


def segment_distance(a1, b1, a2, b2):
    """Shortest distance between pairs of segments a1-b1 and a2-b2.

    Parameters
    ----------
    a1, b1, a2, b2 : ndarray, shape (n, 3)
        End points (m).

    Returns
    -------
    ndarray, shape (n,)
        Distance (m); zero for touching or crossing segments.

    Examples
    --------
    >>> segment_distance(np.array([[0., 0, 0]]), np.array([[1., 0, 0]]),
    ...                  np.array([[0.5, 1, 1]]), np.array([[0.5, -1, 1]]))
    array([1.])
    """
    a1, b1, a2, b2 = (np.asarray(v, float) for v in (a1, b1, a2, b2))
    dist = np.minimum.reduce([
        _point_segment_distance(a1, a2, b2),
        _point_segment_distance(b1, a2, b2),
        _point_segment_distance(a2, a1, b1),
        _point_segment_distance(b2, a1, b1),
    ])
    # interior closest points of the two lines
    u, v, r = b1 - a1, b2 - a2, a1 - a2
    uu, vv, uv, ur, vr = _dot(u, u), _dot(v, v), _dot(u, v), _dot(u, r), _dot(v, r)
    den = uu * vv - uv * uv
    good = den > 1e-12 * uu * vv
    den = np.where(good, den, 1.0)
    s = (uv * vr - vv * ur) / den
    t = (uu * vr - uv * ur) / den
    inside = good & (s > 0) & (s < 1) & (t > 0) & (t < 1)
    if np.any(inside):
        w = r + s[:, None] * u - t[:, None] * v
        dist = np.where(inside, np.minimum(dist, np.linalg.norm(w, axis=-1)), dist)
    return dist


def _parallel_integral(x1b, x2a, x2b, d):
    """int_0^x1b int_x2a^x2b dx dy / sqrt((x-y)^2 + d^2), x2a <= x2b, d >= 0.

    G(u) = u asinh(u/d) - sqrt(u^2 + d^2) written as |u| ln(|u| + R) - R
    - |u| ln d; the ln d terms cancel unless the filaments overlap.
    """
    us = (x2b, x2b - x1b, x2a, x2a - x1b)
    sg = (1.0, -1.0, -1.0, 1.0)
    total = 0.0
    abs_sum = 0.0
    for u, s in zip(us, sg):
        au = np.abs(u)
        R = np.sqrt(u * u + d * d)
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.where(au + R > 0, au * np.log(np.where(au + R > 0, au + R, 1.0)), 0.0) - R
        total = total + s * g
        abs_sum = abs_sum + s * au
    with np.errstate(divide="ignore"):
        lnd = np.log(np.where(d > 0, d, 1.0))
    return total - abs_sum * lnd


def _norm(v):
    return np.sqrt(np.einsum("...i,...i->...", v, v))


def _skew_F(x, y, c, s, d, R):
    """Antiderivative F(x, y) with d2F/dxdy = 1/R for inclined filaments."""
    out = np.zeros(np.broadcast(x, y).shape)
    for p, q in ((x, y), (y, x)):
        den = np.sqrt(d * d + p * p * (s * s))
        nz = (p != 0) & (den > 0)
        out += np.where(nz, p * np.arcsinh((q - p * c) / np.where(nz, den, 1.0)), 0.0)
    out -= (d / s) * np.arctan2(x * y * (s * s) + d * d * c, d * s * R)
    return out


def _parallel(a1, b1, a2, b2, u, l1, c):
    """Neumann integral for (nearly) parallel filaments, filament 2 projected
    on the axis of filament 1 with its offset taken at its middle."""
    x2a = _dot(a2 - a1, u)
    x2b = _dot(b2 - a1, u)
    lo, hi = np.minimum(x2a, x2b), np.maximum(x2a, x2b)
    mid = 0.5 * (a2 + b2) - a1
    dd = _norm(mid - _dot(mid, u)[:, None] * u)
    return np.sign(c) * _parallel_integral(l1, lo, hi, dd)


def _closed_form(a1, b1, a2, b2, parallel_tol):
    """Neumann double integral I = int int dl1.dl2 / R (m) in closed form."""
    d1, d2 = b1 - a1, b2 - a2
    l1 = _norm(d1)
    l2 = _norm(d2)
    u, v = d1 / l1[:, None], d2 / l2[:, None]
    c = _dot(u, v)
    w = np.cross(u, v)
    s = _norm(w)
    r0 = a1 - a2
    out = np.zeros(len(a1))
    par = s < parallel_tol
    if np.any(par):
        # Nearly parallel: the inclined form loses digits (its origin, the
        # foot of the common perpendicular, runs off to infinity). Treat the
        # pair as parallel, splitting filament 2 into n pieces each with its
        # own offset; the error ~0.08 s (l/D) / n^2 is kept below ~1e-9
        # (measured against high-precision quadrature), n <= 64.
        A1, B1, A2, B2, U, L1, C, S = (x[par] for x in (a1, b1, a2, b2, u, l1, c, s))
        mid = 0.5 * (A2 + B2) - A1
        D = _norm(mid - _dot(mid, U)[:, None] * U)
        lmax = np.maximum(L1, l2[par])
        with np.errstate(divide="ignore", invalid="ignore"):
            want = np.sqrt(0.08 * S * lmax / D / 1e-9)
        n = np.clip(np.nan_to_num(np.ceil(want), nan=64.0, posinf=64.0), 1, 64).astype(int)
        owner = np.repeat(np.arange(len(n)), n)
        piece = np.arange(len(owner)) - np.repeat(np.cumsum(n) - n, n)
        t0 = (piece / n[owner])[:, None]
        t1 = ((piece + 1) / n[owner])[:, None]
        seg = (B2 - A2)[owner]
        vals = _parallel(A1[owner], B1[owner], A2[owner] + t0 * seg, A2[owner] + t1 * seg, U[owner], L1[owner], C[owner])
        out[par] = np.bincount(owner, weights=vals, minlength=len(n))
    sk = ~par
    if np.any(sk):
        r, uu, vv, cc, ss, ww = r0[sk], u[sk], v[sk], c[sk], s[sk], w[sk]
        ru, rv = _dot(r, uu), _dot(r, vv)
        s2 = ss * ss
        s_star = (cc * rv - ru) / s2
        t_star = (rv - cc * ru) / s2
        d = np.abs(_dot(r, ww)) / ss
        # the four corners (x1,y1) + (x2,y2) - (x2,y1) - (x1,y2) at once
        x1, x2 = -s_star, l1[sk] - s_star
        y1, y2 = -t_star, l2[sk] - t_star
        X = np.stack([x1, x2, x2, x1])
        Y = np.stack([y1, y2, y1, y2])
        R = np.sqrt(np.maximum(d * d + X * X + Y * Y - 2 * X * Y * cc, 0.0))
        Fv = _skew_F(X, Y, cc, ss, d, R)
        out[sk] = cc * (Fv[0] + Fv[1] - Fv[2] - Fv[3])
    return out


def _quadrature(a1, b1, a2, b2, order):
    """Neumann integral by Gauss-Legendre on filament 1 with the exact inner
    integral over filament 2 (accurate for well-separated filaments)."""
    xg, wg = gauss_legendre(order)
    d1, d2 = b1 - a1, b2 - a2
    l1 = np.linalg.norm(d1, axis=-1)
    l2 = np.linalg.norm(d2, axis=-1)
    v = d2 / l2[:, None]
    c = _dot(d1 / l1[:, None], v)
    P = a1[:, None, :] + xg[None, :, None] * d1[:, None, :]  # (n, q, 3)
    r = P - a2[:, None, :]
    s1 = _dot(r, v[:, None, :])
    rho2 = np.maximum(_dot(r, r) - s1 * s1, 0.0)
    R1 = np.sqrt(_dot(r, r))
    R2 = np.sqrt(np.maximum(_dot(r, r) - 2 * s1 * l2[:, None] + (l2 * l2)[:, None], 0.0))
    l2b = l2[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        h1 = np.where(s1 > 0, rho2 / (R1 + s1), R1 - s1)
        h2 = np.where(l2b - s1 > 0, rho2 / (R2 + l2b - s1), R2 - (l2b - s1))
        g = np.log1p(2 * l2b / (h1 + h2))
    return c * l1 * (g @ wg)


def filament_mutual(a1, b1, a2, b2, *, method="auto", parallel_tol=3e-5, quadrature_order=12):
    """Mutual inductance of pairs of straight filaments (Neumann's formula).

    ``M = mu0/(4 pi) (u1.u2) int int ds dt / |P(s) - Q(t)|`` for filaments
    a1 -> b1 and a2 -> b2 in any relative position.

    Methods, chosen per pair:

    * parallel filaments (sin of the angle below ``parallel_tol``):
      the exact closed form with G(u) = u asinh(u/d) - sqrt(u^2 + d^2)
      (Grover 1946, from memory); collinear non-overlapping filaments
      (d = 0) are handled.
    * inclined filaments, coplanar or skew, touching, crossing or apart:
      the exact antiderivative
      ``F = x asinh((y - x c)/sqrt(d^2 + x^2 s^2)) + y asinh((x - y c)/
      sqrt(d^2 + y^2 s^2)) - (d/s) atan((x y s^2 + d^2 c)/(d s R))``
      evaluated at the four corners (x, y measured from the feet of the
      common perpendicular, d its length, c and s the cosine and sine of
      the angle); this is Grover's inclined-filament result in
      antiderivative form.
    * well-separated pairs (gap >= the shorter length), where the closed
      forms lose digits to cancellation: Gauss-Legendre of
      ``quadrature_order`` points along the shorter filament with the exact
      inner integral ln((R1 + R2 + l)/(R1 + R2 - l)) over the other
      (relative error below 1e-13).

    Crossing or touching filaments give a finite value; overlapping
    collinear filaments give inf (the integral diverges).

    Accuracy (against 30-digit quadrature while writing this module):
    about 1e-13 relative in general position; nearly parallel filaments
    (angle below ~1e-3 rad), where the inclined form loses digits, stay
    within about 2e-8 relative even when 100 times longer than their
    distance.

    Parameters
    ----------
    a1, b1, a2, b2 : ndarray, shape (n, 3)
        Filament end points (m), non-zero lengths.
    method : {"auto", "closed", "quadrature"}
        "auto" picks per pair as described; "closed" forces the closed
        forms (for close pairs, skips the distance test), "quadrature" the
        Gauss-Legendre rule (for well-separated pairs only).
    parallel_tol : float
        Sine of the angle below which filaments count as parallel.
    quadrature_order : int
        Gauss-Legendre points for separated pairs.

    Returns
    -------
    ndarray, shape (n,)
        Mutual inductance (H).

    Examples
    --------
    Two filaments of 1 m meeting at a right angle have M = 0; two
    collinear filaments end to end:
    M = mu0/(4 pi) [(l+m) ln(l+m) - l ln l - m ln m] = mu0/(4 pi) 2 ln 2.

    >>> z = np.zeros((1, 3)); ex = np.array([[1., 0, 0]]); ey = np.array([[0., 1, 0]])
    >>> abs(float(filament_mutual(z, ex, z, ey)[0])) < 1e-22
    True
    >>> round(float(filament_mutual(-ex, z, z, ex)[0] / (K_MU * 2 * np.log(2))), 12)
    1.0
    """
    a1, b1, a2, b2 = (np.atleast_2d(np.asarray(v, float)) for v in (a1, b1, a2, b2))
    n = len(a1)
    out = np.empty(n)
    if n == 0:
        return out
    l1 = np.linalg.norm(b1 - a1, axis=-1)
    l2 = np.linalg.norm(b2 - a2, axis=-1)
    if method == "closed":
        far = np.zeros(n, bool)
    elif method == "quadrature":
        far = np.ones(n, bool)
    elif method == "auto":
        far = segment_distance(a1, b1, a2, b2) >= np.minimum(l1, l2)
    else:
        raise ValueError(f"method must be one of ('auto', 'closed', 'quadrature'); got {method!r}")
    near = ~far
    if np.any(near):
        out[near] = _closed_form(a1[near], b1[near], a2[near], b2[near], parallel_tol)
    if np.any(far):
        swap = l1[far] > l2[far]  # integrate numerically along the shorter one
        A1 = np.where(swap[:, None], a2[far], a1[far])
        B1 = np.where(swap[:, None], b2[far], b1[far])
        A2 = np.where(swap[:, None], a1[far], a2[far])
        B2 = np.where(swap[:, None], b1[far], b2[far])
        out[far] = _quadrature(A1, B1, A2, B2, quadrature_order)
    return K_MU * out


# --------------------------------------------------------------------------
# Rectangular bars
# --------------------------------------------------------------------------

def rect_gmd(a, b):
    """Geometric mean distance of a rectangle a x b from itself.

    ln g = ln sqrt(a^2+b^2) - a^2/(12 b^2) ln(1 + b^2/a^2)
    - b^2/(12 a^2) ln(1 + a^2/b^2) + 2a/(3b) atan(b/a) + 2b/(3a) atan(a/b)
    - 25/12 (Rosa & Grover 1912, from memory). For a square g = 0.44705 a.

    >>> round(float(rect_gmd(1.0, 1.0)), 5)
    0.44705
    """
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    lg = (0.5 * np.log(a * a + b * b) - a * a / (12 * b * b) * np.log1p(b * b / (a * a))
          - b * b / (12 * a * a) * np.log1p(a * a / (b * b))
          + 2 * a / (3 * b) * np.arctan(b / a) + 2 * b / (3 * a) * np.arctan(a / b) - 25.0 / 12.0)
    return np.exp(lg)


def rect_amd(a, b):
    """Arithmetic mean distance between two random points of an a x b rectangle.

    (1/15)[a^3/b^2 + b^3/a^2 + d(3 - a^2/b^2 - b^2/a^2)]
    + (1/6)[(b^2/a) ln((a+d)/b) + (a^2/b) ln((b+d)/a)], d = sqrt(a^2+b^2)
    (classical result, from memory; 0.5214 for the unit square).

    >>> round(float(rect_amd(1.0, 1.0)), 4)
    0.5214
    """
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    d = np.hypot(a, b)
    return ((a**3 / b**2 + b**3 / a**2 + d * (3 - a * a / (b * b) - b * b / (a * a))) / 15
            + (b * b / a * np.log((a + d) / b) + a * a / b * np.log((b + d) / a)) / 6)


def _gmd2_f(x, y):
    """F with d^4 F / (dx^2 dy^2) = ln sqrt(x^2 + y^2) (checked symbolically):
    -(x^4 - 6 x^2 y^2 + y^4)/48 ln(x^2 + y^2)
    + (x^3 y atan(y/x) + x y^3 atan(x/y))/6 - 25 x^2 y^2 / 48."""
    x, y = np.abs(x), np.abs(y)
    r2 = x * x + y * y
    lg = np.log(np.where(r2 > 0, r2, 1.0))
    return (-(x**4 - 6 * x * x * y * y + y**4) / 48 * lg
            + (x**3 * y * np.arctan2(y, x) + x * y**3 * np.arctan2(x, y)) / 6 - 25.0 / 48.0 * x * x * y * y)


def rect_log_gmd(lo1, size1, lo2, size2):
    """ln of the geometric mean distance between two coplanar rectangles.

    Exact: the fourfold integral of ln|r - r'| over both rectangles by the
    antiderivative in :func:`_gmd2_f` at the 16 corner differences, divided
    by both areas. With identical rectangles it is ``ln(rect_gmd)``. The
    per-unit-length mutual inductance of two long parallel conductors with
    these cross-sections is -mu0/(2 pi) ln(GMD) + const (Maxwell's GMD
    method, from memory). Rounding grows like (distance/size)^4 x 1e-16.

    Parameters
    ----------
    lo1, lo2 : ndarray, shape (n, 2)
        Lower-left corners (m).
    size1, size2 : ndarray, shape (n, 2)
        Sides (m).

    Returns
    -------
    ndarray, shape (n,)

    Examples
    --------
    >>> round(float(np.exp(rect_log_gmd([[0, 0]], [[1, 1]], [[0, 0]], [[1, 1]])[0])), 5)
    0.44705
    """
    lo1, s1, lo2, s2 = (np.atleast_2d(np.asarray(v, float)) for v in (lo1, size1, lo2, size2))
    o = lo2 - lo1
    Y = np.stack([o[:, 0] + s2[:, 0], o[:, 0] + s2[:, 0] - s1[:, 0], o[:, 0], o[:, 0] - s1[:, 0]], axis=1)
    Z = np.stack([o[:, 1] + s2[:, 1], o[:, 1] + s2[:, 1] - s1[:, 1], o[:, 1], o[:, 1] - s1[:, 1]], axis=1)
    sg = np.array([1.0, -1.0, -1.0, 1.0])
    tot = np.einsum("i,j,nij->n", sg, sg, _gmd2_f(Y[:, :, None], Z[:, None, :]))
    return tot / (s1[:, 0] * s1[:, 1] * s2[:, 0] * s2[:, 1])


def _hl_f(x, y, z):
    """Hoer & Love (1965) antiderivative f with d^6 f/(dx^2 dy^2 dz^2) = 1/r.

    Even in each argument; evaluated on |x|, |y|, |z| in the input dtype.
    """
    x, y, z = np.abs(x), np.abs(y), np.abs(z)
    x2, y2, z2 = x * x, y * y, z * z
    r = np.sqrt(x2 + y2 + z2)
    one = np.ones_like(r)

    def xlog(p, q2):
        ok = (p > 0) & (q2 > 0)
        return np.where(ok, p * np.arcsinh(p / np.sqrt(np.where(ok, q2, one))), 0 * p)

    t = (y2 * z2 / 4 - y2 * y2 / 24 - z2 * z2 / 24) * xlog(x, y2 + z2)
    t = t + (x2 * z2 / 4 - x2 * x2 / 24 - z2 * z2 / 24) * xlog(y, x2 + z2)
    t = t + (x2 * y2 / 4 - x2 * x2 / 24 - y2 * y2 / 24) * xlog(z, x2 + y2)
    t = t + (x2 * x2 + y2 * y2 + z2 * z2 - 3 * x2 * y2 - 3 * y2 * z2 - 3 * x2 * z2) * r / 60
    xyz = x * y * z
    t = t - xyz * z2 / 6 * np.arctan2(x * y, z * r)
    t = t - xyz * y2 / 6 * np.arctan2(x * z, y * r)
    t = t - xyz * x2 / 6 * np.arctan2(y * z, x * r)
    return t


def box_mutual(size1, size2, offset):
    """Exact mutual inductance of two parallel rectangular bars (Hoer & Love 1965).

    Both bars carry uniform current along axis 0 of a common frame. Bar 1
    occupies [0, size1] (per axis), bar 2 [offset, offset + size2]::

        M = mu0 / (4 pi A1 A2) sum_{ijk} (-1)^(i+j+k) f(X_i, Y_j, Z_k)

    where X_i, Y_j, Z_k are the four differences of the bars' bounds along
    each axis. The 64-term sum cancels strongly for long thin bars: the
    relative rounding error is about 1e-16 C with C = s^4 / (w t)^2 (s the
    largest coordinate difference, w and t the smaller cross-section
    sides). Pairs with C > 1e6 are evaluated in ``np.longdouble`` (80-bit on
    x86, error about 1e-19 C: 1e-8 for a 100 mm x 0.1 mm x 18 um bar, where
    float64 gives 2e-5); on platforms where longdouble is float64 the
    float64 error applies.

    Parameters
    ----------
    size1, size2 : ndarray, shape (n, 3)
        (length, width, thickness) of each bar (m).
    offset : ndarray, shape (n, 3)
        Minimum corner of bar 2 minus minimum corner of bar 1 (m).

    Returns
    -------
    ndarray, shape (n,)
        Mutual inductance (H); with identical bars and zero offset, the
        partial self-inductance.

    Examples
    --------
    With zero offset it is the self-inductance of :func:`bar_self`:

    >>> s = np.array([[1e-3, 1e-4, 35e-6]])
    >>> M = box_mutual(s, s, np.zeros((1, 3)))
    >>> round(float(M[0] / bar_self(1e-3, 1e-4, 35e-6)[0]), 12)
    1.0
    """
    s1 = np.atleast_2d(np.asarray(size1, dtype=float))
    s2 = np.atleast_2d(np.asarray(size2, dtype=float))
    o = np.atleast_2d(np.asarray(offset, dtype=float))
    span = np.max(np.abs(np.concatenate([o + s2, o - s1], axis=1)), axis=1)
    small = np.minimum(s1[:, 1], s2[:, 1]) * np.minimum(s1[:, 2], s2[:, 2])
    hard = span**4 > 1e6 * small**2
    out = np.empty(len(s1))
    for sel, dt in ((~hard, np.float64), (hard, np.longdouble)):
        if np.any(sel):
            out[sel] = _box_sum(s1[sel].astype(dt), s2[sel].astype(dt), o[sel].astype(dt))
    return out


def _box_sum(s1, s2, o):
    n = len(s1)
    dt = s1.dtype
    diffs = []
    for ax in range(3):
        diffs.append(np.stack([o[:, ax] + s2[:, ax], o[:, ax] + s2[:, ax] - s1[:, ax], o[:, ax],
                               o[:, ax] - s1[:, ax]], axis=1))  # (n, 4)
    sg = np.array([1, -1, -1, 1], dtype=dt)
    X, Y, Z = np.broadcast_arrays(diffs[0][:, :, None, None], diffs[1][:, None, :, None], diffs[2][:, None, None, :])
    f = _hl_f(X.reshape(n, -1), Y.reshape(n, -1), Z.reshape(n, -1))
    w = (sg[:, None, None] * sg[None, :, None] * sg[None, None, :]).reshape(-1)
    tot = f @ w
    area = s1[:, 1] * s1[:, 2] * s2[:, 1] * s2[:, 2]
    return (dt.type(K_MU) * tot / area).astype(float)


def bar_self(length, width, thickness):
    """Partial self-inductance of a straight rectangular bar, uniform current.

    Exact (Hoer & Love 1965) evaluated in longdouble with the symmetric
    8-term form for short bars; for long bars (length >= 20 x the
    cross-section diagonal) the cancellation-free expansion::

        L = mu0 l / (2 pi) [ln(2 l / g) - 1 + a/l - <rho^2>/(4 l^2) + <rho^4>/(32 l^4)]

    with g the geometric mean distance and a the arithmetic mean distance
    of the cross-section from itself, <rho^2> = (w^2 + t^2)/6 and
    <rho^4> = (w^4 + t^4)/15 + w^2 t^2/18 (obtained by averaging the exact
    double length integral of two parallel filaments,
    2[l asinh(l/rho) - sqrt(l^2 + rho^2) + rho], expanded in rho/l). The
    dropped term is O((rho/l)^6), below 1e-8 relative at the switch.

    Parameters
    ----------
    length, width, thickness : array_like, shape (n,)
        Bar dimensions (m).

    Returns
    -------
    ndarray, shape (n,)
        Partial self-inductance (H).

    Examples
    --------
    A 10 mm x 0.2 mm x 35 um trace is about 9.9 nH:

    >>> round(float(bar_self(10e-3, 0.2e-3, 35e-6)[0]) * 1e9, 2)
    9.9
    """
    l, w, t = np.broadcast_arrays(*(np.atleast_1d(np.asarray(v, float)) for v in (length, width, thickness)))
    out = np.empty(l.shape)
    diag = np.hypot(w, t)
    long_ = l >= 20 * diag
    if np.any(long_):
        ll, ww, tt = l[long_], w[long_], t[long_]
        g = rect_gmd(ww, tt)
        amd = rect_amd(ww, tt)
        r2 = (ww * ww + tt * tt) / 6
        r4 = (ww**4 + tt**4) / 15 + ww * ww * tt * tt / 18
        out[long_] = 2 * K_MU * ll * (np.log(2 * ll / g) - 1 + amd / ll - r2 / (4 * ll * ll) + r4 / (32 * ll**4))
    sh = ~long_
    if np.any(sh):
        ld = np.longdouble
        ll, ww, tt = (v[sh].astype(ld) for v in (l, w, t))
        z = np.zeros_like(ll)
        tot = np.zeros_like(ll)
        for x, cx in ((ll, 2), (z, -2)):
            for y, cy in ((ww, 2), (z, -2)):
                for zz, cz in ((tt, 2), (z, -2)):
                    tot = tot + (cx * cy * cz) * _hl_f(x, y, zz)
        out[sh] = (ld(K_MU) * tot / (ww * ww * tt * tt)).astype(float)
    return out


def tube_self(length, outer_radius, wall):
    """Partial self-inductance of a straight tube (a plated via barrel).

    Geometric-mean-distance approximation (Grover 1946, from memory)::

        L = mu0/(2 pi) [l asinh(l/g) - sqrt(l^2 + g^2) + g]

    with g the GMD of the annulus from itself,
    ln g = ln r2 - r1^4/(r2^2 - r1^2)^2 ln(r2/r1)
    + (3 r1^2 - r2^2)/(4 (r2^2 - r1^2)) (Maxwell, from memory), r2 outer
    and r1 inner radius. For l >> g this is the exact partial inductance to
    O(g/l); for short vias (l ~ g) it is an estimate (a few percent).

    Parameters
    ----------
    length, outer_radius, wall : array_like, shape (n,)
        Tube length, outer radius and wall thickness (m); wall may equal
        the radius (solid rod).

    Returns
    -------
    ndarray, shape (n,)
        Partial self-inductance (H).

    Examples
    --------
    >>> round(float(tube_self(1.6e-3, 0.15e-3, 25e-6)[0]) * 1e9, 3)
    0.705
    """
    l, r2, tw = np.broadcast_arrays(*(np.atleast_1d(np.asarray(v, float)) for v in (length, outer_radius, wall)))
    r1 = np.maximum(r2 - tw, 0.0)
    q = r2 * r2 - r1 * r1
    with np.errstate(divide="ignore", invalid="ignore"):
        term = np.where(r1 > 0, r1**4 / (q * q) * np.log(r2 / np.where(r1 > 0, r1, 1.0)), 0.0)
    g = np.exp(np.log(r2) - term + (3 * r1 * r1 - r2 * r2) / (4 * q))
    return 2 * K_MU * (l * np.arcsinh(l / g) - np.sqrt(l * l + g * g) + g)


# --------------------------------------------------------------------------
# Far-field sums over quadrature points
# --------------------------------------------------------------------------

def pair_energy(x, j, groups, n_groups, *, x2=None, j2=None, groups2=None, n_groups2=None, block=1024, threads=None):
    """Grouped sums of j_p . j_q / |x_p - x_q| over pairs of weighted points.

    With one set of points (``x2`` None) the sum runs over all ordered
    pairs p != q; with two sets over all p in set 1 and q in set 2. Used
    with Gauss-Legendre points of conductor segments and j = current x
    weight x length x direction, ``mu0/(4 pi) * E`` is the corresponding
    quadrature of Neumann's double sum.

    Computed in blocks of ``block`` x ``block`` pairs (one float64 buffer of
    that size per thread), with |x_p - x_q|^2 = |x_p|^2 + |x_q|^2 - 2 x_p.x_q
    from a matrix product after centring the coordinates (relative rounding
    of about 1e-16 |x|^2 / |x_p - x_q|^2, so keep coincident points out:
    their pair is dropped only when p == q in a single set).

    Parameters
    ----------
    x : ndarray, shape (N, 3)
        Points (m).
    j : ndarray, shape (N, 3)
        Vector weights (A m).
    groups : ndarray of int, shape (N,)
        Group index 0..n_groups-1 of each point.
    n_groups : int
    x2, j2, groups2, n_groups2 : optional
        Second set of points.
    block : int
        Block edge.
    threads : int, optional
        Worker threads over row blocks (default: CPU count, max 4).

    Returns
    -------
    ndarray, shape (n_groups, n_groups2)
        E[a, b] = sum over p in group a, q in group b of j_p . j_q / r_pq.

    Examples
    --------
    >>> x = np.array([[0, 0, 0], [1, 0, 0], [0, 2, 0]], float)
    >>> j = np.array([[1, 0, 0], [1, 0, 0], [0, 1, 0]], float)
    >>> pair_energy(x, j, np.zeros(3, int), 1)  # 2 * (1/1)
    array([[2.]])
    """
    same = x2 is None
    if same:
        x2, j2, groups2, n_groups2 = x, j, groups, n_groups
    x, x2 = np.asarray(x, float), np.asarray(x2, float)
    j, j2 = np.asarray(j, float), np.asarray(j2, float)
    groups, groups2 = np.asarray(groups, int), np.asarray(groups2, int)
    # sort by group so that every group is a contiguous run
    oa = np.argsort(groups, kind="stable")
    ob = oa if same else np.argsort(groups2, kind="stable")
    centre = 0.5 * (x.mean(axis=0) + x2.mean(axis=0))
    xa, xb = x[oa] - centre, x2[ob] - centre
    ja, jb = j[oa], j2[ob]
    ga, gb = groups[oa], groups2[ob]
    sqa, sqb = np.einsum("ij,ij->i", xa, xa), np.einsum("ij,ij->i", xb, xb)
    # augmented coordinates: one product gives |xa|^2 + |xb|^2 - 2 xa.xb
    xa5 = np.column_stack([xa, sqa, np.ones(len(xa))])
    xb5 = np.column_stack([-2.0 * xb, np.ones(len(xb)), sqb])
    na, nb = len(xa), len(xb)
    tasks = [(i0, j0) for i0 in range(0, na, block) for j0 in range(i0 if same else 0, nb, block)]
    nthreads = min(_threads(threads), max(1, len(tasks)))
    import threading

    local = threading.local()

    def run(chunk):
        buf = getattr(local, "buf", None)
        if buf is None:
            buf = local.buf = np.empty(block * block)
        E = np.zeros((n_groups, n_groups2))
        for i0, j0 in chunk:
            i1, j1 = min(i0 + block, na), min(j0 + block, nb)
            G = buf[: (i1 - i0) * (j1 - j0)].reshape(i1 - i0, j1 - j0)
            np.matmul(xa5[i0:i1], xb5[j0:j1].T, out=G)
            np.maximum(G, 1e-300, out=G)
            np.sqrt(G, out=G)
            np.divide(1.0, G, out=G)
            if same and i0 == j0:
                np.fill_diagonal(G, 0.0)
            C = np.zeros((n_groups, n_groups2))
            for gcol in np.unique(gb[j0:j1]):
                c0, c1 = j0 + np.searchsorted(gb[j0:j1], gcol), j0 + np.searchsorted(gb[j0:j1], gcol, side="right")
                phi = G[:, c0 - j0:c1 - j0] @ jb[c0:c1]  # (rows, 3)
                dots = np.einsum("pk,pk->p", ja[i0:i1], phi)
                C[:, gcol] += np.bincount(ga[i0:i1], weights=dots, minlength=n_groups)
            E += C + C.T if (same and j0 != i0) else C
        return E

    chunks = [tasks[k::nthreads] for k in range(nthreads)]
    with _BlasThreads():
        if nthreads == 1:
            results = [run(tasks)]
        else:
            with ThreadPoolExecutor(max_workers=nthreads) as pool:
                results = list(pool.map(run, chunks))  # in chunk order: the same sum on every run
    return np.sum(results, axis=0)
