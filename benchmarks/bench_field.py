"""Biot-Savart throughput: tracecoil's segment kernel against magpylib, same run.

Prints segment x point pairs per second for two conductor sets (a
4-layer octagonal spiral of ~300 segments and a 2000-segment circle) at
10k and 100k observation points, magpylib's figure on the same segments
and points (on the first points only when its run would take more than
about 20 s; its throughput per pair does not depend on the count), the
ratio, the largest relative difference between the two, and the peak
memory of our kernel (tracemalloc) and of the process (ru_maxrss).

    python benchmarks/bench_field.py [--quick]
"""

from __future__ import annotations

import argparse
import os
import resource
import time
import tracemalloc

import magpylib as magpy
import numpy as np

from tracecoil import spiral
from tracecoil.physics.conductors import conductors
from tracecoil.physics.kernels import segment_field


def conductor_sets():
    c = spiral(shape="octagon", outer_mm=20, turns=9, width_mm=0.2, gap_mm=0.2, layers=4, board={"layers": 4})
    cd = conductors(c)
    t = np.linspace(0, 2 * np.pi, 2001)
    ring = np.column_stack([0.01 * np.cos(t), 0.01 * np.sin(t), np.zeros_like(t)])
    return [
        (f"4-layer octagonal spiral, {len(cd)} segments", cd.start_m, cd.end_m, cd.fraction),
        ("circle, 2000 segments", ring[:-1], ring[1:], np.ones(2000)),
    ]


def points(n, rng):
    return rng.uniform(-0.015, 0.015, size=(n, 3)) * [1, 1, 0.5] + [0, 0, 0.002]


def ours(pts, a, b, cur):
    """Timed run, then a second run under tracemalloc for the memory peak
    (tracing slows NumPy's allocations, so it stays out of the timing)."""
    t0, c0 = time.perf_counter(), time.process_time()
    B = segment_field(pts, a, b, cur)
    dt, dc = time.perf_counter() - t0, time.process_time() - c0
    tracemalloc.start()
    segment_field(pts, a, b, cur)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return B, dt, dc, peak


def theirs(pts, a, b, cur, budget_s, rate_guess=1.5e6):
    """magpylib on the same segments for as many of the points as fit the
    time budget: one Polyline through all vertices when the segments form a
    single path with one current (its fastest use), else one source per
    segment in a Collection."""
    n = int(min(len(pts), max(200, budget_s * rate_guess / len(a))))
    if np.allclose(a[1:], b[:-1]) and np.all(cur == cur[0]):
        src = magpy.current.Polyline(current=float(cur[0]), vertices=np.vstack([a, b[-1:]]))
    else:
        src = magpy.Collection(*[magpy.current.Polyline(current=float(i), vertices=np.array([s, e]))
                                 for s, e, i in zip(a, b, cur)])
    t0, c0 = time.perf_counter(), time.process_time()
    B = src.getB(pts[:n])
    return B, time.perf_counter() - t0, time.process_time() - c0, n


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="10k points only")
    args = ap.parse_args()
    rng = np.random.default_rng(1)
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} CPUs (other work on the machine slows both sides)")
    print("rates in million segment-point pairs per second, by wall clock and (in brackets) by CPU time;")
    print("the CPU-time figures are the fairer comparison when other jobs share the machine")
    print(f"{'conductors':42s} {'points':>7s} {'ours':>13s} {'magpylib':>13s} {'ratio':>11s} "
          f"{'max rel diff':>12s} {'peak MB':>8s}")
    for name, a, b, cur in conductor_sets():
        for n in ((10_000,) if args.quick else (10_000, 100_000)):
            pts = points(n, rng)
            B, dt, dc, peak = ours(pts, a, b, cur)
            Bm, dtm, dcm, nm = theirs(pts, a, b, cur, budget_s=20.0)
            rate, rate_m = len(a) * n / dt, len(a) * nm / dtm
            crate, crate_m = len(a) * n / dc, len(a) * nm / dcm
            diff = np.max(np.linalg.norm(B[:nm] - Bm, axis=1) / np.linalg.norm(Bm, axis=1))
            note = "" if nm == n else f"  (magpylib on first {nm} points)"
            print(f"{name:42s} {n:7d} {rate / 1e6:5.1f} ({crate / 1e6:5.1f}) {rate_m / 1e6:5.2f} ({crate_m / 1e6:5.2f}) "
                  f"{rate / rate_m:4.1f} ({crate / crate_m:4.1f}) {diff:12.1e} {peak / 1e6:8.1f}{note}")
    print(f"process peak RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    main()
