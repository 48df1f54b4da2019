"""Parasitic capacitance of a coil: an energy-equivalent estimate.

The coil's self-capacitance is the single capacitor across its terminals
that stores the same electric energy as the winding does when the terminal
voltage is V:

    C_eq = sum over pairs of C_pair * (dV_pair / V)^2.

Voltage distribution
    The potential is taken to fall linearly with centreline length along
    the current path from terminal A (1) to terminal B (0), the common
    assumption for windings well below self-resonance (common practice).
    Parallel branches share their end potentials: node potentials come
    from the path network (:func:`tracecoil.physics.resistance.path_network`)
    with each trace weighted by its length.

Turn to turn, on one layer
    Each short piece of trace looks across its normal, on both sides, for
    the nearest roughly parallel trace on the same layer (within 30
    degrees). The pair is treated locally as coplanar strips of edge gap
    s and width w (the mean of the two widths), with capacitance per length
    C' = eps0 * eps_eff * K(k') / K(k), k = s / (s + 2 w), k' = sqrt(1 - k^2)
    (K. C. Gupta, R. Garg, I. Bahl, P. Bhartia, *Microstrip Lines and
    Slotlines*, 2nd ed., 1996, ch. 7; C. P. Wen, IEEE Trans. MTT 17, 1969;
    from memory). Every pair is found from both sides, so each counts half.
    eps_eff is (eps_r + 1) / 2 on an outer layer: exact for zero-thickness
    strips on a dielectric half-space, a fair approximation when the
    dielectric under the layer is thicker than the strip pair is wide
    (s + 2 w); eps_r on inner layers (dielectric on both sides). Solder mask,
    copper thickness and the screening by further turns are ignored.
Layer to layer
    Copper of consecutive used layers overlaps through the dielectric
    between them; each overlapping patch (shapely intersection of the two
    layers' traces, each buffered by half its width) is a parallel-plate
    capacitor eps0 eps_r A / d, d the dielectric thickness between the
    copper faces. For fringing, each trace is first widened on each side by
    the edge allowance of Palmer's two-plate formula, C' = eps w / d *
    [1 + d / (pi w) * (1 + ln(2 pi w / d))] (H. B. Palmer, "The capacitance
    of a parallel-plate capacitor by the Schwartz-Christoffel
    transformation", Trans. AIEE 56, 1937; from memory), clipped to
    0..d and never past half the gap to the next turn: a thin dielectric
    gives nearly the bare copper overlap, and a dense winding over a thick
    dielectric becomes a uniform charged sheet. Layers that are not
    consecutive among the used layers are taken as screened by the copper
    between them.

Expected accuracy: an estimate, typically within +-30-50 % of a
measured or field-solved self-capacitance (common practice for lumped
energy-equivalent models); the self-resonant frequency, which goes as
C^-1/2, then within about +-15-30 %.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from scipy.special import ellipkm1

from ..errors import SpecError
from .materials import EPS0
from .resistance import path_elements, path_network, step_sums

PARALLEL_COS = np.cos(np.deg2rad(30.0))
MAX_GAP_OVER_WIDTH = 10.0  # neighbours further than this many widths are ignored

# ----------------------------------------------------------------------------
# kernels (SI, arrays)
# ----------------------------------------------------------------------------


def elliptic_ratio(k, kp2=None):
    """K(k') / K(k) for modulus k, k' = sqrt(1 - k^2).

    Uses scipy's ``ellipkm1`` (which takes the complementary parameter
    p = 1 - m, m = k^2) for both integrals, so neither k -> 0 nor k -> 1
    loses digits.

    Parameters
    ----------
    k : ndarray
        Modulus in (0, 1).
    kp2 : ndarray or None
        k'^2 = 1 - k^2 if known without cancellation.

    Returns
    -------
    ndarray
        The ratio, same shape as ``k``.

    >>> round(float(elliptic_ratio(np.sqrt(0.5))), 12)
    1.0
    """
    k = np.asarray(k, dtype=float)
    kp2 = 1.0 - k * k if kp2 is None else np.asarray(kp2, dtype=float)
    return ellipkm1(k * k) / ellipkm1(kp2)


def coplanar_strips_capacitance(gap_m, width_m, eps_eff=1.0):
    """Capacitance per unit length between two coplanar strips (F/m).

    C' = eps0 * eps_eff * K(k') / K(k), k = s / (s + 2 w): two strips of
    zero thickness and width w, edge gap s (Gupta et al., *Microstrip Lines
    and Slotlines*, 2nd ed., 1996; Wen 1969; from memory). With eps_eff = 1
    this is the exact free-space result of conformal mapping.

    Parameters
    ----------
    gap_m, width_m : ndarray
        Edge-to-edge gap s and strip width w (m), broadcast together.
    eps_eff : float or ndarray
        Effective relative permittivity.

    Returns
    -------
    ndarray
        Capacitance per length (F/m).

    >>> round(float(coplanar_strips_capacitance(0.2e-3, 0.2e-3, 2.75)) * 1e12, 2)
    27.08
    """
    s = np.asarray(gap_m, dtype=float)
    w = np.asarray(width_m, dtype=float)
    k = s / (s + 2.0 * w)
    kp2 = 4.0 * w * (s + w) / (s + 2.0 * w) ** 2
    return EPS0 * np.asarray(eps_eff, dtype=float) * elliptic_ratio(k, kp2)


def parallel_plate_capacitance(area_m2, distance_m, eps_r):
    """eps0 eps_r A / d (F), no fringing.

    >>> round(float(parallel_plate_capacitance(1e-4, 1e-3, 4.5)) * 1e12, 3)
    3.985
    """
    return EPS0 * np.asarray(eps_r, dtype=float) * np.asarray(area_m2, dtype=float) / np.asarray(distance_m, dtype=float)


def palmer_edge_extension(width, distance):
    """Width to add on each edge of a parallel-plate strip for fringing.

    From Palmer's formula for two plates of width w at distance d,
    C' = eps w / d [1 + d / (pi w) (1 + ln(2 pi w / d))] (Palmer, Trans.
    AIEE 56, 1937; from memory): the added width per edge is
    d / (2 pi) (1 + ln(2 pi w / d)), clipped to 0..d because the formula
    is meant for w >~ d and turns negative for very narrow plates.

    Parameters
    ----------
    width, distance : ndarray
        Plate width and distance (any one length unit), broadcast.

    Returns
    -------
    ndarray
        Added width per edge, same unit.

    >>> round(float(palmer_edge_extension(1.0, 0.1)), 4)
    0.0818
    """
    w = np.asarray(width, dtype=float)
    d = np.asarray(distance, dtype=float)
    ext = d / (2.0 * np.pi) * (1.0 + np.log(2.0 * np.pi * w / d))
    return np.clip(ext, 0.0, d)


def nearest_parallel_hits(points, normals, tangents, seg_a, seg_b, *, max_distance):
    """Nearest segment hit by a ray along +normal and along -normal.

    For every point p with unit normal n, the rays p + t n and p - t n
    (0 < t <= ``max_distance``) are intersected with the segments a -> b
    whose direction is within 30 degrees of the point's tangent; the
    nearest hit on each side is returned. Candidate segments come from a
    spatial index (shapely STRtree) of the segments the rays cross, so the
    work grows with the number of neighbours, not with n * m.

    Parameters
    ----------
    points, normals, tangents : ndarray, shape (n, 2)
        Ray origins and unit normal and tangent vectors (any length unit).
    seg_a, seg_b : ndarray, shape (m, 2)
        Segment ends, same unit.
    max_distance : float
        Longest ray, same unit.

    Returns
    -------
    dist : ndarray, shape (n, 2)
        Distance to the hit on the + and - side (inf when none). A hit at
        distance 0 (the point's own segment) never counts.
    seg : ndarray of int, shape (n, 2)
        Index of the segment hit (-1 when none).
    u : ndarray, shape (n, 2)
        Position of the hit along that segment, 0 at ``seg_a``, 1 at ``seg_b``.

    >>> p = np.array([[0.0, 0.0]]); n = np.array([[0.0, 1.0]]); t = np.array([[1.0, 0.0]])
    >>> a = np.array([[-1.0, 2.0], [-1.0, -3.0]]); b = np.array([[1.0, 2.0], [1.0, -3.0]])
    >>> dist, seg, u = nearest_parallel_hits(p, n, t, a, b, max_distance=5.0)
    >>> dist.tolist(), seg.tolist(), u.tolist()
    ([[2.0, 3.0]], [[0, 1]], [[0.5, 0.5]])
    """
    p = np.asarray(points, float)
    nrm = np.asarray(normals, float)
    tan = np.asarray(tangents, float)
    a = np.asarray(seg_a, float)
    d = np.asarray(seg_b, float) - a
    seg_len = np.hypot(d[:, 0], d[:, 1])
    n = len(p)
    dist = np.full((n, 2), np.inf)
    seg = np.full((n, 2), -1, dtype=int)
    u_out = np.zeros((n, 2))
    if len(a) == 0 or n == 0:
        return dist, seg, u_out
    # Candidate pairs: segments the ray's full extent crosses (shapely STRtree).
    rays = shapely.linestrings(np.stack([p - max_distance * nrm, p + max_distance * nrm], axis=1))
    tree = shapely.STRtree(shapely.linestrings(np.stack([a, a + d], axis=1)))
    i, j = tree.query(rays, predicate="intersects")
    dj = d[j]
    parallel = np.abs(tan[i, 0] * dj[:, 0] + tan[i, 1] * dj[:, 1]) >= PARALLEL_COS * seg_len[j]
    i, j, dj = i[parallel], j[parallel], dj[parallel]
    ap = a[j] - p[i]
    den = nrm[i, 0] * dj[:, 1] - nrm[i, 1] * dj[:, 0]  # cross(n, d), nonzero when parallel
    t = (ap[:, 0] * dj[:, 1] - ap[:, 1] * dj[:, 0]) / den
    u = (ap[:, 0] * nrm[i, 1] - ap[:, 1] * nrm[i, 0]) / den
    eps = 1e-9 * float(seg_len.max())
    ok = (u >= 0.0) & (u <= 1.0)
    for side, sign in enumerate((1.0, -1.0)):
        m = ok & (sign * t > eps) & (sign * t <= max_distance)
        ii, tt, jj, uu = i[m], sign * t[m], j[m], u[m]
        order = np.lexsort((tt, ii))  # by point, then by distance
        ii, tt, jj, uu = ii[order], tt[order], jj[order], uu[order]
        first = np.ones(len(ii), dtype=bool)
        first[1:] = ii[1:] != ii[:-1]
        dist[ii[first], side] = tt[first]
        seg[ii[first], side] = jj[first]
        u_out[ii[first], side] = uu[first]
    return dist, seg, u_out


# ----------------------------------------------------------------------------
# coil level
# ----------------------------------------------------------------------------


@dataclass(frozen=True)
class CapacitanceEstimate:
    """Energy-equivalent parasitic capacitance of a coil.

    Attributes
    ----------
    total_f : float
        Equivalent capacitance across the terminals (F).
    turn_to_turn_f : dict
        {layer: F} the same-layer (coplanar) part per copper layer.
    layer_to_layer_f : dict
        {(upper, lower): F} the overlap part per pair of consecutive used
        layers.
    overlap_area_mm2 : dict
        {(upper, lower): mm^2} overlapping area of each pair, copper widened
        by the fringing allowance.
    notes : tuple of str
        Model statements and accuracy.
    """

    total_f: float
    turn_to_turn_f: dict = field(default_factory=dict)
    layer_to_layer_f: dict = field(default_factory=dict)
    overlap_area_mm2: dict = field(default_factory=dict)
    notes: tuple = ()


@dataclass(frozen=True)
class _Pieces:
    """Short pieces of the coil's traces (mm) with their potentials."""

    layer: np.ndarray  # (n,)
    a: np.ndarray  # (n, 2) piece start
    b: np.ndarray  # (n, 2) piece end
    width: np.ndarray  # (n,)
    va: np.ndarray  # (n,) potential at a (fraction of the terminal voltage)
    vb: np.ndarray  # (n,) potential at b
    trace: np.ndarray  # (n,) index of the trace the piece belongs to


def trace_potentials(coil) -> dict:
    """Potential at both ends of every trace on the path, as a fraction of
    the terminal voltage (A = 1, B = 0), linear in centreline length.

    Returns
    -------
    dict
        {trace index: (v_start, v_end)}.
    """
    e = path_elements(coil)
    net = path_network(coil, e)
    length = step_sums(e, np.where(e.kind == "trace", e.length_m, 0.0))
    # Vias carry no length in this model; a tiny weight keeps the network regular.
    length = np.maximum(length, 1e-9 * max(float(length.sum()), 1e-12))
    r, _, v = net.solve(length)
    v = v / r
    out = {}
    for k, s in enumerate(net.step):
        step = coil.path[s]
        if step.kind == "trace":
            out[step.index] = (float(v[net.edge_i[k]]), float(v[net.edge_j[k]]))
    return out


def _pieces(coil, spacing_mm) -> _Pieces:
    pots = trace_potentials(coil)
    rows = []
    for ti, (v0, v1) in pots.items():
        tr = coil.traces[ti]
        p = tr.points_mm
        seg = np.hypot(*np.diff(p, axis=0).T)
        cum = np.concatenate([[0.0], np.cumsum(seg)])
        total = cum[-1]
        if total <= 0:
            continue
        n_sub = np.maximum(1, np.ceil(seg / spacing_mm).astype(int))
        idx = np.repeat(np.arange(len(seg)), n_sub)
        frac0 = np.concatenate([np.arange(m) / m for m in n_sub])
        frac1 = np.concatenate([np.arange(1, m + 1) / m for m in n_sub])
        a = p[idx] + (p[idx + 1] - p[idx]) * frac0[:, None]
        b = p[idx] + (p[idx + 1] - p[idx]) * frac1[:, None]
        s0 = cum[idx] + seg[idx] * frac0
        s1 = cum[idx] + seg[idx] * frac1
        keep = s1 > s0
        rows.append(
            (
                np.full(keep.sum(), tr.layer),
                a[keep],
                b[keep],
                np.full(keep.sum(), tr.width_mm),
                v0 + (v1 - v0) * s0[keep] / total,
                v0 + (v1 - v0) * s1[keep] / total,
                np.full(keep.sum(), ti),
            )
        )
    cols = [np.concatenate(c) for c in zip(*rows)]
    return _Pieces(*cols)


def effective_permittivity(stackup, layer: int) -> float:
    """eps_eff for coplanar strips on ``layer``: (eps_r + 1) / 2 on an outer
    layer (air on one side), eps_r on an inner layer."""
    er = stackup.permittivity
    if layer in (1, stackup.n_layers):
        return (er + 1.0) / 2.0
    return er


def _default_spacing(coil) -> float:
    widths = [t.width_mm for t in coil.traces]
    total = sum(t.length_mm for t in coil.traces)
    # Pieces of about half a trace width, at most ~15k pieces in all.
    return max(0.5 * min(widths), total / 15000.0)


def capacitance(coil, *, spacing_mm: float | None = None) -> CapacitanceEstimate:
    """Energy-equivalent parasitic capacitance across the terminals.

    See the module docstring for the model, its assumptions and its
    expected accuracy (+-30-50 %).

    Parameters
    ----------
    coil : tracecoil.layout.Coil
    spacing_mm : float or None
        Length of the trace pieces the estimate resolves (mm); default
        half the narrowest trace width, coarser for very long windings.

    Returns
    -------
    CapacitanceEstimate
    """
    if spacing_mm is None:
        spacing_mm = _default_spacing(coil)
    if not (np.isfinite(spacing_mm) and spacing_mm > 0):
        raise SpecError(f"spacing_mm must be a positive length; got {spacing_mm!r}")
    pc = _pieces(coil, spacing_mm)
    st = coil.stackup
    t2t = {}
    gaps = np.full((len(pc.layer), 2), np.inf)
    used = sorted(set(pc.layer.tolist()))
    for layer in used:
        on = pc.layer == layer
        t2t[layer], gaps[on] = _turn_to_turn(pc, on, effective_permittivity(st, layer))
    l2l, areas = {}, {}
    for up, lo in zip(used[:-1], used[1:]):
        d_mm = abs(st.z_mm(up) - st.z_mm(lo)) - (st.copper_um[up - 1] + st.copper_um[lo - 1]) / 2000.0
        l2l[(up, lo)], areas[(up, lo)] = _overlap(pc, gaps, up, lo, d_mm, st.permittivity)
    total = sum(t2t.values()) + sum(l2l.values())
    notes = (
        "capacitance: energy-equivalent estimate with potential linear along the winding; "
        "expected accuracy +-30-50 %",
        "turn-to-turn: coplanar strips (Gupta et al. 1996), eps_eff (eps_r+1)/2 on outer layers, "
        "solder mask ignored",
        "layer-to-layer: parallel plate on overlapping copper, widened for fringing "
        "(Palmer 1937 edge allowance, at most half the gap to the next turn)",
    )
    return CapacitanceEstimate(float(total), t2t, l2l, areas, notes)


def _turn_to_turn(pc: _Pieces, on: np.ndarray, eps_eff: float):
    """Coplanar-strip energy of one layer's pieces (``on`` selects them).

    Returns the capacitance (F) and the edge gap to the nearest parallel
    neighbour on each side of every piece (mm, inf when none), shape (n, 2).
    """
    a, b, w = pc.a[on], pc.b[on], pc.width[on]
    va, vb = pc.va[on], pc.vb[on]
    vec = b - a
    length = np.hypot(vec[:, 0], vec[:, 1])
    tan = vec / length[:, None]
    nrm = np.stack([-tan[:, 1], tan[:, 0]], axis=1)
    mid = 0.5 * (a + b)
    vmid = 0.5 * (va + vb)
    reach = float(w.max()) * (1.0 + MAX_GAP_OVER_WIDTH)
    dist, seg, u = nearest_parallel_hits(mid, nrm, tan, a, b, max_distance=reach)
    gaps = np.full(dist.shape, np.inf)
    total = 0.0
    for side in range(2):
        hit = np.nonzero(seg[:, side] >= 0)[0]
        j = seg[hit, side]
        wm = 0.5 * (w[hit] + w[j])
        gap = dist[hit, side] - wm
        ok = (gap > 0) & (gap <= MAX_GAP_OVER_WIDTH * wm)
        hit, j, wm, gap = hit[ok], j[ok], wm[ok], gap[ok]
        gaps[hit, side] = gap
        v_hit = va[j] + (vb[j] - va[j]) * u[hit, side]
        c_len = coplanar_strips_capacitance(gap * 1e-3, wm * 1e-3, eps_eff)
        dv = vmid[hit] - v_hit
        # Each pair is seen from both of its pieces: half weight.
        total += 0.5 * float(np.sum(c_len * length[hit] * 1e-3 * dv**2))
    return total, gaps


def _overlap(pc: _Pieces, gaps, up: int, lo: int, d_mm: float, eps_r: float, group: int = 8):
    """Parallel-plate energy of the overlap of two layers' copper.

    Each trace is widened on each side by Palmer's edge allowance
    (:func:`palmer_edge_extension`), but never past half the edge gap to
    the neighbouring turn (``gaps``, shape (n, 2), mm), so neighbours'
    areas never overlap and a dense winding over a thick dielectric becomes
    a uniform sheet. Runs of ``group`` consecutive pieces of a trace become one buffered
    polyline (the potential varies by well under 1 % of the terminal
    voltage along a run), keeping the number of shapely intersections low.
    """

    def polys(layer):
        idx = np.nonzero(pc.layer == layer)[0]
        tr = pc.trace[idx]
        # Runs never cross from one trace to the next.
        start = np.ones(len(idx), dtype=bool)
        start[1:] = tr[1:] != tr[:-1]
        local = np.arange(len(idx)) - np.maximum.accumulate(np.where(start, np.arange(len(idx)), 0))
        new_run = start | (local % group == 0)
        run = np.cumsum(new_run) - 1
        last = np.ones(len(idx), dtype=bool)
        last[:-1] = new_run[1:]
        # Vertices: every piece's start, plus the end of each run's last piece.
        coords = np.concatenate([pc.a[idx], pc.b[idx[last]]])
        owner = np.concatenate([run, run[last]])
        order = np.concatenate([np.arange(len(idx)), np.nonzero(last)[0] + 0.5])
        srt = np.lexsort((order, owner))
        lines = shapely.linestrings(coords[srt], indices=owner[srt])
        n_run = run[-1] + 1
        edge = palmer_edge_extension(pc.width[idx], d_mm)[:, None]
        fringe = np.minimum(0.5 * gaps[idx], edge).sum(axis=1)
        width = np.bincount(run, weights=pc.width[idx] + fringe, minlength=n_run) / np.bincount(run, minlength=n_run)
        vsum = np.bincount(run, weights=0.5 * (pc.va[idx] + pc.vb[idx]), minlength=n_run)
        vmid = vsum / np.bincount(run, minlength=n_run)
        return shapely.buffer(lines, width / 2, cap_style="flat", join_style="mitre"), vmid

    pu, vu = polys(up)
    pl, vl = polys(lo)
    tree = shapely.STRtree(pl)
    iu, il = tree.query(pu, predicate="intersects")
    if len(iu) == 0:
        return 0.0, 0.0
    area_mm2 = shapely.area(shapely.intersection(pu[iu], pl[il]))
    c = parallel_plate_capacitance(area_mm2 * 1e-6, d_mm * 1e-3, eps_r)
    return float(np.sum(c * (vu[iu] - vl[il]) ** 2)), float(area_mm2.sum())
