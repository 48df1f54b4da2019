"""The layout data model: the single source of truth for a coil's geometry.

A :class:`Coil` holds, in millimetres:

* the board stack-up (:class:`Stackup`): z of every copper layer, copper
  thickness, dielectric thicknesses and permittivity;
* copper tracks (:class:`Trace`): a centreline polyline on one copper layer
  with a width, its points ordered in the direction the current flows;
* plated holes (:class:`Via`): vias between layers and through-hole terminal
  pads, with drill and pad diameters;
* the two terminals (:class:`Terminal`);
* the current path (:class:`Step` list): the order in which current flows
  through traces and vias from terminal ``A`` to terminal ``B``, with the
  fraction of the terminal current each step carries (1 for series wiring,
  1/n for each of n parallel layers).

Generators only build a Coil. Outlines (export, rule checks) and conductors
(physics) are derived from it and never from the design parameters.
Layer numbers count copper layers from the top of the board, starting at 1.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np


@dataclass(frozen=True)
class Stackup:
    """Copper layers and dielectric of the board, top to bottom.

    Parameters
    ----------
    copper_um : tuple of float, one per copper layer
        Copper thickness of each layer in micrometres.
    dielectric_mm : tuple of float, one fewer than copper layers
        Dielectric thickness between consecutive copper layers (mm).
    permittivity : float
        Relative permittivity of the dielectric.
    plating_um : float
        Copper plating thickness in plated holes (um).
    """

    copper_um: tuple[float, ...]
    dielectric_mm: tuple[float, ...]
    permittivity: float = 4.5
    plating_um: float = 25.0

    @property
    def n_layers(self) -> int:
        return len(self.copper_um)

    @property
    def thickness_mm(self) -> float:
        """Board thickness over the outer copper surfaces (mm)."""
        return sum(self.dielectric_mm) + sum(self.copper_um) / 1000.0

    def z_mm(self, layer: int) -> float:
        """z of the mid-plane of copper ``layer`` (1 = top); top surface of the
        top copper is at z = 0 and the board extends to negative z."""
        if not 1 <= layer <= self.n_layers:
            raise ValueError(f"layer must be 1..{self.n_layers}; got {layer}")
        z = 0.0
        for i in range(layer - 1):
            z -= self.copper_um[i] / 1000.0 + self.dielectric_mm[i]
        return z - self.copper_um[layer - 1] / 2000.0

    def layer_name(self, layer: int) -> str:
        """Plain name of a copper layer: 'top', 'inner1', ..., 'bottom'."""
        if layer == 1:
            return "top"
        if layer == self.n_layers:
            return "bottom"
        return f"inner{layer - 1}"


@dataclass(frozen=True)
class Trace:
    """A copper track: centreline polyline with constant width on one layer.

    ``points_mm`` has shape (n, 2) and is ordered along the current flow.
    ``role`` is 'winding' for spiral turns, 'lead' for stubs to vias and
    pads, 'return' for a return lead crossing the winding on another layer.
    """

    layer: int
    points_mm: np.ndarray
    width_mm: float
    role: str = "winding"

    def __post_init__(self):
        pts = np.asarray(self.points_mm, dtype=float)
        if pts.ndim != 2 or pts.shape[1] != 2 or len(pts) < 2:
            raise ValueError(f"Trace.points_mm must have shape (n>=2, 2); got {pts.shape}")
        pts.setflags(write=False)
        object.__setattr__(self, "points_mm", pts)

    @property
    def length_mm(self) -> float:
        return float(np.linalg.norm(np.diff(self.points_mm, axis=0), axis=1).sum())


@dataclass(frozen=True)
class Via:
    """A plated hole at (x, y) with copper pads on ``layers``.

    The drilled hole passes through the whole board (through-hole), so it
    must keep clear of copper on every layer it does not connect.
    ``role`` is 'via' (layer change) or 'terminal' (a through-hole pad for
    connecting the coil).
    """

    x_mm: float
    y_mm: float
    drill_mm: float
    pad_mm: float
    layers: tuple[int, ...]
    role: str = "via"

    @property
    def xy(self) -> np.ndarray:
        return np.array([self.x_mm, self.y_mm])


@dataclass(frozen=True)
class Terminal:
    """One end of the coil: name 'A' (current enters) or 'B' (leaves)."""

    name: str
    x_mm: float
    y_mm: float
    via: int  # index into Coil.vias of the terminal pad


@dataclass(frozen=True)
class Step:
    """One element of the current path.

    ``kind`` is 'trace' (index into Coil.traces) or 'via' (index into
    Coil.vias, with the current passing from ``from_layer`` to
    ``to_layer``). ``fraction`` is the share of the terminal current.
    """

    kind: str
    index: int
    fraction: float = 1.0
    from_layer: int = 0
    to_layer: int = 0


@dataclass(frozen=True)
class Coil:
    """A complete coil layout (millimetres). See the module docstring."""

    stackup: Stackup
    traces: tuple[Trace, ...]
    vias: tuple[Via, ...]
    terminals: tuple[Terminal, ...]
    path: tuple[Step, ...]
    spec: object = None  # the CoilSpec it was generated from, if any
    name: str = "coil"
    offset_z_mm: float = 0.0  # z of the board's top surface in the world
    flipped: bool = False  # True when the board is turned upside down
    extra_turns: tuple[float, ...] = ()  # per winding: turns added to clear via/pad positions
    board_outline_mm: np.ndarray | None = None  # (n, 2) closed board edge polygon, if known

    # ----------------------------------------------------------------- queries
    @property
    def layers_used(self) -> tuple[int, ...]:
        used = {t.layer for t in self.traces}
        for v in self.vias:
            used.update(v.layers)
        return tuple(sorted(used))

    def traces_on(self, layer: int) -> list[Trace]:
        return [t for t in self.traces if t.layer == layer]

    def winding_traces(self) -> list[Trace]:
        return [t for t in self.traces if t.role == "winding"]

    def z_mm(self, layer: int) -> float:
        """World z of copper ``layer`` mid-plane, after placement."""
        z = self.stackup.z_mm(layer)
        return self.offset_z_mm + (-z if self.flipped else z)

    def bounds_mm(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of all copper including pads."""
        lo = np.array([np.inf, np.inf])
        hi = -lo
        for t in self.traces:
            lo = np.minimum(lo, t.points_mm.min(axis=0) - t.width_mm / 2)
            hi = np.maximum(hi, t.points_mm.max(axis=0) + t.width_mm / 2)
        for v in self.vias:
            lo = np.minimum(lo, v.xy - v.pad_mm / 2)
            hi = np.maximum(hi, v.xy + v.pad_mm / 2)
        return (float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1]))

    # --------------------------------------------------------------- placement
    def placed(self, *, offset_mm=(0.0, 0.0, 0.0), rotation_deg: float = 0.0, flip: bool = False) -> "Coil":
        """A moved copy: rotated by ``rotation_deg`` about the z axis through
        the origin, optionally flipped upside down (mirror in x, layers
        reversed in z), then translated by ``offset_mm`` = (x, y, z).

        >>> from tracecoil import spiral
        >>> c = spiral(turns=3, outer_mm=10, width_mm=0.3, gap_mm=0.3)
        >>> moved = c.placed(offset_mm=(20, 0, 1.6))
        >>> round(moved.bounds_mm()[0] - c.bounds_mm()[0], 9)
        20.0
        """
        ox, oy, oz = (float(v) for v in offset_mm)
        a = np.deg2rad(rotation_deg)
        rot = np.array([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]])
        mirror = np.array([[-1.0, 0.0], [0.0, 1.0]]) if flip else np.eye(2)
        m = rot @ mirror
        shift = np.array([ox, oy])

        def tf(p):
            return np.asarray(p) @ m.T + shift

        traces = tuple(replace(t, points_mm=tf(t.points_mm)) for t in self.traces)
        vias = []
        for v in self.vias:
            x, y = tf(v.xy)
            vias.append(replace(v, x_mm=float(x), y_mm=float(y)))
        terms = []
        for t in self.terminals:
            x, y = tf(np.array([t.x_mm, t.y_mm]))
            terms.append(replace(t, x_mm=float(x), y_mm=float(y)))
        board = None if self.board_outline_mm is None else tf(self.board_outline_mm)
        return replace(
            self,
            board_outline_mm=board,
            traces=traces,
            vias=tuple(vias),
            terminals=tuple(terms),
            offset_z_mm=self.offset_z_mm + oz,
            flipped=self.flipped != flip,
        )


def polyline_signed_area(points: np.ndarray) -> float:
    """Signed area swept about the origin by a polyline (mm^2), positive when
    it turns counter-clockwise seen from +z (shoelace over the open path).

    >>> sq = np.array([[1, 0], [0, 1], [-1, 0], [0, -1], [1, 0]], float)
    >>> polyline_signed_area(sq)
    2.0
    """
    p = np.asarray(points, float)
    return float(0.5 * np.sum(p[:-1, 0] * p[1:, 1] - p[1:, 0] * p[:-1, 1]))
