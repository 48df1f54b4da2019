"""Geometric rule checks on the copper polygons themselves (millimetres).

Width and gap
-------------
Both are measured between pairs of boundary edges of the copper polygons
that *face* each other, the way layout rule checkers do it:

* every boundary edge of a layer's copper gets a unit normal pointing into
  the copper (exterior rings are walked counter-clockwise, holes
  clockwise, so the copper is always on the left);
* for a **width** pair both normals point into the copper between the two
  edges; for a **gap** pair both point away, into the space between them;
  pairs between any two pieces of copper count, so adjacent turns of one
  connected spiral polygon are checked like any other two conductors;
* two edges face each other when their normals differ by more than
  ``180 - IGNORE_ANGLE_DEG`` degrees (edges meeting at a corner of 80
  degrees or more -- the convex corners of a square spiral, the inside
  corners where a lead joins a turn -- are corners, not narrow places) and
  each edge's part that lies in front of the other, within the other's
  extent along its length, has non-zero length (the *projection* metric);
* the distance of a facing pair is the smallest distance between those
  two parts. A pair closer than the limit is a violation;
* when both edges belong to one ring, the middles of the two facing parts
  must also lie more than ``PATH_FACTOR`` (3) times their distance apart
  along the ring, the short way round. Otherwise they are the two sides of
  one corner (a lead joining its own turn at an angle, a polyline bend
  next to it), not a narrow place. A wedge of space or copper sharper than
  about 39 degrees (2 asin(1/3)) still counts, with a distance of 0: it is
  narrower than the limit over a length of several limits, which the etch
  cannot make reliably.

Like any projection-metric check, this does not measure between two
corners whose edges do not overlap in projection (two rectangles offset
diagonally); round ends and pads are many short chords, and those are
measured. Notches shallower than about twice their width count as
corners.

Candidate pairs come from an R-tree of edge bounding boxes grown by the
largest limit. Pairs that break a rule are cut down to the stretch that
breaks it and grouped into location clusters along the copper boundary
(parts that overlap on an edge or continue onto the next edge join; see
:func:`cluster_pairs`), and each cluster gives one finding: its smallest
distance, where it was measured and the two points measured between.

Why not morphological opening and closing? ``buffer(-w/2).buffer(+w/2)``
compared with the original does find narrow copper, but it also reports
every convex corner (and closing every concave one), which must then be
measured anyway; GEOS simplifies buffer input by a fraction of the buffer
distance (1 %, from memory of its buffer parameters), which is 1 um at
w = 0.2 mm, the size of the defects the check must catch; and on a 30-turn
circular spiral at the gap limit the closing pinches into thousands of
slivers and took 0.5-0.7 s per layer against about 0.03 s for the edge
pairs (measured on the 2-core development machine). The edge-pair
distances are exact on the polygons; the tests use opening and closing as
a second route to where the findings must lie.

Floating point: a value passes when ``measured >= limit - LIMIT_TOL_MM``
(0.1 um), so a layout drawn exactly at a limit passes although its
coordinates carry rounding errors of ~1e-12 mm, and one 1 um under the
limit fails.

Polygons approximate curves with chords (``Outlines.tolerance_mm``); a
chord lies inside its arc, so a round pad looks up to that much smaller and
a gap to it up to that much larger. Check at a fine tolerance
(:func:`tracecoil.rules.check` rebuilds outlines at 0.1 um) when designing
at a limit. The annular ring treats chords whose ends lie on one circle
about the hole centre, with sag within the outline tolerance, as arcs, so a
ring drawn exactly at the limit passes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree
from shapely.geometry import Point, Polygon

from ..outline import as_multipolygon
from .findings import Finding

LIMIT_TOL_MM = 1e-4  # a measured value passes when >= limit - 0.1 um
IGNORE_ANGLE_DEG = 80.0  # edges meeting at this angle or more are a corner, not a pair
_COS_IGNORE = math.cos(math.radians(IGNORE_ANGLE_DEG))
PATH_FACTOR = 3.0  # same-ring points closer along the boundary than 3x their distance form a corner
_MIN_OVERLAP_MM = 1e-9  # facing parts shorter than this are a shared point
ON_HOLE_TOL_MM = 1e-4  # an edge lies on a hole when both ends are this close to its circle
_POINT_MM = 1e-6  # a measured width or gap this small is a point: a spike, a wedge or a touch
_LINK_MM = 1e-3  # offending parts this close along an edge belong to one place
_CHUNK = 200_000  # candidate pairs per numpy block (about 30 MB of temporaries)


@dataclass(frozen=True)
class Edges:
    """Boundary edges of one layer's copper.

    ``p0``, ``p1``: (n, 2) edge ends (mm), copper on the left of p0 -> p1;
    ``normal``: (n, 2) unit normals into the copper; ``polygon``: (n,)
    index of the polygon each edge bounds; ``on_hole``: (n,) True for edges
    on the circle of a drilled hole; ``ring``: (n,) index of the ring;
    ``s0``: (n,) length along the ring at p0; ``ring_length``: (n,) length
    of the edge's ring (mm).
    """

    p0: np.ndarray
    p1: np.ndarray
    normal: np.ndarray
    polygon: np.ndarray
    on_hole: np.ndarray
    ring: np.ndarray
    s0: np.ndarray
    ring_length: np.ndarray

    def __len__(self) -> int:
        return len(self.p0)


def boundary_edges(geom, drills=None) -> Edges:
    """The boundary edges of ``geom`` (a shapely (Multi)Polygon, mm).

    ``drills``: (m, 3) x, y, diameter of drilled holes; edges whose two ends
    lie on a hole circle are marked ``on_hole`` (their checks are the
    annular ring and hole rules, not width and gap).

    >>> from shapely.geometry import box
    >>> e = boundary_edges(box(0, 0, 2, 1))
    >>> inside = (e.p0 + e.p1) / 2 + 0.1 * e.normal  # a step along each normal
    >>> len(e), all(box(0, 0, 2, 1).contains(Point(*p)) for p in inside)
    (4, True)
    """
    polys = np.asarray(list(as_multipolygon(geom).geoms), dtype=object)
    if len(polys) == 0:
        z, zi, zf = np.zeros((0, 2)), np.zeros(0, int), np.zeros(0)
        return Edges(z, z, z, zi, np.zeros(0, bool), zi, zf, zf)
    polys = shapely.orient_polygons(polys)  # exterior counter-clockwise, holes clockwise
    rings, ring_poly = shapely.get_rings(polys, return_index=True)
    xy, ring_of = shapely.get_coordinates(rings, return_index=True)
    same = ring_of[:-1] == ring_of[1:]
    p0, p1 = xy[:-1][same], xy[1:][same]
    ring = ring_of[:-1][same]
    poly = ring_poly[ring]
    d = p1 - p0
    length = np.hypot(d[:, 0], d[:, 1])
    ring_length = np.bincount(ring, weights=length, minlength=len(rings))
    first = np.searchsorted(ring, ring)  # index of each ring's first edge (edges are grouped by ring)
    cum = np.concatenate([[0.0], np.cumsum(length)])
    s0 = cum[:-1] - cum[first]
    keep = length > 0
    p0, p1, poly, d, length, ring, s0 = p0[keep], p1[keep], poly[keep], d[keep], length[keep], ring[keep], s0[keep]
    ring_length = ring_length[ring]
    normal = np.stack([-d[:, 1], d[:, 0]], axis=1) / length[:, None]
    on_hole = np.zeros(len(p0), bool)
    drills = np.asarray(drills if drills is not None else np.zeros((0, 3)), float).reshape(-1, 3)
    if len(drills) and len(p0):
        tree = cKDTree(drills[:, :2])
        d0, k0 = tree.query(p0)
        d1, k1 = tree.query(p1)
        r0, r1 = drills[k0, 2] / 2, drills[k1, 2] / 2
        on_hole = (np.abs(d0 - r0) <= ON_HOLE_TOL_MM) & (np.abs(d1 - r1) <= ON_HOLE_TOL_MM) & (k0 == k1)
    return Edges(p0, p1, normal, poly, on_hole, ring, s0, ring_length)


def candidate_pairs(edges: Edges, reach_mm: float) -> tuple[np.ndarray, np.ndarray]:
    """Index pairs (i < j) of edges whose bounding boxes come within
    ``reach_mm`` of each other (a superset of the pairs closer than it)."""
    n = len(edges)
    if n < 2:
        return np.zeros(0, int), np.zeros(0, int)
    lines = shapely.linestrings(np.stack([edges.p0, edges.p1], axis=1))
    tree = shapely.STRtree(lines)
    lo = np.minimum(edges.p0, edges.p1) - reach_mm
    hi = np.maximum(edges.p0, edges.p1) + reach_mm
    boxes = shapely.box(lo[:, 0], lo[:, 1], hi[:, 0], hi[:, 1])
    i, j = tree.query(boxes)
    keep = i < j
    return i[keep], j[keep]


def _clip(q0, dq, a0, ta, la, na):
    """Parameter interval [lo, hi] of q0 + u*dq (u in [0, 1]) inside the
    half-slab in front of edge a: 0 <= (p - a0).ta <= la, (p - a0).na >= 0."""
    w = q0 - a0
    lo = np.zeros(len(q0))
    hi = np.ones(len(q0))
    for c, k in (
        (np.einsum("ij,ij->i", w, ta), np.einsum("ij,ij->i", dq, ta)),
        (la - np.einsum("ij,ij->i", w, ta), -np.einsum("ij,ij->i", dq, ta)),
        (np.einsum("ij,ij->i", w, na), np.einsum("ij,ij->i", dq, na)),
    ):
        with np.errstate(divide="ignore", invalid="ignore"):
            u = -c / k
        lo = np.where(k > 0, np.maximum(lo, u), lo)
        hi = np.where(k < 0, np.minimum(hi, u), hi)
        hi = np.where((k == 0) & (c < 0), -1.0, hi)
    return lo, hi


def _point_segment(p, s0, s1):
    v = s1 - s0
    vv = np.einsum("ij,ij->i", v, v)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(vv > 0, np.einsum("ij,ij->i", p - s0, v) / vv, 0.0)
    q = s0 + np.clip(t, 0.0, 1.0)[:, None] * v
    return np.hypot(*(p - q).T), q


def facing_pairs(edges: Edges, i, j, *, side: int):
    """Distances of the facing edge pairs among candidates ``(i, j)``.

    Parameters
    ----------
    edges : Edges
    i, j : ndarray of int, shape (k,)
    side : {+1, -1}
        +1 measures across copper (width), -1 across space (gap).

    Returns
    -------
    keep : ndarray of bool, shape (k,)
        Which candidates face each other.
    dist : ndarray, shape (k,)
        Distance between the facing parts (mm); inf where not facing.
    pa, pb : ndarray, shape (k, 2)
        The closest points on edge i and edge j.
    quad : ndarray, shape (k, 4, 2)
        Corners of the facing parts (a0', a1', b1', b0').
    """
    n = edges.normal * side
    a0, a1, b0, b1 = edges.p0[i], edges.p1[i], edges.p0[j], edges.p1[j]
    na, nb = n[i], n[j]
    da, db = a1 - a0, b1 - b0
    la, lb = np.hypot(*da.T), np.hypot(*db.T)
    ta, tb = da / la[:, None], db / lb[:, None]
    keep = np.einsum("ij,ij->i", na, nb) < -_COS_IGNORE
    keep &= ~(edges.on_hole[i] | edges.on_hole[j])
    lo_b, hi_b = _clip(b0, db, a0, ta, la, na)
    lo_a, hi_a = _clip(a0, da, b0, tb, lb, nb)
    keep &= ((hi_b - lo_b) * lb > _MIN_OVERLAP_MM) & ((hi_a - lo_a) * la > _MIN_OVERLAP_MM)
    A0, A1 = a0 + lo_a[:, None] * da, a0 + hi_a[:, None] * da
    B0, B1 = b0 + lo_b[:, None] * db, b0 + hi_b[:, None] * db
    cands = [
        (*_point_segment(A0, B0, B1), A0),
        (*_point_segment(A1, B0, B1), A1),
        (*_point_segment(B0, A0, A1), B0),
        (*_point_segment(B1, A0, A1), B1),
    ]
    dist = np.stack([c[0] for c in cands])
    k = np.argmin(dist, axis=0)
    rows = np.arange(len(i))
    d = dist[k, rows]
    on_other = np.stack([c[1] for c in cands])[k, rows]
    own = np.stack([c[2] for c in cands])[k, rows]
    from_a = k < 2
    pa = np.where(from_a[:, None], own, on_other)
    pb = np.where(from_a[:, None], on_other, own)
    # Same ring: the two points must be far apart along the boundary, or
    # they are the two sides of a corner, not a narrow place.
    # Judged at the middles of the two facing parts: at a sharp wedge the
    # closest points meet at the apex, where both distances vanish.
    same = edges.ring[i] == edges.ring[j]
    ma, mb = (A0 + A1) / 2, (B0 + B1) / 2
    sa = edges.s0[i] + np.hypot(*(ma - a0).T)
    sb = edges.s0[j] + np.hypot(*(mb - b0).T)
    path = np.abs(sa - sb)
    path = np.minimum(path, edges.ring_length[i] - path)
    keep &= ~same | (path > PATH_FACTOR * np.hypot(*(mb - ma).T) + 1e-6)
    d = np.where(keep, d, np.inf)
    quad = np.stack([A0, A1, B1, B0], axis=1)
    return keep, d, pa, pb, quad


@dataclass
class PairScan:
    """Facing pairs of one layer closer than the scanned reach."""

    dist: np.ndarray
    pa: np.ndarray
    pb: np.ndarray
    quad: np.ndarray
    i: np.ndarray
    j: np.ndarray

    @property
    def smallest(self) -> float | None:
        return float(self.dist.min()) if len(self.dist) else None


def scan_pairs(edges: Edges, reach_mm: float) -> tuple[PairScan, PairScan]:
    """All facing width and gap pairs closer than ``reach_mm``.

    Returns (width pairs, gap pairs). Work is done in blocks of candidate
    pairs so memory stays bounded.
    """
    i_all, j_all = candidate_pairs(edges, reach_mm)
    # Most candidates are neighbours along one side; keep only edges whose
    # normals oppose (the same test for width and gap) before the rest.
    facing = np.einsum("ij,ij->i", edges.normal[i_all], edges.normal[j_all]) < -_COS_IGNORE
    facing &= ~(edges.on_hole[i_all] | edges.on_hole[j_all])
    i_all, j_all = i_all[facing], j_all[facing]
    out = {1: [], -1: []}
    for s in range(0, len(i_all), _CHUNK):
        i, j = i_all[s : s + _CHUNK], j_all[s : s + _CHUNK]
        for side in (1, -1):
            keep, d, pa, pb, quad = facing_pairs(edges, i, j, side=side)
            m = keep & (d < reach_mm)
            out[side].append((d[m], pa[m], pb[m], quad[m], i[m], j[m]))
    scans = []
    for side in (1, -1):
        parts = out[side]
        if parts:
            scans.append(PairScan(*(np.concatenate([p[k] for p in parts]) for k in range(6))))
        else:
            z2, zi = np.zeros((0, 2)), np.zeros(0, int)
            scans.append(PairScan(np.zeros(0), z2, z2, np.zeros((0, 4, 2)), zi, zi))
    return scans[0], scans[1]


def cluster_pairs(edges: Edges, i, j, a0, a1, b0, b1, link_mm: float = _LINK_MM) -> np.ndarray:
    """Cluster label of each violating pair (i, j), whose offending parts
    are a0 -> a1 on edge i and b0 -> b1 on edge j.

    Works along the copper boundary in linear time: each pair joins its
    two parts; parts on one edge that overlap (or come within ``link_mm``)
    join; a part that reaches the end of an edge joins one that starts the
    next edge of the ring. So one narrow stretch is one cluster however
    many edge pairs it spans, and two narrow places separated by a stretch
    that keeps the limit stay apart.

    >>> from shapely.geometry import box
    >>> e = boundary_edges(box(0, 0, 10, 1))
    >>> bottom, top = int(np.argmax(e.normal[:, 1])), int(np.argmin(e.normal[:, 1]))
    >>> xs = np.array([[1.0, 2.0], [1.5, 2.5], [6.0, 7.0]])  # three offending stretches along x
    >>> on = lambda y: (np.column_stack([xs[:, 0], np.full(3, y)]), np.column_stack([xs[:, 1], np.full(3, y)]))
    >>> (a0, a1), (b0, b1) = on(0.0), on(1.0)
    >>> cluster_pairs(e, np.full(3, bottom), np.full(3, top), a0, a1, b0, b1).tolist()
    [0, 0, 1]
    """
    n = len(i)
    if n == 0:
        return np.zeros(0, int)
    node_edge = np.concatenate([i, j])
    starts = np.concatenate([a0, b0])
    ends = np.concatenate([a1, b1])
    p0 = edges.p0[node_edge]
    vec = edges.p1[node_edge] - p0
    length = np.hypot(*vec.T)
    u0 = np.einsum("ij,ij->i", starts - p0, vec) / length**2
    u1 = np.einsum("ij,ij->i", ends - p0, vec) / length**2
    lo, hi = np.clip(np.minimum(u0, u1), 0, 1), np.clip(np.maximum(u0, u1), 0, 1)
    tol = link_mm / length
    rows = [np.arange(n)]
    cols = [np.arange(n) + n]  # the two parts of one pair
    # overlapping parts on one edge: sort by (edge, start), sweep the running end
    order = np.lexsort((lo, node_edge))
    e_s, lo_s, hi_s, tol_s = node_edge[order], lo[order], hi[order], tol[order]
    run = np.maximum.accumulate(hi_s + 2.0 * e_s)  # offsets keep edges apart: parts lie in [0, 1]
    join = (e_s[1:] == e_s[:-1]) & (lo_s[1:] + 2.0 * e_s[1:] <= run[:-1] + tol_s[1:])
    rows.append(order[1:][join])
    cols.append(order[:-1][join])
    # a part reaching the end of an edge and one leaving the start of the next
    nxt = np.arange(len(edges)) + 1
    last = np.r_[edges.ring[1:] != edges.ring[:-1], True]
    first_of_ring = np.searchsorted(edges.ring, edges.ring)
    nxt[last] = first_of_ring[last]
    at_end = np.full(len(edges), -1)
    at_start = np.full(len(edges), -1)
    k_end = np.flatnonzero(hi >= 1 - tol)
    at_end[node_edge[k_end]] = k_end
    k_start = np.flatnonzero(lo <= tol)
    at_start[node_edge[k_start]] = k_start
    e_link = np.flatnonzero((at_end >= 0) & (at_start[nxt] >= 0))
    rows.append(at_end[e_link])
    cols.append(at_start[nxt[e_link]])
    r, c = np.concatenate(rows), np.concatenate(cols)
    graph = coo_matrix((np.ones(len(r)), (r, c)), shape=(2 * n, 2 * n))
    _, label = connected_components(graph, directed=False)
    _, label = np.unique(label[:n], return_inverse=True)
    return label


def _trim(p0, p1, q0, q1, limit_mm):
    """The part of each segment p0 -> p1 closer than ``limit_mm`` to the
    line through q0, q1 (the distance is linear along p)."""
    t = q1 - q0
    n = np.stack([-t[:, 1], t[:, 0]], axis=1) / np.hypot(*t.T)[:, None]
    h0 = np.abs(np.einsum("ij,ij->i", p0 - q0, n))
    h1 = np.abs(np.einsum("ij,ij->i", p1 - q0, n))
    with np.errstate(divide="ignore", invalid="ignore"):
        cut = np.clip((limit_mm - h0) / (h1 - h0), 0.0, 1.0)
    cut = np.where(np.isfinite(cut), cut, 1.0)
    lo = np.where(h0 < limit_mm, 0.0, cut)
    hi = np.where(h1 < limit_mm, 1.0, cut)
    d = p1 - p0
    return p0 + lo[:, None] * d, p0 + hi[:, None] * d


def _middle_of_narrowest(quad, dist):
    """Closest points of one facing pair, taken in the middle of the
    stretch where the two parts are at (within 1 nm of) their smallest
    distance: for parallel edges, the middle of their overlap."""
    A0, A1, B1, B0 = (quad[k][None, :] for k in range(4))
    lo, hi = _trim(A0, A1, B0, B1, dist + 1e-6)
    a = ((lo + hi) / 2)[0]
    _, b = _point_segment(a[None, :], B0, B1)
    return a, b[0]


def _pair_findings(edges: Edges, scan: PairScan, limit_mm: float, *, rule: str, layer: str, describe) -> list[Finding]:
    bad = scan.dist < limit_mm - LIMIT_TOL_MM
    if not bad.any():
        return []
    d, pa, pb, quad = scan.dist[bad], scan.pa[bad], scan.pb[bad], scan.quad[bad]
    # cut each pair down to the stretch that breaks the limit, so separate
    # narrow places along one long gap stay separate clusters
    a0, a1 = _trim(quad[:, 0], quad[:, 1], quad[:, 3], quad[:, 2], limit_mm - LIMIT_TOL_MM)
    b1, b0 = _trim(quad[:, 2], quad[:, 3], quad[:, 0], quad[:, 1], limit_mm - LIMIT_TOL_MM)
    labels = cluster_pairs(edges, scan.i[bad], scan.j[bad], a0, a1, b0, b1)
    out = []
    for lab in range(labels.max() + 1):
        idx = np.flatnonzero(labels == lab)
        # the narrowest pair; among equal ones (parallel edges) the one
        # lowest in x, then y, so the place does not depend on vertex order
        tie = idx[d[idx] <= d[idx].min() + 1e-9]
        mid = np.round((pa[tie] + pb[tie]) / 2, 6)
        k = tie[np.lexsort((mid[:, 1], mid[:, 0]))[0]]
        a, b = _middle_of_narrowest(quad[k], d[k])
        at = (float((a[0] + b[0]) / 2), float((a[1] + b[1]) / 2))
        out.append(
            Finding(
                rule=rule,
                layer=layer,
                at=at,
                measured=float(d[k]),
                limit=float(limit_mm),
                message=describe(float(d[k])),
                span=((float(a[0]), float(a[1])), (float(b[0]), float(b[1]))),
            )
        )
    return out


def width_gap_findings(copper, *, layer: str, min_width_mm: float, min_gap_mm: float, voltage_gap_mm: float = 0.0, drills=None, reach_mm=None):
    """Width and gap findings of one layer's copper.

    Parameters
    ----------
    copper : shapely (Multi)Polygon
        The layer's copper (mm).
    layer : str
        Layer name for the findings.
    min_width_mm, min_gap_mm : float
        Fabrication limits.
    voltage_gap_mm : float
        Gap the working voltage needs (IPC-2221); when larger than
        ``min_gap_mm`` it governs, and gaps between the two are reported
        as VOLTAGE_SPACING.
    drills : ndarray, shape (m, 3), optional
        Holes (x, y, diameter); their circles are left to the hole rules.
    reach_mm : float, optional
        How far to look (default 1.5 x the larger fabrication limit, or
        the voltage gap if that is larger); the narrowest width and gap
        found within it are returned for the report.

    Returns
    -------
    findings : list of Finding
    measured : dict
        'narrowest_mm' and 'smallest_gap_mm' found within the reach (None
        when nothing is that close).
    """
    gap_limit = max(min_gap_mm, voltage_gap_mm)
    reach = reach_mm if reach_mm is not None else max(1.5 * max(min_width_mm, min_gap_mm), gap_limit + 1e-3)
    edges = boundary_edges(copper, drills)
    wscan, gscan = scan_pairs(edges, reach)
    findings = _pair_findings(
        edges,
        wscan,
        min_width_mm,
        rule="MIN_WIDTH",
        layer=layer,
        describe=lambda m: (
            f"copper {m:.4f} mm wide on {layer}, narrower than the {min_width_mm:.4f} mm minimum"
            if m > _POINT_MM
            else f"copper on {layer} runs out to a sharp point, a spike narrower than the {min_width_mm:.4f} mm minimum width"
        ),
    )
    for f in _pair_findings(edges, gscan, gap_limit, rule="MIN_GAP", layer=layer, describe=lambda m: ""):
        if f.measured <= _POINT_MM:
            msg = (
                f"copper on {layer} touches itself or meets at a sharp inside corner: a wedge of space narrower than "
                f"the {gap_limit:.4f} mm gap that etching cannot clear"
            )
            findings.append(_replace(f, limit=gap_limit, message=msg))
        elif f.measured < min_gap_mm - LIMIT_TOL_MM:
            msg = f"copper {f.measured:.4f} mm apart on {layer}, closer than the {min_gap_mm:.4f} mm minimum gap"
            if gap_limit > min_gap_mm:
                msg += f" (the working voltage needs {gap_limit:.4f} mm)"
            findings.append(_replace(f, limit=min_gap_mm if gap_limit == min_gap_mm else gap_limit, message=msg))
        else:
            msg = f"copper {f.measured:.4f} mm apart on {layer}; the working voltage needs {gap_limit:.4f} mm (IPC-2221 clearance)"
            findings.append(_replace(f, rule="VOLTAGE_SPACING", message=msg))
    measured = {"narrowest_mm": wscan.smallest, "smallest_gap_mm": gscan.smallest, "reach_mm": reach}
    return findings, measured


def _replace(f: Finding, **changes) -> Finding:
    from dataclasses import replace

    return replace(f, **changes)


# ------------------------------------------------------------------- holes
def ring_distance(c, ring_xy, sag_tol_mm: float) -> float:
    """Smallest distance from point ``c`` to a closed ring of vertices,
    reading chords of circles about ``c`` as the arcs they approximate.

    An edge that stays within ``sag_tol_mm`` of the circle about ``c``
    through its farther end is such a chord: its distance is that circle's
    radius, and a vertex at the end of such a chord (where a trace meets a
    round pad, the vertex lies on the chord, inside the circle) takes the
    radius too. Other edges count with their exact distance.

    >>> sq = np.array([[1, -1], [1, 1], [-1, 1], [-1, -1], [1, -1]], float)
    >>> float(ring_distance(np.zeros(2), sq, 1e-4))
    1.0
    """
    xy = np.asarray(ring_xy, float)
    p0, p1 = xy[:-1], xy[1:]
    d0 = np.hypot(*(p0 - c).T)
    d1 = np.hypot(*(p1 - c).T)
    v = p1 - p0
    vv = np.einsum("ij,ij->i", v, v)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(vv > 0, np.einsum("ij,ij->i", c - p0, v) / vv, 0.0)
    interior = (t > 0) & (t < 1)
    q = p0 + np.clip(t, 0, 1)[:, None] * v
    seg = np.hypot(*(q - c).T)
    far = np.maximum(d0, d1)
    arc = far - seg <= sag_tol_mm + 1e-9
    # vertex k is the end of edge k-1 and the start of edge k
    start_snap = np.where(arc, far, d0)
    end_snap = np.where(arc, far, d1)
    vert = np.maximum(start_snap, np.roll(end_snap, 1))
    vert_end = np.roll(vert, -1)
    dist = np.where(arc, far, np.where(interior, seg, np.minimum(vert, vert_end)))
    return float(dist.min())


def drill_findings(drills, *, min_drill_mm: float, via_to_via_mm: float) -> list[Finding]:
    """Hole size and hole-to-hole findings (board-wide, layer 'drill')."""
    drills = np.asarray(drills, float).reshape(-1, 3)
    out = []
    for x, y, d in drills:
        if d < min_drill_mm - LIMIT_TOL_MM:
            out.append(Finding("MIN_DRILL", "drill", (float(x), float(y)), float(d), min_drill_mm, f"hole of {d:.4f} mm, smaller than the {min_drill_mm:.4f} mm minimum drill"))
    if len(drills) > 1:
        tree = cKDTree(drills[:, :2])
        pairs = tree.query_pairs(r=float(drills[:, 2].max()) + via_to_via_mm, output_type="ndarray")
        for a, b in pairs:
            ca, cb = drills[a, :2], drills[b, :2]
            dist = float(np.hypot(*(cb - ca)))
            gap = dist - (drills[a, 2] + drills[b, 2]) / 2
            if gap < via_to_via_mm - LIMIT_TOL_MM:
                u = (cb - ca) / dist if dist > 0 else np.array([1.0, 0.0])
                ea, eb = ca + u * drills[a, 2] / 2, cb - u * drills[b, 2] / 2
                at = tuple(float(v) for v in (ea + eb) / 2)
                what = "overlap" if gap < 0 else f"are {gap:.4f} mm apart"
                out.append(
                    Finding("VIA_TO_VIA", "drill", at, gap, via_to_via_mm, f"holes at ({ca[0]:.3f}, {ca[1]:.3f}) and ({cb[0]:.3f}, {cb[1]:.3f}) {what}, edge to edge; the minimum is {via_to_via_mm:.4f} mm", span=(tuple(map(float, ea)), tuple(map(float, eb))))
                )
    return out


def hole_copper_findings(copper, drills, *, layer: str, min_ring_mm: float, via_to_trace_mm: float, sag_tol_mm: float) -> tuple[list[Finding], list]:
    """Annular ring and hole-to-copper findings of one layer.

    For each hole, the copper polygons that reach its circle are its pad on
    this layer: the ring is the smallest distance from the hole centre to
    their boundary (edges on the hole circle excluded, chords of circles
    about the centre treated as arcs) less the hole radius, and 0 when the
    pad does not close round the hole (the hole breaks out, or foreign
    copper runs into it). Every other polygon must keep ``via_to_trace_mm``
    from the hole edge.

    Returns the findings and, per hole with a pad here, (x, y, ring) rows.
    """
    drills = np.asarray(drills, float).reshape(-1, 3)
    polys = list(as_multipolygon(copper).geoms)
    if not len(drills) or not polys:
        return [], []
    tree = shapely.STRtree(polys)
    out, rings = [], []
    for x, y, d in drills:
        r = d / 2
        c = np.array([x, y])
        centre = Point(x, y)
        near = tree.query(centre, predicate="dwithin", distance=r + max(via_to_trace_mm, min_ring_mm) + 1e-6)
        if len(near) == 0:
            continue
        dist = shapely.distance(centre, np.asarray(polys, dtype=object)[near])
        own = near[dist <= r + ON_HOLE_TOL_MM]
        other = near[dist > r + ON_HOLE_TOL_MM]
        if len(own):
            ring = _ring_width(c, r, [polys[k] for k in own], sag_tol_mm)
            rings.append((float(x), float(y), ring))
            if ring < min_ring_mm - LIMIT_TOL_MM:
                msg = (
                    f"annular ring {ring:.4f} mm on {layer} around the {d:.3f} mm hole, narrower than the {min_ring_mm:.4f} mm minimum"
                    if ring > 0
                    else f"the {d:.3f} mm hole at ({x:.3f}, {y:.3f}) cuts into copper on {layer} without a complete ring (it breaks out of its pad, or foreign copper runs into it)"
                )
                out.append(Finding("ANNULAR_RING", layer, (float(x), float(y)), max(ring, 0.0), min_ring_mm, msg))
        for k in other:
            line = shapely.shortest_line(centre, polys[k])
            q = np.asarray(line.coords)[1]
            gap = float(np.hypot(*(q - c))) - r
            if gap < via_to_trace_mm - LIMIT_TOL_MM:
                e = c + (q - c) * (r / (gap + r))
                at = tuple(float(v) for v in (e + q) / 2)
                out.append(
                    Finding(
                        "VIA_TO_TRACE",
                        layer,
                        at,
                        gap,
                        via_to_trace_mm,
                        f"copper on {layer} {gap:.4f} mm from the edge of the {d:.3f} mm hole at ({x:.3f}, {y:.3f}); the minimum is {via_to_trace_mm:.4f} mm",
                        span=(tuple(map(float, e)), tuple(map(float, q))),
                    )
                )
    return out, rings


def _ring_width(c, r, polys, sag_tol_mm) -> float:
    complete = any(Polygon(h).contains(Point(*c)) for p in polys for h in p.interiors)
    if not complete:
        return 0.0
    best = np.inf
    for p in polys:
        for ring in (p.exterior, *p.interiors):
            xy = np.asarray(ring.coords)
            if np.all(np.abs(np.hypot(*(xy - c).T) - r) <= ON_HOLE_TOL_MM):
                continue  # the hole itself
            best = min(best, ring_distance(c, xy, sag_tol_mm))
    return float(best - r)


# -------------------------------------------------------------- board edge
def edge_findings(copper, board, *, layer: str, clearance_mm: float) -> list[Finding]:
    """Copper closer than ``clearance_mm`` to the board edge (or outside
    the board): one finding per connected piece of offending copper."""
    if board is None or copper.is_empty:
        return []
    edge = board.boundary
    zone = edge.buffer(clearance_mm + 1e-3, quad_segs=16)
    near = copper.intersection(zone).union(copper.difference(board))
    out = []
    for piece in as_multipolygon(near).geoms:
        gap = float(piece.distance(edge))
        outside = not board.buffer(1e-9).contains(piece)
        if outside:
            gap = 0.0 if piece.intersects(edge) else -gap
        # a place that does not depend on vertex order: the middle of the
        # copper lying within the measured distance (+1 um) of the edge
        close = piece.intersection(edge.buffer(abs(gap) + 1e-3, quad_segs=4))
        c = close.centroid if not close.is_empty else piece.centroid
        e = edge.interpolate(edge.project(c))
        a, b = np.array([c.x, c.y]), np.array([e.x, e.y])
        if gap < clearance_mm - LIMIT_TOL_MM:
            where = "crosses the board edge" if gap == 0.0 and outside else ("lies outside the board" if gap < 0 else f"is {gap:.4f} mm from the board edge")
            out.append(
                Finding(
                    "EDGE_CLEARANCE",
                    layer,
                    (float((a[0] + b[0]) / 2), float((a[1] + b[1]) / 2)),
                    gap,
                    clearance_mm,
                    f"copper on {layer} {where}; the minimum clearance is {clearance_mm:.4f} mm",
                    span=((float(a[0]), float(a[1])), (float(b[0]), float(b[1]))),
                )
            )
    return out


def hole_edge_findings(drills, board, *, clearance_mm: float) -> list[Finding]:
    """Drilled holes closer than ``clearance_mm`` to the board edge."""
    if board is None:
        return []
    out = []
    edge = board.boundary
    for x, y, d in np.asarray(drills, float).reshape(-1, 3):
        c = Point(x, y)
        gap = float(edge.distance(c)) - d / 2
        if not board.contains(c):
            gap = -gap - d
        if gap < clearance_mm - LIMIT_TOL_MM:
            where = f"is {gap:.4f} mm from the board edge" if gap >= 0 else "crosses the board edge" if gap > -d else "lies outside the board"
            out.append(Finding("EDGE_CLEARANCE", "drill", (float(x), float(y)), gap, clearance_mm, f"the {d:.3f} mm hole at ({x:.3f}, {y:.3f}) {where}; the minimum clearance is {clearance_mm:.4f} mm"))
    return out
