"""``tracecoil sweep DESIGN.toml --vary KEY=VALUES ...``: evaluate metrics
over many variants of a design; stream them to CSV; plot them.

Defaults may come from the design's ``[sweep]`` table (the command line
wins)::

    [sweep]
    vary = ["turns=6:12", "width_mm=0.15,0.2,0.25"]
    metrics = ["inductance", "resistance_dc", "rules"]
    freq_hz = 1e6
    tradeoff = ["inductance", "resistance_dc"]
"""

from __future__ import annotations

import sys
from pathlib import Path

SWEEP_KEYS = ("vary", "zip", "sample", "seed", "metrics", "freq_hz", "tank_capacitance_f", "temperature_c", "rules", "distance_mm", "tradeoff", "executor", "workers")


def add_common(p, *, what: str) -> None:
    """Options shared by sweep and tolerance: metrics, conditions, execution, files."""
    from .variants.metrics import METRICS

    p.add_argument("--metrics", metavar="LIST", help=f"comma-separated metrics: {', '.join(METRICS)}")
    p.add_argument("--freq", metavar="HZ", help="frequency for Q, AC resistance and SRF (default 1e6; accepts 125k, 2.5M)")
    p.add_argument("--tank-cap", metavar="F", help="tank capacitor for lc_frequency (e.g. 1n, 470p)")
    p.add_argument("--temperature", type=float, metavar="C", help="copper temperature in degC (default 20)")
    p.add_argument("--rules", metavar="NAME|PATH", help="rule set for the rules metric (default: the design's)")
    p.add_argument("--distance", metavar="MM", help="plate distance above the board for delta_l (default: the plate's position)")
    p.add_argument("--out", default="out", metavar="DIR", help="output folder (default: out)")
    p.add_argument("--csv", metavar="FILE", help=f"stream {what} results to FILE (default: DIR/NAME-{what}.csv)")
    p.add_argument("--resume", action="store_true", help="continue an interrupted run: keep the rows already in the CSV and compute only the rest")
    p.add_argument("--force", action="store_true", help="replace an existing CSV instead of refusing")
    p.add_argument("--executor", choices=("process", "dask", "serial"), help="where variants run (default: local processes; dask with --cluster)")
    p.add_argument("--cluster", metavar="ADDR", help="run on a Dask cluster: tcp://HOST:PORT of a scheduler, or 'local' for a local cluster")
    p.add_argument("--workers", type=int, metavar="N", help="local processes or local Dask workers (default: CPU count)")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")


def add_parser(sub):
    p = sub.add_parser(
        "sweep",
        help="evaluate metrics over many variants of a design (grid, zipped or sampled)",
        description="Vary design keys over ranges or lists (full grid, zipped, random or Latin-hypercube samples), compute the "
        "chosen metrics for every variant on local processes or a Dask cluster, stream the rows to a CSV file (resumable), "
        "and plot each metric against the first varied key and the trade-off of two metrics with rule failures marked. "
        "KEY is any [coil] key or board.KEY; VALUES is start:stop (whole numbers, inclusive), start:stop:step, or a list a,b,c.",
    )
    p.add_argument("design", help="design file (TOML), or the name of a bundled template")
    p.add_argument("--vary", action="append", metavar="KEY=VALUES", help="a key to vary, e.g. turns=8:20, width_mm=0.1:0.2:0.05, shape=circle,square (repeatable)")
    p.add_argument("--zip", action="store_true", help="pair the i-th values of all keys instead of a full grid")
    p.add_argument("--sample", metavar="KIND:N", help="N sampled points instead of a grid: lhs:N (Latin hypercube) or random:N")
    p.add_argument("--seed", type=int, metavar="N", help="seed for --sample (default 0)")
    p.add_argument("--tradeoff", metavar="A,B", help="two metrics (or result columns) for the trade-off plot (default: the first two numeric ones)")
    p.add_argument("--no-plots", action="store_true", help="write no pictures")
    p.add_argument("--top", type=int, default=10, metavar="N", help="rows to print (default 10)")
    add_common(p, what="sweep")
    p.set_defaults(run=run)


def table_defaults(design, table: str, keys) -> dict:
    """The design's ``[table]`` values, keys checked."""
    from .errors import SpecError, unknown_key_message

    values = (design.tables or {}).get(table) or {}
    if not isinstance(values, dict):
        raise SpecError(f"[{table}] must be a table of keys")
    for k in values:
        if k not in keys:
            raise SpecError(unknown_key_message(table, k, keys))
    return values


def options_from(args, defaults: dict):
    """MetricOptions from the command line over the design's table."""
    from .cmd_predict import parse_si
    from .variants.metrics import make_options

    opts = {k: defaults[k] for k in ("freq_hz", "tank_capacitance_f", "temperature_c", "rules", "distance_mm") if k in defaults}
    if args.freq is not None:
        opts["freq_hz"] = parse_si(args.freq, "--freq")
    if args.tank_cap is not None:
        opts["tank_capacitance_f"] = parse_si(args.tank_cap, "--tank-cap")
    if args.temperature is not None:
        opts["temperature_c"] = args.temperature
    if args.rules is not None:
        opts["rules"] = args.rules
    if args.distance is not None:
        opts["distance_mm"] = args.distance
    return make_options(opts)


def prepare_csv(args, out_dir: Path, name: str, what: str) -> Path:
    """The results CSV path; with --force an existing one is removed."""
    from .errors import SpecError
    from .variants.sweep import meta_path

    path = Path(args.csv) if args.csv else out_dir / f"{name}-{what}.csv"
    if args.force and args.resume:
        raise SpecError("choose --resume or --force, not both")
    if args.force:
        for p in (path, meta_path(path)):
            p.unlink(missing_ok=True)
    return path


def execution(args, defaults: dict) -> dict:
    return {
        "executor": args.executor or defaults.get("executor") or ("dask" if args.cluster else "process"),
        "cluster": args.cluster,
        "workers": args.workers if args.workers is not None else defaults.get("workers"),
        "progress": not args.no_progress,
    }


def _listed(value, name):
    from .errors import SpecError

    if value is None:
        return None
    if isinstance(value, str):
        return [v.strip() for v in value.split(",") if v.strip()]
    if isinstance(value, (list, tuple)) and all(isinstance(v, str) for v in value):
        return list(value)
    raise SpecError(f"{name} must be a list of names or a comma-separated string; got {value!r}")


def run(args) -> int:
    from .cmd_build import load_design_arg
    from .errors import SpecError
    from .variants.metrics import resolve
    from .variants.space import make_space
    from .variants.sweep import DEFAULT_METRICS, sweep

    design = load_design_arg(args.design)
    d = table_defaults(design, "sweep", SWEEP_KEYS)
    vary = args.vary or _listed(d.get("vary"), "[sweep] vary")
    if not vary:
        raise SpecError("nothing to vary: give --vary KEY=VALUES (e.g. --vary turns=8:20) or vary = [...] in the design's [sweep] table")
    space = make_space(
        vary,
        zip=args.zip or bool(d.get("zip", False)),
        sample=args.sample if args.sample is not None else d.get("sample"),
        seed=args.seed if args.seed is not None else d.get("seed", 0),
    )
    options = options_from(args, d)
    metrics = _listed(args.metrics, "--metrics") or _listed(d.get("metrics"), "[sweep] metrics") or list(DEFAULT_METRICS)
    ms = resolve(metrics, design=design, options=options)
    out = Path(args.out)
    csv_path = prepare_csv(args, out, design.name, "sweep")
    n = len(space.variants())
    ex = execution(args, d)
    where = ex["cluster"] or ex["executor"]
    print(f"{design.name}: {n} variant(s) of {', '.join(space.keys)} ({space.mode}); metrics {', '.join(m.name for m in ms)}; on {where}", file=sys.stderr)
    rows = sweep(design, space, metrics, out_csv=csv_path, resume=args.resume, options=options, **ex)
    failed = [r for r in rows if r["error"] is not None]
    print(f"{len(rows)} variant(s), {len(failed)} failed; rows in {csv_path}")
    _print_table(rows, space.keys, ms, args.top)
    if failed:
        print(f"first failure: {', '.join(f'{k}={failed[0][k]}' for k in space.keys)}: {failed[0]['error']}")
    if not args.no_plots and len(rows) - len(failed) > 0:
        for path in _plots(rows, space.keys, ms, out, design.name, args.tradeoff or ",".join(_listed(d.get("tradeoff"), "[sweep] tradeoff") or [])):
            print(f"  wrote {path}")
    return 0


def _print_table(rows, keys, metrics, top: int) -> None:
    cols = [*keys, *(c.name for m in metrics for c in m.columns)]
    print("  ".join(f"{c:>16s}" for c in cols))
    for r in rows[: max(0, top)]:
        cells = []
        for c in cols:
            v = r.get(c)
            cells.append(f"{v:>16.6g}" if isinstance(v, float) else f"{'-' if v is None else str(v):>16s}")
        print("  ".join(cells))
    if len(rows) > top:
        print(f"  ... {len(rows) - top} more row(s) in the CSV")


def _plots(rows, keys, metrics, out: Path, name: str, tradeoff: str) -> list[Path]:
    from .errors import SpecError
    from .variants.metrics import METRICS
    from .variants.plots import plot_metric, plot_tradeoff

    out.mkdir(parents=True, exist_ok=True)
    written = []
    numeric = [c.name for m in metrics for c in m.columns if c.type is float]
    for col in numeric:
        path = out / f"{name}-sweep-{col}.png"
        plot_metric(rows, keys[0], col, path)
        written.append(path)
    pair = [t.strip() for t in tradeoff.split(",") if t.strip()] if tradeoff else [m.column for m in metrics if m.better and m.columns[0].type is not bool][:2]
    if len(pair) == 2:
        pair = [METRICS[p].column if p in METRICS else p for p in pair]
        for p in pair:
            if p not in rows[0]:
                raise SpecError(f"--tradeoff {p!r} is not a result column; columns: {', '.join(numeric)}")
        path = out / f"{name}-sweep-tradeoff.png"
        plot_tradeoff(rows, pair[0], pair[1], path)
        written.append(path)
    return written
