"""Benchmark: eddy-current plate model (assembly, factorisation, per-pose solve).

Part 1 - plate sizes: a 20 mm x 20 mm aluminium plate meshed with about
400 to 2500 loop currents: time to mesh and assemble the loop impedance
matrix, time of its LU factorisation, and per-pose cost (coupling of a
small coil by direct Biot-Savart vector potential, and the triangular
solve alone).

Part 2 - the issue's case: a 4-layer, 20-turn circular coil (20 mm) and a
20 mm x 20 mm, 1 mm aluminium tab sliding at 1 mm gap across it, 200
positions at 1 MHz. The cell size is halved until Delta L at the centre
changes by less than 1 %; then the full slide is timed with the cell size
found. Target (issue 4): under 10 s on this 2-core machine. Prints the
time, the process's peak resident memory and the mesh used.

Run: python benchmarks/bench_conductive.py [--quick]
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np

TARGET_S = 10.0


def rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def ring(a_mm, n=128):
    from tracecoil.layout import Coil, Stackup, Step, Trace

    t = np.linspace(0, 2 * np.pi, n + 1)
    tr = Trace(1, a_mm * np.column_stack([np.cos(t), np.sin(t)]), 0.2)
    return Coil(Stackup((35.0,), ()), (tr,), (), (), (Step("trace", 0),))


def part1(sizes):
    from tracecoil.targets.conductive import Plate, PlateModel

    print("Part 1: 20 x 20 mm aluminium plate, 1 mm thick, 1 MHz; coil: 128-segment ring, r = 6 mm")
    print(f"{'cells':>6} {'cell mm':>8} {'assemble s':>11} {'LU s':>7} {'coupling ms/pose':>17} "
          f"{'solve ms/pose':>14} {'peak RSS MB':>12}")
    coil = ring(6.0)
    import scipy.linalg

    scipy.linalg.lu_factor(np.eye(64) + 0j)  # warm up BLAS threads before timing
    plate = Plate([[-10, -10], [10, -10], [10, 10], [-10, 10]], 1.0, material="aluminium")
    for n in sizes:
        m = PlateModel(plate, 1e6, cell_mm=20.0 / np.sqrt(n), max_cells=int(n * 1.1) + 10)
        pos = np.column_stack([np.linspace(-5, 5, 20), np.zeros(20), np.full(20, 1.0)])
        t0 = time.perf_counter()
        c = m.coupling(coil, pos, use_grid=False)
        t_c = (time.perf_counter() - t0) / len(pos)
        t0 = time.perf_counter()
        reps = 5
        for _ in range(reps):
            for k in range(len(pos)):
                m.solve(c[:, k].astype(complex))
        t_s = (time.perf_counter() - t0) / (reps * len(pos))
        print(f"{m.n_unknowns:>6} {m.mesh.cell_mm:>8.3f} {m.factor_seconds - m.lu_seconds:>11.2f} "
              f"{m.lu_seconds:>7.2f} {t_c * 1e3:>17.1f} {t_s * 1e3:>14.2f} {rss_mb():>12.0f}")


def part2(positions, quick):
    from tracecoil import spiral
    from tracecoil.physics.conductors import conductors
    from tracecoil.physics.inductance import inductance
    from tracecoil.targets.conductive import Plate, plate_signal

    coil = spiral(shape="circle", outer_mm=20, turns=20, width_mm=0.1, gap_mm=0.1, layers=4)
    cd = conductors(coil)
    print(f"\nPart 2: 4-layer 20-turn circular coil ({len(cd)} segments), 20 x 20 x 1 mm aluminium tab, "
          f"gap 1 mm, 1 MHz, {positions} positions")
    t0 = time.perf_counter()
    l0 = inductance(coil).inductance_h
    r0 = 1.0  # the coil's own R does not enter Delta L; skip its AC estimate
    print(f"  coil inductance {l0 * 1e6:.3f} uH (PEEC) in {time.perf_counter() - t0:.2f} s (not in the timing below)")
    plate = Plate([[-10, -10], [10, -10], [10, 10], [-10, 10]], 1.0, material="aluminium")
    kw = dict(freq_hz=1e6, coil_inductance_h=l0, coil_resistance_ohm=r0)
    centre = [[0.0, 0.0, 1.0]]
    cell, prev = 1.0, None
    print(f"  {'cell mm':>8} {'unknowns':>9} {'dL nH':>10} {'change':>8}")
    while True:
        r = plate_signal(coil, plate, centre, cell_mm=cell, max_cells=5000, use_grid=False, **kw)
        dl = float(r.delta_l_h[0])
        change = None if prev is None else abs(dl / prev - 1)
        print(f"  {cell:>8.3f} {r.unknowns:>9} {dl * 1e9:>10.3f} "
              f"{'' if change is None else f'{change * 100:.2f} %':>8}")
        if change is not None and change < 0.01:
            cell *= 2  # the coarser of the last two already agrees within 1 %
            break
        if quick and cell < 1.0:
            break
        prev, cell = dl, cell / 2
    xs = np.linspace(-20, 20, positions)
    pos = np.column_stack([xs, np.zeros(positions), np.ones(positions)])
    t0 = time.perf_counter()
    r = plate_signal(coil, plate, pos, cell_mm=cell, max_cells=5000, progress=False, **kw)
    total = time.perf_counter() - t0
    print(f"  slide of {positions} positions with {cell:.3g} mm cells ({r.unknowns} unknowns): {total:.2f} s "
          f"(assemble+factorise {r.factor_seconds:.2f} s, couplings and solves {r.solve_seconds:.2f} s); "
          f"target {TARGET_S:g} s: {'met' if total < TARGET_S else 'NOT met'}")
    print(f"  largest dL {r.delta_l_h.min() * 1e9:.3f} nH ({r.delta_l_h.min() / l0 * 100:.2f} %), "
          f"steepest dL/dx {np.nanmax(np.abs(r.dl_ds_h_per_mm)) * 1e9:.3f} nH/mm")
    t0 = time.perf_counter()
    rd = plate_signal(coil, plate, pos[::20], cell_mm=cell, max_cells=5000, use_grid=False, **kw)
    per_pose = (time.perf_counter() - t0 - rd.factor_seconds) / len(pos[::20])
    err = np.max(np.abs(rd.delta_l_h - r.delta_l_h[::20])) / np.max(np.abs(r.delta_l_h))
    print(f"  direct Biot-Savart route instead of the spline grid: {per_pose:.2f} s per pose "
          f"({per_pose * positions:.1f} s for {positions}); spline vs direct: max difference "
          f"{err * 100:.3f} % of the peak dL")
    print(f"  peak resident memory of this process: {rss_mb():.0f} MB")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes (smoke run)")
    args = ap.parse_args()
    part1([400, 900] if args.quick else [400, 900, 1600, 2500])
    part2(40 if args.quick else 200, args.quick)


if __name__ == "__main__":
    main()
