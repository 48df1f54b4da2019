"""DXF export of copper outlines (millimetres).

The drawing is DXF R2010 with ``$INSUNITS = 4`` (millimetres) and
``$MEASUREMENT = 1`` (metric), one unit = 1 mm. Layers:

* one layer per copper layer of the board, ``COPPER_<NAME>`` from the
  outline's layer names (``COPPER_TOP``, ``COPPER_INNER1``, ...,
  ``COPPER_BOTTOM``);
* ``DRILLS``: every drilled hole as a CIRCLE of the drill diameter;
* ``BOARD_OUTLINE``: the board edge as a closed LWPOLYLINE, when known.

Each connected piece of copper (one shapely Polygon) is written twice on its
copper layer:

* as one solid-filled HATCH whose boundary paths are polylines: the
  exterior (flag *external*) and one path per hole (flag *outermost*), with
  the nested island style, so the holes stay empty. Board tools that import
  filled areas as copper read these;
* as closed LWPOLYLINEs, one per ring (the exterior and each hole), for
  tools that import closed outlines and fill them themselves.

Curves are already polygons (chord error at most ``outlines.tolerance_mm``);
no bulges or arcs are written. The HATCH count of a layer equals the number
of polygons of that layer in :class:`~tracecoil.outline.Outlines`.
"""

from __future__ import annotations

from pathlib import Path

import ezdxf
import numpy as np
from ezdxf.lldxf import const
from shapely.geometry.polygon import orient

from .atomic import atomic_path

DXF_VERSION = "R2010"
DRILL_LAYER = "DRILLS"
BOARD_LAYER = "BOARD_OUTLINE"
# AutoCAD colour index per copper layer position: top red, bottom blue,
# inner layers green, orange, magenta, cyan, ... (cycled).
_TOP_ACI, _BOTTOM_ACI = 1, 5
_INNER_ACI = (3, 30, 6, 4, 40, 150, 210, 90)


def dxf_layer_names(outlines) -> dict:
    """DXF layer name of each copper layer number, e.g. {1: 'COPPER_TOP'}.

    >>> from types import SimpleNamespace
    >>> dxf_layer_names(SimpleNamespace(layer_names={1: "top", 2: "inner1", 3: "bottom"}))
    {1: 'COPPER_TOP', 2: 'COPPER_INNER1', 3: 'COPPER_BOTTOM'}
    """
    names = {}
    for layer in sorted(set(outlines.layer_names)):
        plain = "".join(c if c.isalnum() else "_" for c in str(outlines.layer_names[layer])).upper()
        names[layer] = f"COPPER_{plain}"
    return names


def _aci(layer: int, n_layers: int) -> int:
    if layer == 1:
        return _TOP_ACI
    if layer == n_layers:
        return _BOTTOM_ACI
    return _INNER_ACI[(layer - 2) % len(_INNER_ACI)]


def _ring(coords) -> np.ndarray:
    """Ring vertices without the repeated closing point, shape (n, 2)."""
    xy = np.asarray(coords)[:, :2]
    return xy[:-1] if len(xy) > 1 and np.array_equal(xy[0], xy[-1]) else xy


def dxf_document(outlines, *, hatches: bool = True, polylines: bool = True):
    """Build the ezdxf document for ``outlines`` (see the module docstring).

    Parameters
    ----------
    outlines : tracecoil.outline.Outlines
        Copper per layer (mm), drills (n, 3) as x, y, diameter (mm), board.
    hatches, polylines : bool
        Write copper as filled HATCH entities, as closed LWPOLYLINE rings,
        or both (default).

    Returns
    -------
    ezdxf.document.Drawing

    >>> from tracecoil import spiral
    >>> from tracecoil.outline import outlines
    >>> doc = dxf_document(outlines(spiral(shape="square", outer_mm=10, turns=3, width_mm=0.3, gap_mm=0.3)))
    >>> doc.header["$INSUNITS"], sorted(l.dxf.name for l in doc.layers if l.dxf.name.startswith("COPPER"))
    (4, ['COPPER_BOTTOM', 'COPPER_TOP'])
    """
    if not (hatches or polylines):
        raise ValueError("dxf_document needs hatches=True or polylines=True (or both); got neither")
    doc = ezdxf.new(DXF_VERSION, setup=False)
    doc.units = ezdxf.units.MM  # sets $INSUNITS = 4
    doc.header["$MEASUREMENT"] = 1  # metric
    msp = doc.modelspace()
    names = dxf_layer_names(outlines)
    n_layers = max(names) if names else 1
    for layer, name in names.items():
        doc.layers.add(name, color=_aci(layer, n_layers))
    for layer, geom in sorted(outlines.copper.items()):
        if layer not in names:
            raise ValueError(f"copper layer {layer} has no name in outlines.layer_names {sorted(names)}")
        attribs = {"layer": names[layer]}
        for poly in geom.geoms:
            poly = orient(poly, sign=1.0)  # exterior counter-clockwise, holes clockwise
            ext = _ring(poly.exterior.coords)
            holes = [_ring(h.coords) for h in poly.interiors]
            if hatches:
                h = msp.add_hatch(dxfattribs=attribs)  # solid fill, colour BYLAYER
                h.dxf.hatch_style = const.HATCH_STYLE_NESTED
                h.paths.add_polyline_path(ext, is_closed=True, flags=const.BOUNDARY_PATH_EXTERNAL)
                for ring in holes:
                    h.paths.add_polyline_path(ring, is_closed=True, flags=const.BOUNDARY_PATH_OUTERMOST)
            if polylines:
                for ring in [ext, *holes]:
                    msp.add_lwpolyline(ring, format="xy", close=True, dxfattribs=attribs)
    if len(outlines.drills):
        doc.layers.add(DRILL_LAYER, color=7)
        for x, y, d in np.asarray(outlines.drills, float):
            msp.add_circle((x, y), d / 2, dxfattribs={"layer": DRILL_LAYER})
    if outlines.board is not None:
        doc.layers.add(BOARD_LAYER, color=2)
        msp.add_lwpolyline(_ring(outlines.board.exterior.coords), format="xy", close=True, dxfattribs={"layer": BOARD_LAYER})
    return doc


def save_dxf(outlines, filename, *, hatches: bool = True, polylines: bool = True) -> None:
    """Write the DXF to ``filename`` directly (not atomic: the caller stages
    the name, as :func:`tracecoil.export.build` does)."""
    dxf_document(outlines, hatches=hatches, polylines=polylines).saveas(filename)


def write_dxf(outlines, path, *, hatches: bool = True, polylines: bool = True) -> Path:
    """Write ``outlines`` to the DXF file ``path`` atomically; return it.

    See :func:`dxf_document` for the content.
    """
    with atomic_path(path) as tmp:
        save_dxf(outlines, tmp, hatches=hatches, polylines=polylines)
    return Path(path)
