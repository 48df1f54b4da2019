"""Planar spiral coils on one or more copper layers, with vias and terminals.

Assembly rules (they keep every through hole clear of every other layer):

* Windings occupy the annulus between the outer edge and the hollow centre.
  Plated holes never sit inside it: vias and pads at the outer ends of
  windings stand in a ring just outside the outer edge, vias at the inner
  ends in the hollow centre; each is joined to its winding by a short radial
  lead on that winding's layer.
* Holes in the ring (and in the hollow) keep an angular spacing so that pads
  and radial leads keep ``gap_mm`` from each other. When a winding would end
  at an angle already taken, that winding gets the smallest extra fraction of
  a turn that reaches a free angle (reported in the layout summary).
* Series layers alternate between inward and outward winding so the current
  circulates the same way in every layer. A coil that ends at the centre
  (odd series layer count, or parallel layers) leaves through a return lead
  on a spare copper layer, radially under the windings.
"""

from __future__ import annotations

import math

import numpy as np

from ..design import BoardSpec, CoilSpec, make_board_spec, make_coil_spec
from ..errors import GeometryError, SpecError
from ..layout import Coil, Step, Terminal, Trace, Via
from .tracks import circle_sampling, inward_spiral, outline_for, treat_corners

_E_STEP = 1.0 / 720.0  # search step for extra turns (half a degree)


def spiral(*, board=None, name: str = "coil", **coil) -> Coil:
    """Build a planar spiral coil.

    The keyword arguments are exactly the keys of a design file's ``[coil]``
    table (see :class:`tracecoil.design.CoilSpec`); ``board`` takes the
    ``[board]`` table as a dict or a :class:`~tracecoil.design.BoardSpec`.

    >>> c = spiral(shape="square", outer_mm=20, turns=5, width_mm=0.3, gap_mm=0.3)
    >>> [t.role for t in c.traces]
    ['lead', 'winding', 'lead', 'return']
    >>> round(c.traces[1].length_mm, 2)
    335.02
    """
    spec = make_coil_spec(coil)
    if board is None:
        board = {"layers": default_board_layers(spec)}
    return build_coil(spec, make_board_spec(board), name=name)


def default_board_layers(spec: CoilSpec) -> int:
    """Copper layers of the board assumed when none is given: the smallest
    even count that holds the winding and, when needed, its return lead."""
    ends_inside = spec.layers == 1 or spec.wiring == "parallel" or spec.layers % 2 == 1
    need = spec.layers + (1 if ends_inside and spec.return_lead == "layer" else 0)
    return max(2, need + need % 2)


def build_coil(spec: CoilSpec, board: BoardSpec, *, name: str = "coil") -> Coil:
    """Build the :class:`Coil` for validated ``spec`` and ``board``."""
    if spec.shape == "custom":
        from .custom import build_custom

        return build_custom(spec, board, name=name)
    return _Assembler(spec, board, name).build()


def max_turns(spec: CoilSpec, board: BoardSpec | None = None) -> float:
    """The most turns (in steps of 1/8 turn) that fit the outer size of
    ``spec`` with its width, gap, vias and pads.

    >>> from tracecoil.design import CoilSpec
    >>> max_turns(CoilSpec(shape="circle", outer_mm=10, turns=1, width_mm=0.2, gap_mm=0.2))
    9.625
    """
    board = board or make_board_spec({"layers": max(2, spec.layers + 1)})
    coil = {f: getattr(spec, f) for f in spec.__dataclass_fields__}
    lo, hi = 0.0, spec.outer_mm / (2 * spec.pitch_mm) + 1
    best = None
    # The fit is monotone in turns except for via-slot effects; bisection on
    # 1/8-turn steps, then a short walk down to the largest buildable value.
    lo_i, hi_i = 2, int(hi * 8) + 1
    while lo_i < hi_i:
        mid = (lo_i + hi_i + 1) // 2
        try:
            build_coil(make_coil_spec({**coil, "turns": mid / 8}), board)
            lo_i = mid
        except GeometryError:
            hi_i = mid - 1
    for i in range(lo_i, 1, -1):
        try:
            build_coil(make_coil_spec({**coil, "turns": i / 8}), board)
            best = i / 8
            break
        except GeometryError:
            continue
    if best is None:
        raise GeometryError(f"not even a quarter turn fits: outer_mm = {spec.outer_mm} with width_mm = {spec.width_mm}, gap_mm = {spec.gap_mm}")
    return best


def _seg_dist(p: np.ndarray, a: np.ndarray, b: np.ndarray) -> float:
    """Distance from point ``p`` to the segment ``a``-``b``."""
    ab = b - a
    den = float(ab @ ab)
    t = 0.0 if den == 0 else min(max(float((p - a) @ ab) / den, 0.0), 1.0)
    return float(np.hypot(*(p - (a + t * ab))))


class _Assembler:
    """Lays out windings, leads and plated holes for one CoilSpec.

    Every plated hole goes through the whole board, so each must keep
    ``gap_mm`` from all copper it does not connect, on every layer. Holes
    stand outside the outer edge (within ``gap + pad/2`` of it along the
    outward normal of the side the winding ends on) or in the hollow centre
    (at the point of the hollow region nearest the winding end, so the lead
    is perpendicular to the last side wherever it can be). The hollow region
    is the track shrunk by the deepest winding any layer can reach plus the
    clearance, so a hole there clears every layer's winding.
    """

    def __init__(self, spec: CoilSpec, board: BoardSpec, name: str):
        self.spec, self.board, self.name = spec, board, name
        s = spec
        self.sense = 1 if s.direction == "ccw" else -1
        self.edge = outline_for(s.shape, s.outer_mm, outer_height_mm=s.outer_height_mm, sides=s.sides)
        self.track = self.edge.shrink(s.width_mm / 2)
        if s.shape == "circle":
            self.deep = s.turns + 0.25
            _, self.pitch = circle_sampling(self.track.distances[0], s.pitch_mm, s.tolerance_mm, self.deep)
        else:
            self.pitch = s.pitch_mm
            self.deep = s.turns + 0.25 + 1.0 / s.n_sides
        self.stackup = board.stackup()
        self.layers = self._layers()
        self.traces: list[Trace] = []
        self.vias: list[Via] = []
        self.path: list[Step] = []
        self.extra_turns: list[float] = []
        self.leads: list[tuple] = []  # (a, b, positions of the holes it attaches to)

    # ------------------------------------------------------------------ setup
    def _layers(self) -> tuple[int, ...]:
        s, n = self.spec, self.board.layers
        layers = s.on_layers or tuple(range(1, s.layers + 1))
        if max(layers) > n:
            raise SpecError(f"layers = {s.layers} (on_layers {list(layers)}) needs copper layers beyond board.layers = {n}; allowed: layers <= {n}")
        return layers

    def _ends_inside(self) -> bool:
        s = self.spec
        return s.layers == 1 or s.wiring == "parallel" or s.layers % 2 == 1

    def _needs_return(self) -> bool:
        return self._ends_inside() and self.spec.return_lead == "layer"

    def _return_layer(self) -> int:
        s, n = self.spec, self.board.layers
        if s.return_layer is not None:
            if s.return_layer > n or s.return_layer in self.layers:
                raise SpecError(f"return_layer = {s.return_layer} must be a board copper layer (1..{n}) not used by the winding {list(self.layers)}")
            return s.return_layer
        free = [l for l in range(1, n + 1) if l not in self.layers]
        if not free:
            raise SpecError(
                f"this coil ends at its centre ({s.layers} layer(s), wiring {s.wiring!r}) and needs a spare copper layer for the return lead, "
                f"but board.layers = {n} are all used; add a copper layer, use an even number of series layers, or set return_lead = 'none'"
            )
        return free[0]

    def _check_fit(self):
        s = self.spec
        self.hollow_pad = s.pad_mm if self._ends_inside() and s.return_lead == "none" else s.via_pad_mm
        clear = s.width_mm / 2 + s.gap_mm + self.hollow_pad / 2
        self.hollow = self.track.shrink(self.pitch * self.deep + clear)
        if self.hollow.min_distance < self.hollow_pad / 2:
            room = self.track.min_distance - s.width_mm / 2 - s.gap_mm - self.hollow_pad
            fit = math.floor(max(room / self.pitch - (self.deep - s.turns), 0) * 4) / 4
            raise GeometryError(
                f"turns = {s.turns} do not fit inside outer_mm = {s.outer_mm} with width_mm = {s.width_mm} and gap_mm = {s.gap_mm}: "
                f"the centre must keep room for a {self.hollow_pad} mm pad; at most about {fit} turns fit"
            )

    # -------------------------------------------------------------- geometry
    def _winding(self, start: float, turns: float, sense: int, outward: bool) -> np.ndarray:
        s = self.spec
        pts = inward_spiral(self.track, start=start, turns=turns, sense=sense, pitch_mm=s.pitch_mm, tolerance_mm=s.tolerance_mm, deepest_turns=self.deep)
        pts = treat_corners(pts, s.corner, s.corner_mm, s.tolerance_mm)
        return pts[::-1].copy() if outward else pts

    def _frame(self, pts: np.ndarray, at_end: bool):
        """End point of a winding and the outward normal of its last piece."""
        p, q = (pts[-1], pts[-2]) if at_end else (pts[0], pts[1])
        if self.edge.normals is None:
            n = p / np.hypot(*p)
        else:
            d = p - q
            n = np.array([d[1], -d[0]]) / np.hypot(*d)
            if n @ p < 0:
                n = -n
        return p, n

    def _outer_hole(self, p, n, pad):
        """Hole on the outward normal ``n`` from the winding end ``p``, just
        clear of the outer edge of every layer: its projection on ``n`` lies
        ``gap + pad/2`` beyond the edge outline's supporting line, so it is
        at least that far from the (convex) outline."""
        if self.edge.normals is None:
            support = float(self.edge.distances[0])
        else:
            support = float((self.edge.vertices() @ n).max())
        return p + n * (support - float(n @ p) + self.spec.gap_mm + pad / 2)

    def _inner_hole(self, p):
        """Nearest point of the hollow region to ``p``."""
        h = self.hollow
        if h.normals is None:
            return p * (h.distances[0] / np.hypot(*p))
        from shapely.geometry import Point, Polygon
        from shapely.ops import nearest_points

        poly = Polygon(h.vertices())
        q = nearest_points(poly, Point(p))[0]
        q = np.array([q.x, q.y])
        # stay on the safe side of the hollow boundary despite rounding
        return q * (1 - 1e-12)

    def _ring_point(self, angle: float, pad: float):
        r = self.edge.clear_radius(angle, self.spec.gap_mm + pad / 2)
        return np.array([r * math.cos(angle), r * math.sin(angle)])

    # ------------------------------------------------------------- conflicts
    def _conflicts(self, holes, leads) -> bool:
        """True when candidate ``holes`` [(xy, pad)] or ``leads`` [(a, b,
        attached hole positions)] come too close to what is placed."""
        s = self.spec
        w2g = s.width_mm / 2 + s.gap_mm
        placed = [(v.xy, v.pad_mm) for v in self.vias]
        for xy, pad in holes:
            for pxy, ppad in placed:
                if np.hypot(*(xy - pxy)) < (pad + ppad) / 2 + s.gap_mm - 1e-9:
                    return True
            for a, b, att in self.leads:
                if _seg_dist(xy, a, b) < pad / 2 + w2g - 1e-9:
                    return True
        for a, b, att in leads:
            for pxy, ppad in placed + list(holes):
                if att is not None and min(np.hypot(*(pxy - np.asarray(t))) for t in att) < 1e-9:
                    continue
                if _seg_dist(pxy, a, b) < ppad / 2 + w2g - 1e-9:
                    return True
        return False

    def _search(self, make):
        """Smallest extra turn fraction e >= 0 whose candidate ``make(e)`` ->
        (holes, leads, payload) is free of conflicts; returns (e, payload)."""
        e = 0.0
        while e <= 0.25 + 1e-12:
            holes, leads, payload = make(e)
            if not self._conflicts(holes, leads):
                return e, payload
            e += _E_STEP
        raise GeometryError("no free place for a via or pad around the coil within a quarter turn; use fewer layers, smaller via_pad_mm / pad_mm, or a larger coil")

    # --------------------------------------------------------------- building
    def _add_trace(self, layer, pts, role, fraction=1.0):
        self.traces.append(Trace(layer=layer, points_mm=np.asarray(pts), width_mm=self.spec.width_mm, role=role))
        self.path.append(Step("trace", len(self.traces) - 1, fraction))

    def _add_hole(self, xy, layers, role) -> int:
        s = self.spec
        drill, pad = (s.pad_drill_mm, s.pad_mm) if role == "terminal" else (s.via_drill_mm, s.via_pad_mm)
        self.vias.append(Via(float(xy[0]), float(xy[1]), drill, pad, tuple(sorted(layers)), role))
        return len(self.vias) - 1

    def _add_lead(self, layer, a, b, hole, role="lead", fraction=1.0):
        self._add_trace(layer, [a, b], role, fraction)
        self.leads.append((np.asarray(a, float), np.asarray(b, float), [self.vias[hole].xy]))

    def _via_steps(self, via: int, inject: dict[int, float]):
        """Path steps for current through a plated hole. ``inject`` maps
        layer -> current entering the barrel at that layer (fractions of the
        terminal current; they sum to zero)."""
        layers = sorted(inject)
        flow = 0.0
        for a, b in zip(layers, layers[1:]):
            flow += inject[a]
            if abs(flow) > 1e-12:
                if flow > 0:
                    self.path.append(Step("via", via, flow, a, b))
                else:
                    self.path.append(Step("via", via, -flow, b, a))

    def build(self) -> Coil:
        self._check_fit()
        if self.spec.wiring == "parallel" and self.spec.layers > 1:
            self._build_parallel()
        else:
            self._build_series()
        a, b = self.term_via
        terms = (Terminal("A", self.vias[a].x_mm, self.vias[a].y_mm, via=a), Terminal("B", self.vias[b].x_mm, self.vias[b].y_mm, via=b))
        return Coil(
            stackup=self.stackup,
            traces=tuple(self.traces),
            vias=tuple(self.vias),
            terminals=terms,
            path=tuple(self.path),
            spec=self.spec,
            name=self.name,
            extra_turns=tuple(self.extra_turns),
            board_outline_mm=self._board_outline(),
        )

    def _board_outline(self):
        if self.board.outline_mm is None:
            return None
        w, h = self.board.outline_mm
        return np.array([[-w / 2, -h / 2], [w / 2, -h / 2], [w / 2, h / 2], [-w / 2, h / 2]])

    def _terminal_a(self, start: float, first_pts):
        s = self.spec
        p, n = self._frame(first_pts, at_end=False)
        pad_a = self._add_hole(self._outer_hole(p, n, s.pad_mm), range(1, self.board.layers + 1), "terminal")
        return pad_a, p

    def _build_series(self):
        s, sense, T = self.spec, self.sense, self.spec.turns
        all_layers = list(self.layers)
        n_layers = len(all_layers)
        needs_return = self._needs_return()
        ret_layer = self._return_layer() if needs_return else None
        every = range(1, self.board.layers + 1)
        a0 = math.radians(s.start_angle_deg)
        first = self._winding(a0, T, sense, outward=False)
        pad_a, p_start = self._terminal_a(a0, first)
        self.term_via = [pad_a, None]
        prev_hole, prev_layer, angle = pad_a, 1, a0
        for i, layer in enumerate(all_layers):
            outward = i % 2 == 1
            last = i == n_layers - 1
            hole_xy = self.vias[prev_hole].xy

            def make(e, layer=layer, outward=outward, last=last, angle=angle, hole_xy=hole_xy):
                end_angle = angle + sense * 2 * np.pi * (T + e)
                if outward:
                    pts = self._winding(end_angle, T + e, -sense, outward=True)
                else:
                    pts = self._winding(angle, T + e, sense, outward=False)
                p, n = self._frame(pts, at_end=True)
                start_lead = (hole_xy, pts[0], [hole_xy])
                if outward:
                    pad = s.pad_mm if last else s.via_pad_mm
                    xy = self._outer_hole(p, n, pad)
                    return [(xy, pad)], [start_lead, (p, xy, [xy])], (pts, xy, None, end_angle)
                if last and not needs_return:
                    xy = self._inner_hole(p)
                    return [(xy, s.pad_mm)], [start_lead, (p, xy, [xy])], (pts, xy, None, end_angle)
                xy = self._inner_hole(p)
                holes, leads = [(xy, s.via_pad_mm)], [start_lead, (p, xy, [xy])]
                ret = None
                if last:  # return lead radially out under the windings to terminal B
                    ret = self._ring_point(math.atan2(xy[1], xy[0]), s.pad_mm)
                    holes.append((ret, s.pad_mm))
                    leads.append((xy, ret, [xy, ret]))
                return holes, leads, (pts, xy, ret, end_angle)

            e, (pts, xy, ret, end_angle) = self._search(make)
            self.extra_turns.append(e)
            if prev_layer != layer:
                self._via_steps(prev_hole, {prev_layer: 1.0, layer: -1.0})
            self._add_lead(layer, self.vias[prev_hole].xy, pts[0], prev_hole)
            self._add_trace(layer, pts, "winding")
            if outward:
                role = "terminal" if last else "via"
                hole = self._add_hole(xy, every if last else (layer, all_layers[i + 1]), role)
            elif last and not needs_return:
                hole = self._add_hole(xy, every, "terminal")
            else:
                nxt = ret_layer if last else all_layers[i + 1]
                hole = self._add_hole(xy, (layer, nxt), "via")
            self._add_lead(layer, pts[-1], xy, hole)
            if last:
                if ret is not None:
                    self._via_steps(hole, {layer: 1.0, ret_layer: -1.0})
                    pad_b = self._add_hole(ret, every, "terminal")
                    self._add_lead(ret_layer, xy, ret, pad_b, role="return")
                    self.term_via[1] = pad_b
                else:
                    self.term_via[1] = hole
            prev_hole, prev_layer, angle = hole, layer, end_angle

    def _build_parallel(self):
        s, sense, T = self.spec, self.sense, self.spec.turns
        n = len(self.layers)
        frac = 1.0 / n
        needs_return = self._needs_return()
        ret_layer = self._return_layer() if needs_return else None
        every = range(1, self.board.layers + 1)
        a0 = math.radians(s.start_angle_deg)
        pad_a, p_start = self._terminal_a(a0, self._winding(a0, T, sense, outward=False))
        pad_xy = self.vias[pad_a].xy

        def make(e):
            pts = self._winding(a0, T + e, sense, outward=False)
            p, _ = self._frame(pts, at_end=True)
            xy = self._inner_hole(p)
            pad = s.via_pad_mm if needs_return else s.pad_mm
            holes, leads = [(xy, pad)], [(pad_xy, pts[0], [pad_xy]), (p, xy, [xy])]
            ret = None
            if needs_return:
                ret = self._ring_point(math.atan2(xy[1], xy[0]), s.pad_mm)
                holes.append((ret, s.pad_mm))
                leads.append((xy, ret, [xy, ret]))
            return holes, leads, (pts, xy, ret)

        e, (pts, xy, ret) = self._search(make)
        self.extra_turns.extend([e] * n)
        hollow_layers = list(self.layers) + [ret_layer] if needs_return else every
        hollow = self._add_hole(xy, hollow_layers, "via" if needs_return else "terminal")
        entry = self.layers[0]
        self._via_steps(pad_a, {**{l: -frac for l in self.layers}, entry: 1.0 - frac} if entry == 1 else {1: 1.0, **{l: -frac for l in self.layers}})
        for layer in self.layers:
            self._add_lead(layer, pad_xy, pts[0], pad_a, fraction=frac)
            self._add_trace(layer, pts, "winding", frac)
            self._add_lead(layer, pts[-1], xy, hollow, fraction=frac)
        inject = {l: frac for l in self.layers}
        if needs_return:
            inject[ret_layer] = inject.get(ret_layer, 0.0) - 1.0
            self._via_steps(hollow, inject)
            pad_b = self._add_hole(ret, every, "terminal")
            self._add_lead(ret_layer, xy, ret, pad_b, role="return")
            self.term_via = [pad_a, pad_b]
        else:
            inject[self.layers[0]] -= 1.0
            self._via_steps(hollow, inject)
            self.term_via = [pad_a, hollow]
