"""Benchmark: EMF waveform of a cylinder magnet passing a 4-layer, 20-turn coil.

Target (issue 4): 500 time steps in under 1 s on a 2-core machine.

The coil is a 20 mm square spiral, 20 turns per layer on 4 layers in
series; an N42 disc magnet 6 mm x 3 mm passes with its centre 2.5 mm
above the board (its face 1 mm above) at 1.5 m/s over 40 mm. Prints,
for a cold first run and the median of warm runs: the whole ``signal``
call (conductors, closest-approach analysis, overlap check, flux linkage
at 504 poses, derivative), the flux linkage alone, the quadrature size,
the throughput in point-poses per second, and peak memory (tracemalloc
and resident set). Also the same for a block magnet and a point dipole
of equal moment, whose kernels are dearer and cheaper.

Run: python benchmarks/bench_magnet_signal.py [--repeat N]
"""

from __future__ import annotations

import argparse
import resource
import statistics
import time
import tracemalloc

TARGET_S = 1.0
SAMPLES = 500


def rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # kB on Linux


def setup():
    import numpy as np

    import tracecoil
    from tracecoil.targets import BlockMagnet, CylinderMagnet, Dipole, Linear

    coil = tracecoil.spiral(shape="square", outer_mm=20, turns=20, width_mm=0.2, gap_mm=0.2, layers=4,
                            board={"layers": 4})
    cyl = CylinderMagnet(diameter_mm=6, length_mm=3, grade="N42")
    blk = BlockMagnet(size_mm=(5.3, 5.3, 3), grade="N42")
    dip = Dipole(moment_am2=cyl.moment_am2)
    motion = Linear(start_mm=(-20, 0.3, 2.5), direction=(1, 0, 0), speed_m_s=1.5, distance_mm=40)
    return np, coil, {"cylinder": cyl, "block": blk, "dipole": dip}, motion


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    t0 = time.perf_counter()
    np, coil, magnets, motion = setup()
    from tracecoil.physics.conductors import conductors
    from tracecoil.targets import signal
    from tracecoil.targets.flux import flux_linkage, quadrature, segment_clearance_mm

    print(f"imports and coil generation: {time.perf_counter() - t0:.2f} s")
    cd = conductors(coil)
    print(f"coil: {len(cd)} conductor segments, {cd.length_m.sum() * 1e3:.0f} mm of copper; {SAMPLES} samples")
    for name, mag in magnets.items():
        times = []
        for k in range(1 + args.repeat):
            t = time.perf_counter()
            s = signal(coil, mag, motion, samples=SAMPLES)
            times.append(time.perf_counter() - t)
        # memory in one extra run: tracemalloc slows allocation-heavy code, so
        # it stays off while timing
        tracemalloc.start()
        signal(coil, mag, motion, samples=SAMPLES)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        # the flux linkage alone, at the same poses (with the ghost samples)
        h = s.time_s[1] - s.time_s[0]
        t_ext = np.concatenate([[-2 * h, -h], s.time_s, s.time_s[-1] + [h, 2 * h]])
        pos, turn = motion.poses(t_ext)
        rot = turn @ mag.rotation
        t = time.perf_counter()
        flux_linkage(cd, mag, pos, rot)
        t_flux = time.perf_counter() - t
        d = segment_clearance_mm(cd, mag, pos, rot)
        n_pts = len(quadrature(cd, np.maximum(d, 0.005), order=4)[0])
        warm = statistics.median(times[1:]) if len(times) > 1 else times[0]
        flag = "meets" if warm < TARGET_S else "misses"
        print(f"{name:9s} signal: cold {times[0]:.2f} s, warm median {warm:.2f} s ({flag} the {TARGET_S:g} s target); "
              f"flux linkage alone {t_flux:.2f} s for {n_pts} points x {len(pos)} poses = "
              f"{n_pts * len(pos) / t_flux / 1e6:.1f} M point-poses/s; peak traced memory {peak / 1e6:.1f} MB; "
              f"peak EMF {s.peak_emf_v * 1e3:.2f} mV (derivative error < {s.emf_error_v * 1e6:.2f} uV)")
    print(f"process peak resident set: {rss_mb():.0f} MB")


if __name__ == "__main__":
    main()
