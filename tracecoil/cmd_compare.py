"""``tracecoil compare A.toml B.toml ...``: several designs side by side.

Prints one table (electrical figures, geometry, signal at each design's
own target, rule margins) and writes it as text, CSV and JSON, with a plot
that overlays the signal curves of the designs that have a target.
"""

from __future__ import annotations


def add_parser(sub):
    p = sub.add_parser(
        "compare",
        help="compare several designs in one table and one signal plot",
        description="Put several designs side by side: inductance, resistance (DC and at the frequency), capacitance, "
        "self-resonance, Q, geometry, the signal of each design's own [target] along its [motion] (peak EMF for a "
        "magnet, largest inductance change and tank shift for a conductive plate) and the rule check with its worst "
        "margin. Writes compare.txt, .csv, .json and an overlay of the signal curves (compare.png) into the output "
        "folder.",
    )
    p.add_argument("designs", nargs="+", metavar="DESIGN", help="design files (TOML) or names of bundled templates")
    p.add_argument("--freq", default=None, metavar="HZ", help="operating frequency for every design (default: each design's [target] frequency_hz, else 1 MHz); accepts 125k, 2.5M")
    p.add_argument("--temperature", type=float, default=20.0, metavar="C", help="copper temperature in degC (default 20)")
    p.add_argument("--rules", metavar="NAME|PATH", help="rule set for every design (default: each design's own)")
    p.add_argument("--signal", choices=("auto", "require", "off"), default="auto", help="signals: for designs with [target] and [motion] (auto, default), for every design or fail (require), or none (off)")
    p.add_argument("--samples", type=int, default=None, metavar="N", help="signal samples (default: automatic)")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder (default: out)")
    p.add_argument("--stem", default="compare", metavar="NAME", help="file name stem of the outputs (default: compare)")
    p.add_argument("--json", action="store_true", help="print the comparison as JSON instead of the table")
    p.add_argument("--no-files", action="store_true", help="print only; write nothing")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(run=run)


def run(args) -> int:
    import json

    from .cmd_build import load_design_arg
    from .cmd_predict import parse_si
    from .compare import compare
    from .errors import SpecError

    if args.samples is not None and args.samples < 3:
        raise SpecError(f"--samples must be at least 3; got {args.samples}")
    designs = [load_design_arg(d) for d in args.designs]
    freq = None if args.freq is None else parse_si(args.freq, "--freq")
    result = compare(designs, freq_hz=freq, temperature_c=args.temperature, rules=args.rules, signal=args.signal,
                     samples=args.samples, progress=not args.no_progress)
    written = {} if args.no_files else result.write(args.out, stem=args.stem)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2, allow_nan=False))
    else:
        print(result.text(), end="")
        for path in written.values():
            print(f"  wrote {path}")
    return 0
