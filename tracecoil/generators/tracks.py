"""Single-layer spiral centrelines (mm), always built from the outside in.

A spiral starts on its outermost track at polar angle ``start`` and winds
``turns`` turns inward in angular ``sense`` (+1 counter-clockwise, -1
clockwise, seen from +z). Callers that need an outward spiral build the
inward one with the opposite sense and reverse the points.

Circle: an Archimedean spiral r(phi) = r0 - pitch * phi / (2 pi), sampled so
the chord error stays below ``tolerance_mm``.

Polygon family (regular N-gons and rectangles): a sequence of straight side
lines with fixed outward normals n_j; each new side lies ``pitch / N``
further in than the previous one, so every side is parallel to the same side
one turn out and exactly one pitch from it. Corners are intersections of
consecutive side lines, optionally rounded or chamfered on the centreline.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError


@dataclass(frozen=True)
class Outline:
    """A convex shape family: outward side normals and the distance of each
    side line from the centre, or a circle (``normals`` is None)."""

    normals: np.ndarray | None  # (N, 2) unit normals, or None for a circle
    distances: np.ndarray  # (N,) distance of each side from the centre (mm); circle: (1,) radius

    def shrink(self, by_mm: float) -> "Outline":
        return Outline(self.normals, self.distances - by_mm)

    def radius_at(self, angle: np.ndarray | float) -> np.ndarray:
        """Distance from the centre to the boundary along polar ``angle``."""
        a = np.asarray(angle, float)
        if self.normals is None:
            return np.full(a.shape, self.distances[0])
        u = np.stack([np.cos(a), np.sin(a)], axis=-1)
        cos = u @ self.normals.T
        with np.errstate(divide="ignore"):
            r = np.where(cos > 1e-12, self.distances / np.where(cos > 1e-12, cos, 1.0), np.inf)
        return r.min(axis=-1)

    def vertices(self) -> np.ndarray:
        """Corners of a polygon outline (n, 2), counter-clockwise."""
        n = self.normals
        nxt = np.roll(np.arange(len(n)), -1)
        return np.array([np.linalg.solve(np.stack([n[i], n[j]]), [self.distances[i], self.distances[j]]) for i, j in zip(range(len(n)), nxt)])

    def clear_radius(self, angle: float, clearance_mm: float) -> float:
        """Distance from the centre, along polar ``angle``, of the nearest
        point that is ``clearance_mm`` outside this outline (exact: the
        point-to-polygon distance grows monotonically along the ray)."""
        if self.normals is None:
            return float(self.distances[0] + clearance_mm)
        from shapely.geometry import Point, Polygon

        poly = Polygon(self.vertices())
        u = np.array([math.cos(angle), math.sin(angle)])
        lo = float(self.radius_at(angle))
        hi = lo + clearance_mm / max(float(np.min(np.abs(self.normals @ u))), 1e-3) + clearance_mm
        hi = max(hi, lo + 2 * clearance_mm) * 2
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            if Point(*(u * mid)).distance(poly) < clearance_mm:
                lo = mid
            else:
                hi = mid
        return hi

    @property
    def min_distance(self) -> float:
        return float(self.distances.min())


def outline_for(shape: str, outer_mm: float, *, outer_height_mm=None, sides=None) -> Outline:
    """The outside copper boundary of a spiral of ``shape``.

    Regular polygons have a flat facing +x; ``outer_mm`` is twice the
    centre-to-side distance (across flats). Rectangles: width x height.
    """
    if shape == "circle":
        return Outline(None, np.array([outer_mm / 2]))
    if shape == "rectangle":
        normals = np.array([[1.0, 0.0], [0.0, 1.0], [-1.0, 0.0], [0.0, -1.0]])
        d = np.array([outer_mm, outer_height_mm, outer_mm, outer_height_mm]) / 2
        return Outline(normals, d)
    n = {"square": 4, "hexagon": 6, "octagon": 8}.get(shape, sides)
    psi = 2 * np.pi * np.arange(n) / n
    return Outline(np.stack([np.cos(psi), np.sin(psi)], axis=1), np.full(n, outer_mm / 2))


def circle_steps(radius_mm: float, tolerance_mm: float) -> float:
    """Largest angular step (rad) whose chord sags at most ``tolerance_mm``
    from a circle of ``radius_mm``: sagitta r(1 - cos(step/2)) <= tol.

    >>> round(circle_steps(10.0, 0.01), 5)
    0.08945
    """
    if tolerance_mm >= radius_mm:
        return np.pi / 2
    return float(min(2 * math.acos(1 - tolerance_mm / radius_mm), np.pi / 2))


def circle_sampling(radius_mm: float, pitch_mm: float, tolerance_mm: float, turns: float) -> tuple[float, float]:
    """Angular step and radial pitch of a sampled Archimedean spiral.

    The step divides a full turn exactly, so vertices of neighbouring turns
    lie on the same rays. Neighbouring turns of an Archimedean spiral of
    radial pitch P are only about P cos(psi) apart along the normal (tan psi
    = P / (2 pi r), the pitch angle), and a vertex of one turn faces the
    corner between two chords of the next, tilted by half a step and by the
    pitch angle. The radial pitch is therefore stretched until the smallest
    distance from any vertex to the neighbouring turn's chords equals the
    design pitch, over ``turns`` turns from ``radius_mm``: the copper gap
    never drops below the design gap (it is a little larger on outer turns).

    >>> step, pr = circle_sampling(10.0, 0.4, 0.01, 5)
    >>> round(2 * np.pi / step), round(float(pr), 5)
    (71, 0.40054)
    """
    per_turn = max(int(math.ceil(2 * np.pi / circle_steps(radius_mm, tolerance_mm) - 1e-9)), 4)
    step = 2 * np.pi / per_turn
    pr = pitch_mm / math.cos(step / 2)
    n = int(math.ceil(turns * per_turn)) + 1
    t = step * np.arange(n)
    for _ in range(8):
        r = radius_mm - pr * t / (2 * np.pi)
        if r[-1] <= 0:
            break
        pts = np.stack([r * np.cos(t), r * np.sin(t)], axis=1)
        inner = pts[per_turn + 1 : -1]
        a, b, c = pts[: n - per_turn - 2], pts[1 : n - per_turn - 1], pts[2 : n - per_turn]
        d = np.minimum(_point_segment(inner, a, b), _point_segment(inner, b, c)).min() if len(inner) else pitch_mm
        if d >= pitch_mm * (1 - 1e-13):
            break
        pr *= pitch_mm / d * (1 + 1e-13)
    return step, pr


def _point_segment(p, a, b):
    """Row-wise distance from points ``p`` to segments ``a``-``b`` (n, 2)."""
    ab = b - a
    t = np.clip(np.einsum("ij,ij->i", p - a, ab) / np.einsum("ij,ij->i", ab, ab), 0.0, 1.0)
    return np.hypot(*(p - (a + t[:, None] * ab)).T)


def inward_spiral(outline: Outline, *, start: float, turns: float, sense: int, pitch_mm: float, tolerance_mm: float, deepest_turns: float | None = None) -> np.ndarray:
    """Centreline of an inward spiral whose first side lies on ``outline``.

    Parameters
    ----------
    outline : Outline
        The centreline of the outermost track (already shrunk by width/2).
    start : float
        Polar angle of the start point (rad).
    turns : float
        Turns to wind (> 0).
    sense : {+1, -1}
        Angular sense of travel.
    pitch_mm, tolerance_mm : float
    deepest_turns : float or None
        Circles: the most turns any spiral sharing this radial pitch will
        wind (sets the pitch stretch, see :func:`circle_sampling`); default
        ``turns``.

    Returns
    -------
    ndarray, shape (n, 2)
        Vertices in millimetres, from the outer start to the inner end, whose
        polar angle moves monotonically by ``sense * 2 pi * turns``.
    """
    total = 2 * np.pi * turns
    if outline.normals is None:
        r0 = outline.distances[0]
        step, pitch_r = circle_sampling(r0, pitch_mm, tolerance_mm, deepest_turns or turns)
        r_end = r0 - pitch_r * turns
        if r_end <= 0:
            raise GeometryError(f"spiral reaches the centre: {turns} turns at pitch {pitch_mm} mm need a radius over {pitch_r * turns:.3f} mm; the track starts at {r0:.3f} mm")
        k_end = int(math.ceil(total / step - 1e-9))
        t = step * np.arange(k_end + 1)
        r = r0 - pitch_r * t / (2 * np.pi)
        phi = start + sense * t
        pts = np.stack([r * np.cos(phi), r * np.sin(phi)], axis=1)
        if t[-1] - total > 1e-9 * step:
            # end where the last whole chord crosses the end ray, so the end
            # stays on the chord that the neighbouring turn runs parallel to
            a, b = pts[-2], pts[-1]
            u = np.array([math.cos(start + sense * total), math.sin(start + sense * total)])
            d = b - a
            lam = (u[0] * a[1] - u[1] * a[0]) / (u[1] * d[0] - u[0] * d[1])
            pts[-1] = a + lam * d
        return pts

    normals, base = outline.normals, outline.distances
    n_sides = len(base)
    ahead = start + sense * 1e-7  # at a corner, take the side that lies ahead
    u0 = np.array([math.cos(ahead), math.sin(ahead)])
    cos0 = normals @ u0
    with np.errstate(divide="ignore"):
        hit = np.where(cos0 > 1e-12, base / np.where(cos0 > 1e-12, cos0, 1.0), np.inf)
    j0 = int(np.argmin(hit))

    def line(k):
        j = (j0 + sense * k) % n_sides
        d = base[j] - pitch_mm * k / n_sides
        if d <= 0:
            raise GeometryError(f"spiral reaches the centre: {turns} turns at pitch {pitch_mm} mm do not fit inside an outer track {2 * base.min():.3f} mm across")
        return normals[j], d

    def ray_hit(angle, k):
        nrm, d = line(k)
        u = np.array([math.cos(angle), math.sin(angle)])
        c = nrm @ u
        if c <= 1e-12:
            raise GeometryError("spiral geometry degenerated (ray parallel to a side); try other turns or start_angle_deg")
        return u * (d / c)

    def corner_at(k):
        n1, d1 = line(k)
        n2, d2 = line(k + 1)
        return np.linalg.solve(np.stack([n1, n2]), np.array([d1, d2]))

    # A start just short of a corner can lie beyond the next side, which
    # sits pitch/N further in: that corner is then behind the start. Begin
    # on the next side instead (its start point lies inside the outline).
    k = 0
    c0 = corner_at(0)
    if ((math.atan2(c0[1], c0[0]) - start) * sense) % (2 * np.pi) > np.pi:
        k = 1
    pts = [ray_hit(start, k)]
    prev_angle = start
    travelled = 0.0
    while True:
        corner = corner_at(k)
        ang = math.atan2(corner[1], corner[0])
        delta = ((ang - prev_angle) * sense) % (2 * np.pi)
        if travelled + delta >= total - 1e-12:
            break
        travelled += delta
        prev_angle = ang
        pts.append(corner)
        k += 1
    pts.append(ray_hit(start + sense * total, k))
    return np.array(pts)


def treat_corners(points: np.ndarray, kind: str, size_mm: float, tolerance_mm: float) -> np.ndarray:
    """Round (fillet of radius ``size_mm``) or chamfer (leg ``size_mm``) every
    interior vertex of a polyline. The first and last points are kept.

    Raises GeometryError when a side is too short for the treatment.
    """
    if kind == "sharp" or len(points) < 3:
        return points
    out = [points[0]]
    seg = np.diff(points, axis=0)
    lengths = np.linalg.norm(seg, axis=1)
    used_before = 0.0  # length of the incoming side already taken by the previous corner
    for i in range(1, len(points) - 1):
        a = seg[i - 1] / lengths[i - 1]
        b = seg[i] / lengths[i]
        turn = math.acos(float(np.clip(a @ b, -1.0, 1.0)))
        if turn < 1e-9:
            out.append(points[i])
            used_before = 0.0
            continue
        cut = size_mm * math.tan(turn / 2) if kind == "round" else size_mm
        avail_in = lengths[i - 1] - used_before
        avail_out = lengths[i] if i == len(points) - 2 else lengths[i] / 2
        if cut > avail_in + 1e-9 or cut > avail_out + 1e-9:
            raise GeometryError(
                f"corner_mm = {size_mm} is too large for the innermost sides ({min(lengths[i - 1], lengths[i]):.3f} mm long); "
                f"use a smaller corner_mm or fewer turns"
            )
        p_in = points[i] - a * cut
        p_out = points[i] + b * cut
        if kind == "chamfer":
            out.extend([p_in, p_out])
        else:
            normal = np.array([-a[1], a[0]])
            if a[0] * b[1] - a[1] * b[0] < 0:
                normal = -normal
            centre = p_in + normal * size_mm
            a0 = math.atan2(*(p_in - centre)[::-1])
            a1 = math.atan2(*(p_out - centre)[::-1])
            sweep = (a1 - a0 + np.pi) % (2 * np.pi) - np.pi
            n = max(int(math.ceil(abs(sweep) / circle_steps(size_mm, tolerance_mm))), 1)
            ang = a0 + sweep * np.linspace(0.0, 1.0, n + 1)
            out.extend(centre + size_mm * np.stack([np.cos(ang), np.sin(ang)], axis=1))
        used_before = cut
    out.append(points[-1])
    return np.array(out)
