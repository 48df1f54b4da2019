"""``tracecoil report DESIGN.toml``: one self-contained HTML page about a design."""

from __future__ import annotations


def add_parser(sub):
    p = sub.add_parser(
        "report",
        help="write a self-contained HTML report of a design",
        description="Write one HTML page (pictures embedded, no other files needed) about a design: its parameters, the "
        "copper of each layer, the geometry summary, the electrical prediction with its accuracy, L, R and Q against "
        "frequency, the field map, the signal of its [target] along its [motion] when both are given, the rule check "
        "with the violations marked, safety cautions, and sweep plots when a sweep results file is given.",
    )
    p.add_argument("design", help="design file (TOML), or the name of a bundled template")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder (default: out); the page is DIR/NAME-report.html")
    p.add_argument("--freq", default=None, metavar="HZ", help="operating frequency (default: the [target] frequency_hz, else 1 MHz); accepts 125k, 2.5M")
    p.add_argument("--temperature", type=float, default=20.0, metavar="C", help="copper temperature in degC (default 20)")
    p.add_argument("--rules", metavar="NAME|PATH", help="rule set (default: the design's own)")
    p.add_argument("--points", type=int, default=6, metavar="N", help="frequencies where the L, R, Q plot runs the filament model (default 6; the slow part)")
    p.add_argument("--samples", type=int, default=None, metavar="N", help="signal samples (default: automatic)")
    p.add_argument("--sweep", metavar="CSV", help="a 'tracecoil sweep' results file: adds its plots")
    p.add_argument("--tradeoff", metavar="A,B", help="with --sweep: two result columns for the trade-off plot")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(run=run)


def run(args) -> int:
    from .cmd_build import load_design_arg
    from .cmd_predict import parse_si
    from .errors import SpecError
    from .report import write_report

    design = load_design_arg(args.design)
    freq = None if args.freq is None else parse_si(args.freq, "--freq")
    tradeoff = None
    if args.tradeoff:
        tradeoff = [t.strip() for t in args.tradeoff.split(",") if t.strip()]
        if len(tradeoff) != 2 or not args.sweep:
            raise SpecError(f"--tradeoff needs --sweep and two comma-separated result columns; got {args.tradeoff!r}")
    path = write_report(design, args.out, sweep=args.sweep, freq_hz=freq, temperature_c=args.temperature, rules=args.rules,
                        points=args.points, samples=args.samples, tradeoff=tradeoff, progress=not args.no_progress)
    print(f"wrote {path}")
    return 0
