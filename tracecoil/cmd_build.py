"""``tracecoil build DESIGN.toml``: footprint files, previews and a summary."""

from __future__ import annotations


def add_parser(sub):
    p = sub.add_parser(
        "build",
        help="write DXF, GDSII, previews and a JSON summary for a design",
        description="Build the coil a design file describes and write its copper outlines (DXF, GDSII), "
        "preview pictures (SVG, PNG) and a JSON geometry summary into the output folder.",
    )
    p.add_argument("design", help="design file (TOML), or the name of a bundled template")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder (default: out)")
    p.add_argument("--formats", default="dxf,gds,svg,png,json", help="comma-separated subset of dxf,gds,svg,png,json")
    p.add_argument("--rules", metavar="NAME|PATH", help="rule set for the check (default: the design's choice, else 'standard')")
    p.add_argument("--no-check", action="store_true", help="skip the fabrication rule check")
    p.add_argument("--strict", action="store_true", help="exit 1 when the rule check finds violations")
    p.set_defaults(run=run)


def load_design_arg(name: str):
    """A design from a file path, or a bundled template name."""
    from pathlib import Path

    from .design import load_design
    from .templates import template_path

    if Path(name).is_file() or name.endswith(".toml") or "/" in name:
        return load_design(name)
    return load_design(template_path(name))


def run(args) -> int:
    from .export.build import build
    from .export.summary import summary
    from .generators import coil_from_design
    from .outline import outlines

    design = load_design_arg(args.design)
    coil = coil_from_design(design)
    formats = tuple(f.strip() for f in args.formats.split(",") if f.strip())
    outl = outlines(coil)
    written = build(coil, args.out, formats=formats)
    s = summary(coil, outlines=outl)
    print(f"{design.name}: {coil.spec.shape}, {coil.spec.layers} layer(s) {coil.spec.wiring}, {coil.spec.turns:g} turns/layer")
    print(f"  total trace length {s['total_trace_length_mm']:.1f} mm, {s['via_count']} via(s), fill ratio {s['fill_ratio']:.3f}")
    if any(e > 0 for e in coil.extra_turns):
        print("  extra turns added to clear via and pad positions: " + ", ".join(f"{e:.3f}" for e in coil.extra_turns))
    for path in written.values():
        print(f"  wrote {path}")
    if args.no_check:
        return 0
    from .rules import check, design_rules
    from .rules.fit import spec_problems
    from .rules.report import write_reports

    rules = design_rules(design, args.rules)
    problems = spec_problems(design.coil, design.board, rules)
    result = check(outl, rules, name=design.name)
    reports = write_reports(result, args.out, formats=("txt", "json", "png"), stem=design.name)
    verdict = "passes" if result.ok and not problems else f"FAILS ({len(result.findings)} finding(s), {len(problems)} design number(s))"
    print(f"  rule check ({rules.name}): {verdict}")
    for f in result.findings[:10]:
        print(f"    - {f.message}")
    for p in problems:
        print(f"    - {p}")
    for path in reports.values():
        print(f"  wrote {path}")
    return 1 if args.strict and not (result.ok and not problems) else 0
