"""Benchmark: build a 4-layer, 30-turn circular spiral and export DXF + GDSII.

Target (issue 2): under 2 s on a 2-core machine, chord error 0.01 mm.

Prints, for a cold first run and the median of repeated warm runs:
generation, copper outlines, DXF, GDSII and the whole ``build`` (DXF+GDS,
atomic staging and fsync included), plus peak memory: Python allocations
(tracemalloc) and the process's peak resident set (which also counts
GEOS, gdstk and the interpreter itself). Library import time is printed
separately: a long-running script pays it once.

Run: python benchmarks/bench_build.py [--repeat N]
"""

from __future__ import annotations

import argparse
import resource
import statistics
import sys
import tempfile
import time
import tracemalloc

TARGET_S = 2.0
COIL = dict(shape="circle", outer_mm=60.0, turns=30, width_mm=0.3, gap_mm=0.2, layers=4, tolerance_mm=0.01)
BOARD = {"layers": 4}


def rss_mb() -> float:
    # ru_maxrss is in kilobytes on Linux
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def one_run(out_dir: str) -> dict:
    import tracecoil
    from tracecoil.export import build, dxf, gds
    from tracecoil.outline import outlines

    t = {}
    t0 = time.perf_counter()
    coil = tracecoil.spiral(board=BOARD, name="bench4x30", **COIL)
    t["generate"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    outl = outlines(coil, tolerance_mm=COIL["tolerance_mm"])
    t["outlines"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    dxf.write_dxf(outl, f"{out_dir}/part.dxf")
    t["dxf"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    gds.write_gds(outl, f"{out_dir}/part.gds")
    t["gds"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    build(coil, out_dir, formats=("dxf", "gds"))
    t["build dxf+gds (outlines included)"] = time.perf_counter() - t0
    t["total: generate + build"] = t["generate"] + t["build dxf+gds (outlines included)"]
    t["_vertices"] = sum(len(p.exterior.coords) + sum(len(h.coords) for h in p.interiors) for g in outl.copper.values() for p in g.geoms)
    return t


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5, help="warm runs (default 5)")
    args = ap.parse_args(argv)

    rss0 = rss_mb()
    t0 = time.perf_counter()
    import ezdxf  # noqa: F401
    import gdstk  # noqa: F401

    import tracecoil  # noqa: F401
    import tracecoil.export.dxf  # noqa: F401
    import tracecoil.export.gds  # noqa: F401

    t_import = time.perf_counter() - t0
    rss_imported = rss_mb()

    with tempfile.TemporaryDirectory() as d:
        cold = one_run(d)
        warm = [one_run(d) for _ in range(args.repeat)]
        rss_peak = rss_mb()
        # memory in a separate run: tracemalloc slows Python-heavy code (ezdxf) several-fold
        tracemalloc.start()
        one_run(d)
        _, py_peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()

    print(f"coil: {COIL} board {BOARD}")
    print(f"copper vertices over all layers: {cold['_vertices']}")
    print(f"python {sys.version.split()[0]}; library imports: {t_import:.3f} s")
    print(f"{'step':38s} {'cold (s)':>9s} {'warm median (s)':>16s} {'warm min (s)':>13s}")
    for key in cold:
        if key.startswith("_"):
            continue
        vals = [w[key] for w in warm]
        print(f"{key:38s} {cold[key]:9.3f} {statistics.median(vals):16.3f} {min(vals):13.3f}")
    total = statistics.median(w["total: generate + build"] for w in warm)
    print(f"target {TARGET_S:.1f} s: warm median is {total / TARGET_S:.2f} x the target ({'met' if total < TARGET_S else 'NOT met'}); "
          f"cold run {cold['total: generate + build'] / TARGET_S:.2f} x")
    print(f"peak memory: python allocations {py_peak / 2**20:.1f} MB (tracemalloc, one extra run); "
          f"process peak RSS {rss_peak:.0f} MB (after imports {rss_imported:.0f} MB, at start {rss0:.0f} MB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
