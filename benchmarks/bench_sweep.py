"""Benchmark: sweep throughput serially, on a local process pool and on a
Dask LocalCluster, and the per-task overhead of each parallel path.

Part 1 (issue 6): one sweep of 2-layer square spirals (10 mm, Latin-
hypercube samples over turns and trace width) with the metrics inductance,
DC resistance and rule check, run three ways on the same variants:

* serial (one process, no pool);
* local processes (``executor="process"``, ``--workers`` processes);
* Dask LocalCluster (``--workers`` single-threaded worker processes).

It prints variants per second, the speed-up over serial (target >= 1.8x on
2 cores for the process pool), and checks that all three give the same
rows. The Dask cluster's start-up is timed separately (a long-lived
cluster pays it once).

Part 2: per-task overhead. ``--tasks`` trivial tasks (each returns its
input) through the process pool and the Dask cluster, one task at a time,
side by side: the cost the batching in tracecoil.variants.executors
amortises.

Run: python benchmarks/bench_sweep.py [--variants 1000] [--workers 2] [--tasks 400]
"""

from __future__ import annotations

import argparse
import os
import sys
import time

BASE = {"coil": {"shape": "square", "outer_mm": 10, "turns": 4, "width_mm": 0.2, "gap_mm": 0.15, "layers": 2}, "board": {"layers": 2}}
VARY = ["turns=2.0:7.0", "width_mm=0.15:0.3"]  # continuous ranges: every sample a distinct variant
METRICS = ["inductance", "resistance_dc", "rules"]


def echo(task, batch):
    """A task that does nothing: its cost is the executor's overhead."""
    return batch


def cpu_timed(task, batch):
    """Run one batch and return the CPU seconds it took in this process."""
    from tracecoil.variants.sweep import run_batch

    c = time.process_time()
    run_batch(task, batch)
    return time.process_time() - c


def cpu_per_variant(design, variants, executor, workers):
    """CPU seconds per variant spent inside the batches, and the wall time."""
    from tracecoil.variants.executors import chunks, run_batches
    from tracecoil.variants.metrics import make_options
    from tracecoil.variants.space import variant_id
    from tracecoil.variants.sweep import Task

    task = Task(design, tuple(METRICS), make_options())
    batches = chunks([(variant_id(v), v) for v in variants], 4)
    t = time.perf_counter()
    cpu = sum(run_batches(cpu_timed, task, batches, executor=executor, workers=workers))
    return cpu / len(variants), time.perf_counter() - t


def timed_sweep(design, variants, **kw):
    from tracecoil.variants import sweep

    t = time.perf_counter()
    rows = sweep(design, variants, METRICS, progress=False, **kw)
    return rows, time.perf_counter() - t


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--variants", type=int, default=240, help="variants in the sweep (issue target: 1000; default 240 for a quicker run)")
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--tasks", type=int, default=400, help="trivial tasks for the overhead measurement")
    ap.add_argument("--skip-serial", action="store_true", help="estimate nothing; just skip the serial run (speed-up not printed)")
    args = ap.parse_args()

    from distributed import Client, LocalCluster

    from tracecoil.design import design_from_dict
    from tracecoil.variants.executors import run_batches
    from tracecoil.variants.space import make_space
    from tracecoil.variants.sweep import format_row

    design = design_from_dict(BASE)
    variants = make_space(VARY, sample=f"lhs:{args.variants}", seed=1).variants()
    n = len(variants)
    print(f"machine: {os.cpu_count()} CPU(s); load average {os.getloadavg()[0]:.2f} at start (other work on the machine slows every figure)")
    print(f"sweep: {n} distinct 2-layer square spirals (10 mm; {', '.join(VARY)}), metrics {', '.join(METRICS)}; workers = {args.workers}")

    results = {}
    if not args.skip_serial:
        rows, s = timed_sweep(design, variants, executor="serial")
        results["serial"] = (rows, s)
    rows, s = timed_sweep(design, variants, executor="process", workers=args.workers)
    results["process pool"] = (rows, s)
    t = time.perf_counter()
    with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True, dashboard_address=None) as lc, Client(lc) as client:
        startup = time.perf_counter() - t
        client.run(lambda: __import__("tracecoil.variants.sweep"))  # imports in the workers, like any warm cluster
        rows, s = timed_sweep(design, variants, cluster=client)
        results["dask LocalCluster"] = (rows, s)

        # Part 2: per-task overhead, one trivial task per submission.
        batches = [[i] for i in range(args.tasks)]
        t = time.perf_counter()
        for _ in run_batches(echo, None, batches, cluster=client):
            pass
        dask_task = (time.perf_counter() - t) / args.tasks
    t = time.perf_counter()
    for _ in run_batches(echo, None, batches, executor="process", workers=args.workers):
        pass
    pool_task = (time.perf_counter() - t) / args.tasks

    failed = sum(r["error"] is not None for r in results["process pool"][0])
    print(f"  ({failed} variant(s) fail to build and are recorded with their error)")
    ref_rows = next(iter(results.values()))[0]
    header = list(ref_rows[0])
    ref = [format_row(r, header) for r in ref_rows]
    base_s = results["serial"][1] if "serial" in results else None
    print(f"{'path':20s} {'seconds':>9s} {'variants/s':>11s} {'speed-up':>9s}  rows")
    for name, (rows, s) in results.items():
        same = "identical" if [format_row(r, header) for r in rows] == ref else "DIFFERENT"
        up = f"{base_s / s:8.2f}x" if base_s else "        -"
        print(f"{name:20s} {s:9.2f} {n / s:11.1f} {up}  {same}")
    print(f"dask LocalCluster start-up: {startup:.2f} s (not in the figure above)")
    print(f"load average at the end: {os.getloadavg()[0]:.2f} (above the worker count, the machine was shared and the ratios understate)")
    print(f"per-task overhead, {args.tasks} trivial tasks one at a time: process pool {pool_task * 1e3:.2f} ms, "
          f"dask {dask_task * 1e3:.2f} ms ({dask_task / pool_task:.1f}x)")
    # Part 3: CPU accounting, which other work on the machine disturbs far
    # less than wall time: a pool that wastes nothing spends the same CPU
    # per variant as the serial run, and its wall-time speed-up on an idle
    # machine is then min(workers, cores) less start-up and the last batch.
    sub = variants[: min(len(variants), 120)]
    cs, ws = cpu_per_variant(design, sub, "serial", 1)
    cp, wp = cpu_per_variant(design, sub, "process", args.workers)
    print(f"CPU per variant ({len(sub)} variants): serial {cs * 1e3:.1f} ms, in pool workers {cp * 1e3:.1f} ms "
          f"(ratio {cp / cs:.2f}); wall {ws:.2f} s serial vs {wp:.2f} s pool ({ws / wp:.2f}x) at load {os.getloadavg()[0]:.2f}")
    if base_s:
        target = results["serial"][1] / results["process pool"][1]
        verdict = "meets" if target >= 1.8 else "misses"
        print(f"process pool speed-up {target:.2f}x on {args.workers} workers {verdict} the 1.8x target")
    return 0


if __name__ == "__main__":
    sys.exit(main())
