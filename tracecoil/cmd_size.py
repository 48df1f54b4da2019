"""``tracecoil size``: find the best coil that fits a size, meets an
inductance (or an LC resonance) and passes the rules; write it as a
design file.

Exit status: 0 when a coil was found, 1 when none meets the target and the
rules, 2 for bad input.
"""

from __future__ import annotations

import sys
from pathlib import Path


def add_parser(sub):
    p = sub.add_parser(
        "size",
        help="size a coil to an inductance or LC target under a size limit and a rule set",
        description="Search shapes, layer counts, trace widths, gaps and turns for coils that fit the outer size, meet the target "
        "inductance (or resonate at a frequency with a given capacitor) and pass the rule set; rank them (Q at the frequency by "
        "default, or peak EMF, or DC resistance); write the best as a ready design file and print the ranked table. A closed-form "
        "estimate (modified Wheeler, Mohan et al. 1999), calibrated against the full model, prunes the candidates first.",
    )
    p.add_argument("design", nargs="?", help="optional base design (board, rule set, vias, target and motion come from it)")
    p.add_argument("--inductance", metavar="H", help="target inductance, e.g. 4.7u")
    p.add_argument("--frequency", metavar="HZ", help="target LC resonance frequency, e.g. 2M (needs --cap)")
    p.add_argument("--cap", metavar="F", help="tank capacitor for --frequency, e.g. 100p")
    p.add_argument("--tol", default="5", metavar="PCT", help="allowed deviation from the target in percent (default 5)")
    p.add_argument("--outer", metavar="MM", help="outer size limit in mm (default: the base design's outer_mm)")
    p.add_argument("--layers", default=None, metavar="LIST", help="layer counts allowed, e.g. 1,2,4 (default: the base design's, else 1,2)")
    p.add_argument("--shapes", default=None, metavar="LIST", help="shapes allowed from circle,square,hexagon,octagon (default: the base design's, else square,circle)")
    p.add_argument("--widths", metavar="LIST", help="trace widths in mm to try (default: 1, 1.5, 2, 3 x the rule minimum)")
    p.add_argument("--gaps", metavar="LIST", help="gaps in mm to try (default: 1, 1.5, 2 x the rule minimum)")
    p.add_argument("--turns-step", type=float, default=0.25, metavar="T", help="turn count step (default 0.25)")
    p.add_argument("--rules", metavar="NAME|PATH", help="rule set (default: the base design's, else 'standard')")
    p.add_argument("--rank", default="q", metavar="METRIC", help="rank by q (default, Q at --freq), peak_emf, resistance_dc, ...")
    p.add_argument("--freq", metavar="HZ", help="frequency for Q (default: --frequency, else 1M)")
    p.add_argument("--name", metavar="NAME", help="name of the design written (default: BASE-sized or 'sized')")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder for the design file (default: out)")
    p.add_argument("--top", type=int, default=10, metavar="N", help="candidates to print (default 10)")
    p.add_argument("--no-prescreen", action="store_true", help="verify every candidate with the full model (slow; brute force)")
    p.add_argument("--executor", choices=("process", "dask", "serial"), help="where candidates run (default: local processes)")
    p.add_argument("--cluster", metavar="ADDR", help="Dask cluster: tcp://HOST:PORT or 'local'")
    p.add_argument("--workers", type=int, metavar="N", help="local processes or local Dask workers")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(run=run)


def _floats(text, name):
    from .errors import SpecError

    try:
        return [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise SpecError(f"{name} must be comma-separated numbers; got {text!r}") from None


def run(args) -> int:
    from .cmd_predict import parse_si
    from .errors import SpecError
    from .units import to_mm
    from .variants.sizing import Target, size, write_design

    design = None
    if args.design:
        from .cmd_build import load_design_arg

        design = load_design_arg(args.design)
    tol_text = str(args.tol).strip().rstrip("%")
    try:
        tol = float(tol_text) / 100.0
    except ValueError:
        raise SpecError(f"--tol must be a percentage such as 5; got {args.tol!r}") from None
    if args.inductance is not None:
        if args.frequency or args.cap:
            raise SpecError("give --inductance, or --frequency with --cap, not both")
        target = Target(inductance_h=parse_si(args.inductance, "--inductance"), tolerance=tol)
    elif args.frequency is not None or args.cap is not None:
        if args.frequency is None or args.cap is None:
            raise SpecError("a resonance target needs both --frequency and --cap")
        target = Target(frequency_hz=parse_si(args.frequency, "--frequency"), capacitance_f=parse_si(args.cap, "--cap"), tolerance=tol)
    else:
        raise SpecError("give a target: --inductance 4.7u, or --frequency 2M --cap 100p")
    if args.outer is not None:
        outer = to_mm(args.outer, "--outer")
    elif design is not None:
        outer = design.coil.outer_mm
    else:
        raise SpecError("give the outer size limit: --outer 15 (mm)")
    if args.layers:
        layers = [int(v) for v in _floats(args.layers, "--layers")]
    else:
        layers = [design.coil.layers] if design is not None else [1, 2]
    if args.shapes:
        shapes = [s.strip() for s in args.shapes.split(",") if s.strip()]
    else:
        shapes = [design.coil.shape] if design is not None else ["square", "circle"]
    result = size(
        target,
        outer_mm=outer,
        design=design,
        layers=layers,
        shapes=shapes,
        widths_mm=_floats(args.widths, "--widths") if args.widths else None,
        gaps_mm=_floats(args.gaps, "--gaps") if args.gaps else None,
        turns_step=args.turns_step,
        rules=args.rules,
        rank_by=args.rank,
        freq_hz=parse_si(args.freq, "--freq") if args.freq else None,
        prescreen=not args.no_prescreen,
        name=args.name,
        executor=args.executor or ("dask" if args.cluster else "process"),
        cluster=args.cluster,
        workers=args.workers,
        progress=not args.no_progress,
    )
    print(result.table(args.top))
    if result.best is None:
        print("no candidate meets the target and passes the rules; widen --tol, allow more layers or shapes, or change --outer", file=sys.stderr)
        return 1
    best = result.ranked[0]
    path = Path(args.out) / f"{result.best.name}.toml"
    path.parent.mkdir(parents=True, exist_ok=True)
    comment = (
        f"Sized by tracecoil for {target.describe()} within outer {outer:g} mm; ranked by {args.rank}.\n"
        f"Full model: {', '.join(f'{k} = {best[k]:.6g}' for k in best if isinstance(best[k], float))}"
    )
    write_design(result.best, path, comment=comment)
    print(f"  wrote {path}")
    return 0
