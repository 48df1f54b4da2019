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

    design = load_design_arg(args.design)
    coil = coil_from_design(design)
    formats = tuple(f.strip() for f in args.formats.split(",") if f.strip())
    written = build(coil, args.out, formats=formats)
    s = summary(coil)
    print(f"{design.name}: {coil.spec.shape}, {coil.spec.layers} layer(s) {coil.spec.wiring}, {coil.spec.turns:g} turns/layer")
    print(f"  total trace length {s['total_trace_length_mm']:.1f} mm, {s['via_count']} via(s), fill ratio {s['fill_ratio']:.3f}")
    for path in written.values():
        print(f"  wrote {path}")
    return 0
