"""Inductance of PCB coils by partial inductances (PEEC).

Model
-----
The coil is its conductor segments (:func:`~tracecoil.physics.conductors.
conductors`): rectangular bars along trace centrelines and tubes for via
barrels, each carrying the share ``f_i`` of the terminal current given by
its path step. With uniform current in every bar, the inductance is the
double sum of partial inductances (A. E. Ruehli, "Inductance calculations
in a complex integrated circuit environment", IBM J. Res. Dev. 16(5),
1972, from memory; for coils H. M. Greenhouse, IEEE Trans. PHP-10(2),
1974, from memory)::

    L = sum_i sum_j f_i f_j M_ij,       M_ii = partial self-inductance.

Terms
-----
Self terms
    Traces: the exact bar formula of C. Hoer and C. Love, J. Res. NBS
    69C(2), 1965 (:func:`~tracecoil.physics.kernels.bar_self`, evaluated
    without float64 cancellation). Vias: tube with the geometric mean
    distance of the annulus (:func:`~tracecoil.physics.kernels.tube_self`).
Near pairs (closer than 1.5 x the longer segment or 6 trace widths)
    Parallel traces: the exact Hoer & Love mutual inductance of the two
    bars. Other pairs: Neumann's formula between filaments in closed form
    (:func:`~tracecoil.physics.kernels.filament_mutual`), averaged over a
    Gauss-Legendre grid of filaments across the width and the thickness of
    both bars. The grid is finest (``filaments`` across the width) for
    touching pairs and coarsens with distance (with the default 4: two
    points up to 3 widths, then 1); this is the discretisation that
    ``filaments`` refines. Close consecutive segments at small angles (a
    finely divided curve) use the exact bars turned parallel, scaled by the
    ratio of the centreline filaments' values in the true and turned
    positions (filament grids are poor there: the filaments of the two
    bars overlap at the inside of the bend).
All other pairs
    Neumann's double integral by a 2-point Gauss-Legendre rule on each
    segment (centreline filaments), summed in blocks as a dense
    point-to-point interaction (:func:`~tracecoil.physics.kernels.pair_energy`);
    near pairs are taken out of that sum again and replaced by the terms
    above.

Validity and accuracy
---------------------
Magnetostatic (quasi-static: frequency well below self-resonance),
non-magnetic surroundings, uniform current over each bar's cross-section
(DC current distribution; see :func:`impedance` for skin and proximity
effects). Corners are modelled by bars meeting at centreline points (the
overlap at the inside and the gap at the outside of a bend are not
corrected), an error of order the trace width over the turn length.
Under refinement of ``filaments`` the result changes by well under 0.2 %
(tests/test_inductance.py); against exact loop formulas it agrees to
better than 0.5 % (ibid.).
"""

from __future__ import annotations

import hashlib
import math
import time
from collections import OrderedDict
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field as dc_field

import numpy as np
from scipy.spatial import cKDTree

from ..errors import SpecError
from . import kernels
from .materials import copper_resistivity
from .conductors import Conductors, conductors
from .kernels import K_MU

__all__ = [
    "METHODS",
    "InductanceResult",
    "ImpedanceResult",
    "inductance",
    "impedance",
    "mutual_inductance",
    "coupling",
    "partial_matrix",
    "self_terms",
]

METHODS = ("peec",)
DEFAULT_FILAMENTS = 4
NEAR_LENGTHS = 1.5  # near pairs: distance < NEAR_LENGTHS x the longer segment ...
NEAR_WIDTHS = 6.0  # ... or < max(NEAR_WIDTHS, 1.5 filaments) x the wider trace
BULK_ORDER = 2  # Gauss-Legendre points per segment in the far-field sum
PARALLEL_SIN = 1e-9  # sine of the angle below which two traces are parallel bars
_CHUNK = 8192  # filament pairs per vectorised call (keeps temporaries in cache)


# ----------------------------------------------------------------------------
# result
# ----------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class InductanceResult:
    """Inductance of a coil and its split into layer contributions.

    Attributes
    ----------
    inductance_h : float
        Total inductance (H).
    layers : tuple of str
        Labels of the groups of ``matrix_h``: copper layer names ('top',
        'inner1', ..., 'bottom') and 'vias'.
    matrix_h : ndarray, shape (g, g)
        ``matrix_h[a, b]`` = sum over segments i in group a and j in group b
        of f_i f_j M_ij; symmetric, sums to ``inductance_h``. The diagonal
        holds each layer's own inductance, ``2 * matrix_h[a, b]`` the
        mutual contribution between two layers.
    method : str
    freq_hz : float or None
        Frequency of an AC solution (None for the DC current distribution).
    resistance_ohm : float or None
        Resistance from the same AC solution (None at DC).
    segments : int
        Number of conductor segments.
    filaments : int
        Filaments across the width of touching neighbours.
    seconds : float
        Computing time.
    inductance_dc_h : float
        The DC inductance (equal to ``inductance_h`` unless ``freq_hz``).
    notes : tuple of str
    """

    inductance_h: float
    layers: tuple
    matrix_h: np.ndarray
    method: str = "peec"
    freq_hz: float | None = None
    resistance_ohm: float | None = None
    segments: int = 0
    filaments: int = DEFAULT_FILAMENTS
    seconds: float = 0.0
    inductance_dc_h: float | None = None
    notes: tuple = dc_field(default=())

    def __float__(self) -> float:
        return float(self.inductance_h)

    @property
    def self_h(self) -> dict:
        """Each group's own inductance (H), by label."""
        return {lab: float(self.matrix_h[i, i]) for i, lab in enumerate(self.layers)}

    @property
    def mutual_h(self) -> dict:
        """Mutual contribution 2 M_ab (H) between groups, keyed by label pairs."""
        out = {}
        for a in range(len(self.layers)):
            for b in range(a + 1, len(self.layers)):
                out[(self.layers[a], self.layers[b])] = float(2.0 * self.matrix_h[a, b])
        return out

    def by_layer(self) -> dict:
        """Plain dict for reports: {'self': {...}, 'mutual': {'top-bottom': ...}}."""
        return {
            "self_h": self.self_h,
            "mutual_h": {f"{a}-{b}": v for (a, b), v in self.mutual_h.items()},
        }


# ----------------------------------------------------------------------------
# helpers
# ----------------------------------------------------------------------------

def _segments(obj) -> Conductors:
    if isinstance(obj, Conductors):
        return obj
    return conductors(obj)


def _groups(cd: Conductors, coil):
    """Group index per segment and labels: layers in order, then 'vias'."""
    layers = sorted({int(x) for x in cd.layer if x > 0})
    labels = []
    st = getattr(coil, "stackup", None)
    for la in layers:
        labels.append(st.layer_name(la) if st is not None else f"layer{la}")
    index = {la: i for i, la in enumerate(layers)}
    g = np.array([index.get(int(x), len(layers)) for x in cd.layer], dtype=int)
    if np.any(cd.layer == 0):
        labels.append("vias")
    return g, tuple(labels)


def _check_filaments(filaments):
    if isinstance(filaments, bool) or not isinstance(filaments, (int, np.integer)):
        raise SpecError(f"filaments must be an integer 1..32; got {filaments!r}")
    if not 1 <= int(filaments) <= 32:
        raise SpecError(f"filaments must be 1..32; got {filaments}")
    return int(filaments)


@dataclass
class _Geo:
    """Per-segment geometry arrays used by the pair computations."""

    a: np.ndarray
    b: np.ndarray
    u: np.ndarray
    l: np.ndarray
    w: np.ndarray
    t: np.ndarray
    e1: np.ndarray
    e2: np.ndarray
    via: np.ndarray
    f: np.ndarray

    @classmethod
    def of(cls, cd: Conductors):
        return cls(cd.start_m, cd.end_m, cd.direction, cd.length_m, cd.width_m, cd.thickness_m,
                   cd.width_dir, cd.thickness_dir, cd.is_via, cd.fraction)


def self_terms(cd: Conductors) -> np.ndarray:
    """Partial self-inductance of every segment (H), shape (n,)."""
    out = np.empty(len(cd))
    via = cd.is_via
    L = cd.length_m
    if np.any(~via):
        out[~via] = kernels.bar_self(L[~via], cd.width_m[~via], cd.thickness_m[~via])
    if np.any(via):
        out[via] = kernels.tube_self(L[via], 0.5 * cd.width_m[via], cd.thickness_m[via])
    return out


def _near_widths(filaments):
    """Near-pair distance in trace widths: beyond it one filament suffices."""
    return max(NEAR_WIDTHS, 1.5 * filaments)


def _near_pairs(ga: _Geo, gb: _Geo, same: bool, filaments: int, near_lengths: float = NEAR_LENGTHS):
    """Near pairs (i in a, j in b; i < j for one set) and their centreline distance.

    Near: distance < max(NEAR_LENGTHS x the longer segment, reach x the
    wider trace) with reach = max(NEAR_WIDTHS, 1.5 filaments). Found with a
    k-d tree on midpoints: a pair is near only if its midpoints are closer
    than that limit plus half of both lengths.
    """
    nwid = _near_widths(filaments)
    wt = np.concatenate([ga.w[~ga.via], gb.w[~gb.via]])
    wmax = float(wt.max()) if len(wt) else 0.0
    ma, mb = 0.5 * (ga.a + ga.b), 0.5 * (gb.a + gb.b)
    # radius about each midpoint that surely holds every near partner's midpoint
    # when the partner is not longer than this segment
    ra = np.maximum((near_lengths + 1.0) * ga.l, nwid * wmax + ga.l)
    rb = np.maximum((near_lengths + 1.0) * gb.l, nwid * wmax + gb.l)
    rall = np.concatenate([ra, rb])
    r0 = float(rall.max())
    if r0 > 1.5 * float(np.quantile(rall, 0.95)):  # a few long leads: query them alone
        r0 = float(np.quantile(rall, 0.95))
    ta = cKDTree(ma)
    tb = ta if same else cKDTree(mb)
    if same:
        pairs = ta.query_pairs(r0, output_type="ndarray")
        i, j = pairs[:, 0], pairs[:, 1]
    else:
        sp = ta.sparse_distance_matrix(tb, r0, output_type="ndarray")
        i, j = sp["i"].astype(int), sp["j"].astype(int)
    ii, jj = [i], [j]
    # segments reaching further than r0 (long leads): their own queries
    for tree_other, mids, rad, first in ((tb, ma, ra, True), (ta, mb, rb, False)):
        big = np.nonzero(rad > r0)[0]
        if len(big):
            hits = tree_other.query_ball_point(mids[big], rad[big], return_sorted=False)
            rep = np.repeat(big, [len(h) for h in hits])
            oth = np.concatenate([np.asarray(h, dtype=int) for h in hits])
            ii.append(rep if first else oth)
            jj.append(oth if first else rep)
        if same:
            break
    i, j = np.concatenate(ii).astype(np.int64), np.concatenate(jj).astype(np.int64)
    if same:
        i, j = np.minimum(i, j), np.maximum(i, j)
        keep = i < j
        i, j = i[keep], j[keep]
    if len(ii) > 1:
        key = np.unique(i * len(mb) + j)
        i, j = key // len(mb), key % len(mb)
    wa = np.where(ga.via, 0.0, ga.w)
    wb = np.where(gb.via, 0.0, gb.w)
    lim = np.maximum(near_lengths * np.maximum(ga.l[i], gb.l[j]), nwid * np.maximum(wa[i], wb[j]))
    dv = ma[i] - mb[j]
    reach = lim + 0.5 * (ga.l[i] + gb.l[j])
    keep = np.einsum("ij,ij->i", dv, dv) < reach * reach
    i, j, lim = i[keep], j[keep], lim[keep]
    d = kernels.segment_distance(ga.a[i], ga.b[i], gb.a[j], gb.b[j])
    keep = d < lim
    return i[keep], j[keep], d[keep]


def _orders(dist, size, finest):
    """Gauss-Legendre points across one cross-section dimension for a pair.

    ``finest`` points for touching pairs, ceil(0.75 finest size / dist)
    otherwise: with finest = 4, three points within one size, two up to
    three sizes away, then one. Doubling ``finest`` doubles both the
    resolution and the reach.
    """
    with np.errstate(divide="ignore"):
        n = np.ceil(0.75 * finest * size / dist)
    return np.clip(np.nan_to_num(n, posinf=finest), 1, finest).astype(int)


def _parallel_bars(ga, i, gb, j):
    """Exact mutual inductance of parallel trace bars (Hoer & Love)."""
    e0, e1, e2 = ga.u[i], ga.e1[i], ga.e2[i]
    rel_a = gb.a[j] - ga.a[i]
    rel_b = gb.b[j] - ga.a[i]
    sa, sb = np.einsum("ij,ij->i", rel_a, e0), np.einsum("ij,ij->i", rel_b, e0)
    mid = 0.5 * (rel_a + rel_b)
    o1 = np.einsum("ij,ij->i", mid, e1)
    o2 = np.einsum("ij,ij->i", mid, e2)
    size1 = np.column_stack([ga.l[i], ga.w[i], ga.t[i]])
    size2 = np.column_stack([gb.l[j], gb.w[j], gb.t[j]])
    offset = np.column_stack([np.minimum(sa, sb), o1 - gb.w[j] / 2 + ga.w[i] / 2, o2 - gb.t[j] / 2 + ga.t[i] / 2])
    sign = np.sign(np.einsum("ij,ij->i", e0, gb.u[j]))
    return sign * kernels.box_mutual(size1, size2, offset)


def _filament_grid(ga, gb, i, j, nw, nt):
    """Mutual inductance of bar pairs by an (nw x nt)^2 grid of filaments."""
    xw, ww = kernels.gauss_legendre(nw)
    xt, wt = kernels.gauss_legendre(nt)
    ow = np.repeat(xw - 0.5, nt)
    ot = np.tile(xt - 0.5, nw)
    wq = np.repeat(ww, nt) * np.tile(wt, nw)  # (k,)
    k = len(wq)
    out = np.empty(len(i))
    step = max(1, _CHUNK // (k * k))

    def chunk(s0):
        ii, jj = i[s0:s0 + step], j[s0:s0 + step]

        def fil(g, idx):
            sh = (ow[None, :, None] * (g.w[idx])[:, None, None] * g.e1[idx][:, None, :]
                  + ot[None, :, None] * (g.t[idx])[:, None, None] * g.e2[idx][:, None, :])
            return g.a[idx][:, None, :] + sh, g.b[idx][:, None, :] + sh  # (p, k, 3)

        a1, b1 = fil(ga, ii)
        a2, b2 = fil(gb, jj)
        p = len(ii)
        A1 = np.broadcast_to(a1[:, :, None, :], (p, k, k, 3)).reshape(-1, 3)
        B1 = np.broadcast_to(b1[:, :, None, :], (p, k, k, 3)).reshape(-1, 3)
        A2 = np.broadcast_to(a2[:, None, :, :], (p, k, k, 3)).reshape(-1, 3)
        B2 = np.broadcast_to(b2[:, None, :, :], (p, k, k, 3)).reshape(-1, 3)
        m = kernels.filament_mutual(A1, B1, A2, B2, method="closed").reshape(p, k, k)
        out[s0:s0 + step] = np.einsum("pab,a,b->p", m, wq, wq)

    starts = range(0, len(i), step)
    nthreads = kernels._threads(None)
    if nthreads > 1 and len(starts) > 1:
        with ThreadPoolExecutor(max_workers=nthreads) as pool:
            list(pool.map(chunk, starts))
    else:
        for s0 in starts:
            chunk(s0)
    return out


def _aligned(ga: _Geo, i, gb: _Geo, j) -> _Geo:
    """Bars j turned parallel to bars i about their end nearest to bar i
    (about the shared corner for consecutive segments)."""
    sign = np.sign(np.einsum("ij,ij->i", ga.u[i], gb.u[j]))
    u = ga.u[i] * sign[:, None]
    da = kernels.segment_distance(gb.a[j], gb.a[j], ga.a[i], ga.b[i])
    db = kernels.segment_distance(gb.b[j], gb.b[j], ga.a[i], ga.b[i])
    at_a = (da <= db)[:, None]
    vec = gb.l[j][:, None] * u
    a = np.where(at_a, gb.a[j], gb.b[j] - vec)
    return _Geo(a, a + vec, u, gb.l[j], gb.w[j], gb.t[j], ga.e1[i], ga.e2[i], gb.via[j], gb.f[j])


def _near_mutual(ga: _Geo, gb: _Geo, i, j, dist, filaments):
    """Mutual inductance of near segment pairs with their cross-sections (H).

    * perpendicular: 0;
    * parallel traces: exact Hoer & Love bars;
    * traces closer than 1.5 widths at less than 30 degrees (consecutive
      segments of a finely divided curve, where a filament grid coarser
      than the segment length would be wrong): Hoer & Love for bar j
      turned parallel to bar i, plus the change from that to the true
      position computed on the filament grid (whose own error cancels to
      first order in the angle);
    * everything else: the Gauss-Legendre filament grid.
    """
    out = np.zeros(len(i))
    c = np.einsum("ij,ij->i", ga.u[i], gb.u[j])
    s = np.linalg.norm(np.cross(ga.u[i], gb.u[j]), axis=1)
    live = np.abs(c) > 1e-13  # perpendicular segments have M = 0 exactly
    anyvia = ga.via[i] | gb.via[j]
    par = live & ~anyvia & (s < PARALLEL_SIN)
    if np.any(par):
        out[par] = _parallel_bars(ga, i[par], gb, j[par])
    rest = live & ~par
    if np.any(rest):
        ri, rj, rd = i[rest], j[rest], dist[rest]
        wmax = np.maximum(ga.w[ri], gb.w[rj])
        tmax = np.maximum(ga.t[ri], gb.t[rj])
        nw = _orders(rd, wmax, filaments)
        nt = _orders(rd, tmax, max(2, filaments // 2))
        via = anyvia[rest]
        nw[via] = 1
        nt[via] = 1
        turned = ~via & (rd < 1.5 * wmax) & (s[rest] < 0.5)
        vals = np.empty(len(ri))
        for a, b in sorted(set(zip(nw[~turned].tolist(), nt[~turned].tolist()))):
            sel = (nw == a) & (nt == b) & ~turned
            vals[sel] = _filament_grid(ga, gb, ri[sel], rj[sel], a, b)
        # turned pairs: exact bars turned parallel, scaled by the ratio of the
        # centreline filaments' mutual inductances in the true and turned
        # positions (exact at zero angle; the cross-section correction is
        # assumed to scale with the filament value)
        tsel = np.nonzero(turned)[0]
        if len(tsel):
            gt = _aligned(ga, ri[tsel], gb, rj[tsel])
            k = np.arange(len(tsel))
            m_true = kernels.filament_mutual(ga.a[ri[tsel]], ga.b[ri[tsel]], gb.a[rj[tsel]], gb.b[rj[tsel]], method="closed")
            m_turn = kernels.filament_mutual(ga.a[ri[tsel]], ga.b[ri[tsel]], gt.a, gt.b, method="closed")
            vals[tsel] = _parallel_bars(ga, ri[tsel], gt, k) * m_true / m_turn
        out[rest] = vals
    return out


def _bulk_points(g: _Geo, order: int = BULK_ORDER):
    x, w = kernels.gauss_legendre(order)
    d = g.b - g.a
    pts = g.a[:, None, :] + x[None, :, None] * d[:, None, :]
    jw = (g.f * g.l)[:, None, None] * w[None, :, None] * g.u[:, None, :]
    return pts, jw  # (n, q, 3) each


def _bulk_pair_values(pa, ja, pb, jb, i, j, same_segment=False):
    """The far-field rule's value for listed pairs (same units as pair_energy)."""
    out = np.zeros(len(i))
    q = pa.shape[1]
    for s0 in range(0, len(i), 200000):
        ii, jj = i[s0:s0 + 200000], j[s0:s0 + 200000]
        acc = np.zeros(len(ii))
        for x in range(q):
            for y in range(q):
                if same_segment and x == y:
                    continue
                r = np.linalg.norm(pa[ii, x] - pb[jj, y], axis=1)
                acc += np.einsum("ij,ij->i", ja[ii, x], jb[jj, y]) / r
        out[s0:s0 + 200000] = acc
    return out


def partial_matrix(coil_a, coil_b=None, *, filaments=DEFAULT_FILAMENTS, near_lengths=NEAR_LENGTHS,
                   bulk_order=BULK_ORDER):
    """Grouped double sum of f_i f_j M_ij (H) between layers.

    With one coil: the inductance split by layer groups (self terms
    included). With two coils: the mutual inductance split by the layer
    groups of each (no self terms).

    Parameters
    ----------
    coil_a, coil_b : Coil or Conductors
    filaments : int
        Gauss-Legendre filaments across the width of touching segments.
    near_lengths : float
        Pairs closer than this many segment lengths get the accurate near
        treatment (the far rule's error there is below ~5e-4 of the pair).
    bulk_order : int
        Gauss-Legendre points per segment in the far-field sum.

    Returns
    -------
    matrix : ndarray, shape (ga, gb)
        Grouped sums (H).
    labels_a, labels_b : tuple of str
        Group labels.
    """
    M, lab_a, lab_b, _ = _partial_parts(coil_a, coil_b, filaments=filaments, near_lengths=near_lengths,
                                        bulk_order=bulk_order)
    return M.copy(), lab_a, lab_b


_CACHE: OrderedDict = OrderedDict()  # recent results, keyed by a digest of the geometry
_CACHE_SIZE = 8


def _digest(cd: Conductors) -> bytes:
    h = hashlib.blake2b(digest_size=16)
    for name in ("start_m", "end_m", "width_m", "thickness_m", "fraction", "layer", "kind"):
        h.update(np.ascontiguousarray(getattr(cd, name)).tobytes())
    return h.digest()


def _partial_parts(coil_a, coil_b=None, *, filaments=DEFAULT_FILAMENTS, near_lengths=NEAR_LENGTHS,
                   bulk_order=BULK_ORDER):
    """partial_matrix plus the near-pair list (i, j, distance), cached.

    The last few results are kept, keyed by a digest of the conductor
    arrays and the options, so that repeated calls on one geometry (an
    impedance sweep, a prediction) compute the DC model once.
    """
    filaments = _check_filaments(filaments)
    if not 0.5 <= float(near_lengths) <= 20:
        raise SpecError(f"near_lengths must be 0.5..20; got {near_lengths}")
    if bulk_order not in range(1, 9):
        raise SpecError(f"bulk_order must be 1..8; got {bulk_order}")
    same = coil_b is None
    cda = _segments(coil_a)
    cdb = cda if same else _segments(coil_b)
    grp_a, lab_a = _groups(cda, coil_a)
    grp_b, lab_b = (grp_a, lab_a) if same else _groups(cdb, coil_b)
    key = (_digest(cda), None if same else _digest(cdb), lab_a, lab_b, filaments, float(near_lengths), int(bulk_order))
    if key in _CACHE:
        _CACHE.move_to_end(key)
        return _CACHE[key]
    ga = _Geo.of(cda)
    gb = ga if same else _Geo.of(cdb)
    nga, ngb = len(lab_a), len(lab_b)

    # far field: every pair by the bulk rule
    pa, ja = _bulk_points(ga, bulk_order)
    pb, jb = (pa, ja) if same else _bulk_points(gb, bulk_order)
    q = pa.shape[1]
    E = kernels.pair_energy(pa.reshape(-1, 3), ja.reshape(-1, 3), np.repeat(grp_a, q), nga,
                            **({} if same else dict(x2=pb.reshape(-1, 3), j2=jb.reshape(-1, 3),
                                                    groups2=np.repeat(grp_b, q), n_groups2=ngb)))
    M = K_MU * E

    # near pairs: replace the bulk value with the accurate one
    i, j, dist = _near_pairs(ga, gb, same, filaments, float(near_lengths))
    if len(i):
        exact = _near_mutual(ga, gb, i, j, dist, filaments) * ga.f[i] * gb.f[j]
        approx = K_MU * _bulk_pair_values(pa, ja, pb, jb, i, j)
        corr = exact - approx
        np.add.at(M, (grp_a[i], grp_b[j]), corr)
        if same:
            np.add.at(M, (grp_b[j], grp_a[i]), corr)
    if same:
        n = len(cda)
        idx = np.arange(n)
        approx_self = K_MU * _bulk_pair_values(pa, ja, pa, ja, idx, idx, same_segment=True)
        st = self_terms(cda) * cda.fraction**2 - approx_self
        np.add.at(M, (grp_a, grp_a), st)
    for arr in (M, i, j, dist):
        arr.setflags(write=False)
    out = (M, lab_a, lab_b, (i, j, dist))
    _CACHE[key] = out
    while len(_CACHE) > _CACHE_SIZE:
        _CACHE.popitem(last=False)
    return out


# ----------------------------------------------------------------------------
# public API
# ----------------------------------------------------------------------------

def inductance(coil, *, method="peec", freq_hz=None, filaments=DEFAULT_FILAMENTS, **ac_options) -> InductanceResult:
    """Inductance of a coil by partial inductances (PEEC).

    Parameters
    ----------
    coil : Coil or Conductors
    method : {"peec"}
        The partial-inductance model described in this module's docstring.
    freq_hz : float, optional
        If given, solve the current distribution over the filaments of every
        cross-section at this frequency (skin and proximity effect, see
        :func:`impedance`) and return L(f) = Im Z / omega and R(f) = Re Z.
    filaments : int
        Gauss-Legendre filaments across the width of touching segments
        (1..32); the discretisation that refinement studies double.
    **ac_options
        Passed to :func:`impedance` when ``freq_hz`` is given.

    Returns
    -------
    InductanceResult
        ``float(result)`` is the inductance in henries.

    Examples
    --------
    Square loop of side 20 mm, trace 0.5 mm x 35 um:

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> sq = np.array([[0, 0], [20, 0], [20, 20], [0, 20], [0, 0]], float)
    >>> c = Coil(Stackup((35.0,), ()), (Trace(1, sq, 0.5),), (), (), (Step("trace", 0),))
    >>> r = inductance(c)
    >>> round(r.inductance_h * 1e9, 1), r.layers
    (69.7, ('top',))
    """
    if method not in METHODS:
        raise SpecError(f"method must be one of {METHODS}; got {method!r}")
    t0 = time.perf_counter()
    if freq_hz is not None:
        f = np.asarray(freq_hz, dtype=float)
        if f.ndim != 0:
            raise SpecError(f"freq_hz must be a single frequency here (use impedance() for a sweep); got {freq_hz!r}")
        z = impedance(coil, float(f), filaments=filaments, **ac_options)
        return InductanceResult(
            inductance_h=float(z.inductance_h[0]),
            layers=z.layers,
            matrix_h=z.matrix_dc_h,
            method=method,
            freq_hz=float(f),
            resistance_ohm=float(z.resistance_ohm[0]),
            segments=z.segments,
            filaments=filaments,
            seconds=time.perf_counter() - t0,
            inductance_dc_h=z.inductance_dc_h,
            notes=("matrix_h is the DC (uniform-current) split; inductance_h is L(f)",),
        )
    if ac_options:
        raise SpecError(f"unknown options {sorted(ac_options)} (AC options need freq_hz)")
    cd = _segments(coil)
    M, labels, _ = partial_matrix(cd if isinstance(coil, Conductors) else coil, filaments=filaments)
    M = 0.5 * (M + M.T)
    return InductanceResult(
        inductance_h=float(M.sum()),
        layers=labels,
        matrix_h=M,
        method=method,
        segments=len(cd),
        filaments=filaments,
        seconds=time.perf_counter() - t0,
        inductance_dc_h=float(M.sum()),
    )


def mutual_inductance(coil_a, coil_b, *, filaments=DEFAULT_FILAMENTS) -> float:
    """Mutual inductance between two coils (H), terminal current to terminal current.

    Both coils are given in the same world frame; place them with
    ``Coil.placed(offset_mm=..., rotation_deg=..., flip=...)``. The sign
    follows the current directions (A to B in each coil).

    Parameters
    ----------
    coil_a, coil_b : Coil or Conductors
    filaments : int
        As in :func:`inductance`.

    Returns
    -------
    float
        M (H).

    Examples
    --------
    Two coaxial square loops of side 20 mm, 5 mm apart:

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> sq = np.array([[0, 0], [20, 0], [20, 20], [0, 20], [0, 0]], float)
    >>> a = Coil(Stackup((35.0,), ()), (Trace(1, sq, 0.5),), (), (), (Step("trace", 0),))
    >>> b = a.placed(offset_mm=(0, 0, 5))
    >>> round(mutual_inductance(a, b) * 1e9, 2)
    13.74
    """
    M, _, _ = partial_matrix(coil_a, coil_b, filaments=filaments)
    return float(M.sum())


def coupling(coil_a, coil_b, *, filaments=DEFAULT_FILAMENTS) -> float:
    """Coupling factor k = M / sqrt(La Lb) between two coils (dimensionless).

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> sq = np.array([[0, 0], [20, 0], [20, 20], [0, 20], [0, 0]], float)
    >>> a = Coil(Stackup((35.0,), ()), (Trace(1, sq, 0.5),), (), (), (Step("trace", 0),))
    >>> round(coupling(a, a.placed(offset_mm=(0, 0, 5))), 3)
    0.197
    """
    la = inductance(coil_a, filaments=filaments).inductance_h
    lb = inductance(coil_b, filaments=filaments).inductance_h
    return mutual_inductance(coil_a, coil_b, filaments=filaments) / math.sqrt(la * lb)


# ----------------------------------------------------------------------------
# frequency dependence: current distribution over the cross-sections
# ----------------------------------------------------------------------------

AC_REACH_WIDTHS = 3.0  # neighbours closer than this many widths shape each other's current
MAX_SUBBARS = (8, 6)  # largest default (width, thickness) subdivision


@dataclass(frozen=True, eq=False)
class ImpedanceResult:
    """Series impedance of a coil over frequency (magnetostatic, no capacitance).

    Attributes
    ----------
    freq_hz : ndarray, shape (k,)
    impedance_ohm : ndarray of complex, shape (k,)
        Z = R(f) + j omega L(f) between the terminals.
    inductance_h, resistance_ohm : ndarray, shape (k,)
        L(f) = Im Z / omega and R(f) = Re Z.
    inductance_dc_h, resistance_dc_ohm : float
        Uniform-current (DC) values of the same model.
    cross_section : tuple of int
        Sub-bars across (width, thickness) of every trace segment.
    layers : tuple of str
    matrix_dc_h : ndarray
        DC split of the inductance by layer groups (see :class:`InductanceResult`).
    segments : int
    iterations : tuple of int
        GMRES iterations per frequency.
    currents : ndarray of complex, shape (k, N) or None
        With ``keep_currents``: the current (A, for 1 A at the terminals) of
        each sub-bar at each frequency; ``subbars`` describes the sub-bars.
    subbars : dict or None
        'segment' (N,), 'offset_m' (N, 2) centre across width and thickness
        in the segment's frame, 'size_m' (N, 2).
    """

    freq_hz: np.ndarray
    impedance_ohm: np.ndarray
    inductance_h: np.ndarray
    resistance_ohm: np.ndarray
    inductance_dc_h: float
    resistance_dc_ohm: float
    cross_section: tuple
    layers: tuple
    matrix_dc_h: np.ndarray
    segments: int
    iterations: tuple = ()
    currents: np.ndarray | None = None
    subbars: dict | None = None


def _graded(n):
    """Cell edges on [-1/2, 1/2], cosine-graded (finer at both faces)."""
    return -0.5 * np.cos(np.pi * np.arange(n + 1) / n)


def _default_cross_section(cd: Conductors, freq_max, rho):
    tr = ~cd.is_via
    if freq_max <= 0 or not np.any(tr):
        return 1, 1
    delta = math.sqrt(rho / (math.pi * freq_max * kernels.MU0))
    w, t = float(cd.width_m[tr].max()), float(cd.thickness_m[tr].max())
    nw = int(np.clip(math.ceil(w / (2 * delta)) + 1, 2, MAX_SUBBARS[0]))
    nt = int(np.clip(math.ceil(t / delta) + 1, 1, MAX_SUBBARS[1]))
    return nw, nt


@dataclass
class _SubBars:
    owner: np.ndarray  # segment of each sub-bar (N,)
    a: np.ndarray  # centreline start (N, 3)
    b: np.ndarray
    y: np.ndarray  # lower corner across the width, local (N,)
    z: np.ndarray  # lower corner across the thickness, local (N,)
    w: np.ndarray
    t: np.ndarray
    area: np.ndarray
    first: np.ndarray  # index of each segment's first sub-bar (n + 1,)


def _subdivide(cd: Conductors, nw, nt) -> _SubBars:
    n = len(cd)
    via = cd.is_via
    k = np.where(via, 1, nw * nt)
    first = np.concatenate([[0], np.cumsum(k)])
    ew, et = _graded(nw), _graded(nt)
    cw, ct = 0.5 * (ew[:-1] + ew[1:]), 0.5 * (et[:-1] + et[1:])
    fw, ft = np.diff(ew), np.diff(et)
    owner = np.repeat(np.arange(n), k)
    N = int(first[-1])
    loc = np.arange(N) - first[owner]
    iw, it = loc // nt, loc % nt
    W, T = cd.width_m[owner], cd.thickness_m[owner]
    isv = via[owner]
    oy = np.where(isv, 0.0, cw[np.minimum(iw, nw - 1)] * W)
    oz = np.where(isv, 0.0, ct[np.minimum(it, nt - 1)] * T)
    sw = np.where(isv, W, fw[np.minimum(iw, nw - 1)] * W)
    st = np.where(isv, T, ft[np.minimum(it, nt - 1)] * T)
    shift = oy[:, None] * cd.width_dir[owner] + oz[:, None] * cd.thickness_dir[owner]
    a = cd.start_m[owner] + shift
    b = cd.end_m[owner] + shift
    d_out = cd.width_m[owner]
    area = np.where(isv, np.pi * st * (d_out - st), sw * st)  # barrel: annulus of wall st
    return _SubBars(owner, a, b, oy - sw / 2, oz - st / 2, sw, st, area, first)


def _hl_block(length, ys, zs, ws, ts):
    """Exact (Hoer & Love) partial inductance matrix of aligned sub-bars of
    one bar of the given length; ys, zs lower corners, ws, ts sides."""
    K = len(ys)
    I, J = np.triu_indices(K)
    n = len(I)
    size1 = np.column_stack([np.full(n, length), ws[I], ts[I]])
    size2 = np.column_stack([np.full(n, length), ws[J], ts[J]])
    off = np.column_stack([np.zeros(n), ys[J] - ys[I], zs[J] - zs[I]])
    m = kernels.box_mutual(size1, size2, off)
    out = np.empty((K, K))
    out[I, J] = m
    out[J, I] = m
    return out


def _intra_blocks(cd: Conductors, sb: _SubBars, nw, nt, nodes=16):
    """Partial inductance matrices among the sub-bars of each trace segment (H).

    Exact Hoer & Love mutual inductances of the aligned sub-bars. For each
    distinct cross-section the matrix is computed directly for up to
    ``nodes`` distinct lengths; with more lengths it is computed at
    ``nodes`` Chebyshev lengths (in log length) and the smooth remainder
    M(l) - mu0 l/(2 pi) (ln 2l - 1) interpolated (checked against direct
    evaluation in the tests).
    """
    tr = np.nonzero(~cd.is_via)[0]
    K = nw * nt
    out = np.zeros((len(tr), K, K))
    if not len(tr):
        return tr, out
    ew, et = _graded(nw), _graded(nt)
    keys = np.round(np.column_stack([cd.width_m[tr], cd.thickness_m[tr]]) * 1e12).astype(np.int64)
    uniq, inv = np.unique(keys, axis=0, return_inverse=True)
    inv = inv.ravel()
    for u, (wk, tk) in enumerate(uniq * 1e-12):
        ys = (ew[:-1] * wk).repeat(nt)
        zs = np.tile(et[:-1] * tk, nw)
        ws = (np.diff(ew) * wk).repeat(nt)
        ts = np.tile(np.diff(et) * tk, nw)
        sel = np.nonzero(inv == u)[0]
        L = cd.length_m[tr[sel]]
        lu, li = np.unique(np.round(L * 1e12).astype(np.int64), return_inverse=True)
        lu = lu * 1e-12
        if len(lu) <= nodes:
            blocks = np.stack([_hl_block(x, ys, zs, ws, ts) for x in lu])
            out[sel] = blocks[li.ravel()]
            continue
        lo, hi = np.log(lu[0]), np.log(lu[-1])
        xk = np.cos(np.pi * (np.arange(nodes) + 0.5) / nodes)  # Chebyshev nodes on [-1, 1]
        lk = np.exp(0.5 * (lo + hi) + 0.5 * (hi - lo) * xk)

        def smooth(M, length):
            return M - 2 * K_MU * length * (np.log(2 * length) - 1.0)

        vals = np.stack([smooth(_hl_block(x, ys, zs, ws, ts), x) for x in lk])  # (nodes, K, K)
        coef = np.polynomial.chebyshev.chebfit(xk, vals.reshape(nodes, -1), nodes - 1)
        xs = (2 * np.log(L) - (lo + hi)) / (hi - lo)
        interp = np.polynomial.chebyshev.chebval(xs, coef).T.reshape(len(L), K, K)  # (m, K, K)
        out[sel] = interp + 2 * K_MU * (L * (np.log(2 * L) - 1.0))[:, None, None]
    return tr, out


def _subbar_pairs_mutual(cd: Conductors, sb: _SubBars, iu, ju, pp, pi, pj):
    """Mutual inductance of sub-bar pairs pi (of segment iu[pp]) and pj (of ju[pp]).

    Exactly parallel traces: Hoer & Love bars. Otherwise Neumann's formula
    for the sub-bars' centreline filaments; for nearly parallel pairs
    (sine below 0.3) whose sub-bars are closer than 4 sub-bar sizes, the
    filament's ln(distance) over the overlapping length is replaced by the
    ln(GMD) of the two sub-rectangles (Maxwell's GMD method), the leading
    effect of their finite cross-sections.
    """
    g = _Geo.of(cd)
    # geometry per segment pair
    u_i, u_j = g.u[iu], g.u[ju]
    c_s = np.einsum("ij,ij->i", u_i, u_j)
    sn_s = np.linalg.norm(np.cross(u_i, u_j), axis=1)
    e1, e2 = g.e1[iu], g.e2[iu]
    f1 = np.einsum("ij,ij->i", g.e1[ju], e1)
    f2 = np.einsum("ij,ij->i", g.e2[ju], e2)
    sa = np.einsum("ij,ij->i", g.a[ju] - g.a[iu], u_i)
    sbb = np.einsum("ij,ij->i", g.b[ju] - g.a[iu], u_i)
    lo, hi = np.minimum(sa, sbb), np.maximum(sa, sbb)
    ov_lo, ov_hi = np.maximum(lo, 0.0), np.minimum(hi, g.l[iu])
    ov = np.maximum(ov_hi - ov_lo, 0.0)
    lam = np.clip((0.5 * (ov_lo + ov_hi) - sa) / np.where(sbb != sa, sbb - sa, 1.0), 0.0, 1.0)
    pmid = g.a[ju] + lam[:, None] * (g.b[ju] - g.a[ju]) - g.a[iu]  # j's axis at the overlap middle
    mid = 0.5 * (g.a[ju] + g.b[ju]) - g.a[iu]
    my = np.where(sn_s < PARALLEL_SIN, np.einsum("ij,ij->i", mid, e1), np.einsum("ij,ij->i", pmid, e1))
    mz = np.where(sn_s < PARALLEL_SIN, np.einsum("ij,ij->i", mid, e2), np.einsum("ij,ij->i", pmid, e2))
    anyvia = g.via[iu] | g.via[ju]
    par_s = (sn_s < PARALLEL_SIN) & ~anyvia
    # expand to sub-bar pairs
    c, sn, par = c_s[pp], sn_s[pp], par_s[pp]
    cy_i = sb.y[pi] + sb.w[pi] / 2
    cz_i = sb.z[pi] + sb.t[pi] / 2
    dy = my[pp] + (sb.y[pj] + sb.w[pj] / 2) * f1[pp] - cy_i
    dz = mz[pp] + (sb.z[pj] + sb.t[pj] / 2) * f2[pp] - cz_i
    out = np.empty(len(pi))
    if np.any(par):
        q = np.nonzero(par)[0]
        k = pp[q]
        size1 = np.column_stack([g.l[iu[k]], sb.w[pi[q]], sb.t[pi[q]]])
        size2 = np.column_stack([g.l[ju[k]], sb.w[pj[q]], sb.t[pj[q]]])
        off = np.column_stack([lo[k], dy[q] + cy_i[q] - sb.w[pj[q]] / 2 - sb.y[pi[q]],
                               dz[q] + cz_i[q] - sb.t[pj[q]] / 2 - sb.z[pi[q]]])
        out[q] = np.sign(c[q]) * kernels.box_mutual(size1, size2, off)
    r = np.nonzero(~par)[0]
    if len(r):
        m = np.empty(len(r))
        for s0 in range(0, len(r), _CHUNK):
            q = r[s0:s0 + _CHUNK]
            m[s0:s0 + _CHUNK] = kernels.filament_mutual(sb.a[pi[q]], sb.b[pi[q]], sb.a[pj[q]], sb.b[pj[q]], method="closed")
        out[r] = m
        # GMD correction for close, nearly parallel sub-bars
        dist = np.hypot(dy[r], dz[r])
        size = np.maximum.reduce([sb.w[pi[r]], sb.t[pi[r]], sb.w[pj[r]], sb.t[pj[r]]])
        fix = ~anyvia[pp[r]] & (sn[r] < 0.3) & (ov[pp[r]] > 0) & (dist < 4 * size)
        if np.any(fix):
            q = r[fix]
            lg = kernels.rect_log_gmd(np.column_stack([sb.y[pi[q]], sb.z[pi[q]]]), np.column_stack([sb.w[pi[q]], sb.t[pi[q]]]),
                                      np.column_stack([dy[q] + cy_i[q] - sb.w[pj[q]] / 2, dz[q] + cz_i[q] - sb.t[pj[q]] / 2]),
                                      np.column_stack([sb.w[pj[q]], sb.t[pj[q]]]))
            out[q] += 2 * K_MU * ov[pp[q]] * c[q] * (np.log(np.maximum(dist[fix], 1e-300)) - lg)
    return out


def _near_subbar_matrix(cd: Conductors, sb: _SubBars, near):
    """Sparse sub-bar mutual inductances between close segments (H);
    ``near`` is the DC model's near-pair list (i, j, distance)."""
    from scipy import sparse

    g = _Geo.of(cd)
    i, j, dist = near
    wmax = np.maximum(np.where(g.via[i], 0, g.w[i]), np.where(g.via[j], 0, g.w[j]))
    c = np.abs(np.einsum("ij,ij->i", g.u[i], g.u[j]))
    keep = (dist < AC_REACH_WIDTHS * wmax) & (c > 1e-13)
    i, j = i[keep], j[keep]
    ki = sb.first[i + 1] - sb.first[i]
    kj = sb.first[j + 1] - sb.first[j]
    rows, cols, vals = [], [], []
    for a_k in np.unique(ki):
        for b_k in np.unique(kj):
            sel = (ki == a_k) & (kj == b_k)
            if not np.any(sel):
                continue
            iu, ju = i[sel], j[sel]
            pp = np.repeat(np.arange(len(iu)), a_k * b_k)
            pi = (sb.first[iu][:, None, None] + np.arange(a_k)[None, :, None] + 0 * np.arange(b_k)[None, None, :]).ravel()
            pj = (sb.first[ju][:, None, None] + 0 * np.arange(a_k)[None, :, None] + np.arange(b_k)[None, None, :]).ravel()
            m = _subbar_pairs_mutual(cd, sb, iu, ju, pp, pi, pj)
            rows += [pi, pj]
            cols += [pj, pi]
            vals += [m, m]
    N = len(sb.owner)
    if not rows:
        return sparse.csr_matrix((N, N))
    return sparse.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(N, N))


def impedance(coil, freq_hz, *, filaments=DEFAULT_FILAMENTS, cross_section=None, temperature_c=20.0,
              resistivity_ohm_m=None, rtol=1e-9, keep_currents=False) -> ImpedanceResult:
    """Series impedance Z(f) = R(f) + j omega L(f) with skin and proximity effect.

    Every trace segment is divided into ``nw x nt`` rectangular sub-bars
    (cosine-graded, finer at the faces) carrying uniform current each; the
    sub-bars of a segment are in parallel between its ends and carry
    together the segment's share of the terminal current. The sub-bar
    currents follow from (R + j omega M) I = V per segment (partial-element
    equivalent circuit, A. E. Ruehli, IEEE Trans. MTT 22(3), 1974, from
    memory), with

    * R: rho l / A of each sub-bar (copper: 100 % IACS with temperature
      coefficient, :func:`tracecoil.physics.materials.copper_resistivity`);
    * M among the sub-bars of one segment: exact geometric mean distances
      of the sub-rectangles in the long-conductor form, calibrated to the
      exact Hoer & Love self-inductance of the whole bar;
    * M between sub-bars of segments closer than 3 trace widths
      (neighbouring turns, consecutive segments): Neumann's formula for
      their centreline filaments;
    * all other couplings at the segment level from the DC model (a
      distant conductor sees a nearly uniform field across a cross-section,
      which does not redistribute current).

    The block system is solved by GMRES preconditioned with the exact
    per-segment solution. Vias are single tubes (no skin effect in the
    barrel). Capacitance is not included (see the capacitance model and the
    self-resonance estimate for that). At low frequency Z tends to the DC
    values of the same model: R = sum f_i^2 R_i and the DC inductance.

    Parameters
    ----------
    coil : Coil or Conductors
    freq_hz : float or array_like, shape (k,)
        Frequencies (Hz), >= 0.
    filaments : int
        As in :func:`inductance` (DC part).
    cross_section : (int, int), optional
        Sub-bars across the width and the thickness of every trace. Default:
        from the skin depth at the highest frequency, about two cells per
        skin depth across the thickness (at most 6) and one per two skin
        depths across the width (at most 8).
    temperature_c : float
        Copper temperature (degC) for the resistivity.
    resistivity_ohm_m : float, optional
        Override the copper resistivity (ohm m).
    rtol : float
        GMRES relative tolerance.
    keep_currents : bool
        Keep the sub-bar currents (for current-density maps).

    Returns
    -------
    ImpedanceResult

    Examples
    --------
    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> sq = np.array([[0, 0], [20, 0], [20, 20], [0, 20], [0, 0]], float)
    >>> c = Coil(Stackup((35.0,), ()), (Trace(1, sq, 0.5),), (), (), (Step("trace", 0),))
    >>> z = impedance(c, [1e3, 1e7])
    >>> round(float(z.resistance_ohm[1] / z.resistance_ohm[0]), 1)  # skin and edge effect at 10 MHz
    1.5
    >>> round(float(z.inductance_h[0] / z.inductance_dc_h), 4)
    1.0
    """
    from scipy.sparse.linalg import LinearOperator, gmres

    f = np.atleast_1d(np.asarray(freq_hz, dtype=float))
    if f.ndim != 1 or len(f) == 0 or not np.all(np.isfinite(f)) or np.any(f < 0):
        raise SpecError(f"freq_hz must be one or more finite frequencies >= 0 (Hz); got {freq_hz!r}")
    rho = float(copper_resistivity(temperature_c)) if resistivity_ohm_m is None else float(resistivity_ohm_m)
    if not rho > 0:
        raise SpecError(f"resistivity_ohm_m must be > 0; got {resistivity_ohm_m!r}")
    cd = _segments(coil)
    if cross_section is None:
        nw, nt = _default_cross_section(cd, float(f.max()), rho)
    else:
        try:
            nw, nt = (int(v) for v in cross_section)
        except (TypeError, ValueError):
            raise SpecError(f"cross_section must be (nw, nt) integers; got {cross_section!r}") from None
        if not (1 <= nw <= 32 and 1 <= nt <= 16):
            raise SpecError(f"cross_section must be within (1..32, 1..16); got {cross_section!r}")
    Mdc, labels, _, near = _partial_parts(cd if isinstance(coil, Conductors) else coil, filaments=filaments)
    L_static = float(Mdc.sum())
    sb = _subdivide(cd, nw, nt)
    n, N = len(cd), len(sb.owner)
    R_sub = rho * cd.length_m[sb.owner] / sb.area
    fr = cd.fraction
    a_sub = sb.area / np.bincount(sb.owner, weights=sb.area, minlength=n)[sb.owner]  # DC shares
    R_dc = float(np.sum(fr**2 / np.bincount(sb.owner, weights=1.0 / R_sub, minlength=n)))

    tr, blocks = _intra_blocks(cd, sb, nw, nt)
    vias = np.nonzero(cd.is_via)[0]
    via_self = self_terms(cd.subset(vias)) if len(vias) else np.zeros(0)
    C = _near_subbar_matrix(cd, sb, near)
    u = fr[sb.owner] * a_sub  # uniform (DC) sub-bar currents for 1 A
    K = nw * nt
    tr_idx = sb.first[tr][:, None] + np.arange(K)[None, :]
    L_near_uniform = (np.einsum("mk,mkl,ml->", u[tr_idx], blocks, u[tr_idx]) + float(np.sum(via_self * fr[vias] ** 2))
                      + float(u @ (C @ u)))

    Z, iters, kept = [], [], []
    for fk in f:
        w = 2 * np.pi * fk
        if w == 0:
            Z.append(complex(R_dc, 0.0))
            iters.append(0)
            kept.append(u.astype(complex))
            continue
        D = np.zeros((len(tr), K, K), complex)
        D += 1j * w * blocks
        D[:, np.arange(K), np.arange(K)] += R_sub[tr_idx]
        Dinv = np.linalg.inv(D)
        y_tr = Dinv.sum(axis=2)  # D^-1 1, (m, K)
        s_tr = y_tr.sum(axis=1)  # 1^T D^-1 1
        dv = R_sub[sb.first[vias]] + 1j * w * via_self  # 1x1 blocks

        def block_solve(g, fvals):
            """Per-segment solve of D_s I_s - 1 V_s = g_s, 1^T I_s = f_s."""
            I = np.empty(N, complex)
            V = np.empty(n, complex)
            gt = g[tr_idx]
            x = np.einsum("mkl,ml->mk", Dinv, gt)
            Vt = (fvals[tr] - x.sum(axis=1)) / s_tr
            I[tr_idx] = x + y_tr * Vt[:, None]
            V[tr] = Vt
            if len(vias):
                gv = g[sb.first[vias]]
                I[sb.first[vias]] = fvals[vias]
                V[vias] = dv * fvals[vias] - gv
            return I, V

        zero_f = np.zeros(n)
        I0, _ = block_solve(np.zeros(N, complex), fr.astype(complex))
        Cw = C * (1j * w)

        def matvec(x):  # (Id - B0(-C .)) x, with B0 the per-segment solve for zero net current
            return x - block_solve(-(Cw @ x), zero_f)[0]

        op = LinearOperator((N, N), matvec=matvec, dtype=complex)
        count = [0]

        def cb(_):
            count[0] += 1

        I, info = gmres(op, I0, x0=I0, rtol=rtol, atol=0.0, restart=60, maxiter=2000, callback=cb,
                        callback_type="pr_norm")
        if info != 0:
            raise SpecError(f"impedance: the current distribution did not converge at {fk:g} Hz (GMRES info {info})")
        _, V = block_solve(-(Cw @ I), fr.astype(complex))
        Z.append(complex(np.sum(fr * V)) + 1j * w * (L_static - L_near_uniform))
        iters.append(count[0])
        kept.append(I)
    Z = np.array(Z)
    with np.errstate(divide="ignore", invalid="ignore"):
        L = np.where(f > 0, Z.imag / (2 * np.pi * f), L_static)
    return ImpedanceResult(
        freq_hz=f,
        impedance_ohm=Z,
        inductance_h=L,
        resistance_ohm=Z.real.copy(),
        inductance_dc_h=L_static,
        resistance_dc_ohm=R_dc,
        cross_section=(nw, nt),
        layers=labels,
        matrix_dc_h=0.5 * (Mdc + Mdc.T),
        segments=n,
        iterations=tuple(iters),
        currents=np.array(kept) if keep_currents else None,
        subbars=dict(segment=sb.owner, offset_m=np.column_stack([sb.y + sb.w / 2, sb.z + sb.t / 2]),
                     size_m=np.column_stack([sb.w, sb.t])) if keep_currents else None,
    )
