"""``tracecoil predict DESIGN.toml``: L, R, C, self-resonance, Q and a SPICE model."""

from __future__ import annotations


def add_parser(sub):
    p = sub.add_parser(
        "predict",
        help="predict inductance, resistance, capacitance, self-resonance and Q",
        description="Predict the electrical behaviour of the coil a design file describes: inductance L(f), DC and AC "
        "resistance, parasitic capacitance (an estimate), self-resonant frequency, Q, the resonance with a tank "
        "capacitor, and a SPICE equivalent circuit. Writes a JSON document, the SPICE subcircuit, a plot of L, R and "
        "Q against frequency and a map of the magnetic field into the output folder.",
    )
    p.add_argument("design", help="design file (TOML), or the name of a bundled template")
    p.add_argument("--freq", default="1e6", metavar="HZ", help="operating frequency in Hz (default 1e6); accepts 125k, 2.5M")
    p.add_argument("--temperature", type=float, default=20.0, metavar="C", help="copper temperature in degC (default 20)")
    p.add_argument("--tank-cap", default=None, metavar="F", help="capacitor across the coil for the tank resonance, in F (e.g. 1n, 470p)")
    p.add_argument("--json", action="store_true", help="print the JSON document instead of the table")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder (default: out)")
    p.add_argument("--points", type=int, default=6, metavar="N", help="frequencies where the plot runs the filament model, up to 4x --freq (default 6; it is the slow part)")
    p.add_argument("--no-files", action="store_true", help="print only; write nothing")
    p.set_defaults(run=run)


_SUFFIX = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3, "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9}


def parse_si(text, name: str) -> float:
    """A number with an optional SI prefix and unit: '125k', '2.5MHz',
    '470p', '1nF', '1e6'.

    >>> parse_si("125k", "freq"), parse_si("2.5MHz", "freq"), parse_si("470pF", "cap")
    (125000.0, 2500000.0, 4.7e-10)
    """
    import re

    from .errors import SpecError

    m = re.fullmatch(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([fpnuµmkKMG]?)\s*(Hz|F)?\s*", str(text))
    if not m:
        raise SpecError(f"{name} must be a number with an optional SI prefix such as 125k or 470p; got {text!r}")
    value = float(m.group(1)) * _SUFFIX.get(m.group(2), 1.0)
    return float(f"{value:.12g}")


def run(args) -> int:
    import json

    from .cmd_build import load_design_arg
    from .generators import coil_from_design
    from .errors import SpecError
    from .predict import filament_frequencies, frequency_sweep, predict, sweep_frequencies, write_outputs

    design = load_design_arg(args.design)
    coil = coil_from_design(design)
    if not 1 <= args.points <= 50:
        raise SpecError(f"--points must be between 1 and 50; got {args.points}")
    freq = parse_si(args.freq, "--freq")
    tank = None if args.tank_cap is None else parse_si(args.tank_cap, "--tank-cap")
    pred = predict(coil, freq_hz=freq, temperature_c=args.temperature, tank_capacitance_f=tank)
    written = {}
    if not args.no_files:
        dense = sweep_frequencies(freq, pred.srf_hz)
        sweep = frequency_sweep(
            coil,
            dense,
            temperature_c=args.temperature,
            capacitance_f=pred.capacitance_f,
            filament_hz=filament_frequencies(freq, dense, points=args.points),
        )
        written = write_outputs(pred, coil, args.out, sweep=sweep)
    if args.json:
        print(json.dumps(pred.to_dict(), indent=2, allow_nan=False))
    else:
        print(pred.table())
        for path in written.values():
            print(f"  wrote {path}")
    return 0
