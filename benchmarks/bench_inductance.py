"""Inductance of a 4-layer, 20-turn, 20 mm circular coil: time, memory, convergence.

Prints, for the partial-inductance model at several discretisations
(``filaments`` across the width of touching neighbours; the reference
also widens the near zone and the far-field rule), the inductance, its
deviation from the most refined result, the wall-clock and CPU time and
the tracemalloc peak; then the time of an AC solution (skin and
proximity effect) at 1 MHz.

    python benchmarks/bench_inductance.py [--no-ac]
"""

from __future__ import annotations

import argparse
import os
import resource
import time
import tracemalloc

from tracecoil import spiral
from tracecoil.physics.conductors import conductors
from tracecoil.physics.inductance import impedance, partial_matrix


def timed(fn, memory=True):
    """Run fn timed; then, if asked, once more under tracemalloc for the
    memory peak (tracing slows NumPy's allocations, so it stays out of the
    timing; the geometry cache is cleared so the second run repeats the work)."""
    from tracecoil.physics import inductance as ind

    ind._CACHE.clear()
    t0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    peak = float("nan")
    if memory:
        ind._CACHE.clear()
        tracemalloc.start()
        fn()
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    return out, wall, cpu, peak


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--no-ac", action="store_true", help="skip the AC solution")
    args = ap.parse_args()
    coil = spiral(shape="circle", outer_mm=20, turns=20, width_mm=0.15, gap_mm=0.15, layers=4, board={"layers": 4})
    n = len(conductors(coil))
    print(f"coil: 4 layers x 20 turns, 20 mm, 0.15/0.15 mm, {n} segments; "
          f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} CPUs")
    runs = [
        ("filaments=2", dict(filaments=2)),
        ("filaments=4 (default)", dict(filaments=4)),
        ("filaments=8", dict(filaments=8)),
        ("reference: filaments=16, near=3, bulk=3", dict(filaments=16, near_lengths=3.0, bulk_order=3)),
    ]
    rows = []
    for name, kw in runs:
        (M, _, _), wall, cpu, peak = timed(lambda kw=kw: partial_matrix(coil, **kw), memory="reference" not in name)
        rows.append((name, float(M.sum()), wall, cpu, peak))
    ref = rows[-1][1]
    print(f"{'discretisation':42s} {'L (uH)':>10s} {'vs ref':>9s} {'wall s':>7s} {'cpu s':>7s} {'peak MB':>8s}")
    for name, L, wall, cpu, peak in rows:
        print(f"{name:42s} {L * 1e6:10.4f} {100 * (L / ref - 1):+8.4f}% {wall:7.2f} {cpu:7.2f} {peak / 1e6:8.1f}")
    if not args.no_ac:
        z, wall, cpu, peak = timed(lambda: impedance(coil, [1e6]))
        print(f"AC at 1 MHz, cross-section {z.cross_section}: L = {z.inductance_h[0] * 1e6:.4f} uH, "
              f"R = {z.resistance_ohm[0]:.3f} ohm (DC {z.resistance_dc_ohm:.3f}); wall {wall:.2f} s, cpu {cpu:.2f} s, "
              f"peak {peak / 1e6:.0f} MB, GMRES iterations {z.iterations[0]}")
    print(f"process peak RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    main()
