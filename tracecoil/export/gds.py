"""GDSII export of copper outlines.

Units: the library is ``gdstk.Library(unit=1e-6, precision=1e-9)``: one user
unit is 1 um and coordinates are stored as integers of 1 nm. Outlines are in
millimetres and are multiplied by 1000 on the way out; rounding to the
1 nm grid moves a vertex by at most 0.5 nm.

Layers come from a layer map (see :data:`DEFAULT_DRILL_LAYER`,
:func:`default_layer_map`): copper layer *n* (1 = top) goes to GDS layer *n*,
datatype 0; drilled holes (as polygons of the drill diameter) to layer 100;
the board edge to layer 101.

Format limits handled here:

* **No holes.** A GDSII boundary is a single closed ring. Copper with holes
  (a spiral with pad drills, an annular ring) is written in keyhole form:
  each hole is joined to the outside by a cut of zero width, so the ring
  runs out along the cut, round the hole and back. The area enclosed is the
  copper area exactly (up to the 1 nm grid), and a reader that merges
  polygons (klayout's ``Region.merged``) gets the holes back.
* **Vertex limit.** One XY record holds at most 8191 points (65535-byte
  record, 8 bytes a point), i.e. 8190 distinct vertices plus the repeated
  closing point. A polygon that would exceed ``max_points`` vertices (after
  keyholing) is cut in two along the longer side of its bounding box, and
  the halves are treated again until every piece fits. Pieces share their
  cut edges; merged, they are the original polygon.

So the number of GDS boundaries on a layer is at least the number of
polygons in the outlines (more where polygons were split); the number of
*merged* polygons a reader gets back equals it.
"""

from __future__ import annotations

from pathlib import Path

import gdstk
import numpy as np
from shapely.geometry import Polygon, box

from ..errors import GeometryError, SpecError
from ..outline import as_multipolygon, disc
from .atomic import atomic_path

UNIT_M = 1e-6  # one GDS user unit: 1 um
PRECISION_M = 1e-9  # database unit: 1 nm
MM_TO_UNIT = 1e-3 / UNIT_M  # 1000 um per mm
GDS_MAX_POINTS = 8190  # distinct vertices per boundary (see module docstring)
DEFAULT_DRILL_LAYER = (100, 0)
DEFAULT_BOARD_LAYER = (101, 0)
_MAX_LAYER = 32767  # GDSII LAYER/DATATYPE are 2-byte signed integers
_MAX_SPLIT_DEPTH = 40


def default_layer_map(outlines) -> dict:
    """The default layer map: {copper layer n: (n, 0), 'drill': (100, 0),
    'board': (101, 0)}.

    >>> from types import SimpleNamespace
    >>> default_layer_map(SimpleNamespace(copper={1: None, 2: None}))
    {1: (1, 0), 2: (2, 0), 'drill': (100, 0), 'board': (101, 0)}
    """
    m = {layer: (int(layer), 0) for layer in sorted(outlines.copper)}
    m["drill"] = DEFAULT_DRILL_LAYER
    m["board"] = DEFAULT_BOARD_LAYER
    return m


def resolve_layer_map(outlines, layer_map: dict | None) -> dict:
    """Merge a user ``layer_map`` over :func:`default_layer_map` and check it.

    Keys are copper layer numbers (1 = top), 'drill' and 'board'; values are
    ``(gds_layer, datatype)`` pairs of integers 0..32767. Two keys may not
    share a pair (their shapes would merge in the file).
    """
    m = default_layer_map(outlines)
    for key, value in (layer_map or {}).items():
        if key not in m:
            valid = ", ".join(str(k) for k in m)
            raise SpecError(f"layer_map key {key!r} is not a copper layer of these outlines nor 'drill'/'board'; valid keys: {valid}")
        try:
            lay, dt = value
        except (TypeError, ValueError):
            raise SpecError(f"layer_map[{key!r}] must be a pair (gds_layer, datatype); got {value!r}") from None
        for what, v in (("gds_layer", lay), ("datatype", dt)):
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or not 0 <= v <= _MAX_LAYER:
                raise SpecError(f"layer_map[{key!r}] {what} must be a whole number 0..{_MAX_LAYER}; got {v!r}")
        m[key] = (int(lay), int(dt))
    seen = {}
    for key, pair in m.items():
        if pair in seen:
            raise SpecError(f"layer_map gives {seen[pair]!r} and {key!r} the same GDS layer/datatype {pair}; give each its own")
        seen[pair] = key
    return m


def _ring(coords) -> np.ndarray:
    xy = np.asarray(coords)[:, :2]
    return xy[:-1] if len(xy) > 1 and np.array_equal(xy[0], xy[-1]) else xy


def _split(poly: Polygon) -> list[Polygon]:
    """Cut ``poly`` across the middle of the longer side of its bounding box."""
    x0, y0, x1, y1 = poly.bounds
    pad = 1.0 + max(x1 - x0, y1 - y0)
    if x1 - x0 >= y1 - y0:
        xm = 0.5 * (x0 + x1)
        boxes = (box(x0 - pad, y0 - pad, xm, y1 + pad), box(xm, y0 - pad, x1 + pad, y1 + pad))
    else:
        ym = 0.5 * (y0 + y1)
        boxes = (box(x0 - pad, y0 - pad, x1 + pad, ym), box(x0 - pad, ym, x1 + pad, y1 + pad))
    return [p for b in boxes for p in as_multipolygon(poly.intersection(b)).geoms]


def hole_free_pieces(poly: Polygon, *, max_points: int = GDS_MAX_POINTS, _depth: int = 0) -> list[np.ndarray]:
    """Hole-free rings that together cover ``poly`` exactly.

    Polygons with holes become keyhole rings (built with gdstk's boolean
    'not' on a 1e-3 grid of the input unit -- 1 nm for input in um); any
    ring with more than ``max_points`` vertices is split (see module
    docstring).

    Parameters
    ----------
    poly : shapely Polygon
        Valid polygon, possibly with holes, in GDS user units (um).
    max_points : int
        Largest vertex count of one ring (without the closing point).

    Returns
    -------
    list of ndarray, each shape (n, 2), n <= max_points
        Rings in the units of ``poly``.

    >>> from shapely.geometry import Point
    >>> washer = Point(0, 0).buffer(100).difference(Point(0, 0).buffer(50))
    >>> rings = hole_free_pieces(washer)
    >>> len(rings), round(sum(Polygon(r).buffer(0).area for r in rings) / washer.area, 6)
    (1, 1.0)
    """
    if max_points < 8:
        raise SpecError(f"max_points must be at least 8; got {max_points}")
    ext = _ring(poly.exterior.coords)
    if not poly.interiors:
        if len(ext) <= max_points:
            return [ext]
    else:
        holes = [gdstk.Polygon(_ring(h.coords)) for h in poly.interiors]
        out = gdstk.boolean(gdstk.Polygon(ext), holes, "not", precision=1e-3)
        area = sum(p.area() for p in out)
        # The boolean snaps to a 1e-3 grid: the area may move by about
        # perimeter * 1e-3; anything more means the keyholing went wrong.
        if abs(area - poly.area) > 1e-3 * poly.length + 1e-9 * poly.area:
            raise GeometryError(f"keyhole conversion changed a polygon's area from {poly.area} to {area} (GDS units^2)")
        if all(len(p.points) <= max_points for p in out):
            return [np.asarray(p.points) for p in out]
    if _depth >= _MAX_SPLIT_DEPTH:  # pragma: no cover - 2**40 pieces
        raise GeometryError(f"could not split a polygon of {len(ext)} vertices into pieces of at most {max_points} vertices")
    rings = []
    for piece in _split(poly):
        rings.extend(hole_free_pieces(piece, max_points=max_points, _depth=_depth + 1))
    return rings


def gds_library(outlines, *, cell_name: str = "coil", layer_map: dict | None = None, max_points: int = GDS_MAX_POINTS):
    """Build the gdstk library for ``outlines``: one cell, coordinates in um.

    Parameters
    ----------
    outlines : tracecoil.outline.Outlines
        Copper per layer (mm), drills (n, 3) as x, y, diameter (mm), board.
    cell_name : str
        Name of the single (top) cell.
    layer_map : dict, optional
        Overrides of :func:`default_layer_map`: {copper layer: (layer,
        datatype), 'drill': (layer, datatype), 'board': (layer, datatype)}.
    max_points : int
        Largest vertex count of one boundary (default and upper limit 8190).

    Returns
    -------
    gdstk.Library
        ``unit = 1e-6`` (um), ``precision = 1e-9`` (1 nm).

    >>> from tracecoil import spiral
    >>> from tracecoil.outline import outlines
    >>> lib = gds_library(outlines(spiral(shape="square", outer_mm=10, turns=3, width_mm=0.3, gap_mm=0.3)))
    >>> lib.unit, lib.precision, sorted({(p.layer, p.datatype) for p in lib.cells[0].polygons})
    (1e-06, 1e-09, [(1, 0), (2, 0), (100, 0)])
    """
    if not 8 <= max_points <= GDS_MAX_POINTS:
        raise SpecError(f"max_points must be 8..{GDS_MAX_POINTS} (the GDSII record limit); got {max_points}")
    lmap = resolve_layer_map(outlines, layer_map)
    lib = gdstk.Library(name="tracecoil", unit=UNIT_M, precision=PRECISION_M)
    cell = lib.new_cell(cell_name)
    scale = MM_TO_UNIT
    for layer, geom in sorted(outlines.copper.items()):
        lay, dt = lmap[layer]
        for poly in geom.geoms:
            poly_um = Polygon(_ring(poly.exterior.coords) * scale, [_ring(h.coords) * scale for h in poly.interiors])
            for ring in hole_free_pieces(poly_um, max_points=max_points):
                cell.add(gdstk.Polygon(ring, layer=lay, datatype=dt))
    lay, dt = lmap["drill"]
    for x, y, d in np.asarray(outlines.drills, float).reshape(-1, 3):
        hole = disc(x, y, d, outlines.tolerance_mm)
        cell.add(gdstk.Polygon(_ring(hole.exterior.coords) * scale, layer=lay, datatype=dt))
    if outlines.board is not None:
        lay, dt = lmap["board"]
        for ring in hole_free_pieces(Polygon(_ring(outlines.board.exterior.coords) * scale), max_points=max_points):
            cell.add(gdstk.Polygon(ring, layer=lay, datatype=dt))
    return lib


def save_gds(outlines, filename, *, cell_name: str = "coil", layer_map: dict | None = None, max_points: int = GDS_MAX_POINTS, timestamp=None) -> None:
    """Write the GDSII file to ``filename`` directly (not atomic: the caller
    stages the name, as :func:`tracecoil.export.build` does)."""
    lib = gds_library(outlines, cell_name=cell_name, layer_map=layer_map, max_points=max_points)
    lib.write_gds(str(filename), max_points=max_points, timestamp=timestamp)


def write_gds(outlines, path, *, cell_name: str = "coil", layer_map: dict | None = None, max_points: int = GDS_MAX_POINTS, timestamp=None) -> Path:
    """Write ``outlines`` to the GDSII file ``path`` atomically; return it.

    See :func:`gds_library` for the parameters and content; ``timestamp``
    (a datetime) is stored in the file, the current time if None.
    """
    with atomic_path(path) as tmp:
        save_gds(outlines, tmp, cell_name=cell_name, layer_map=layer_map, max_points=max_points, timestamp=timestamp)
    return Path(path)
