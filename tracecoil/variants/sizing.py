"""Sizing a coil to a target: the best coil that fits, meets an inductance
(or an LC resonance) and passes the rules.

Search
------
For every allowed shape, layer count, trace width and gap (by default a
few multiples of the rule set's minimums), turns go from ``turns_step`` to
the most that fit the outer size (:func:`tracecoil.generators.max_turns`),
in steps of ``turns_step``. The candidates are:

1. **pre-screened** by a closed form: the modified Wheeler expression of
   S. S. Mohan, M. del Mar Hershenson, S. P. Boyd and T. H. Lee, "Simple
   accurate expressions for planar spiral inductances", IEEE JSSC 34(10),
   1999 (square, hexagon, octagon), or their current-sheet expression
   (circle), for one layer. The paper does not cover stacked layers, and
   at printed-circuit proportions leads, vias and the return lead add
   their share, so the closed form is calibrated against the full model:
   once per shape and layer count (at half the most turns), then once per
   family (shape, layers, width, gap) at the turn count the first
   calibration puts nearest the target. Within a family the ratio of full
   model to closed form changes slowly with the turns, so candidates whose
   calibrated estimate lies more than ``prescreen_margin`` (default 10 %)
   outside the target band are dropped; the rest are
2. **verified with the full model**: the partial-inductance L of every
   kept candidate; for those within the target, the rule check, the LC
   resonance of :func:`tracecoil.predict.predict` for a resonance target,
   and the ranking figure (:func:`~tracecoil.variants.metrics.evaluate`).
   Candidates that meet the target and pass every rule are
3. **ranked** by the chosen figure: Q at the frequency (default), peak
   EMF for the design's target and motion, or DC resistance (any metric
   with a 'better' direction).

The best candidate becomes a ready design file (:func:`write_design`).

>>> from tracecoil.variants.sizing import wheeler_inductance
>>> round(float(wheeler_inductance("square", turns=5, outer_mm=10, width_mm=0.3, gap_mm=0.3)) * 1e9, 1)
266.0
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field, fields

import numpy as np

from ..design import BoardSpec, CoilSpec, Design, make_board_spec, make_coil_spec
from ..errors import GeometryError, SpecError
from .metrics import METRICS, make_options, resolve

SHAPES = ("circle", "square", "hexagon", "octagon")
MU0 = 4e-7 * math.pi  # H/m; the SI 2019 value differs by 1e-10 relative, far below this estimate's error

# Mohan et al. 1999, Table 1 (modified Wheeler) and Table 2 (current sheet),
# as listed in the project's references (from memory).
WHEELER_K = {"square": (2.34, 2.75), "hexagon": (2.33, 3.82), "octagon": (2.25, 3.55)}
SHEET_C = {"square": (1.27, 2.07, 0.18, 0.13), "hexagon": (1.09, 2.23, 0.0, 0.17), "octagon": (1.07, 2.29, 0.0, 0.19), "circle": (1.00, 2.46, 0.0, 0.20)}
WIDTH_FACTORS = (1.0, 1.5, 2.0, 3.0)
GAP_FACTORS = (1.0, 1.5, 2.0)


def wheeler_inductance(shape: str, *, turns, outer_mm, width_mm, gap_mm) -> np.ndarray:
    """Closed-form inductance of a one-layer planar spiral (H).

    Modified Wheeler for square, hexagon and octagon; the current-sheet
    expression for a circle (Mohan et al. 1999). d_out = ``outer_mm``,
    d_in = d_out - 2 (n w + (n - 1) s), fill ratio
    rho = (d_out - d_in) / (d_out + d_in). Claimed typical error 2-3 %
    (worse when s >> w); NaN where no hollow is left (d_in <= 0).

    Parameters
    ----------
    turns, outer_mm, width_mm, gap_mm : float or ndarray (broadcast)

    Returns
    -------
    ndarray
        Inductance (H).
    """
    n = np.asarray(turns, float)
    d_out = np.asarray(outer_mm, float) * 1e-3
    w, s = np.asarray(width_mm, float) * 1e-3, np.asarray(gap_mm, float) * 1e-3
    d_in = d_out - 2 * (n * w + (n - 1) * s)
    ok = (d_in > 0) & (n > 0)
    d_in = np.where(ok, d_in, np.nan)
    d_avg = 0.5 * (d_out + d_in)
    rho = (d_out - d_in) / (d_out + d_in)
    with np.errstate(divide="ignore", invalid="ignore"):
        if shape in WHEELER_K:
            k1, k2 = WHEELER_K[shape]
            out = k1 * MU0 * n**2 * d_avg / (1 + k2 * rho)
        elif shape in SHEET_C:
            c1, c2, c3, c4 = SHEET_C[shape]
            out = MU0 * n**2 * d_avg * c1 / 2 * (np.log(c2 / rho) + c3 * rho + c4 * rho**2)
        else:
            raise SpecError(f"shape must be one of {', '.join(SHAPES)} for the closed form; got {shape!r}")
    return np.where(ok, out, np.nan)


# ----------------------------------------------------------------------------
# target
# ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Target:
    """What the coil must give: an inductance, or an LC resonance.

    Parameters
    ----------
    inductance_h : float or None
        Low-frequency inductance (H).
    frequency_hz, capacitance_f : float or None
        Resonance frequency with a tank capacitor (the coil's own
        capacitance included by the full model).
    tolerance : float
        Allowed relative deviation of the inductance, or of the frequency.
    """

    inductance_h: float | None = None
    tolerance: float = 0.05
    frequency_hz: float | None = None
    capacitance_f: float | None = None

    def __post_init__(self):
        by_l = self.inductance_h is not None
        by_f = self.frequency_hz is not None or self.capacitance_f is not None
        if by_l == by_f:
            raise SpecError("give either an inductance target (inductance_h) or a resonance target (frequency_hz with capacitance_f)")
        if by_f and (self.frequency_hz is None or self.capacitance_f is None):
            raise SpecError("a resonance target needs both frequency_hz and capacitance_f")
        for k in ("inductance_h", "frequency_hz", "capacitance_f"):
            v = getattr(self, k)
            if v is not None and not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
                raise SpecError(f"target {k} must be a number > 0; got {v!r}")
        t = self.tolerance
        if isinstance(t, bool) or not isinstance(t, (int, float)) or not 0 < t < 1:
            raise SpecError(f"target tolerance must be a fraction between 0 and 1 (0.05 for 5 %); got {t!r}")

    @property
    def column(self) -> str:
        return "inductance_h" if self.inductance_h is not None else "lc_frequency_hz"

    @property
    def value(self) -> float:
        return self.inductance_h if self.inductance_h is not None else self.frequency_hz

    @property
    def inductance_estimate_h(self) -> float:
        """The inductance aimed at (for an LC target: with the tank capacitor alone)."""
        if self.inductance_h is not None:
            return self.inductance_h
        return 1.0 / ((2 * math.pi * self.frequency_hz) ** 2 * self.capacitance_f)

    def meets(self, value) -> bool:
        return value is not None and math.isfinite(value) and abs(value - self.value) <= self.tolerance * self.value

    def describe(self) -> str:
        if self.inductance_h is not None:
            return f"L = {self.inductance_h:.4g} H +- {self.tolerance * 100:g} %"
        return f"f = {self.frequency_hz:.4g} Hz +- {self.tolerance * 100:g} % with C = {self.capacitance_f:.4g} F"


# ----------------------------------------------------------------------------
# candidates
# ----------------------------------------------------------------------------


def _grid(values, name):
    vals = sorted({round(float(v), 6) for v in values})
    if not vals or any(v <= 0 for v in vals):
        raise SpecError(f"{name} must be a list of positive numbers; got {values!r}")
    return vals


def _base_coil(design: Design | None, rules) -> dict:
    """[coil] values the candidates share: the base design's (sharp
    corners, no shape-specific keys), or defaults with via and pad sizes
    raised to the rule set's drill and ring."""
    if design is not None:
        c = {f.name: getattr(design.coil, f.name) for f in fields(design.coil)}
        for k in ("outer_height_mm", "sides", "paths", "on_layers", "return_layer"):
            c[k] = None
        c["corner"], c["corner_mm"] = "sharp", 0.0
        return c
    c = {f.name: f.default for f in fields(CoilSpec)}
    for drill_key, pad_key in (("via_drill_mm", "via_pad_mm"), ("pad_drill_mm", "pad_mm")):
        c[drill_key] = max(c[drill_key], rules.min_drill_mm)
        c[pad_key] = max(c[pad_key], round(c[drill_key] + 2 * rules.min_annular_ring_mm, 4))
    return c


def _board_layers(board: BoardSpec, spec: CoilSpec) -> int:
    """The base board's layer count, or the fewest that hold ``spec``."""
    from ..generators import default_board_layers

    return max(board.layers, default_board_layers(spec))


@dataclass(frozen=True)
class Family:
    """Shape, layer count, width and gap: the turns vary within a family."""

    shape: str
    layers: int
    width_mm: float
    gap_mm: float
    board_layers: int
    max_turns: float


def enumerate_candidates(families, turns_step: float) -> list[dict]:
    """Every (family, turns) as a variant dict for the sweep engine."""
    out = []
    for f in families:
        k = np.arange(1, int(math.floor(f.max_turns / turns_step + 1e-9)) + 1)
        for t in k * turns_step:
            out.append({"shape": f.shape, "layers": f.layers, "board.layers": f.board_layers, "width_mm": f.width_mm, "gap_mm": f.gap_mm, "turns": float(t)})
    return out


@dataclass
class SizingResult:
    """Outcome of :func:`size`.

    Attributes
    ----------
    ranked : list of dict
        Candidates that meet the target and pass the rules, best first
        (variant keys, metric columns, ``rank`` from 1).
    best : Design or None
        The best candidate as a design.
    checked : list of dict
        Every candidate verified with the full model (meeting or not).
    counts : dict
        'enumerated', 'prescreened' (kept by the closed form), 'verified',
        'meet_target', 'pass_rules' (and meet the target), 'failed'
        (could not be built or evaluated).
    """

    target: Target
    rank_by: str
    ranked: list
    best: Design | None
    checked: list
    counts: dict
    families: list = field(default_factory=list)

    def table(self, n: int = 10) -> str:
        """The best ``n`` candidates as a text table."""
        rank_col = METRICS[self.rank_by].column
        cols = ["rank", "shape", "layers", "turns", "width_mm", "gap_mm", self.target.column, rank_col]
        if "rules_margin" not in cols:
            cols.append("rules_margin")
        cols = list(dict.fromkeys(cols))
        lines = ["  ".join(f"{c:>14s}" for c in cols)]
        for r in self.ranked[:n]:
            cells = []
            for c in cols:
                v = r.get(c)
                cells.append(f"{v:>14.5g}" if isinstance(v, float) else f"{str(v):>14s}")
            lines.append("  ".join(cells))
        c = self.counts
        lines.append(
            f"target {self.target.describe()}; ranked by {self.rank_by} ({METRICS[self.rank_by].better} is better): "
            f"{c['enumerated']} candidates, {c['prescreened']} kept by the closed-form pre-screen, {c['verified']} verified "
            f"with the full model, {c['meet_target']} meet the target, {c['pass_rules']} of those pass the rules"
        )
        return "\n".join(lines)


def _calibrations(base_design: Design, families) -> dict:
    """Full model over closed form, once per (shape, layers): at the family
    in the middle of the list, at the buildable turn count nearest half its
    maximum."""
    from ..generators import coil_from_design
    from ..physics.inductance import inductance
    from .space import apply_params

    ratios = {}
    for key in sorted({(f.shape, f.layers) for f in families}):
        fams = [f for f in families if (f.shape, f.layers) == key]
        f = fams[len(fams) // 2]
        half = max(0.25, round(f.max_turns / 2 * 4) / 4)
        tries = sorted({half, *np.arange(0.25, f.max_turns + 1e-9, 0.25)}, key=lambda t: (abs(t - half), t))
        for t in tries:
            params = {"shape": f.shape, "layers": f.layers, "board.layers": f.board_layers, "width_mm": f.width_mm, "gap_mm": f.gap_mm, "turns": float(t)}
            d = apply_params(base_design, params)
            closed = float(wheeler_inductance(f.shape, turns=t, outer_mm=d.coil.outer_mm, width_mm=f.width_mm, gap_mm=f.gap_mm))
            if not (math.isfinite(closed) and closed > 0):
                continue
            try:
                coil = coil_from_design(d)
            except GeometryError:
                continue
            ratios[key] = float(inductance(coil).inductance_h) / closed
            break
        else:  # pragma: no cover - max_turns found the family buildable
            raise GeometryError(f"no {key[0]} coil with {key[1]} layer(s) builds for the pre-screen calibration")
    return ratios


def _band(target: Target, margin: float) -> tuple[float, float]:
    """Inductance interval worth verifying: the target band widened by
    ``margin``; for an LC target f ~ L^-1/2, so +-t in f is about +-2t in L."""
    l0, t = target.inductance_estimate_h, target.tolerance
    if target.capacitance_f:
        return l0 * (1 + t) ** -2 * (1 - margin), l0 * (1 - t) ** -2 * (1 + margin)
    return l0 * (1 - t) * (1 - margin), l0 * (1 + t) * (1 + margin)


def _closed_form(c: dict, outer_mm: float) -> float:
    return float(wheeler_inductance(c["shape"], turns=c["turns"], outer_mm=outer_mm, width_mm=c["width_mm"], gap_mm=c["gap_mm"]))


def _prescreen(target, candidates, families, base_design, margin, task, keys, run, done) -> list[dict]:
    """Candidates whose calibrated closed-form inductance lies in the band.

    The closed form is scaled first by one full-model ratio per (shape,
    layers) (:func:`_calibrations`); with it each family's turn count
    nearest the target is evaluated with the full model (these probes are
    candidates themselves and are kept in ``done``), and the family's own
    ratio there scales the closed form for the rest of the family. A probe
    that cannot be built leaves the family with its group's ratio.
    """
    from .sweep import run_variants

    outer = base_design.coil.outer_mm
    group = _calibrations(base_design, families)
    fam_of = lambda c: (c["shape"], c["layers"], c["width_mm"], c["gap_mm"])  # noqa: E731
    members: dict[tuple, list] = {}
    for c in candidates:
        members.setdefault(fam_of(c), []).append(c)
    aim = target.inductance_estimate_h
    probes = []
    for key, cs in members.items():
        est = [(_closed_form(c, outer) * group[key[:2]], c) for c in cs]
        est = [(abs(math.log(e / aim)), c) for e, c in est if math.isfinite(e) and e > 0]
        if est:
            probes.append(min(est, key=lambda x: x[0])[1])
    ratio = {key: group[key[:2]] for key in members}
    for c, r in zip(probes, run_variants(task, keys, probes, desc="size: calibrate", **run)):
        done[r["variant_id"]] = r
        if r["error"] is None:
            ratio[fam_of(c)] = r["inductance_h"] / _closed_form(c, outer)
    lo, hi = _band(target, margin)
    kept = []
    for c in candidates:
        e = _closed_form(c, outer) * ratio[fam_of(c)]
        if math.isfinite(e) and lo <= e <= hi:
            kept.append(c)
    return kept


def size(
    target: Target,
    *,
    outer_mm,
    design: Design | None = None,
    layers=(1,),
    shapes=("square",),
    widths_mm=None,
    gaps_mm=None,
    turns_step: float = 0.25,
    rules=None,
    rank_by: str = "q",
    freq_hz: float | None = None,
    prescreen: bool = True,
    prescreen_margin: float = 0.1,
    name: str | None = None,
    executor: str = "process",
    cluster=None,
    workers: int | None = None,
    progress: bool = True,
) -> SizingResult:
    """Search for coils that meet ``target`` and the rules; rank them.

    Parameters
    ----------
    target : Target
    outer_mm : float
        Outer size limit (mm); every candidate uses it.
    design : Design, optional
        Base design: board, rule set, via and pad sizes, target and motion
        (for peak EMF) come from it.
    layers : sequence of int
        Layer counts allowed (series wiring).
    shapes : sequence of str
        Shapes allowed, from 'circle', 'square', 'hexagon', 'octagon'.
    widths_mm, gaps_mm : sequence of float, optional
        Trace widths and gaps to try (default: 1, 1.5, 2 and 3 times the
        rule set's minimum width; 1, 1.5 and 2 times its minimum gap).
    turns_step : float
        Turn count step (default a quarter turn).
    rules : str, path, RuleSet or None
        Rule set (default: the base design's, else 'standard').
    rank_by : str
        A metric with a better direction: 'q' (Q at ``freq_hz``, default),
        'peak_emf', 'resistance_dc', ...
    freq_hz : float, optional
        Frequency for Q and AC resistance (default: the resonance target's
        frequency, else 1 MHz).
    prescreen : bool
        Drop candidates far from the target by the closed form before the
        full model (False verifies every candidate: brute force).
    prescreen_margin : float
        How far (relative) outside the target band the estimate may lie
        and still be verified.
    name : str, optional
        Name of the resulting design.
    executor, cluster, workers, progress
        As for :func:`~tracecoil.variants.sweep.sweep`.

    Returns
    -------
    SizingResult
    """
    from ..generators import max_turns
    from ..rules import design_rules, load_rules, rule_set_names
    from .space import apply_params, variant_id
    from .sweep import Task, run_variants

    if not isinstance(target, Target):
        raise SpecError(f"target must be a Target; got {type(target).__name__}")
    if rank_by not in METRICS or METRICS[rank_by].better is None or len(METRICS[rank_by].columns) != 1:
        ok = [m for m, v in METRICS.items() if v.better and len(v.columns) == 1]
        raise SpecError(f"rank_by must be one of {', '.join(ok)}; got {rank_by!r}")
    if not (isinstance(turns_step, (int, float)) and 0.1 <= turns_step <= 1 and (turns_step * 8).is_integer()):
        raise SpecError(f"turns_step must be a multiple of 1/8 turn from 0.125 to 1; got {turns_step!r}")
    if not (isinstance(prescreen_margin, (int, float)) and 0 <= prescreen_margin <= 5):
        raise SpecError(f"prescreen_margin must be from 0 to 5; got {prescreen_margin!r}")
    shapes = tuple(shapes)
    for s in shapes:
        if s not in SHAPES:
            raise SpecError(f"shapes must be chosen from {', '.join(SHAPES)}; got {s!r}")
    layers = tuple(int(n) for n in layers)
    if not shapes or not layers or any(not 1 <= n <= 8 for n in layers):
        raise SpecError(f"give at least one shape and layer counts from 1 to 8; got shapes {shapes}, layers {layers}")
    rule_set = design_rules(design, rules) if design is not None else load_rules(rules or "standard")
    base = _base_coil(design, rule_set)
    base.update(outer_mm=outer_mm, wiring="series", shape=shapes[0], layers=1, turns=1)
    probe = make_coil_spec(base)  # validates outer_mm and the rest early
    base["outer_mm"] = outer_mm = probe.outer_mm
    w_min = max(rule_set.min_width_outer_mm, rule_set.min_width_inner_mm if max(layers) > 2 else 0)
    g_min = max(rule_set.min_gap_outer_mm, rule_set.min_gap_inner_mm if max(layers) > 2 else 0)
    widths = _grid(widths_mm if widths_mm is not None else [w_min * k for k in WIDTH_FACTORS], "widths_mm")
    gaps = _grid(gaps_mm if gaps_mm is not None else [g_min * k for k in GAP_FACTORS], "gaps_mm")
    freq = freq_hz if freq_hz is not None else (target.frequency_hz or 1e6)
    options = make_options(freq_hz=freq, rules=rule_set, tank_capacitance_f=target.capacitance_f)
    stage1 = ["inductance"] + (["capacitance"] if target.capacitance_f else [])
    stage2 = ["rules"] + (["lc_frequency"] if target.capacitance_f else []) + ([rank_by] if rank_by not in ("inductance", "rules", "capacitance") else [])
    resolve(stage1 + stage2, design=design, options=options)
    base_design = Design(
        coil=probe,
        board=design.board if design is not None else make_board_spec({"layers": 2}),
        name=name or (f"{design.name}-sized" if design is not None else "sized"),
        description=f"sized for {target.describe()}",
        rules=rule_set.name if rule_set.name in rule_set_names() else (rule_set.source or rule_set.name),
        tables={k: v for k, v in (design.tables if design is not None else {}).items() if k not in ("sweep", "tolerance")},
    )

    families = []
    for shape in shapes:
        for n in layers:
            for w in widths:
                for g in gaps:
                    try:
                        spec = make_coil_spec({**base, "shape": shape, "layers": n, "width_mm": w, "gap_mm": g})
                    except SpecError:
                        continue  # width or gap too large for the outer size
                    bl = _board_layers(base_design.board, spec)
                    d = apply_params(base_design, {"shape": shape, "layers": n, "board.layers": bl, "width_mm": w, "gap_mm": g})
                    try:
                        families.append(Family(shape, n, w, g, bl, max_turns(d.coil, d.board)))
                    except GeometryError:
                        continue  # not a quarter turn fits
    if not families:
        raise SpecError(f"no coil of shapes {shapes}, layers {layers}, widths {widths} and gaps {gaps} fits outer_mm = {outer_mm}")
    candidates = enumerate_candidates(families, turns_step)
    keys = ["shape", "layers", "board.layers", "width_mm", "gap_mm", "turns"]
    run = dict(executor=executor, cluster=cluster, workers=workers, progress=progress)
    task1 = Task(base_design, tuple(stage1), options)
    done: dict[str, dict] = {}
    kept = candidates
    if prescreen:
        kept = _prescreen(target, candidates, families, base_design, prescreen_margin, task1, keys, run, done)
    todo = [c for c in kept if variant_id(c) not in done]
    for r in run_variants(task1, keys, todo, desc="size: inductance", **run) if todo else []:
        done[r["variant_id"]] = r
    checked = [done[vid] for vid in (variant_id(c) for c in candidates) if vid in done]

    def near(r):
        if r["error"] is not None:
            return False
        if target.capacitance_f is None:
            return target.meets(r["inductance_h"])
        f_est = 1.0 / (2 * math.pi * math.sqrt(r["inductance_h"] * (target.capacitance_f + r["capacitance_f"])))
        return abs(f_est - target.frequency_hz) <= 2 * target.tolerance * target.frequency_hz

    short = [r for r in checked if near(r)]
    if short:
        more = run_variants(Task(base_design, tuple(stage2), options), keys, [{k: r[k] for k in keys} for r in short], desc="size: rules and rank", **run)
        for r, m in zip(short, more):
            r.update({k: v for k, v in m.items() if k not in keys and k not in ("variant_id", "error")})
            r["error"] = m["error"]
    meet = [r for r in short if r["error"] is None and target.meets(r.get(target.column))]
    passing = [r for r in meet if r["rules_ok"]]
    col = METRICS[rank_by].column
    sign = -1 if METRICS[rank_by].better == "high" else 1
    ranked = sorted((r for r in passing if r.get(col) is not None and math.isfinite(r[col])), key=lambda r: (sign * r[col], r["variant_id"]))
    for i, r in enumerate(ranked, 1):
        r["rank"] = i
    best = None
    if ranked:
        best = apply_params(base_design, {k: ranked[0][k] for k in keys})
    counts = {
        "enumerated": len(candidates),
        "prescreened": len(kept),
        "verified": len(checked),
        "meet_target": len(meet),
        "pass_rules": len(passing),
        "failed": sum(r["error"] is not None for r in checked),
    }
    return SizingResult(target, rank_by, ranked, best, checked, counts, families)


# ----------------------------------------------------------------------------
# design files
# ----------------------------------------------------------------------------


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise SpecError(f"cannot write {type(v).__name__} value {v!r} to a design file")


def _toml_key(k: str) -> str:
    return k if k.replace("_", "").replace("-", "").isalnum() else json.dumps(k)


def design_toml(design: Design, *, comment: str = "") -> str:
    """The TOML text of a design file that loads back to ``design``.

    ``[coil]`` lists the keys that differ from the defaults plus the
    essential ones; ``[board]`` its values; other tables are copied.

    >>> from tracecoil.design import design_from_dict
    >>> d = design_from_dict({"design": {"name": "x"}, "coil": {"shape": "circle", "turns": 6.5}})
    >>> print(design_toml(d).split("[board]")[0].strip())
    [design]
    name = "x"
    <BLANKLINE>
    [coil]
    shape = "circle"
    outer_mm = 20.0
    turns = 6.5
    width_mm = 0.2
    gap_mm = 0.2
    layers = 1
    """
    lines = [f"# {line}" for line in comment.splitlines()] + ([""] if comment else [])
    meta = {"name": design.name}
    if design.description:
        meta["description"] = design.description
    if design.rules:
        meta["rules"] = design.rules
    lines.append("[design]")
    lines += [f"{k} = {_toml_value(v)}" for k, v in meta.items()]
    essential = ("shape", "outer_mm", "turns", "width_mm", "gap_mm", "layers")
    coil = []
    for f in fields(design.coil):
        v = getattr(design.coil, f.name)
        if f.name == "paths" and v is not None:
            v = [{"layer": p["layer"], "points": [list(xy) for xy in p["points"]]} for p in v]
        if f.name in essential or (v is not None and v != f.default):
            coil.append((f.name, v))
    coil.sort(key=lambda kv: essential.index(kv[0]) if kv[0] in essential else len(essential))
    lines += ["", "[coil]"] + [f"{k} = {_toml_value(v)}" for k, v in coil]
    lines += ["", "[board]"]
    for f in fields(design.board):
        v = getattr(design.board, f.name)
        if f.name == "copper_um" and len(set(v)) == 1:
            v = v[0]
        if v is not None:
            lines.append(f"{f.name} = {_toml_value(v)}")
    for table, content in (design.tables or {}).items():
        if not isinstance(content, dict):
            raise SpecError(f"table [{table}] is not a table; cannot write it")
        lines += ["", f"[{_toml_key(table)}]"] + [f"{_toml_key(k)} = {_toml_value(v)}" for k, v in content.items()]
    return "\n".join(lines) + "\n"


def write_design(design: Design, path, *, comment: str = ""):
    """Write ``design`` as a design file, atomically; check that it loads
    back to the same coil and board. Returns the path."""
    import tomllib

    from ..design import design_from_dict
    from ..export.atomic import write_text

    text = design_toml(design, comment=comment)
    again = design_from_dict(tomllib.loads(text))
    if again.coil != design.coil or again.board != design.board:  # pragma: no cover - a writer bug, not user input
        raise SpecError("the design file written does not load back to the same design")
    return write_text(path, text)


__all__ = ["SHAPES", "Family", "SizingResult", "Target", "design_toml", "enumerate_candidates", "size", "wheeler_inductance", "write_design"]
