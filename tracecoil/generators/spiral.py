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
from .tracks import inward_spiral, outline_for, treat_corners

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
    335.21
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
    9.75
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


def _angdist(a: float, b: float) -> float:
    d = (a - b) % (2 * np.pi)
    return min(d, 2 * np.pi - d)


class _Assembler:
    def __init__(self, spec: CoilSpec, board: BoardSpec, name: str):
        self.spec, self.board, self.name = spec, board, name
        s = spec
        self.sense = 1 if s.direction == "ccw" else -1
        self.pitch = s.pitch_mm
        self.edge = outline_for(s.shape, s.outer_mm, outer_height_mm=s.outer_height_mm, sides=s.sides)
        self.track = self.edge.shrink(s.width_mm / 2)
        self.stackup = board.stackup()
        self.layers = self._layers()
        self.traces: list[Trace] = []
        self.vias: list[Via] = []
        self.path: list[Step] = []
        self.outer_items: list[float] = []  # angles taken in the outer ring
        self.inner_items: list[float] = []  # angles taken in the hollow
        self.extra_turns: list[float] = []

    # ------------------------------------------------------------------ setup
    def _layers(self) -> tuple[int, ...]:
        s, n = self.spec, self.board.layers
        layers = s.on_layers or tuple(range(1, s.layers + 1))
        if max(layers) > n:
            raise SpecError(f"layers = {s.layers} (on_layers {list(layers)}) needs copper layers beyond board.layers = {n}; allowed: layers <= {n}")
        return layers

    def _needs_return(self) -> bool:
        s = self.spec
        ends_inside = s.wiring == "parallel" and s.layers > 1 or s.wiring == "series" and s.layers % 2 == 1
        if s.layers == 1:
            ends_inside = True
        return ends_inside and s.return_lead == "layer"

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

    # ------------------------------------------------------------- hole room
    def _ring_radius(self, angle: float, pad: float) -> float:
        return self.edge.clear_radius(angle, self.spec.gap_mm + pad / 2)

    def _spacing(self, radius: float, pad: float) -> float:
        """Smallest angle between two holes of diameter ``pad`` at ``radius``
        so that pads keep the gap from each other and from radial leads."""
        s = self.spec
        need_lead = (pad / 2 + s.width_mm / 2 + s.gap_mm) / radius
        need_pad = (pad + s.gap_mm) / (2 * radius)
        if need_lead >= 1 or need_pad >= 1:
            return np.inf
        return max(math.asin(need_lead), 2 * math.asin(need_pad))

    def _free(self, angle: float, outer: bool, inner: bool) -> bool:
        if outer and any(_angdist(angle, a) < self.d_out for a in self.outer_items):
            return False
        if inner and any(_angdist(angle, a) < self.d_in for a in self.inner_items):
            return False
        return True

    def _extra(self, end_angle_at, outer: bool, inner: bool) -> float:
        """Smallest extra turn fraction e >= 0 such that the winding's end
        angle ``end_angle_at(e)`` is free in the requested hole regions."""
        e = 0.0
        while e < 1.0:
            if self._free(end_angle_at(e), outer, inner):
                return e
            e += _E_STEP
        raise GeometryError("no free position for a via or pad around the coil; use fewer layers, smaller via_pad_mm / pad_mm, or a larger coil")

    # --------------------------------------------------------------- building
    def build(self) -> Coil:
        s = self.spec
        self._check_fit()
        if s.wiring == "parallel" and s.layers > 1:
            self._build_parallel()
        else:
            self._build_series()
        terms = (Terminal("A", *self.term_xy[0], via=self.term_via[0]), Terminal("B", *self.term_xy[1], via=self.term_via[1]))
        return Coil(
            stackup=self.stackup,
            traces=tuple(self.traces),
            vias=tuple(self.vias),
            terminals=terms,
            path=tuple(self.path),
            spec=s,
            name=self.name,
            extra_turns=tuple(self.extra_turns),
            board_outline_mm=self._board_outline(),
        )

    def _board_outline(self):
        if self.board.outline_mm is None:
            return None
        w, h = self.board.outline_mm
        return np.array([[-w / 2, -h / 2], [w / 2, -h / 2], [w / 2, h / 2], [-w / 2, h / 2]])

    def _check_fit(self):
        s = self.spec
        inner_pad = s.pad_mm if not self._needs_return() and (s.layers % 2 == 1 or s.wiring == "parallel") and s.return_lead == "none" else s.via_pad_mm
        self.hollow_pad = inner_pad
        inner_edge = self.track.min_distance - self.pitch * (s.turns + 0.25) - s.width_mm / 2
        need = s.gap_mm + inner_pad
        if inner_edge < need:
            room = self.track.min_distance - s.width_mm / 2 - need
            fit = math.floor(max(room / self.pitch - 0.25, 0) * 4) / 4
            raise GeometryError(
                f"turns = {s.turns} do not fit inside outer_mm = {s.outer_mm} with width_mm = {s.width_mm} and gap_mm = {s.gap_mm}: "
                f"the centre must keep room for a {inner_pad} mm pad; at most about {fit} turns fit"
            )
        r_ring = self.edge.min_distance + s.gap_mm + s.pad_mm / 2
        self.d_out = self._spacing(r_ring, max(s.pad_mm, s.via_pad_mm))
        r_hollow = inner_edge - s.gap_mm - inner_pad / 2
        self.r_hollow_est = r_hollow
        self.d_in = self._spacing(r_hollow, inner_pad) if r_hollow > 0 else np.inf

    def _winding(self, layer: int, start: float, turns: float, sense: int, outward: bool) -> np.ndarray:
        s = self.spec
        pts = inward_spiral(self.track, start=start, turns=turns, sense=sense, pitch_mm=self.pitch, tolerance_mm=s.tolerance_mm)
        pts = treat_corners(pts, s.corner, s.corner_mm, s.tolerance_mm)
        if outward:
            pts = pts[::-1].copy()
        return pts

    def _add_trace(self, layer, pts, role, fraction=1.0):
        self.traces.append(Trace(layer=layer, points_mm=np.asarray(pts), width_mm=self.spec.width_mm, role=role))
        self.path.append(Step("trace", len(self.traces) - 1, fraction))

    def _add_hole(self, xy, layers, role) -> int:
        s = self.spec
        drill, pad = (s.pad_drill_mm, s.pad_mm) if role == "terminal" else (s.via_drill_mm, s.via_pad_mm)
        self.vias.append(Via(float(xy[0]), float(xy[1]), drill, pad, tuple(sorted(layers)), role))
        return len(self.vias) - 1

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

    def _ring_xy(self, angle, pad):
        r = self._ring_radius(angle, pad)
        return np.array([r * math.cos(angle), r * math.sin(angle)])

    def _hollow_xy(self, angle):
        return np.array([self.r_hollow * math.cos(angle), self.r_hollow * math.sin(angle)])

    def _compute_r_hollow(self, deepest_turns: float):
        s = self.spec
        inner_edge = self.track.min_distance - self.pitch * deepest_turns - s.width_mm / 2
        self.r_hollow = inner_edge - s.gap_mm - self.hollow_pad / 2

    def _build_series(self):
        s, sense, T = self.spec, self.sense, self.spec.turns
        all_layers = list(self.layers)
        needs_return = self._needs_return()
        ret_layer = self._return_layer() if needs_return else None
        n_layers = len(all_layers)
        a0 = math.radians(s.start_angle_deg)
        # First plan the angles (extra turns) of every winding end.
        self.outer_items.append(a0)  # terminal A
        plan = []  # (layer, start_angle, turns, outward)
        angle = a0
        for i, layer in enumerate(all_layers):
            outward = i % 2 == 1
            last = i == n_layers - 1
            if outward:
                # ends in the outer ring (via to the next layer, or terminal B)
                e = self._extra(lambda e: angle + sense * 2 * np.pi * (T + e), outer=True, inner=False)
                end = angle + sense * 2 * np.pi * (T + e)
                self.outer_items.append(end)
            else:
                # ends in the hollow; a return lead also needs the ring angle
                ret = last and needs_return
                e = self._extra(lambda e: angle + sense * 2 * np.pi * (T + e), outer=ret, inner=True)
                end = angle + sense * 2 * np.pi * (T + e)
                self.inner_items.append(end)
                if ret:
                    self.outer_items.append(end)
            plan.append((layer, angle, T + e, outward))
            self.extra_turns.append(e)
            angle = end
        deepest = max(t for _, _, t, _ in plan) if plan else T
        if deepest - T > 0.25 + 1e-9:
            raise GeometryError("vias need more than a quarter extra turn to find room; use fewer layers or smaller pads")
        self._compute_r_hollow(T + 0.25)
        # Terminal A and its lead.
        pad_a = self._add_hole(self._ring_xy(a0, s.pad_mm), range(1, self.board.layers + 1), "terminal")
        self.term_via = [pad_a, None]
        self.term_xy = [self.vias[pad_a].xy, None]
        prev_hole = pad_a
        prev_layer = all_layers[0]
        for i, (layer, start, turns, outward) in enumerate(plan):
            if outward:
                end_angle = start + sense * 2 * np.pi * turns
                pts = self._winding(layer, end_angle, turns, -sense, outward=True)
            else:
                pts = self._winding(layer, start, turns, sense, outward=False)
            # current goes from the previous hole, through the barrel to this layer
            entry = 1 if i == 0 else prev_layer  # external current enters terminal A on the top layer
            if entry != layer:
                self._via_steps(prev_hole, {entry: 1.0, layer: -1.0})
            self._add_trace(layer, [self.vias[prev_hole].xy, pts[0]], "lead")
            self._add_trace(layer, pts, "winding")
            end_angle = start + sense * 2 * np.pi * turns
            last = i == len(plan) - 1
            if outward:
                if last:
                    hole = self._add_hole(self._ring_xy(end_angle, s.pad_mm), range(1, self.board.layers + 1), "terminal")
                    self.term_via[1] = hole
                    self.term_xy[1] = self.vias[hole].xy
                else:
                    hole = self._add_hole(self._ring_xy(end_angle, s.via_pad_mm), (layer, plan[i + 1][0]), "via")
                self._add_trace(layer, [pts[-1], self.vias[hole].xy], "lead")
            else:
                if last and not needs_return:
                    hole = self._add_hole(self._hollow_xy(end_angle), range(1, self.board.layers + 1), "terminal")
                    self.term_via[1] = hole
                    self.term_xy[1] = self.vias[hole].xy
                    self._add_trace(layer, [pts[-1], self.vias[hole].xy], "lead")
                else:
                    nxt = ret_layer if last else plan[i + 1][0]
                    hole = self._add_hole(self._hollow_xy(end_angle), (layer, nxt), "via")
                    self._add_trace(layer, [pts[-1], self.vias[hole].xy], "lead")
                    if last:
                        self._return(hole, layer, ret_layer, end_angle)
            prev_hole, prev_layer = hole, layer

    def _return(self, hollow_via: int, from_layer: int, ret_layer: int, angle: float, fraction: float = 1.0, inject=None):
        s = self.spec
        self._via_steps(hollow_via, inject or {from_layer: fraction, ret_layer: -fraction})
        pad_b = self._add_hole(self._ring_xy(angle, s.pad_mm), range(1, self.board.layers + 1), "terminal")
        self._add_trace(ret_layer, [self.vias[hollow_via].xy, self.vias[pad_b].xy], "return")
        self.term_via[1] = pad_b
        self.term_xy[1] = self.vias[pad_b].xy

    def _build_parallel(self):
        s, sense, T = self.spec, self.sense, self.spec.turns
        n = len(self.layers)
        frac = 1.0 / n
        needs_return = self._needs_return()
        ret_layer = self._return_layer() if needs_return else None
        a0 = math.radians(s.start_angle_deg)
        self.outer_items.append(a0)
        e = self._extra(lambda e: a0 + sense * 2 * np.pi * (T + e), outer=needs_return, inner=True)
        self.extra_turns.extend([e] * n)
        end_angle = a0 + sense * 2 * np.pi * (T + e)
        self._compute_r_hollow(T + 0.25)
        pad_a = self._add_hole(self._ring_xy(a0, s.pad_mm), range(1, self.board.layers + 1), "terminal")
        hollow_layers = list(self.layers) + ([ret_layer] if needs_return else [])
        role = "via" if needs_return else "terminal"
        hollow = self._add_hole(self._hollow_xy(end_angle), hollow_layers if needs_return else range(1, self.board.layers + 1), role)
        self.term_via = [pad_a, hollow]
        self.term_xy = [self.vias[pad_a].xy, self.vias[hollow].xy]
        entry = self.layers[0]
        self._via_steps(pad_a, {entry: 1.0, **{l: (-frac if l != entry else 1.0 - frac) for l in self.layers}})
        for layer in self.layers:
            pts = self._winding(layer, a0, T + e, sense, outward=False)
            self._add_trace(layer, [self.vias[pad_a].xy, pts[0]], "lead", frac)
            self._add_trace(layer, pts, "winding", frac)
            self._add_trace(layer, [pts[-1], self.vias[hollow].xy], "lead", frac)
        if needs_return:
            inject = {l: frac for l in self.layers}
            inject[ret_layer] = inject.get(ret_layer, 0.0) - 1.0
            self._return(hollow, None, ret_layer, end_angle, inject=inject)
        else:
            exit_layer = self.layers[0]
            inject = {l: frac for l in self.layers}
            inject[exit_layer] -= 1.0
            self._via_steps(hollow, inject)
