"""Geometry summary of a coil as a JSON-able dict (millimetres).

Everything is measured on the layout (:class:`~tracecoil.layout.Coil`) and
its copper outlines, not recomputed from the design parameters, so the
summary is also a check of what the generator built.

Sizes and turns are measured about the origin of the coil's own frame,
where the generators put the coil centre: summarise a coil before moving it
with :meth:`Coil.placed`.

Definitions (for one winding, i.e. a trace with role 'winding'):

* **turns**: the angle the centreline sweeps about the centre, / 2 pi.
* **outer_mm** (d_out): outside edge of the outermost turn: twice the
  largest distance from the centre to the line through a centreline
  segment, plus the width. For a polygon spiral this is the size across
  flats at the copper's outside edge. For a curved spiral the line through
  a short chord is nearly the tangent, whose distance from the centre is
  r^2 / sqrt(r^2 + (dr/dtheta)^2) (the pedal of the curve), short of r by
  about (pitch / 2 pi)^2 / (2 r); the chords also lie up to the chord
  tolerance inside the curve. So a circle's d_out is its diameter less a
  little over twice the chord tolerance.
* **inner_mm** (d_in): inside edge of the innermost turn, taken where that
  turn is widest: twice the largest segment-line distance over the last
  full turn before the inner end, less the width. For n closed turns of
  width w and gap s this is the d_in = d_out - 2 n w - 2 (n - 1) s of
  S. S. Mohan, M. del Mar Hershenson, S. P. Boyd and T. H. Lee, "Simple
  accurate expressions for planar spiral inductances", IEEE J. Solid-State
  Circuits 34(10), 1999 (from memory).
* **fill_ratio**: rho = (d_out - d_in) / (d_out + d_in) (Mohan et al. 1999).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..layout import Coil, polyline_signed_area
from ..outline import DEFAULT_TOLERANCE_MM, outlines as make_outlines
from .atomic import jsonable


def winding_turns(points_mm: np.ndarray) -> float:
    """Turns a centreline sweeps about the origin (angle / 2 pi, >= 0).

    Parameters
    ----------
    points_mm : ndarray, shape (n, 2)
        Centreline (mm); consecutive points less than half a turn apart as
        seen from the origin.

    >>> t = np.linspace(0, 3 * np.pi, 50)
    >>> round(winding_turns(np.stack([np.cos(t), np.sin(t)], axis=1)), 9)
    1.5
    """
    p = np.asarray(points_mm, float)
    phi = np.unwrap(np.arctan2(p[:, 1], p[:, 0]))
    return float(abs(phi[-1] - phi[0]) / (2 * np.pi))


def winding_sizes(points_mm: np.ndarray, width_mm: float, *, side_normals_rad=None) -> tuple[float, float]:
    """(d_out, d_in) of a winding in mm, as defined in the module docstring.

    Parameters
    ----------
    points_mm : ndarray, shape (n, 2)
        Centreline (mm), centred on the origin, from either end.
    width_mm : float
        Trace width (mm).
    side_normals_rad : array_like or None
        Polygon spirals (possibly with rounded or chamfered corners): the
        polar angles of the side normals. Sizes are then measured across
        flats with the support function h(u) = max_i p_i . u of the
        centreline: d_out = 2 max_j h(n_j) + w over the side normals, and
        d_in = 2 max_j h_last(n_j) - w over the innermost full turn. Corner
        arcs, whose chords' lines would otherwise count, play no part; for
        sharp corners this equals the segment-line definition.

    >>> r = 10 - 0.5 * np.linspace(0, 3, 3001)      # 3 turns, pitch 0.5 mm
    >>> a = 2 * np.pi * np.linspace(0, 3, 3001)
    >>> d_out, d_in = winding_sizes(np.stack([r * np.cos(a), r * np.sin(a)], axis=1), 0.3)
    >>> round(d_out, 2), round(d_in, 2)
    (20.3, 17.7)
    """
    p = np.asarray(points_mm, float)
    if np.hypot(*p[-1]) > np.hypot(*p[0]):  # run from the outer to the inner end
        p = p[::-1]
    phi = np.unwrap(np.arctan2(p[:, 1], p[:, 0]))
    seg = np.diff(p, axis=0)
    length = np.hypot(seg[:, 0], seg[:, 1])
    keep = length > 0
    # distance from the origin to the line through each segment
    h = np.abs(p[:-1, 0] * seg[:, 1] - p[:-1, 1] * seg[:, 0])[keep] / length[keep]
    # segments ending within one turn of the inner end form the innermost turn
    last_turn = (np.abs(phi[-1] - phi[1:]) < 2 * np.pi)[keep]
    if side_normals_rad is not None:
        ang = np.asarray(side_normals_rad, float)
        u = np.stack([np.cos(ang), np.sin(ang)], axis=1)
        inner_pts = p[np.abs(phi[-1] - phi) <= 2 * np.pi + 1e-12]
        return float(2 * (p @ u.T).max() + width_mm), float(2 * (inner_pts @ u.T).max(axis=0).max() - width_mm)
    d_out = 2 * h.max() + width_mm
    d_in = 2 * h[last_turn].max() - width_mm
    return float(d_out), float(d_in)


def _side_normals(coil):
    """Side-normal angles of a polygon-family spiral (the generator puts a
    flat facing +x), or None for circles and custom paths."""
    spec = coil.spec
    n = getattr(spec, "n_sides", None)
    if n is None or spec.corner == "sharp":
        return None  # the segment-line definition is exact there
    return 2 * np.pi * np.arange(n) / n


def fill_ratio(d_out: float, d_in: float) -> float:
    """rho = (d_out - d_in) / (d_out + d_in) (Mohan et al. 1999).

    >>> fill_ratio(20.0, 10.0)
    0.3333333333333333
    """
    return float((d_out - d_in) / (d_out + d_in))


def _copper_bounds(outlines) -> list | None:
    """(xmin, ymin, xmax, ymax) of the copper of all layers (mm)."""
    b = np.array([g.bounds for g in outlines.copper.values() if not g.is_empty])
    if not len(b):
        return None
    return [b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()]


def summary(coil: Coil, *, outlines=None) -> dict:
    """Geometry summary of ``coil`` (see the module docstring).

    Parameters
    ----------
    coil : Coil
        The layout, in its own frame (centre at the origin).
    outlines : tracecoil.outline.Outlines, optional
        Its copper outlines, if already computed (for the copper areas);
        otherwise they are built at the coil spec's chord tolerance.

    Returns
    -------
    dict
        JSON-able: ``name``, ``units`` ('mm'), ``layers`` (one entry per
        copper layer carrying copper: ``layer``, ``name``,
        ``trace_length_mm``, ``winding_length_mm``, ``copper_area_mm2``,
        ``turns``, ``outer_mm``, ``inner_mm``, ``fill_ratio``,
        ``direction``), ``total_trace_length_mm``,
        ``total_winding_length_mm``, ``turns_per_winding``, ``extra_turns``,
        ``outer_mm``, ``inner_mm``, ``fill_ratio``, ``via_count``,
        ``terminal_pad_count``, ``terminals`` ({'A': [x, y], ...}),
        ``bounds_mm`` (xmin, ymin, xmax, ymax of the copper outlines of all
        layers, including mitred corners and pads), ``board_bounds_mm``,
        ``tolerance_mm``, ``spec``.

    >>> from tracecoil import spiral
    >>> s = summary(spiral(shape="square", outer_mm=20, turns=5, width_mm=0.3, gap_mm=0.3))
    >>> round(s["layers"][0]["turns"], 4), s["layers"][0]["outer_mm"], round(s["inner_mm"], 6), s["via_count"]
    (5.0236, 20.0, 14.6, 1)
    """
    if outlines is None:
        tol = getattr(coil.spec, "tolerance_mm", DEFAULT_TOLERANCE_MM)
        outlines = make_outlines(coil, tolerance_mm=tol)
    layer_set = sorted({t.layer for t in coil.traces} | set(outlines.copper))
    layers = []
    all_out, all_in, per_winding = [], [], []
    for layer in layer_set:
        traces = coil.traces_on(layer)
        windings = [t for t in traces if t.role == "winding"]
        entry = {
            "layer": layer,
            "name": outlines.layer_names.get(layer, coil.stackup.layer_name(layer)),
            "trace_length_mm": float(sum(t.length_mm for t in traces)),
            "winding_length_mm": float(sum(t.length_mm for t in windings)),
            "copper_area_mm2": outlines.area_mm2(layer),
            "turns": 0.0,
            "outer_mm": None,
            "inner_mm": None,
            "fill_ratio": None,
            "direction": None,
        }
        if windings:
            sizes = [winding_sizes(t.points_mm, t.width_mm, side_normals_rad=_side_normals(coil)) for t in windings]
            turns = [winding_turns(t.points_mm) for t in windings]
            per_winding.extend(turns)
            d_out = max(s[0] for s in sizes)
            d_in = min(s[1] for s in sizes)
            all_out.append(d_out)
            all_in.append(d_in)
            area = sum(polyline_signed_area(t.points_mm) for t in windings)
            entry.update(turns=sum(turns), outer_mm=d_out, inner_mm=d_in, fill_ratio=fill_ratio(d_out, d_in), direction="ccw" if area > 0 else "cw")
        layers.append(entry)
    d_out = max(all_out) if all_out else None
    d_in = min(all_in) if all_in else None
    result = {
        "name": coil.name,
        "units": "mm",
        "layers": layers,
        "total_trace_length_mm": sum(t.length_mm for t in coil.traces),
        "total_winding_length_mm": sum(t.length_mm for t in coil.winding_traces()),
        "turns_per_winding": per_winding,
        "extra_turns": list(coil.extra_turns),
        "outer_mm": d_out,
        "inner_mm": d_in,
        "fill_ratio": None if d_out is None else fill_ratio(d_out, d_in),
        "via_count": sum(1 for v in coil.vias if v.role == "via"),
        "terminal_pad_count": sum(1 for v in coil.vias if v.role == "terminal"),
        "terminals": {t.name: [t.x_mm, t.y_mm] for t in coil.terminals},
        "bounds_mm": _copper_bounds(outlines),
        "board_bounds_mm": None if outlines.board is None else list(outlines.board.bounds),
        "board_layers": coil.stackup.n_layers,
        "tolerance_mm": outlines.tolerance_mm,
        "spec": coil.spec if dataclasses.is_dataclass(coil.spec) else None,
    }
    return jsonable(result)
