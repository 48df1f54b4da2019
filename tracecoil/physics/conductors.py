"""The coil as straight 3D conductor segments in SI units.

:func:`conductors` walks a :class:`~tracecoil.layout.Coil`'s current path
from terminal A to terminal B and returns one row per straight piece of
copper: trace segments (each pair of consecutive centreline points of a
:class:`~tracecoil.layout.Trace`, at the z of its copper layer's mid-plane)
and via barrels (vertical, between the mid-planes of the two layers the
current passes between). This is the only place where layout millimetres
become metres; every physics function reads these arrays.

Modelling choices
-----------------
* Trace segments are rectangular bars: width = trace width, thickness =
  copper thickness of the layer, length = centreline length (corners are
  neither trimmed nor filled, as in Greenhouse's partial-inductance
  method, H. M. Greenhouse, IEEE Trans. PHP-10(2), 1974, from memory).
* Via barrels are tubes of outer diameter ``drill_mm`` and wall
  ``Stackup.plating_um`` (the plated copper lines the drilled hole),
  stored with ``width_m`` = outer diameter and ``thickness_m`` = wall.
* Barrels of terminal pads carry no current along their length (the pin
  or wire soldered through the pad joins its layers) and are left out, as
  are zero-length pieces.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError

__all__ = ["Conductors", "conductors", "KIND_TRACE", "KIND_VIA"]

KIND_TRACE = 0
KIND_VIA = 1
MM = 1e-3  # metres per millimetre: the single layout -> SI conversion


@dataclass(frozen=True, eq=False)
class Conductors:
    """Straight conductor segments of a coil, SI units, in current-path order.

    Attributes
    ----------
    start_m, end_m : ndarray, shape (n, 3)
        Segment end points (m); current flows from start to end when the
        terminal current enters at A.
    width_m : ndarray, shape (n,)
        Trace width, or the barrel's outer diameter for vias (m).
    thickness_m : ndarray, shape (n,)
        Copper thickness, or the barrel's plating wall for vias (m).
    fraction : ndarray, shape (n,)
        Share of the terminal current carried (``Step.fraction``).
    layer : ndarray of int, shape (n,)
        Copper layer (1 = top) of trace segments; 0 for vias.
    kind : ndarray of int8, shape (n,)
        ``KIND_TRACE`` (0) or ``KIND_VIA`` (1).
    width_dir : ndarray, shape (n, 3)
        Unit vector across the width: for traces in the board plane, to the
        left of the current direction seen from +z; for vias the x axis.
    step : ndarray of int, shape (n,)
        Index of the ``Coil.path`` step each segment comes from.
    """

    start_m: np.ndarray
    end_m: np.ndarray
    width_m: np.ndarray
    thickness_m: np.ndarray
    fraction: np.ndarray
    layer: np.ndarray
    kind: np.ndarray
    width_dir: np.ndarray
    step: np.ndarray

    def __post_init__(self):
        for name in ("start_m", "end_m", "width_m", "thickness_m", "fraction", "layer", "kind", "width_dir", "step"):
            getattr(self, name).setflags(write=False)

    def __len__(self) -> int:
        return len(self.start_m)

    @property
    def vector_m(self) -> np.ndarray:
        """end - start, shape (n, 3) (m)."""
        return self.end_m - self.start_m

    @property
    def length_m(self) -> np.ndarray:
        """Segment lengths, shape (n,) (m)."""
        return np.linalg.norm(self.vector_m, axis=1)

    @property
    def direction(self) -> np.ndarray:
        """Unit vectors along the current, shape (n, 3)."""
        return self.vector_m / self.length_m[:, None]

    @property
    def thickness_dir(self) -> np.ndarray:
        """Unit vectors across the thickness (direction x width_dir), shape (n, 3).

        +z for traces (whatever way the current runs); for vias y or -y.
        """
        return np.cross(self.direction, self.width_dir)

    @property
    def midpoint_m(self) -> np.ndarray:
        """Segment midpoints, shape (n, 3) (m)."""
        return 0.5 * (self.start_m + self.end_m)

    @property
    def is_via(self) -> np.ndarray:
        return self.kind == KIND_VIA

    def subset(self, mask) -> "Conductors":
        """The segments selected by a boolean mask or index array."""
        return Conductors(**{k: np.array(getattr(self, k)[mask]) for k in _FIELDS})


_FIELDS = ("start_m", "end_m", "width_m", "thickness_m", "fraction", "layer", "kind", "width_dir", "step")


def conductors(coil) -> Conductors:
    """Straight conductor segments of a coil, in SI units, from terminal A to B.

    Parameters
    ----------
    coil : tracecoil.layout.Coil
        The layout (millimetres). Its placement (``offset_z_mm``,
        ``flipped``) is honoured through ``coil.z_mm(layer)``.

    Returns
    -------
    Conductors
        See :class:`Conductors`.

    Raises
    ------
    GeometryError
        If a path step names an unknown kind, or the path has no copper.

    Examples
    --------
    A square of side 10 mm on the top layer of a 2-layer board:

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> sq = np.array([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], float)
    >>> c = Coil(Stackup((35.0, 35.0), (1.5,)), (Trace(1, sq, 0.5),), (), (), (Step("trace", 0),))
    >>> cd = conductors(c)
    >>> len(cd), round(float(cd.length_m.sum()), 12), round(float(cd.start_m[0, 2]) * 1e6, 6)
    (4, 0.04, -17.5)
    >>> cd.width_dir[0].tolist()  # left of +x seen from +z
    [0.0, 1.0, 0.0]
    """
    st = coil.stackup
    terminal_vias = {t.via for t in coil.terminals}
    starts, ends, widths, thick, frac, layers, kinds, wdirs, steps = ([] for _ in range(9))
    for k, s in enumerate(coil.path):
        if s.kind == "trace":
            tr = coil.traces[s.index]
            p = np.asarray(tr.points_mm, float) * MM
            z = coil.z_mm(tr.layer) * MM
            d = np.diff(p, axis=0)
            seg = np.hypot(d[:, 0], d[:, 1])
            keep = seg > 0
            m = int(keep.sum())
            if m == 0:
                continue
            a, b, d, seg = p[:-1][keep], p[1:][keep], d[keep], seg[keep]
            starts.append(np.column_stack([a, np.full(m, z)]))
            ends.append(np.column_stack([b, np.full(m, z)]))
            wd = np.column_stack([-d[:, 1] / seg, d[:, 0] / seg, np.zeros(m)]) + 0.0  # no -0.0
            # seen from +z after a flip the board's left is the world's right;
            # the left-of-travel rule is kept in world coordinates.
            wdirs.append(wd)
            widths.append(np.full(m, tr.width_mm * MM))
            thick.append(np.full(m, st.copper_um[tr.layer - 1] * 1e-6))
            frac.append(np.full(m, float(s.fraction)))
            layers.append(np.full(m, tr.layer, dtype=int))
            kinds.append(np.full(m, KIND_TRACE, dtype=np.int8))
            steps.append(np.full(m, k, dtype=int))
        elif s.kind == "via":
            v = coil.vias[s.index]
            if s.from_layer == s.to_layer or not s.from_layer or not s.to_layer or s.index in terminal_vias:
                continue
            z0, z1 = coil.z_mm(s.from_layer) * MM, coil.z_mm(s.to_layer) * MM
            xy = np.array([v.x_mm, v.y_mm]) * MM
            starts.append(np.array([[xy[0], xy[1], z0]]))
            ends.append(np.array([[xy[0], xy[1], z1]]))
            wdirs.append(np.array([[1.0, 0.0, 0.0]]))
            widths.append(np.array([v.drill_mm * MM]))
            thick.append(np.array([st.plating_um * 1e-6]))
            frac.append(np.array([float(s.fraction)]))
            layers.append(np.array([0]))
            kinds.append(np.array([KIND_VIA], dtype=np.int8))
            steps.append(np.array([k]))
        else:
            raise GeometryError(f"path step {k}: kind must be 'trace' or 'via'; got {s.kind!r}")
    if not starts:
        raise GeometryError(f"coil {coil.name!r} has no copper on its current path")
    return Conductors(
        start_m=np.concatenate(starts),
        end_m=np.concatenate(ends),
        width_m=np.concatenate(widths),
        thickness_m=np.concatenate(thick),
        fraction=np.concatenate(frac),
        layer=np.concatenate(layers),
        kind=np.concatenate(kinds),
        width_dir=np.concatenate(wdirs),
        step=np.concatenate(steps),
    )
