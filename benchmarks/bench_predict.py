"""Benchmark: the parts of ``tracecoil.predict`` on the bundled example designs.

Prints, per design, the wall time of each part (median of warm runs):
DC resistance (network solve), closed-form AC resistance, the parasitic
capacitance estimate, the low-frequency inductance, one AC solution of the
partial-inductance model, and the whole ``predict`` call; plus the
capacitance estimate's spread over cut counts (24, 48, 96) as a measure of
its sampling scatter, and the Python allocation peak (tracemalloc) of one
``predict`` call.

The inductance model keeps its partial-inductance matrix for geometry it
has seen, so L is timed once, on first sight of each design (cold); the
L,R(f) and predict columns (each one call) then reuse that matrix, as a
sweep or a second command in the same process would.

No target is asserted: the figures are for the README and for spotting
regressions. On a machine busy with other work, run with
OPENBLAS_NUM_THREADS=1: the capacitance model's many small dense solves
were measured 10-100 times slower when OpenBLAS threads contend for the
cores.

Run: python benchmarks/bench_predict.py [--repeat N] [--freq HZ]
"""

from __future__ import annotations

import argparse
import statistics
import time
import tracemalloc


def cold(fn):
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def timed(fn, repeat):
    fn()  # warm
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--freq", type=float, default=1e6)
    args = ap.parse_args()

    import tracecoil
    from tracecoil.physics import capacitance as cap
    from tracecoil.physics import resistance as res
    from tracecoil.physics.conductors import conductors
    from tracecoil.predict import core_impedance, core_inductance
    from tracecoil.templates import design_names, template_path

    f = args.freq
    import os

    print(f"predict parts at {f:g} Hz (s): R and C median of {args.repeat} warm runs; L first call; L,R(f) and predict one call after it")
    print(f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}")
    print(f"{'design':26s}{'segs':>6s}{'R dc':>8s}{'R ac cf':>8s}{'C':>8s}{'L':>8s}{'L,R(f)':>8s}{'predict':>9s}{'C spread':>10s}{'peak MB':>9s}")
    for name in design_names():
        design = tracecoil.load_design(template_path(name))
        coil = tracecoil.coil_from_design(design)
        n = len(conductors(coil))
        t_rdc = timed(lambda: res.dc_resistance(coil), args.repeat)
        t_rac = timed(lambda: res.ac_resistance(coil, f), args.repeat)
        t_c = timed(lambda: cap.capacitance(coil), args.repeat)
        t_l = cold(lambda: core_inductance(tracecoil.coil_from_design(design)))
        t_z = cold(lambda: core_impedance(tracecoil.coil_from_design(design), [f]))
        t_p = cold(lambda: tracecoil.predict(tracecoil.coil_from_design(design), freq_hz=f))
        cs = [cap.capacitance(coil, cuts=k).total_f for k in (24, 48, 96)]
        spread = (max(cs) - min(cs)) / cs[1]
        tracemalloc.start()
        tracecoil.predict(coil, freq_hz=f)
        peak = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()
        print(f"{name:26s}{n:6d}{t_rdc:8.3f}{t_rac:8.3f}{t_c:8.3f}{t_l:8.3f}{t_z:8.3f}{t_p:9.3f}{spread:10.1%}{peak:9.1f}")


if __name__ == "__main__":
    main()
