"""Run every rule of a rule set on a coil or on copper outlines.

>>> from tracecoil import spiral
>>> coil = spiral(shape="square", outer_mm=10, turns=3, width_mm=0.3, gap_mm=0.3)
>>> result = check(coil, "standard", current_a=0.2, voltage_v=5)
>>> result.ok, len(result.findings)
(True, 0)
>>> narrow = spiral(shape="square", outer_mm=10, turns=3, width_mm=0.12, gap_mm=0.3)
>>> sorted({f.rule for f in check(narrow, "standard").findings})
['MIN_WIDTH']
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import SpecError
from ..layout import Coil
from ..outline import Outlines, outlines
from . import electrical
from .findings import CheckResult, Finding
from .geometry import (
    LIMIT_TOL_MM,
    drill_findings,
    edge_findings,
    hole_copper_findings,
    hole_edge_findings,
    width_gap_findings,
)
from .ruleset import RuleSet, load_rules

# Chord error of the outlines a Coil is checked on: round pads, holes and
# trace ends are polygons inside their arcs, so at 0.1 um they are within
# the pass tolerance of the true circles.
CHECK_TOLERANCE_MM = 1e-4


def _number(name, value, hi):
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or not 0 <= value <= hi:
        raise SpecError(f"{name} must be a number from 0 to {hi}; got {value!r}")
    return float(value)


def check(
    obj,
    rules=None,
    *,
    current_a: float | None = None,
    voltage_v: float | None = None,
    trace_width_mm: float | None = None,
    tolerance_mm: float = CHECK_TOLERANCE_MM,
    name: str | None = None,
) -> CheckResult:
    """Check a coil (or copper outlines) against a rule set.

    Parameters
    ----------
    obj : Coil or Outlines
        A :class:`~tracecoil.layout.Coil` (its outlines are rebuilt at
        ``tolerance_mm``) or ready :class:`~tracecoil.outline.Outlines`
        (e.g. read from a DXF or GDSII file).
    rules : RuleSet, str, Path or None
        The rule set, a bundled name ('standard', 'fine') or a TOML path.
    current_a : float, optional
        Current at the terminals (A) for the temperature check; default
        the rule set's ``design_current_a``; 0 skips the check.
    voltage_v : float, optional
        Working voltage (V, DC or AC peak) for the spacing check; default
        the rule set's ``working_voltage_v``; 0 skips the check.
    trace_width_mm : float, optional
        Outlines only: the conductor width for the temperature check
        (default: the narrowest copper measured on each layer).
    tolerance_mm : float
        Chord error of rebuilt outlines (Coil input only).
    name : str, optional
        Name used in reports (default: the coil's name).

    Returns
    -------
    CheckResult
        Findings (one per problem location), per-layer measurements, the
        electrical table, notes and safety cautions.
    """
    rules = load_rules(rules)
    if isinstance(obj, Coil):
        coil, out = obj, outlines(obj, tolerance_mm=tolerance_mm)
    elif isinstance(obj, Outlines):
        coil, out = None, obj
    else:
        raise SpecError(f"check() takes a Coil or Outlines; got {type(obj).__name__}")
    I = rules.design_current_a if current_a is None else _number("current_a", current_a, 1000.0)
    V = rules.working_voltage_v if voltage_v is None else _number("voltage_v", voltage_v, 100000.0)
    n_layers = max([*out.layer_names, *out.copper, 1])
    res = CheckResult(rules=rules, current_a=I, voltage_v=V, tolerance_mm=LIMIT_TOL_MM, outlines=out, name=name or (coil.name if coil else "outlines"))
    findings: list[Finding] = []
    for layer, copper in sorted(out.copper.items()):
        lname = out.layer_names.get(layer, f"layer{layer}")
        internal = not RuleSet.is_outer(layer, n_layers)
        vgap = electrical.spacing_for_voltage_mm(V, internal=internal, condition=rules.condition) if V > 0 else 0.0
        f, measured = width_gap_findings(
            copper,
            layer=lname,
            min_width_mm=rules.min_width_mm(layer, n_layers),
            min_gap_mm=rules.min_gap_mm(layer, n_layers),
            voltage_gap_mm=vgap,
            drills=out.drills,
        )
        findings += f
        f, rings = hole_copper_findings(copper, out.drills, layer=lname, min_ring_mm=rules.min_annular_ring_mm, via_to_trace_mm=rules.via_to_trace_mm, sag_tol_mm=out.tolerance_mm)
        findings += f
        findings += edge_findings(copper, out.board, layer=lname, clearance_mm=rules.edge_clearance_mm)
        measured["smallest_ring_mm"] = min((r[2] for r in rings), default=None)
        measured["voltage_gap_mm"] = vgap
        res.measured[lname] = measured
    findings += drill_findings(out.drills, min_drill_mm=rules.min_drill_mm, via_to_via_mm=rules.via_to_via_mm)
    findings += hole_edge_findings(out.drills, out.board, clearance_mm=rules.edge_clearance_mm)
    if I > 0:
        rows, f = _heating(coil, out, rules, I, n_layers, trace_width_mm, res)
        res.electrical = rows
        findings += f
        res.cautions += electrical.heating_cautions()
    if V > 0:
        res.cautions += electrical.voltage_cautions(V)
    if coil is not None:
        for layer in sorted(out.copper):
            design_um = coil.stackup.copper_um[layer - 1]
            fab_um = rules.copper_um(layer, n_layers)
            if abs(design_um - fab_um) > 0.1 * fab_um:
                res.notes.append(
                    f"{out.layer_names.get(layer)}: the layout's copper is {design_um:g} um, the rule set '{rules.name}' assumes {fab_um:g} um; "
                    f"the current check uses the layout's value"
                )
    res.findings = findings
    return res


def _midpoint(points: np.ndarray) -> tuple[float, float]:
    seg = np.hypot(*np.diff(points, axis=0).T)
    s = np.concatenate([[0.0], np.cumsum(seg)])
    half = s[-1] / 2
    k = min(int(np.searchsorted(s, half, side="right")) - 1, len(seg) - 1)
    t = (half - s[k]) / seg[k] if seg[k] > 0 else 0.0
    p = points[k] + t * (points[k + 1] - points[k])
    return float(p[0]), float(p[1])


def _layer_conductors(coil, out, rules, I, n_layers, trace_width_mm, res):
    """(layer, width_mm, thickness_um, current_a, where, estimated) per layer."""
    rows = []
    if coil is not None:
        share: dict[int, float] = {}
        for step in coil.path:
            if step.kind == "trace":
                share[step.index] = max(share.get(step.index, 0.0), step.fraction)
        worst: dict[int, tuple] = {}
        for idx, t in enumerate(coil.traces):
            frac = share.get(idx, 1.0)
            cu = coil.stackup.copper_um[t.layer - 1]
            internal = not RuleSet.is_outer(t.layer, n_layers)
            dt = float(electrical.temperature_rise_c(I * frac, t.width_mm, cu, internal=internal))
            if t.layer not in worst or dt > worst[t.layer][0]:
                worst[t.layer] = (dt, t.width_mm, cu, I * frac, _midpoint(t.points_mm))
        for layer in sorted(worst):
            _, w, cu, i_layer, at = worst[layer]
            rows.append((layer, w, cu, i_layer, at, False))
        return rows
    for layer, copper in sorted(out.copper.items()):
        if copper.is_empty:
            continue
        lname = out.layer_names.get(layer, f"layer{layer}")
        cu = rules.copper_um(layer, n_layers)
        largest = max(copper.geoms, key=lambda p: p.area)
        if trace_width_mm is not None:
            w, est = float(trace_width_mm), False
        else:
            w = res.measured.get(lname, {}).get("narrowest_mm")
            est = w is None
            if est:  # a long thin conductor has area ~ w * L and perimeter ~ 2 L
                w = 2 * largest.area / largest.exterior.length
        p = largest.representative_point()
        rows.append((layer, w, cu, I, (float(p.x), float(p.y)), est))
    if rows:
        res.notes.append("outlines carry no current path: every layer is assumed to carry the full current (conservative for parallel layers)")
    return rows


def _heating(coil, out, rules, I, n_layers, trace_width_mm, res):
    rows, findings = [], []
    for layer, w, cu, i_layer, at, est in _layer_conductors(coil, out, rules, I, n_layers, trace_width_mm, res):
        internal = not RuleSet.is_outer(layer, n_layers)
        dt = float(electrical.temperature_rise_c(i_layer, w, cu, internal=internal))
        i_max = float(electrical.trace_current_a(w, cu, rules.max_temp_rise_c, internal=internal))
        lname = out.layer_names.get(layer, f"layer{layer}")
        rows.append(
            {
                "layer": lname,
                "internal": internal,
                "width_mm": round(w, 6),
                "width_estimated": est,
                "copper_um": cu,
                "current_a": i_layer,
                "temp_rise_c": round(dt, 4),
                "max_current_a": round(i_max, 4),
                "max_temp_rise_c": rules.max_temp_rise_c,
            }
        )
        for note in electrical.validity_notes(current_a=i_layer, width_mm=w, thickness_um=cu, temp_rise_c=dt):
            res.notes.append(f"{lname}: {note}")
        if dt > rules.max_temp_rise_c:
            findings.append(
                Finding(
                    "TEMPERATURE_RISE",
                    lname,
                    at,
                    dt,
                    rules.max_temp_rise_c,
                    f"{i_layer:.3g} A in {w:.3f} mm x {cu:g} um copper on {lname} rises about {dt:.1f} K (IPC-2221 fit), above the "
                    f"{rules.max_temp_rise_c:g} K allowed; it carries {i_max:.3g} A within that rise; widen the trace or use thicker copper",
                    unit="K",
                )
            )
    return rows, findings


def geometry_only(rules: RuleSet) -> RuleSet:
    """``rules`` with the electrical checks switched off."""
    return rules.with_values(design_current_a=0.0, working_voltage_v=0.0)


__all__ = ["CHECK_TOLERANCE_MM", "check", "geometry_only"]
