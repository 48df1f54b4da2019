"""``tracecoil check DESIGN.toml | FILE.dxf | FILE.gds``: fabrication and
electrical rule check.

Exit status: 0 when clean, 1 when a rule is broken (so scripts and CI can
use it), 2 for bad input (unreadable file, invalid design or options).
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

OUTLINE_SUFFIXES = (".dxf", ".gds", ".gds2", ".gdsii")


def add_parser(sub):
    p = sub.add_parser(
        "check",
        help="check a design or an outline file against fabrication and electrical rules",
        description="Check the copper of a coil against a rule set: trace width, gap, drills, annular rings, hole spacing, "
        "board-edge clearance, trace heating (IPC-2221) and spacing for the working voltage. Takes a design file (TOML), "
        "the name of a bundled design, or a DXF/GDSII outline file made elsewhere. Exits 0 when clean, 1 when a rule is "
        "broken, 2 for bad input.",
    )
    p.add_argument("target", help="design file (TOML), bundled design name, or outline file (.dxf, .gds)")
    p.add_argument("--rules", metavar="NAME|PATH", help="rule set: bundled name (standard, fine) or a TOML file; default: the design's choice, else 'standard'")
    p.add_argument("--layer-map", metavar="MAP", help="outline files: what each file layer is, e.g. 'TOP=1,BOTTOM=2,HOLES=drill,EDGE=board' (GDSII: '1/0=1,...') or a TOML file with [layers]")
    p.add_argument("--layers", type=int, metavar="N", help="outline files: copper layers of the board (default: the highest mapped layer)")
    p.add_argument("--current", type=float, metavar="A", help="current at the terminals for the heating check (default: the rule set's design_current_a; 0 = off)")
    p.add_argument("--voltage", type=float, metavar="V", help="working voltage (DC or AC peak) for the spacing check (default: the rule set's working_voltage_v; 0 = off)")
    p.add_argument("--json", action="store_true", help="print the result as JSON instead of text")
    p.add_argument("--out", metavar="DIR", help="also write the report (text, JSON, SVG and PNG picture) into DIR")
    p.add_argument("--formats", default="txt,json,svg,png", help="with --out: comma-separated subset of txt,json,svg,png")
    p.add_argument("--max-turns", action="store_true", help="designs only: print the most turns that fit the design's size, shape and layers under the rule set, and stop")
    p.set_defaults(run=run)


def _max_turns(design, rules) -> int:
    from .rules.fit import max_turns_for

    spec = design.coil
    keep = {k: getattr(spec, k) for k in ("wiring", "direction", "start_angle_deg", "outer_height_mm", "sides", "corner", "corner_mm", "tolerance_mm", "via_drill_mm", "via_pad_mm", "pad_mm", "pad_drill_mm", "return_lead", "on_layers", "return_layer")}
    keep = {k: v for k, v in keep.items() if v is not None}
    common = dict(outer_mm=spec.outer_mm, shape=spec.shape, layers=spec.layers, rules=rules, board=design.board, **keep)
    lines = []
    for label, w, g in (("the design's width and gap", spec.width_mm, spec.gap_mm), ("the rule set's minimum width and gap", None, None)):
        fit = max_turns_for(width_mm=w, gap_mm=g, **common)
        state = "passes the rule check" if fit.clean else f"does NOT pass the rule check ({len(fit.findings)} finding(s), e.g. {fit.findings[0].message})" if fit.findings else "not checked"
        lines.append(f"  with {label} ({fit.width_mm:g} / {fit.gap_mm:g} mm): {fit.turns:g} turns per layer; {state}")
        if fit.clean and fit.turns < fit.generator_turns:
            lines.append(f"    (the generator fits {fit.generator_turns:g}; the check needed {fit.generator_turns - fit.turns:g} turn(s) fewer)")
    print(f"{design.name}: {spec.shape}, outer {spec.outer_mm:g} mm, {spec.layers} layer(s), rule set {rules.name!r}")
    print("\n".join(lines))
    return 0


def run(args) -> int:
    from .rules import check, design_rules, load_rules
    from .rules.fit import spec_problems
    from .rules.report import text_report, write_reports

    target = args.target
    problems: list[str] = []
    notes: list[str] = []
    if Path(target).suffix.lower() in OUTLINE_SUFFIXES:
        if args.max_turns:
            print("tracecoil check: --max-turns needs a design file, not an outline file", file=sys.stderr)
            return 2
        from .rules.importer import read_outlines

        obj = read_outlines(target, layer_map=args.layer_map, notes=notes, n_layers=args.layers)
        rules = load_rules(args.rules)
        name = Path(target).stem
    else:
        from .cmd_build import load_design_arg
        from .generators import coil_from_design

        if args.layer_map or args.layers:
            print("tracecoil check: --layer-map and --layers apply to outline files (.dxf, .gds) only", file=sys.stderr)
            return 2
        design = load_design_arg(target)
        rules = design_rules(design, args.rules)
        if args.max_turns:
            return _max_turns(design, rules)
        problems = spec_problems(design.coil, design.board, rules, current_a=args.current, voltage_v=args.voltage)
        obj = coil_from_design(design)
        name = design.name
    result = check(obj, rules, current_a=args.current, voltage_v=args.voltage, name=name)
    result.notes = notes + result.notes
    if args.json:
        print(json.dumps({**result.to_dict(), "design_problems": problems}, indent=2, allow_nan=False))
    else:
        text = text_report(result)
        if problems:
            text += "\nDesign numbers that break the rule set\n" + "".join(f"  - {p}\n" for p in problems)
        sys.stdout.write(text)
    if args.out:
        formats = tuple(f.strip() for f in args.formats.split(",") if f.strip())
        written = write_reports(result, args.out, formats=formats, stem=name)
        if not args.json:
            for p in written.values():
                print(f"wrote {p}")
    return 0 if result.ok and not problems else 1
