"""Design specifications: validated, frozen dataclasses and the TOML design file.

The keys of the ``[coil]`` table of a design file are exactly the keyword
arguments of :func:`tracecoil.spiral`, so a file and a script say the same
thing::

    [coil]
    shape = "square"
    outer_mm = 20
    turns = 8
    width_mm = 0.2
    gap_mm = 0.2

    [board]
    layers = 2

Validation happens once, here, at the edge. Every error names the key, the
value that arrived and what is allowed, and is a :class:`SpecError`.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field, fields, replace
from pathlib import Path

from .errors import SpecError, unknown_key_message
from .layout import Stackup
from .units import to_mm, to_um

SHAPES = ("circle", "square", "rectangle", "hexagon", "octagon", "polygon", "custom")
WIRINGS = ("series", "parallel")
DIRECTIONS = ("ccw", "cw")
CORNERS = ("sharp", "round", "chamfer")
RETURN_LEADS = ("layer", "none")

# Smallest copper feature any printed-circuit process can make: 25 um (1 mil)
# (common practice: fine-line and HDI processes reach ~50 um; 25 um is a hard
# floor below which a "trace" is not a PCB feature).
MIN_FEATURE_MM = 0.025
MAX_LAYERS = 32
# Tables a design file may hold; tables other modules read are kept raw.
TABLES = ("design", "coil", "board", "rules", "target", "motion", "receiver", "sweep", "tolerance", "check")


def _check_range(name, value, lo=None, hi=None, *, lo_open=False, unit=""):
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
        raise SpecError(f"{name} must be a finite number; got {value!r}")
    bad_lo = lo is not None and (value <= lo if lo_open else value < lo)
    bad_hi = hi is not None and value > hi
    if bad_lo or bad_hi:
        lo_s = "" if lo is None else (f"> {lo}" if lo_open else f">= {lo}")
        hi_s = "" if hi is None else f"<= {hi}"
        rng = " and ".join(s for s in (lo_s, hi_s) if s)
        raise SpecError(f"{name} must be {rng}{unit}; got {value}{unit}")
    return value


def _check_choice(name, value, choices):
    if value not in choices:
        raise SpecError(f"{name} must be one of {', '.join(repr(c) for c in choices)}; got {value!r}")
    return value


def _check_int(name, value, lo, hi):
    if isinstance(value, bool) or not isinstance(value, int):
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        else:
            raise SpecError(f"{name} must be a whole number from {lo} to {hi}; got {value!r}")
    if not lo <= value <= hi:
        raise SpecError(f"{name} must be a whole number from {lo} to {hi}; got {value}")
    return value


@dataclass(frozen=True)
class BoardSpec:
    """The printed board: copper layers, thicknesses and dielectric.

    Parameters
    ----------
    layers : int
        Number of copper layers of the board (1..32).
    copper_um : float or tuple of float
        Copper thickness in micrometres, one value for all layers or one per
        layer (default 35 um: nominal one-ounce copper).
    thickness_mm : float
        Board thickness (default 1.6 mm, common practice).
    dielectric_mm : tuple of float or None
        Dielectric thickness between consecutive copper layers. Default:
        the board thickness less the copper, shared equally.
    permittivity : float
        Relative permittivity of the dielectric (default 4.5; FR-4 is about
        4.2-4.8 near 1 MHz, common practice).
    plating_um : float
        Plating thickness in plated holes (default 25 um, common practice).
    outline_mm : tuple of float or None
        Optional board outline as a centred rectangle (width, height) in mm,
        for edge-clearance checks and exports.
    """

    layers: int = 2
    copper_um: float | tuple[float, ...] = 35.0
    thickness_mm: float = 1.6
    dielectric_mm: tuple[float, ...] | None = None
    permittivity: float = 4.5
    plating_um: float = 25.0
    outline_mm: tuple[float, float] | None = None

    def __post_init__(self):
        n = _check_int("board.layers", self.layers, 1, MAX_LAYERS)
        cu = self.copper_um
        if isinstance(cu, (list, tuple)):
            cu = tuple(to_um(c, "board.copper_um") for c in cu)
            if len(cu) != n:
                raise SpecError(f"board.copper_um lists {len(cu)} thicknesses but board.layers = {n}; give one per layer or a single value")
        else:
            cu = (to_um(cu, "board.copper_um"),) * n
        for c in cu:
            _check_range("board.copper_um", c, 1.0, 500.0, unit=" um")
        object.__setattr__(self, "copper_um", cu)
        t = _check_range("board.thickness_mm", to_mm(self.thickness_mm, "board.thickness_mm"), 0.05, 10.0, unit=" mm")
        object.__setattr__(self, "thickness_mm", t)
        if self.dielectric_mm is not None:
            d = tuple(to_mm(x, "board.dielectric_mm") for x in self.dielectric_mm)
            if len(d) != n - 1:
                raise SpecError(f"board.dielectric_mm must list {n - 1} thicknesses (one between each pair of copper layers); got {len(d)}")
            for x in d:
                _check_range("board.dielectric_mm", x, 0.0, 10.0, lo_open=True, unit=" mm")
            object.__setattr__(self, "dielectric_mm", d)
        elif n > 1:
            rest = t - sum(cu) / 1000.0
            if rest <= 0:
                raise SpecError(f"board.thickness_mm = {t} mm leaves no room for dielectric between {n} copper layers of {cu[0]} um")
        _check_range("board.permittivity", self.permittivity, 1.0, 100.0)
        _check_range("board.plating_um", to_um(self.plating_um, "board.plating_um"), 1.0, 200.0, unit=" um")
        object.__setattr__(self, "plating_um", to_um(self.plating_um, "board.plating_um"))
        if self.outline_mm is not None:
            o = tuple(to_mm(x, "board.outline_mm") for x in self.outline_mm)
            if len(o) != 2 or min(o) <= 0:
                raise SpecError(f"board.outline_mm must be [width, height] > 0 in mm; got {self.outline_mm!r}")
            object.__setattr__(self, "outline_mm", o)

    def stackup(self) -> Stackup:
        n = self.layers
        if self.dielectric_mm is not None:
            d = self.dielectric_mm
        elif n == 1:
            d = ()
        else:
            d = ((self.thickness_mm - sum(self.copper_um) / 1000.0) / (n - 1),) * (n - 1)
        return Stackup(copper_um=self.copper_um, dielectric_mm=tuple(d), permittivity=self.permittivity, plating_um=self.plating_um)


@dataclass(frozen=True)
class CoilSpec:
    """Parameters of a planar spiral coil; the same names as ``spiral(...)``.

    Parameters
    ----------
    shape : {'circle', 'square', 'rectangle', 'hexagon', 'octagon', 'polygon'}
    outer_mm : float
        Outer size at the outside edge of the copper: the diameter of a
        circle; the width across flats of a square or regular polygon (twice
        the distance from centre to an outer side); the x width of a
        rectangle.
    turns : float
        Turns per layer; fractional turns are allowed.
    width_mm, gap_mm : float
        Trace width and the copper-to-copper gap between adjacent turns.
        The pitch is ``width_mm + gap_mm``.
    layers : int
        Number of copper layers the winding uses.
    wiring : {'series', 'parallel'}
        Series layers alternate winding direction so current circulates the
        same way in every layer; parallel layers repeat the same spiral.
    direction : {'ccw', 'cw'}
        Sense in which current entering terminal A circulates, seen from the
        top of the board.
    start_angle_deg : float
        Polar angle of the outer start of the winding (and of terminal A).
    outer_height_mm : float or None
        Rectangle only: the y height at the outside edge.
    sides : int or None
        Polygon only: the number of sides (3..64).
    corner : {'sharp', 'round', 'chamfer'}
        Corner treatment of polygon spirals; ``corner_mm`` is the fillet
        radius or chamfer leg on the centreline.
    tolerance_mm : float
        Largest allowed chord error when curves become polygons.
    via_drill_mm, via_pad_mm : float
        Vias joining layers.
    pad_mm, pad_drill_mm : float
        Through-hole terminal pads.
    return_lead : {'layer', 'none'}
        How the inner end gets out when it must: 'layer' runs a return lead
        on a spare copper layer; 'none' leaves terminal B at the centre.
    paths : tuple of dict or None
        Custom shape only: the centrelines in current order, each
        ``{"layer": n, "points": [[x, y], ...]}`` in mm; consecutive paths
        on different layers are joined by a via where one ends and the next
        begins.
    on_layers : tuple of int or None
        Which board copper layers carry the winding (1 = top). Default:
        layers 1..n, or top and bottom for two layers on a thicker board.
    return_layer : int or None
        Copper layer for the return lead (default: first unused layer).
    """

    shape: str = "square"
    outer_mm: float = 20.0
    turns: float = 8.0
    width_mm: float = 0.2
    gap_mm: float = 0.2
    layers: int = 1
    wiring: str = "series"
    direction: str = "ccw"
    start_angle_deg: float = 0.0
    outer_height_mm: float | None = None
    sides: int | None = None
    corner: str = "sharp"
    corner_mm: float = 0.0
    tolerance_mm: float = 0.01
    via_drill_mm: float = 0.3
    via_pad_mm: float = 0.6
    pad_mm: float = 1.6
    pad_drill_mm: float = 0.8
    return_lead: str = "layer"
    on_layers: tuple[int, ...] | None = None
    return_layer: int | None = None
    paths: tuple | None = None

    def __post_init__(self):
        mm_keys = ("outer_mm", "width_mm", "gap_mm", "corner_mm", "tolerance_mm", "via_drill_mm", "via_pad_mm", "pad_mm", "pad_drill_mm")
        for k in mm_keys:
            object.__setattr__(self, k, to_mm(getattr(self, k), k))
        if self.outer_height_mm is not None:
            object.__setattr__(self, "outer_height_mm", to_mm(self.outer_height_mm, "outer_height_mm"))
        _check_choice("shape", self.shape, SHAPES)
        _check_choice("wiring", self.wiring, WIRINGS)
        _check_choice("direction", self.direction, DIRECTIONS)
        _check_choice("corner", self.corner, CORNERS)
        _check_choice("return_lead", self.return_lead, RETURN_LEADS)
        _check_range("outer_mm", self.outer_mm, 0.0, 1000.0, lo_open=True, unit=" mm")
        _check_range("turns", self.turns, 0.25, 1000.0)
        _check_range("width_mm", self.width_mm, MIN_FEATURE_MM, self.outer_mm / 4, unit=" mm")
        _check_range("gap_mm", self.gap_mm, MIN_FEATURE_MM, self.outer_mm / 4, unit=" mm")
        _check_int("layers", self.layers, 1, MAX_LAYERS)
        _check_range("start_angle_deg", self.start_angle_deg, -360.0, 360.0)
        _check_range("tolerance_mm", self.tolerance_mm, 1e-4, 1.0, unit=" mm")
        _check_range("corner_mm", self.corner_mm, 0.0, self.outer_mm / 4, unit=" mm")
        if self.corner != "sharp" and self.shape == "circle":
            raise SpecError("corner applies to polygon shapes; a circle has no corners (use corner = 'sharp')")
        if self.corner != "sharp" and self.corner_mm <= 0:
            raise SpecError(f"corner = {self.corner!r} needs corner_mm > 0; got {self.corner_mm}")
        _check_range("via_drill_mm", self.via_drill_mm, 0.05, 6.0, unit=" mm")
        _check_range("via_pad_mm", self.via_pad_mm, self.via_drill_mm, 10.0, lo_open=True, unit=" mm (larger than via_drill_mm)")
        _check_range("pad_drill_mm", self.pad_drill_mm, 0.05, 6.0, unit=" mm")
        _check_range("pad_mm", self.pad_mm, self.pad_drill_mm, 20.0, lo_open=True, unit=" mm (larger than pad_drill_mm)")
        if self.shape == "rectangle":
            if self.outer_height_mm is None:
                raise SpecError("shape 'rectangle' needs outer_height_mm (the y height at the outside edge)")
            _check_range("outer_height_mm", self.outer_height_mm, 0.0, 1000.0, lo_open=True, unit=" mm")
        elif self.outer_height_mm is not None:
            raise SpecError(f"outer_height_mm applies to shape 'rectangle' only; got shape {self.shape!r}")
        if self.shape == "polygon":
            if self.sides is None:
                raise SpecError("shape 'polygon' needs sides (3..64)")
            object.__setattr__(self, "sides", _check_int("sides", self.sides, 3, 64))
        elif self.sides is not None:
            raise SpecError(f"sides applies to shape 'polygon' only; got shape {self.shape!r}")
        if self.shape == "custom":
            object.__setattr__(self, "paths", _check_paths(self.paths))
            object.__setattr__(self, "layers", len({p["layer"] for p in self.paths}))
        elif self.paths is not None:
            raise SpecError(f"paths applies to shape 'custom' only; got shape {self.shape!r}")
        if self.on_layers is not None:
            ol = tuple(_check_int("on_layers", x, 1, MAX_LAYERS) for x in self.on_layers)
            if len(ol) != self.layers or len(set(ol)) != len(ol):
                raise SpecError(f"on_layers must list {self.layers} different copper layers (layers = {self.layers}); got {list(self.on_layers)}")
            object.__setattr__(self, "on_layers", ol)
        if self.return_layer is not None:
            _check_int("return_layer", self.return_layer, 1, MAX_LAYERS)

    @property
    def pitch_mm(self) -> float:
        return self.width_mm + self.gap_mm

    @property
    def n_sides(self) -> int | None:
        """Sides of the polygon family, or None for a circle."""
        return {"square": 4, "rectangle": 4, "hexagon": 6, "octagon": 8, "polygon": self.sides}.get(self.shape)


def _check_paths(paths):
    if not paths:
        raise SpecError("shape 'custom' needs paths: a list of {layer = n, points = [[x, y], ...]} in current order")
    out = []
    for i, p in enumerate(paths):
        if not isinstance(p, dict) or set(p) != {"layer", "points"}:
            raise SpecError(f"paths[{i}] must be a table with exactly the keys 'layer' and 'points'; got {p!r}"[:200])
        layer = _check_int(f"paths[{i}].layer", p["layer"], 1, MAX_LAYERS)
        try:
            pts = tuple((float(to_mm(x, f"paths[{i}].points")), float(to_mm(y, f"paths[{i}].points"))) for x, y in p["points"])
        except (TypeError, ValueError) as e:
            raise SpecError(f"paths[{i}].points must be a list of [x, y] pairs in mm ({e})") from None
        if len(pts) < 2:
            raise SpecError(f"paths[{i}].points needs at least 2 points; got {len(pts)}")
        if any(math.dist(a, b) == 0 for a, b in zip(pts, pts[1:])):
            raise SpecError(f"paths[{i}].points repeats a point; consecutive points must differ")
        out.append({"layer": layer, "points": pts})
    return tuple(out)


COIL_KEYS = tuple(f.name for f in fields(CoilSpec))
BOARD_KEYS = tuple(f.name for f in fields(BoardSpec))


@dataclass(frozen=True)
class Design:
    """A whole design file: name, coil, board and the other tables raw."""

    coil: CoilSpec
    board: BoardSpec = field(default_factory=BoardSpec)
    name: str = "coil"
    description: str = ""
    rules: str | None = None
    tables: dict = field(default_factory=dict)
    source: str | None = None

    def with_coil(self, **changes) -> "Design":
        """A copy with some ``[coil]`` keys changed (validated)."""
        return replace(self, coil=make_coil_spec({**coil_dict(self.coil), **changes}))


def coil_dict(spec: CoilSpec) -> dict:
    return {f.name: getattr(spec, f.name) for f in fields(spec)}


def _build(cls, table: str, keys, values: dict):
    if not isinstance(values, dict):
        raise SpecError(f"[{table}] must be a table of keys; got {type(values).__name__}")
    for k in values:
        if k not in keys:
            raise SpecError(unknown_key_message(table, k, keys))
    vals = dict(values)
    for k, v in vals.items():
        if isinstance(v, list):
            vals[k] = tuple(v)
    try:
        return cls(**vals)
    except TypeError as e:  # pragma: no cover - guarded by the key check
        raise SpecError(f"[{table}]: {e}") from None


def make_coil_spec(values: dict) -> CoilSpec:
    """Validate a ``[coil]`` mapping into a :class:`CoilSpec`."""
    return _build(CoilSpec, "coil", COIL_KEYS, values)


def make_board_spec(values) -> BoardSpec:
    """Validate a ``[board]`` mapping (or pass a BoardSpec through)."""
    if isinstance(values, BoardSpec):
        return values
    return _build(BoardSpec, "board", BOARD_KEYS, values or {})


def design_from_dict(data: dict, *, source: str | None = None) -> Design:
    """Validate the parsed content of a design file."""
    for t in data:
        if t not in TABLES:
            raise SpecError(unknown_key_message("design file", t, TABLES).replace("unknown key", "unknown table"))
    if "coil" not in data:
        raise SpecError("design file has no [coil] table; it needs at least [coil] with shape, outer_mm, turns, width_mm, gap_mm")
    meta = data.get("design", {})
    for k in meta:
        if k not in ("name", "description", "rules"):
            raise SpecError(unknown_key_message("design", k, ("name", "description", "rules")))
    coil = make_coil_spec(data["coil"])
    board = make_board_spec(data.get("board", {}))
    name = meta.get("name") or (Path(source).stem if source else "coil")
    if not isinstance(name, str) or not name.replace("-", "").replace("_", "").isalnum():
        raise SpecError(f"design.name must use letters, digits, '-' and '_' only (it names output files); got {name!r}")
    tables = {k: v for k, v in data.items() if k not in ("design", "coil", "board")}
    rules = meta.get("rules")
    return Design(coil=coil, board=board, name=name, description=meta.get("description", ""), rules=rules, tables=tables, source=source)


def load_design(path) -> Design:
    """Read and validate a TOML design file.

    Raises :class:`SpecError` naming the file and the problem.
    """
    p = Path(path)
    if not p.is_file():
        raise SpecError(f"design file {str(p)!r} does not exist")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"{p}: not valid TOML: {e}") from None
    try:
        return design_from_dict(data, source=str(p))
    except SpecError as e:
        raise SpecError(f"{p.name}: {e}") from None
