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
Near pairs (closer than ``near`` x the longer segment or 12 trace widths)
    Parallel traces: the exact Hoer & Love mutual inductance of the two
    bars. Other pairs: Neumann's formula between filaments in closed form
    (:func:`~tracecoil.physics.kernels.filament_mutual`), averaged over a
    Gauss-Legendre grid of filaments across the width and the thickness of
    both bars. The grid is finest (``filaments`` across the width) for
    touching pairs and coarsens with distance (2 points up to 12 widths,
    then 1); this is the discretisation that ``filaments`` refines.
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

import math
import time
from dataclasses import dataclass, field as dc_field

import numpy as np
from scipy.spatial import cKDTree

from ..errors import SpecError
from . import kernels
from .conductors import Conductors, conductors
from .kernels import K_MU

__all__ = [
    "METHODS",
    "InductanceResult",
    "inductance",
    "mutual_inductance",
    "coupling",
    "partial_matrix",
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


def _near_pairs(ga: _Geo, gb: _Geo, same: bool, filaments: int):
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
    ra = np.maximum((NEAR_LENGTHS + 1.0) * ga.l, nwid * wmax + ga.l)
    rb = np.maximum((NEAR_LENGTHS + 1.0) * gb.l, nwid * wmax + gb.l)
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
    lw = np.where(ga.via[i] & gb.via[j], 0.0, np.maximum(np.where(ga.via[i], 0, ga.w[i]), np.where(gb.via[j], 0, gb.w[j])))
    lim = np.maximum(NEAR_LENGTHS * np.maximum(ga.l[i], gb.l[j]), nwid * lw)
    dm = np.linalg.norm(ma[i] - mb[j], axis=1)
    keep = dm < lim + 0.5 * (ga.l[i] + gb.l[j])
    i, j, lim = i[keep], j[keep], lim[keep]
    d = kernels.segment_distance(ga.a[i], ga.b[i], gb.a[j], gb.b[j])
    keep = d < lim
    return i[keep], j[keep], d[keep]


def _orders(dist, size, finest):
    """Gauss-Legendre points across one cross-section dimension for a pair.

    ``finest`` points for touching pairs, ceil(1.5 finest size / dist)
    otherwise: with finest = 4, two points up to 6 sizes away, then one.
    Doubling ``finest`` doubles both the resolution and the reach.
    """
    with np.errstate(divide="ignore"):
        n = np.ceil(1.5 * finest * size / dist)
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
    for s0 in range(0, len(i), step):
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


def _bulk_points(g: _Geo):
    x, w = kernels.gauss_legendre(BULK_ORDER)
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


def partial_matrix(coil_a, coil_b=None, *, filaments=DEFAULT_FILAMENTS):
    """Grouped double sum of f_i f_j M_ij (H) between layers.

    With one coil: the inductance split by layer groups (self terms
    included). With two coils: the mutual inductance split by the layer
    groups of each (no self terms).

    Parameters
    ----------
    coil_a, coil_b : Coil or Conductors
    filaments : int
        Gauss-Legendre filaments across the width of touching segments.

    Returns
    -------
    matrix : ndarray, shape (ga, gb)
        Grouped sums (H).
    labels_a, labels_b : tuple of str
        Group labels.
    """
    filaments = _check_filaments(filaments)
    same = coil_b is None
    cda = _segments(coil_a)
    cdb = cda if same else _segments(coil_b)
    grp_a, lab_a = _groups(cda, coil_a)
    grp_b, lab_b = (grp_a, lab_a) if same else _groups(cdb, coil_b)
    ga = _Geo.of(cda)
    gb = ga if same else _Geo.of(cdb)
    nga, ngb = len(lab_a), len(lab_b)

    # far field: every pair by the bulk rule
    pa, ja = _bulk_points(ga)
    pb, jb = (pa, ja) if same else _bulk_points(gb)
    q = pa.shape[1]
    E = kernels.pair_energy(pa.reshape(-1, 3), ja.reshape(-1, 3), np.repeat(grp_a, q), nga,
                            **({} if same else dict(x2=pb.reshape(-1, 3), j2=jb.reshape(-1, 3),
                                                    groups2=np.repeat(grp_b, q), n_groups2=ngb)))
    M = K_MU * E

    # near pairs: replace the bulk value with the accurate one
    i, j, dist = _near_pairs(ga, gb, same, filaments)
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
    return M, lab_a, lab_b


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
        from .impedance import impedance as _imp  # noqa: PLC0415  (AC solver)

        return _imp(coil, freq_hz, filaments=filaments, **ac_options)
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
