"""Read copper outlines made elsewhere (DXF or GDSII) so the rule check can
run on them.

A *layer map* says what each layer of the file is: a copper layer number
(1 = top), ``drill`` (drilled holes) or ``board`` (the board edge). Keys
are DXF layer names (case does not matter) or GDSII ``layer/datatype``
pairs (``"1/0"``, or ``"1"`` for datatype 0). It can be given as a dict,
as text ``"TOP=1, BOTTOM=2, HOLES=drill, EDGE=board"``, or as a TOML file
with a ``[layers]`` table. Layers not in the map are ignored (and listed in
the notes). Without a map, the names tracecoil's own exporters write are
used: DXF ``COPPER_TOP``, ``COPPER_INNER<k>``, ``COPPER_BOTTOM``,
``DRILLS``, ``BOARD_OUTLINE``; GDSII ``n/0`` for copper layer n,
``100/0`` drills and ``101/0`` board edge.

What is read:

* DXF (units from ``$INSUNITS``; a drawing without units is taken as
  millimetres and says so in the notes): solid HATCH areas, or, on layers
  without hatches, closed (LW)POLYLINEs combined even-odd (a ring inside
  another is a hole); open LWPOLYLINEs with a constant width as traces;
  CIRCLEs as round pads. On the drill layer, CIRCLEs are holes; on the
  board layer the largest closed outline is the board edge. Arcs and
  bulges are flattened to ``tolerance_mm``.
* GDSII (units from the library): all polygons and paths of the top
  cells, merged per layer (keyhole polygons become polygons with holes).
  Drill polygons become holes of the diameter of their circumscribed
  circle (a polygon inscribed in the hole, as exporters draw them).

A file that cannot be read, holds no copper on the mapped layers, or has
unusable geometry raises :class:`~tracecoil.errors.SpecError` saying what
was found.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import shapely
from shapely.geometry import LineString, Polygon

from ..errors import SpecError
from ..outline import DEFAULT_TOLERANCE_MM, Outlines, as_multipolygon, disc
from .ruleset import read_toml

ROLES = ("drill", "board")
FORMATS = ("dxf", "gds")


def layer_name(layer: int, n_layers: int) -> str:
    """'top', 'inner<k>' or 'bottom' for copper layer ``layer`` of ``n_layers``.

    >>> [layer_name(l, 4) for l in (1, 2, 3, 4)]
    ['top', 'inner1', 'inner2', 'bottom']
    """
    if layer == 1:
        return "top"
    if layer == n_layers:
        return "bottom"
    return f"inner{layer - 1}"


def _role(value, key):
    if isinstance(value, str) and value.strip().lower() in ROLES:
        return value.strip().lower()
    try:
        n = int(str(value).strip())
    except ValueError:
        n = 0
    if n < 1 or isinstance(value, bool) or (isinstance(value, float) and not value.is_integer()):
        raise SpecError(f"layer map: {key!r} must map to a copper layer number (1 = top) or one of {', '.join(ROLES)}; got {value!r}")
    return n


def parse_layer_map(spec) -> dict:
    """A layer map from a dict, a text ``"KEY=ROLE, ..."`` or a TOML file
    path (with a ``[layers]`` table). Keys are upper-cased (DXF) or kept as
    ``layer/datatype`` (GDSII).

    >>> parse_layer_map("top=1, Bottom=2, holes=drill, 7/0=board")
    {'TOP': 1, 'BOTTOM': 2, 'HOLES': 'drill', '7/0': 'board'}
    """
    if spec is None:
        return {}
    if isinstance(spec, dict):
        items = spec.items()
    elif isinstance(spec, (str, Path)) and (str(spec).endswith(".toml") or Path(str(spec)).is_file()):
        p = Path(spec)
        if not p.is_file():
            raise SpecError(f"layer map file {str(p)!r} does not exist")
        data = read_toml(p)
        if not isinstance(data.get("layers"), dict):
            raise SpecError(f"{p}: a layer map file needs a [layers] table such as TOP = 1, DRILLS = \"drill\"")
        items = data["layers"].items()
    elif isinstance(spec, str):
        items = []
        for part in spec.split(","):
            if not part.strip():
                continue
            if "=" not in part:
                raise SpecError(f"layer map entries look like NAME=1 or NAME=drill; got {part.strip()!r}")
            k, v = part.split("=", 1)
            items.append((k.strip(), v.strip()))
    else:
        raise SpecError(f"layer map must be a dict, text 'NAME=1, ...' or a TOML file; got {type(spec).__name__}")
    out = {}
    for k, v in items:
        key = _gds_key(str(k)) or str(k).strip().upper()
        if not key:
            raise SpecError("layer map has an empty layer name")
        out[key] = _role(v, k)
    return out


def _gds_key(text: str) -> str | None:
    t = text.strip()
    parts = t.split("/")
    if all(p.strip().isdigit() for p in parts) and 1 <= len(parts) <= 2:
        return f"{int(parts[0])}/{int(parts[1]) if len(parts) == 2 else 0}"
    return None


def _copper_numbers(mapping: dict) -> list[int]:
    return sorted({v for v in mapping.values() if isinstance(v, int)})


def _finish(path, copper_parts, drills, board_polys, mapping, tolerance_mm, n_layers, present=()):
    copper = {}
    for layer, geoms in sorted(copper_parts.items()):
        g = shapely.union_all([shapely.make_valid(x) for x in geoms]) if geoms else Polygon()
        mp = as_multipolygon(g)
        if not mp.is_empty:
            copper[layer] = mp
    if not copper:
        mapped = sorted(k for k, v in mapping.items() if isinstance(v, int))
        found = ", ".join(sorted(present)) or "none"
        raise SpecError(f"{Path(path).name}: no copper found on the mapped copper layers {mapped or '(none)'}; the file has layers: {found}; give a layer map such as 'TOP=1, BOTTOM=2'")
    n = max(n_layers or 0, max(copper), *_copper_numbers(mapping))
    board = None
    if board_polys:
        valid = [as_multipolygon(shapely.make_valid(b)) for b in board_polys]
        parts = [p for m in valid for p in m.geoms]
        if parts:
            board = max(parts, key=lambda p: p.area)
    d = np.array(drills, float).reshape(-1, 3)
    return Outlines(
        copper=copper,
        drills=d,
        plated=np.ones(len(d), bool),
        board=board,
        layer_names={l: layer_name(l, n) for l in range(1, n + 1)},
        tolerance_mm=tolerance_mm,
    )


# --------------------------------------------------------------------- DXF
def _dxf_default_map(layer_names) -> dict:
    from ..export.dxf import BOARD_LAYER, DRILL_LAYER

    names = {n.upper() for n in layer_names}
    inner = sorted(int(n[len("COPPER_INNER") :]) for n in names if n.startswith("COPPER_INNER") and n[len("COPPER_INNER") :].isdigit())
    m = {DRILL_LAYER.upper(): "drill", BOARD_LAYER.upper(): "board"}
    if "COPPER_TOP" in names:
        m["COPPER_TOP"] = 1
    for k in inner:
        m[f"COPPER_INNER{k}"] = k + 1
    if "COPPER_BOTTOM" in names:
        m["COPPER_BOTTOM"] = (max(inner) + 2) if inner else 2
    return m


def _even_odd(rings) -> object:
    out = Polygon()
    for r in rings:
        if len(r) >= 3:
            out = out.symmetric_difference(shapely.make_valid(Polygon(r)))
    return out


def read_dxf(path, *, layer_map=None, tolerance_mm: float = DEFAULT_TOLERANCE_MM, notes: list | None = None, n_layers=None) -> Outlines:
    """Outlines from a DXF file (see the module docstring)."""
    import ezdxf
    from ezdxf import path as dxfpath
    from ezdxf import units as dxfunits

    notes = notes if notes is not None else []
    try:
        doc = ezdxf.readfile(str(path))
    except OSError as e:
        raise SpecError(f"{Path(path).name}: cannot read the DXF file: {e}") from None
    except ezdxf.DXFError as e:
        raise SpecError(f"{Path(path).name}: not a readable DXF file ({e})") from None
    msp = doc.modelspace()
    present = {e.dxf.layer for e in msp}
    mapping = parse_layer_map(layer_map) if layer_map else _dxf_default_map(present)
    code = doc.units
    if code == 0:
        scale = 1.0
        notes.append(f"{Path(path).name} states no drawing units ($INSUNITS = 0); read as millimetres")
    else:
        try:
            scale = dxfunits.conversion_factor(code, dxfunits.MM)
        except (KeyError, ValueError, ZeroDivisionError):
            raise SpecError(f"{Path(path).name}: unsupported drawing units $INSUNITS = {code}") from None
    flat = tolerance_mm / max(scale, 1e-12)  # flattening distance in drawing units

    def pts(entity_path):
        v = np.array([(p.x, p.y) for p in entity_path.flattening(flat)], float)
        return v * scale

    hatches, rings, extra, drills, board = {}, {}, {}, [], []
    ignored = {}
    for e in msp:
        role = mapping.get(e.dxf.layer.upper())
        kind = e.dxftype()
        if role is None:
            ignored[e.dxf.layer] = ignored.get(e.dxf.layer, 0) + 1
            continue
        if role == "drill":
            if kind == "CIRCLE":
                c = e.dxf.center
                drills.append((c.x * scale, c.y * scale, 2 * e.dxf.radius * scale))
            elif kind in ("LWPOLYLINE", "POLYLINE") and e.is_closed:
                v = pts(dxfpath.make_path(e))
                ctr = v.mean(axis=0)
                drills.append((ctr[0], ctr[1], 2 * float(np.hypot(*(v - ctr).T).max())))
            continue
        if role == "board":
            if kind in ("LWPOLYLINE", "POLYLINE") and e.is_closed:
                board.append(Polygon(pts(dxfpath.make_path(e))))
            elif kind == "CIRCLE":
                c = e.dxf.center
                board.append(disc(c.x * scale, c.y * scale, 2 * e.dxf.radius * scale, tolerance_mm))
            continue
        if kind == "HATCH":
            polys = []
            for p in dxfpath.from_hatch(e):
                v = pts(p)
                if len(v) >= 3:
                    polys.append(v)
            hatches.setdefault(role, []).append(_even_odd(polys))
        elif kind in ("LWPOLYLINE", "POLYLINE"):
            v = pts(dxfpath.make_path(e))
            width = float(e.dxf.get("const_width", 0.0) or 0.0) * scale if kind == "LWPOLYLINE" else 0.0
            if e.is_closed:
                rings.setdefault(role, []).append(v)
            elif width > 0 and len(v) >= 2:
                extra.setdefault(role, []).append(LineString(v).buffer(width / 2, quad_segs=_qs(width / 2, tolerance_mm)))
            else:
                ignored[f"{e.dxf.layer} (open polyline without width)"] = ignored.get(f"{e.dxf.layer} (open polyline without width)", 0) + 1
        elif kind == "CIRCLE":
            c = e.dxf.center
            extra.setdefault(role, []).append(disc(c.x * scale, c.y * scale, 2 * e.dxf.radius * scale, tolerance_mm))
        else:
            ignored[f"{e.dxf.layer} ({kind})"] = ignored.get(f"{e.dxf.layer} ({kind})", 0) + 1
    copper_parts = {}
    for layer in set(hatches) | set(rings) | set(extra):
        parts = list(extra.get(layer, []))
        if layer in hatches:
            parts += hatches[layer]  # filled areas win; outlines drawn beside them are the same copper
        elif layer in rings:
            parts.append(_even_odd(rings[layer]))
        copper_parts[layer] = parts
    if ignored:
        notes.append("ignored: " + ", ".join(f"{k}: {v}" for k, v in sorted(ignored.items())))
    return _finish(path, copper_parts, drills, board, mapping, tolerance_mm, n_layers, present)


def _qs(r, tol):
    if r <= tol:
        return 1
    return max(1, math.ceil((math.pi / 2) / (2 * math.acos(1 - tol / r))))


# -------------------------------------------------------------------- GDSII
def _gds_default_map(pairs) -> dict:
    from ..export.gds import DEFAULT_BOARD_LAYER, DEFAULT_DRILL_LAYER

    m = {f"{DEFAULT_DRILL_LAYER[0]}/{DEFAULT_DRILL_LAYER[1]}": "drill", f"{DEFAULT_BOARD_LAYER[0]}/{DEFAULT_BOARD_LAYER[1]}": "board"}
    for lay, dt in pairs:
        if dt == 0 and 1 <= lay <= 32:
            m[f"{lay}/0"] = lay
    return m


def read_gds(path, *, layer_map=None, tolerance_mm: float = DEFAULT_TOLERANCE_MM, notes: list | None = None, n_layers=None) -> Outlines:
    """Outlines from a GDSII file (see the module docstring)."""
    import gdstk

    notes = notes if notes is not None else []
    p = Path(path)
    if not p.is_file():
        raise SpecError(f"{path}: no such file")
    try:
        lib = gdstk.read_gds(str(p))
    except (RuntimeError, OSError, ValueError) as e:
        raise SpecError(f"{p.name}: not a readable GDSII file ({e})") from None
    tops = lib.top_level()
    if not tops:
        raise SpecError(f"{p.name}: the GDSII library holds no cells")
    scale = lib.unit * 1000.0  # user units -> mm
    polys = [q for c in tops for q in c.get_polygons(apply_repetitions=True, include_paths=True)]
    if not polys:
        raise SpecError(f"{p.name}: the GDSII file holds no polygons")
    pairs = sorted({(q.layer, q.datatype) for q in polys})
    mapping = parse_layer_map(layer_map) if layer_map else _gds_default_map(pairs)
    copper_parts, drills, board, ignored = {}, [], [], {}
    for q in polys:
        key = f"{q.layer}/{q.datatype}"
        role = mapping.get(key)
        v = np.asarray(q.points, float) * scale
        if role is None:
            ignored[key] = ignored.get(key, 0) + 1
            continue
        if len(v) < 3:
            continue
        if role == "drill":
            ctr = np.asarray(Polygon(v).centroid.coords)[0]
            drills.append((ctr[0], ctr[1], 2 * float(np.hypot(*(v - ctr).T).max())))
        elif role == "board":
            board.append(Polygon(v))
        else:
            copper_parts.setdefault(role, []).append(Polygon(v))
    if ignored:
        notes.append("ignored GDSII layers: " + ", ".join(f"{k} ({v} shapes)" for k, v in sorted(ignored.items())))
    return _finish(path, copper_parts, drills, board, mapping, tolerance_mm, n_layers, [f"{a}/{b}" for a, b in pairs])


def read_outlines(path, *, layer_map=None, tolerance_mm: float = DEFAULT_TOLERANCE_MM, notes: list | None = None, n_layers: int | None = None) -> Outlines:
    """Read a DXF (``.dxf``) or GDSII (``.gds``, ``.gds2``, ``.gdsii``) file.

    Parameters
    ----------
    path : str or Path
    layer_map : dict, str or Path, optional
        See :func:`parse_layer_map`; default: tracecoil's export names.
    tolerance_mm : float
        Chord error for flattening arcs and circles, and the chord
        tolerance the rule check allows round pads (default 5 um).
    notes : list, optional
        Receives lines about assumptions (units, ignored layers).
    n_layers : int, optional
        Copper layers of the board (default: the highest mapped layer),
        which decides the outer (top, bottom) and inner layers.

    >>> import tempfile, pathlib
    >>> bad = pathlib.Path(tempfile.mkdtemp()) / "empty.gds"
    >>> _ = bad.write_bytes(b"")
    >>> try:
    ...     read_outlines(bad)
    ... except SpecError as e:
    ...     print(str(e)[:40])
    empty.gds: not a readable GDSII file (Er
    """
    suffix = Path(path).suffix.lower()
    if not isinstance(tolerance_mm, (int, float)) or not 1e-5 <= tolerance_mm <= 0.5:
        raise SpecError(f"tolerance_mm must be from 1e-5 to 0.5 mm; got {tolerance_mm!r}")
    if suffix == ".dxf":
        return read_dxf(path, layer_map=layer_map, tolerance_mm=tolerance_mm, notes=notes, n_layers=n_layers)
    if suffix in (".gds", ".gds2", ".gdsii"):
        return read_gds(path, layer_map=layer_map, tolerance_mm=tolerance_mm, notes=notes, n_layers=n_layers)
    raise SpecError(f"{Path(path).name}: unknown outline file type {suffix!r}; use .dxf or .gds")
