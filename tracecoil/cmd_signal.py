"""``tracecoil signal DESIGN.toml``: the signal of a target moving near the coil.

Reads the design's ``[target]`` and ``[motion]`` tables (and ``[receiver]``
when present, for conductive targets), calls
:func:`tracecoil.targets.signal.signal`, prints the key numbers and writes
CSV, JSON and PNG into the output folder.

The result of any target kind provides ``summary_lines()``, ``to_dict()``
and ``write(out_dir, stem)``; this command only calls those.
"""

from __future__ import annotations


def add_parser(sub):
    p = sub.add_parser(
        "signal",
        help="induced EMF of a magnet moving past the coil (waveform, peak, RMS)",
        description="Compute the signal of the target in the design's [target] table moving as its [motion] "
        "table says: for a magnet, the flux linkage and the open-circuit EMF waveform (and the voltage into "
        "a load); writes <name>-signal.csv, .json and .png into the output folder.",
    )
    p.add_argument("design", help="design file (TOML) with [target] and [motion] tables, or a bundled template name")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder (default: out)")
    p.add_argument("--samples", type=int, default=None, metavar="N", help="number of time samples (default: automatic)")
    p.add_argument("--load", type=float, default=None, metavar="OHM",
                   help="load resistance across the coil terminals (ohm); adds the loaded voltage and current")
    p.add_argument("--json", action="store_true", help="print the results (with the waveform arrays) as JSON")
    p.set_defaults(run=run)


def run(args) -> int:
    import json

    from .cmd_build import load_design_arg
    from .compare import design_signal

    design = load_design_arg(args.design)
    result = design_signal(design, samples=args.samples, load_ohm=args.load, progress=True)
    written = result.write(args.out, f"{design.name}-signal")
    if args.json:
        print(json.dumps(result.to_dict(), allow_nan=False))
    else:
        for line in result.summary_lines():
            print(line)
        for path in written.values():
            print(f"  wrote {path}")
    return 0
