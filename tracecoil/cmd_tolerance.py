"""``tracecoil tolerance DESIGN.toml``: spread of L, SRF, Q and the LC
frequency across boards from fabrication deviations (Monte Carlo).

Spreads are numbers (the standard deviation of a normal distribution) or
``uniform:H`` (a uniform distribution of half-width H). Defaults may come
from the design's ``[tolerance]`` table (the command line wins)::

    [tolerance]
    etch_um = 20
    copper_um = "uniform:5"
    samples = 500
    seed = 1
    tank_capacitance_f = 1e-9
"""

from __future__ import annotations

import sys
from pathlib import Path

from .variants.tolerance import PARAMETERS

TOLERANCE_KEYS = (*PARAMETERS, "samples", "seed", "metrics", "freq_hz", "tank_capacitance_f", "temperature_c", "rules", "distance_mm", "executor", "workers")


def add_parser(sub):
    from .cmd_sweep import add_common

    p = sub.add_parser(
        "tolerance",
        help="Monte Carlo spread of L, SRF, Q and LC frequency from fabrication deviations",
        description="Simulate many boards of one design, each with random deviations of the etched copper width (the gap "
        "changes the other way: the artwork fixes the pitch), copper thickness, dielectric thickness and permittivity (and the "
        "tank capacitor), and report mean, standard deviation and 1st/99th percentiles of L, SRF, Q and the LC frequency with a "
        "histogram. A spread is a standard deviation (normal) or uniform:HALF_WIDTH.",
    )
    p.add_argument("design", help="design file (TOML), or the name of a bundled template")
    p.add_argument("--etch-um", metavar="S", help="deviation of the finished trace width (um), e.g. 20 or uniform:25")
    p.add_argument("--copper-um", metavar="S", help="deviation of the copper thickness (um), every layer of a board alike")
    p.add_argument("--dielectric-pct", metavar="S", help="relative deviation of the dielectric thickness (percent)")
    p.add_argument("--permittivity", metavar="S", help="deviation of the relative permittivity (absolute, e.g. 0.2)")
    p.add_argument("--tank-pct", metavar="S", help="relative deviation of the tank capacitor (percent)")
    p.add_argument("--samples", type=int, metavar="N", help="boards to simulate (default 200)")
    p.add_argument("--seed", type=int, metavar="N", help="random seed (default 0); the same seed gives the same boards")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    add_common(p, what="tolerance")
    p.set_defaults(run=run)


def _spread_arg(value):
    """A spread from the command line: a number, or normal:S / uniform:H."""
    if value is None:
        return None
    try:
        return float(value)
    except ValueError:
        return value


def run(args) -> int:
    import json

    from .cmd_build import load_design_arg
    from .cmd_sweep import _listed, execution, options_from, prepare_csv, table_defaults
    from .export.atomic import write_json
    from .variants.tolerance import make_tolerances, plot_histograms, tolerance

    design = load_design_arg(args.design)
    d = table_defaults(design, "tolerance", TOLERANCE_KEYS)
    tol = make_tolerances({k: d[k] for k in PARAMETERS if k in d}, **{k: _spread_arg(getattr(args, k)) for k in PARAMETERS})
    if not any(getattr(tol, k).value for k in PARAMETERS):
        print("note: every spread is zero, so every board equals the nominal; give e.g. --etch-um 20", file=sys.stderr)
    options = options_from(args, d)
    if options.tank_capacitance_f is not None and args.freq is None and "freq_hz" not in d:
        # Q, L(f) and R(f) at the tank's own resonance rather than at 1 MHz
        from dataclasses import replace

        from .variants.metrics import evaluate

        f0 = evaluate(design, ["lc_frequency"], options=options)["lc_frequency_hz"]
        options = replace(options, freq_hz=float(f"{f0:.6g}"))
        print(f"frequency for L(f), R(f) and Q: the nominal LC resonance, {options.freq_hz:.6g} Hz (set --freq to choose another)", file=sys.stderr)
    out = Path(args.out)
    csv_path = prepare_csv(args, out, design.name, "tolerance")
    samples = args.samples if args.samples is not None else d.get("samples", 200)
    seed = args.seed if args.seed is not None else d.get("seed", 0)
    metrics = _listed(args.metrics, "--metrics") or _listed(d.get("metrics"), "[tolerance] metrics")
    print(f"{design.name}: {samples} simulated boards (seed {seed})", file=sys.stderr)
    result = tolerance(design, tol, samples=samples, seed=seed, metrics=metrics, options=options, out_csv=csv_path, resume=args.resume, **execution(args, d))
    summary = result.to_dict()
    written = [csv_path, write_json(out / f"{design.name}-tolerance.json", summary)]
    if any(s.get("kind") == "number" for s in result.stats.values()):
        png = out / f"{design.name}-tolerance.png"
        plot_histograms(result, png)
        written.append(png)
    if args.json:
        print(json.dumps(summary, indent=2, allow_nan=False))
    else:
        print(result.table())
        if result.failed:
            first = next(r for r in result.records if r["error"] is not None)
            print(f"first failed sample ({first['sample']}): {first['error']}")
        for path in written:
            print(f"  wrote {path}")
    return 0
