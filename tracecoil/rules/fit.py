"""Generators that respect rules: the most turns that fit under a rule set,
and a validator that rejects a design whose own numbers break its rules.

>>> from tracecoil.rules.fit import max_turns_for
>>> fit = max_turns_for(outer_mm=10, shape="square", layers=2, rules="standard")
>>> fit.width_mm, fit.gap_mm, fit.turns, fit.clean
(0.15, 0.15, 13.125, True)
"""

from __future__ import annotations

from dataclasses import dataclass, fields

from ..design import BoardSpec, CoilSpec, make_board_spec, make_coil_spec
from ..errors import GeometryError, SpecError
from ..generators import build_coil, default_board_layers, max_turns
from . import electrical
from .check import check, geometry_only
from .geometry import LIMIT_TOL_MM
from .ruleset import RuleSet, design_rules, load_rules, rule_set_names

_VERIFY_STEPS = 8  # at most one turn (in 1/8 turns) below the generator's fit
_DEFAULTS = {f.name: f.default for f in fields(CoilSpec)}


@dataclass(frozen=True)
class TurnsFit:
    """The most turns that fit, and how that was established.

    ``turns`` is the largest turn count (1/8-turn steps) the generator
    builds whose layout passes the geometric rules (when ``clean``), or
    the generator's own fit when no nearby count passed (``clean`` False,
    ``findings`` then holds what the check found there). ``generator_turns``
    is what :func:`tracecoil.generators.max_turns` alone gives.
    """

    turns: float
    width_mm: float
    gap_mm: float
    rules: str
    generator_turns: float
    clean: bool
    findings: tuple = ()
    spec: CoilSpec | None = None


def _board_for(spec: CoilSpec, board) -> BoardSpec:
    if board is None:
        return make_board_spec({"layers": default_board_layers(spec)})
    return make_board_spec(board)


def trace_layers(spec: CoilSpec, board: BoardSpec) -> tuple[int, ...]:
    """Copper layers that carry traces of the coil ``spec`` builds (winding,
    leads, return lead)."""
    try:
        coil = build_coil(make_coil_spec({**_coil_dict(spec), "turns": min(spec.turns, 1.0)}), board)
        return tuple(sorted({t.layer for t in coil.traces}))
    except (GeometryError, SpecError):
        return tuple(range(1, board.layers + 1))


def _coil_dict(spec: CoilSpec) -> dict:
    return {f.name: getattr(spec, f.name) for f in fields(spec)}


def _limits(rules: RuleSet, layers, n_layers):
    w = max(rules.min_width_mm(l, n_layers) for l in layers)
    g = max(rules.min_gap_mm(l, n_layers) for l in layers)
    return w, g


def max_turns_for(*, outer_mm, shape: str = "circle", layers: int = 1, rules=None, width_mm=None, gap_mm=None, board=None, verify: bool = True, **coil) -> TurnsFit:
    """The most turns that fit ``outer_mm`` under a rule set.

    Parameters
    ----------
    outer_mm : float
        Outer size of the copper (see :class:`~tracecoil.design.CoilSpec`).
    shape : str
        Spiral shape.
    layers : int
        Copper layers the winding uses.
    rules : RuleSet, str or None
        Rule set (default 'standard').
    width_mm, gap_mm : float, optional
        Trace width and gap; default the rule set's minimums on the layers
        that carry traces. Values below the minimums raise SpecError.
    board : BoardSpec or dict, optional
        The board (default: the generator's default for ``layers``).
    verify : bool
        Build the coil at the generator's fit and run the geometric checks;
        step down by 1/8 turn (at most one turn) until it passes.
    **coil
        Other ``[coil]`` keys (via and pad sizes, wiring, ...). Via and pad
        sizes not given are the defaults raised as needed to meet the
        minimum drill and annular ring.

    Returns
    -------
    TurnsFit
    """
    rules = load_rules(rules)
    base = {**coil, "shape": shape, "outer_mm": outer_mm, "layers": layers, "turns": 1.0}
    # holes: defaults raised to the rule minimums unless given
    for drill_key, pad_key in (("via_drill_mm", "via_pad_mm"), ("pad_drill_mm", "pad_mm")):
        drill = base.get(drill_key, max(_DEFAULTS[drill_key], rules.min_drill_mm))
        base[drill_key] = drill
        if pad_key not in base:
            base[pad_key] = max(_DEFAULTS[pad_key], drill + 2 * rules.min_annular_ring_mm)
    probe = make_coil_spec({**base, "width_mm": width_mm or 0.2, "gap_mm": gap_mm or 0.2})
    board_spec = _board_for(probe, board)
    w_min, g_min = _limits(rules, trace_layers(probe, board_spec), board_spec.layers)
    w = w_min if width_mm is None else width_mm
    g = g_min if gap_mm is None else gap_mm
    spec = make_coil_spec({**base, "width_mm": w, "gap_mm": g})
    problems = spec_problems(spec, board_spec, rules)
    if problems:
        raise SpecError("; ".join(problems))
    gen = max_turns(spec, board_spec)
    if not verify:
        return TurnsFit(gen, spec.width_mm, spec.gap_mm, rules.name, gen, False, (), make_coil_spec({**_coil_dict(spec), "turns": gen}))
    geo = geometry_only(rules)
    first = None
    for k in range(_VERIFY_STEPS + 1):
        t = gen - k / 8
        if t < 0.25:
            break
        s = make_coil_spec({**_coil_dict(spec), "turns": t})
        try:
            result = check(build_coil(s, board_spec), geo)
        except GeometryError:
            continue
        if result.ok:
            return TurnsFit(t, spec.width_mm, spec.gap_mm, rules.name, gen, True, (), s)
        if first is None:
            first = tuple(result.findings)
    return TurnsFit(gen, spec.width_mm, spec.gap_mm, rules.name, gen, False, first or (), make_coil_spec({**_coil_dict(spec), "turns": gen}))


# ------------------------------------------------------------- validation
def _alternatives(rules: RuleSet, test) -> str:
    """', or rules = "fine"' when a bundled rule set allows what ``test``
    checks; '' otherwise."""
    ok = []
    for name in rule_set_names():
        if name == rules.name:
            continue
        try:
            if test(load_rules(name)):
                ok.append(name)
        except SpecError:  # pragma: no cover - bundled sets are valid
            continue
    return f", or choose rules = {ok[0]!r}" if ok else ""


def spec_problems(spec: CoilSpec, board: BoardSpec, rules: RuleSet, *, current_a=None, voltage_v=None) -> list[str]:
    """Every way the numbers of ``spec`` and ``board`` break ``rules``, as
    messages that name the key, the value, the limit and a way out."""
    tol = LIMIT_TOL_MM
    n = board.layers
    layers = trace_layers(spec, board)
    where = lambda ls: "inner" if all(not RuleSet.is_outer(l, n) for l in ls) else "outer"  # noqa: E731
    rs = f"rule set {rules.name!r}"
    out = []
    w_min, g_min = _limits(rules, layers, n)
    if spec.width_mm < w_min - tol:
        alt = _alternatives(rules, lambda r: spec.width_mm >= _limits(r, layers, n)[0] - tol)
        out.append(f"width_mm = {spec.width_mm:g} mm is narrower than the {w_min:g} mm minimum trace width of {rs} ({where(layers)} layers): use width_mm >= {w_min:g}{alt}")
    if spec.gap_mm < g_min - tol:
        alt = _alternatives(rules, lambda r: spec.gap_mm >= _limits(r, layers, n)[1] - tol)
        out.append(f"gap_mm = {spec.gap_mm:g} mm is below the {g_min:g} mm minimum gap of {rs}: use gap_mm >= {g_min:g}{alt}")
    for key, value in (("via_drill_mm", spec.via_drill_mm), ("pad_drill_mm", spec.pad_drill_mm)):
        if value < rules.min_drill_mm - tol:
            alt = _alternatives(rules, lambda r, v=value: v >= r.min_drill_mm - tol)
            out.append(f"{key} = {value:g} mm is smaller than the {rules.min_drill_mm:g} mm minimum drill of {rs}: use {key} >= {rules.min_drill_mm:g}{alt}")
    for pad_key, drill_key in (("via_pad_mm", "via_drill_mm"), ("pad_mm", "pad_drill_mm")):
        pad, drill = getattr(spec, pad_key), getattr(spec, drill_key)
        ring = (pad - drill) / 2
        if ring < rules.min_annular_ring_mm - tol:
            need = drill + 2 * rules.min_annular_ring_mm
            out.append(
                f"{pad_key} = {pad:g} mm around {drill_key} = {drill:g} mm leaves a {ring:g} mm annular ring; {rs} needs "
                f"{rules.min_annular_ring_mm:g} mm: use {pad_key} >= {need:g}"
            )
    V = rules.working_voltage_v if voltage_v is None else voltage_v
    if V > 0:
        need = max(electrical.spacing_for_voltage_mm(V, internal=not RuleSet.is_outer(l, n), condition=rules.condition) for l in layers)
        if spec.gap_mm < need - tol:
            out.append(f"gap_mm = {spec.gap_mm:g} mm is below the {need:g} mm that {V:g} V needs between conductors (IPC-2221 Table 6-1, from memory): use gap_mm >= {need:g}")
    I = rules.design_current_a if current_a is None else current_a
    if I > 0:
        share = 1.0 / spec.layers if spec.wiring == "parallel" and spec.layers > 1 else 1.0
        for l in layers:
            internal = not RuleSet.is_outer(l, n)
            cu = board.copper_um[l - 1]
            carries = 1.0 if l not in (spec.on_layers or range(1, spec.layers + 1)) else share
            dt = float(electrical.temperature_rise_c(I * carries, spec.width_mm, cu, internal=internal))
            if dt > rules.max_temp_rise_c:
                need = float(electrical.trace_width_mm(I * carries, cu, rules.max_temp_rise_c, internal=internal))
                out.append(
                    f"width_mm = {spec.width_mm:g} mm with {cu:g} um copper heats about {dt:.1f} K at {I * carries:g} A on layer {l} "
                    f"(IPC-2221 fit), above the {rules.max_temp_rise_c:g} K of {rs}: use width_mm >= {need:.3f} or thicker copper"
                )
                break
    if board.outline_mm is not None:
        try:
            x0, y0, x1, y1 = build_coil(spec, board).bounds_mm()
        except (GeometryError, SpecError):
            x0 = y0 = x1 = y1 = None
        if x0 is not None:
            bw, bh = board.outline_mm
            room = min(bw / 2 - x1, x0 + bw / 2, bh / 2 - y1, y0 + bh / 2)
            if room < rules.edge_clearance_mm - tol:
                out.append(
                    f"board.outline_mm = {list(board.outline_mm)} leaves {room:.3f} mm between the copper and the board edge; {rs} needs "
                    f"{rules.edge_clearance_mm:g} mm: enlarge the board or shrink outer_mm"
                )
    return out


def design_problems(design, rules=None, *, current_a=None, voltage_v=None) -> list[str]:
    """Problems of a :class:`~tracecoil.design.Design` under its own rule
    set (``[design] rules`` and ``[rules]``) or under ``rules``."""
    r = design_rules(design, rules)
    return spec_problems(design.coil, design.board, r, current_a=current_a, voltage_v=voltage_v)


def validate_design(design, rules=None, *, current_a=None, voltage_v=None) -> RuleSet:
    """Raise SpecError listing every rule the design's own numbers break;
    return the rule set that applies when there is none.

    >>> from tracecoil.design import design_from_dict
    >>> d = design_from_dict({"design": {"rules": "standard"}, "coil": {"width_mm": 0.12, "gap_mm": 0.2}})
    >>> try:
    ...     validate_design(d)
    ... except SpecError as e:
    ...     print(e)
    design 'coil' breaks rule set 'standard': width_mm = 0.12 mm is narrower than the 0.15 mm minimum trace width of rule set 'standard' (outer layers): use width_mm >= 0.15, or choose rules = 'fine'
    """
    r = design_rules(design, rules)
    problems = spec_problems(design.coil, design.board, r, current_a=current_a, voltage_v=voltage_v)
    if problems:
        raise SpecError(f"design {design.name!r} breaks rule set {r.name!r}: " + "; ".join(problems))
    return r
