"""Fabrication rule sets: what a board process can make and what the design
must stand electrically.

A rule set is a TOML file with one ``[rules]`` table (the same table a
design file may carry to override single values)::

    [rules]
    name = "standard"
    min_width_outer_mm = 0.15
    min_gap_outer_mm = 0.15
    ...

Lengths accept numbers in the unit the key names or strings with units
("6 mil"); copper thicknesses accept "1 oz". Rule sets are selected by name
(``"standard"`` reads ``templates/rules-standard.toml``) or by a path to a
TOML file. Every error is a :class:`~tracecoil.errors.SpecError` naming the
key, the value and what is allowed.

Layer classes: copper layers 1 (top) and n (bottom) of an n-layer board are
*outer* layers; the rest are *inner* layers. Widths, gaps and copper
thickness are given for each class.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, fields, replace
from pathlib import Path

from ..errors import SpecError, unknown_key_message
from ..units import to_mm, to_um

DEFAULT_RULES = "standard"
RULE_PREFIX = "rules-"
# IPC-2221 electrical clearance columns a rule set may select (see
# tracecoil.rules.electrical.SPACING_CONDITIONS for their meaning).
CONDITIONS = ("uncoated", "uncoated-high-altitude", "coated")

_LENGTH_KEYS = (
    "min_width_outer_mm",
    "min_width_inner_mm",
    "min_gap_outer_mm",
    "min_gap_inner_mm",
    "min_drill_mm",
    "min_annular_ring_mm",
    "via_to_via_mm",
    "via_to_trace_mm",
    "edge_clearance_mm",
)
_THICKNESS_KEYS = ("copper_outer_um", "copper_inner_um")


@dataclass(frozen=True)
class RuleSet:
    """Fabrication and electrical limits (lengths in mm).

    Parameters
    ----------
    name, description : str
        A short name (used in reports) and one line about the process.
    min_width_outer_mm, min_width_inner_mm : float
        Narrowest copper allowed on outer / inner layers.
    min_gap_outer_mm, min_gap_inner_mm : float
        Smallest copper-to-copper gap on outer / inner layers.
    min_drill_mm : float
        Smallest finished hole diameter.
    min_annular_ring_mm : float
        Narrowest copper ring around a plated hole, (pad - drill) / 2 for a
        centred round pad.
    via_to_via_mm : float
        Smallest distance between the edges of two drilled holes.
    via_to_trace_mm : float
        Smallest distance from a drilled hole's edge to copper that is not
        its own pad, on every layer the hole passes through.
    edge_clearance_mm : float
        Smallest distance from copper (and holes) to the board edge.
    copper_outer_um, copper_inner_um : float
        Finished copper thickness the process delivers on outer / inner
        layers (um); used for the current check when a layout has no
        stack-up of its own.
    max_temp_rise_c : float
        Largest allowed temperature rise of a trace at the design current
        (IPC-2221 trace formula), in kelvin.
    design_current_a : float
        Current the coil carries at its terminals (A), for the temperature
        check; 0 switches the check off.
    working_voltage_v : float
        Largest voltage (DC or AC peak) between any two conductors, for the
        IPC-2221 spacing check; 0 switches it off.
    condition : {'uncoated', 'uncoated-high-altitude', 'coated'}
        Which IPC-2221 clearance column applies to outer layers.
    source : str or None
        The file the rule set was read from.
    """

    name: str = "custom"
    description: str = ""
    min_width_outer_mm: float = 0.15
    min_width_inner_mm: float = 0.15
    min_gap_outer_mm: float = 0.15
    min_gap_inner_mm: float = 0.15
    min_drill_mm: float = 0.3
    min_annular_ring_mm: float = 0.13
    via_to_via_mm: float = 0.25
    via_to_trace_mm: float = 0.2
    edge_clearance_mm: float = 0.3
    copper_outer_um: float = 35.0
    copper_inner_um: float = 35.0
    max_temp_rise_c: float = 10.0
    design_current_a: float = 0.0
    working_voltage_v: float = 0.0
    condition: str = "uncoated"
    source: str | None = None

    def __post_init__(self):
        if not isinstance(self.name, str) or not self.name:
            raise SpecError(f"rules.name must be a non-empty string; got {self.name!r}")
        if not isinstance(self.description, str):
            raise SpecError(f"rules.description must be a string; got {self.description!r}")
        for k in _LENGTH_KEYS:
            v = to_mm(getattr(self, k), f"rules.{k}")
            _positive(k, v, lo=0.0, hi=50.0, unit=" mm", open_lo=k not in ("edge_clearance_mm", "via_to_via_mm", "via_to_trace_mm"))
            object.__setattr__(self, k, v)
        for k in _THICKNESS_KEYS:
            v = to_um(getattr(self, k), f"rules.{k}")
            _positive(k, v, lo=1.0, hi=500.0, unit=" um")
            object.__setattr__(self, k, v)
        _positive("max_temp_rise_c", self.max_temp_rise_c, lo=0.0, hi=200.0, unit=" K", open_lo=True)
        _positive("design_current_a", self.design_current_a, lo=0.0, hi=1000.0, unit=" A")
        _positive("working_voltage_v", self.working_voltage_v, lo=0.0, hi=100000.0, unit=" V")
        if self.condition not in CONDITIONS:
            raise SpecError(f"rules.condition must be one of {', '.join(repr(c) for c in CONDITIONS)}; got {self.condition!r}")

    # ----------------------------------------------------------- per layer
    @staticmethod
    def is_outer(layer: int, n_layers: int) -> bool:
        """True for the top (1) and bottom (``n_layers``) copper layers."""
        return layer == 1 or layer == n_layers

    def min_width_mm(self, layer: int, n_layers: int) -> float:
        """Narrowest copper allowed on ``layer`` of an ``n_layers`` board.

        >>> r = RuleSet(min_width_outer_mm=0.15, min_width_inner_mm=0.1)
        >>> r.min_width_mm(1, 4), r.min_width_mm(2, 4), r.min_width_mm(4, 4)
        (0.15, 0.1, 0.15)
        """
        return self.min_width_outer_mm if self.is_outer(layer, n_layers) else self.min_width_inner_mm

    def min_gap_mm(self, layer: int, n_layers: int) -> float:
        """Smallest copper-to-copper gap on ``layer`` of an ``n_layers`` board."""
        return self.min_gap_outer_mm if self.is_outer(layer, n_layers) else self.min_gap_inner_mm

    def copper_um(self, layer: int, n_layers: int) -> float:
        """Copper thickness the process delivers on ``layer`` (um)."""
        return self.copper_outer_um if self.is_outer(layer, n_layers) else self.copper_inner_um

    def with_values(self, **changes) -> "RuleSet":
        """A validated copy with some values changed."""
        for k in changes:
            if k not in RULE_KEYS:
                raise SpecError(unknown_key_message("rules", k, RULE_KEYS))
        return replace(self, **changes)

    def to_dict(self) -> dict:
        return {f.name: getattr(self, f.name) for f in fields(self)}


RULE_KEYS = tuple(f.name for f in fields(RuleSet) if f.name != "source")


def _positive(key, value, *, lo, hi, unit="", open_lo=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise SpecError(f"rules.{key} must be a finite number; got {value!r}")
    if (value <= lo if open_lo else value < lo) or value > hi:
        rel = ">" if open_lo else ">="
        raise SpecError(f"rules.{key} must be {rel} {lo} and <= {hi}{unit}; got {value}{unit}")


def rules_from_dict(values: dict, *, base: RuleSet | None = None, source: str | None = None) -> RuleSet:
    """Validate a ``[rules]`` mapping, on top of ``base`` when given.

    >>> round(rules_from_dict({"name": "mine", "min_gap_outer_mm": "6 mil"}).min_gap_outer_mm, 6)
    0.1524
    """
    if not isinstance(values, dict):
        raise SpecError(f"[rules] must be a table of keys; got {type(values).__name__}")
    for k in values:
        if k not in RULE_KEYS:
            raise SpecError(unknown_key_message("rules", k, RULE_KEYS))
    start = base.to_dict() if base is not None else {}
    merged = {**start, **values}
    if source is not None:
        merged["source"] = source
    return RuleSet(**merged)


def rule_set_names() -> list[str]:
    """Names of the bundled rule sets (``templates/rules-<name>.toml``).

    >>> "standard" in rule_set_names() and "fine" in rule_set_names()
    True
    """
    from ..templates import template_names

    return [n[len(RULE_PREFIX):] for n in template_names(RULE_PREFIX)]


def read_toml(path: Path) -> dict:
    """Parsed TOML of ``path``; unreadable or invalid files raise SpecError."""
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as e:
        raise SpecError(f"{path}: not valid TOML: {e}") from None
    except OSError as e:
        raise SpecError(f"rule set file {str(path)!r} cannot be read: {e.strerror}") from None


def load_rules(name_or_path=None, *, base_dir=None) -> RuleSet:
    """Load a rule set by bundled name or from a TOML file.

    Parameters
    ----------
    name_or_path : str, Path, RuleSet or None
        ``None`` gives the default ('standard'); a bare name picks
        ``templates/rules-<name>.toml`` (the template's own name,
        'rules-<name>', works too); anything with a path separator or a
        ``.toml`` ending is read as a file (relative to ``base_dir`` when
        given, e.g. the folder of the design file that names it). A
        :class:`RuleSet` is returned unchanged.

    >>> r = load_rules("standard")
    >>> r.name, r.min_width_outer_mm
    ('standard', 0.15)
    """
    if isinstance(name_or_path, RuleSet):
        return name_or_path
    if name_or_path is None:
        name_or_path = DEFAULT_RULES
    if not isinstance(name_or_path, (str, Path)):
        raise SpecError(f"rules must be a rule set name or a path to a TOML file; got {name_or_path!r}")
    text = str(name_or_path)
    looks_like_path = isinstance(name_or_path, Path) or "/" in text or "\\" in text or text.endswith(".toml")
    if looks_like_path:
        path = Path(text)
        if base_dir is not None and not path.is_absolute():
            path = Path(base_dir) / path
        if not path.is_file():
            raise SpecError(f"rule set file {str(path)!r} does not exist")
    else:
        from ..templates import TEMPLATE_DIR

        stem = text[len(RULE_PREFIX) :] if text.startswith(RULE_PREFIX) else text  # 'rules-fine' names the template file
        path = TEMPLATE_DIR / f"{RULE_PREFIX}{stem}.toml"
        if not path.is_file():
            names = rule_set_names()
            raise SpecError(f"no rule set named {text!r}; bundled rule sets: {', '.join(names) or '(none)'}; or give a path to a TOML file")
    data = read_toml(path)
    if set(data) != {"rules"}:
        extra = sorted(set(data) - {"rules"})
        raise SpecError(f"{path.name}: a rule set file holds one [rules] table; " + (f"found {extra}" if extra else "found none"))
    try:
        rules = rules_from_dict(data["rules"], source=str(path))
    except SpecError as e:
        raise SpecError(f"{path.name}: {e}") from None
    return rules


def design_rules(design, override=None) -> RuleSet:
    """The rule set that applies to a :class:`~tracecoil.design.Design`.

    ``override`` (a name, path or RuleSet, e.g. from the command line)
    replaces the design's ``[design] rules`` choice; the design's own
    ``[rules]`` table then overrides single values of whichever was chosen.
    """
    base_dir = Path(design.source).parent if getattr(design, "source", None) else None
    chosen = override if override is not None else design.rules
    rules = load_rules(chosen, base_dir=base_dir if override is None else None)
    table = (design.tables or {}).get("rules")
    if table:
        try:
            rules = rules_from_dict(table, base=rules, source=rules.source)
        except SpecError as e:
            where = Path(design.source).name if design.source else "design"
            raise SpecError(f"{where}: {e}") from None
    return rules
