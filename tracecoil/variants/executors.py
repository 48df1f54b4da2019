"""Where batches of variants run: in this process, on a local process pool,
or on a Dask distributed cluster.

All three call the same module-level function on the same batches, so the
results are identical; only the order in which batches finish differs.

* ``"serial"`` -- one after another here (debugging, tiny sweeps).
* ``"process"`` -- :class:`concurrent.futures.ProcessPoolExecutor` with
  ``workers`` processes (default: the CPU count). Processes are forked
  when this process runs a single thread and started from a fork server
  otherwise (forking a multi-threaded process can deadlock).
* ``"dask"`` -- a :class:`distributed.Client`: ``cluster="local"`` starts a
  :class:`distributed.LocalCluster` with ``workers`` single-threaded
  worker processes; ``cluster="tcp://HOST:PORT"`` connects to a running
  scheduler (its workers need the same tracecoil installed); a ready
  ``Client`` or cluster object is used as it is.

A Dask task costs about 2 ms of scheduling against about 0.2 ms for a local
process pool (measured on a 2-core machine; see
``benchmarks/bench_sweep.py``), so several variants travel in one task:
:func:`batch_size` picks how many.
"""

from __future__ import annotations

import contextlib
import math
import multiprocessing
import os
import threading
from typing import Callable, Iterable, Iterator

from ..errors import SpecError

EXECUTORS = ("serial", "process", "dask")
CLUSTER_SCHEMES = ("tcp://", "tls://", "inproc://", "ucx://")


def check_executor(executor: str, cluster=None) -> str:
    """Validate the executor choice; a ``cluster`` implies ``'dask'``."""
    if cluster is not None and executor in (None, "process"):
        executor = "dask"
    if executor not in EXECUTORS:
        raise SpecError(f"executor must be one of {', '.join(EXECUTORS)}; got {executor!r}")
    if cluster is not None and executor != "dask":
        raise SpecError(f"cluster={cluster!r} needs executor='dask'; got executor={executor!r}")
    if isinstance(cluster, str) and cluster != "local" and not cluster.startswith(CLUSTER_SCHEMES):
        raise SpecError(f"cluster must be 'local' or a scheduler address such as tcp://HOST:PORT; got {cluster!r}")
    return executor


def check_workers(workers) -> int | None:
    if workers is None:
        return None
    if isinstance(workers, bool) or not isinstance(workers, int) or not 1 <= workers <= 4096:
        raise SpecError(f"workers must be a whole number from 1 to 4096; got {workers!r}")
    return workers


def default_workers() -> int:
    return os.cpu_count() or 1


def batch_size(n: int, workers: int, executor: str) -> int:
    """Variants per task: enough tasks to keep every worker busy and to
    stream results, few enough that per-task overhead stays small (about
    four tasks per Dask worker, capped at 64 variants; up to 8 per local
    process task).

    >>> batch_size(1000, 2, "dask"), batch_size(1000, 2, "process"), batch_size(10, 2, "process")
    (64, 8, 1)
    """
    if executor == "serial" or n <= 0:
        return 1
    if executor == "dask":
        return max(1, min(64, math.ceil(n / (4 * workers))))
    return max(1, min(8, n // (16 * workers)))


def chunks(items: list, size: int) -> list[list]:
    """``items`` cut into lists of at most ``size``.

    >>> chunks([1, 2, 3, 4, 5], 2)
    [[1, 2], [3, 4], [5]]
    """
    return [items[i : i + size] for i in range(0, len(items), size)]


def _one_thread_per_worker():
    """Pool workers already use every core between them: one kernel thread each."""
    import os

    os.environ["TRACECOIL_THREADS"] = "1"


def _mp_context():
    method = "fork" if threading.active_count() == 1 and "fork" in multiprocessing.get_all_start_methods() else "spawn"
    if method == "spawn" and "forkserver" in multiprocessing.get_all_start_methods():
        method = "forkserver"
    ctx = multiprocessing.get_context(method)
    if method == "forkserver":
        ctx.set_forkserver_preload(["tracecoil.variants.sweep"])
    return ctx


def _process_pool(fn, task, batches, workers) -> Iterator:
    from concurrent.futures import ProcessPoolExecutor, as_completed

    pool = ProcessPoolExecutor(max_workers=min(workers, max(1, len(batches))), mp_context=_mp_context(), initializer=_one_thread_per_worker)
    ok = False
    try:
        futures = [pool.submit(fn, task, b) for b in batches]
        for f in as_completed(futures):
            yield f.result()
        ok = True
    finally:
        pool.shutdown(wait=ok, cancel_futures=True)


@contextlib.contextmanager
def dask_client(cluster="local", workers: int | None = None):
    """A :class:`distributed.Client` for ``cluster`` (see the module
    docstring); closes what it started."""
    try:
        from distributed import Client, LocalCluster
    except ImportError as e:  # pragma: no cover - depends on the installation
        raise SpecError(f"running on a Dask cluster needs the 'distributed' package (pip install distributed): {e}") from e
    if isinstance(cluster, Client):
        yield cluster
        return
    if cluster is None or cluster == "local":
        n = workers or default_workers()
        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None) as lc, Client(lc) as client:
            yield client
        return
    with Client(cluster) as client:  # an address or a cluster object
        yield client


def _dask(fn, task, batches, cluster, workers) -> Iterator:
    from distributed import as_completed

    with dask_client(cluster, workers) as client:
        shared = client.scatter(task, broadcast=True)  # the design travels once, not once per task
        futures = [client.submit(fn, shared, b, pure=False) for b in batches]
        try:
            for f in as_completed(futures):
                yield f.result()
        finally:
            client.cancel([f for f in futures if not f.done()])


def run_batches(fn: Callable, task, batches: Iterable[list], *, executor: str = "process", cluster=None, workers: int | None = None) -> Iterator:
    """Call ``fn(task, batch)`` for every batch and yield the results as
    they finish (any order). ``fn`` must be a module-level function and
    ``task`` picklable. An exception raised by ``fn`` stops the run and
    is raised here; pending batches are cancelled.
    """
    executor = check_executor(executor, cluster)
    workers = check_workers(workers)
    batches = list(batches)
    if not batches:
        return
    if executor == "serial":
        for b in batches:
            yield fn(task, b)
    elif executor == "process":
        yield from _process_pool(fn, task, batches, workers or default_workers())
    else:
        yield from _dask(fn, task, batches, cluster, workers)


__all__ = ["EXECUTORS", "batch_size", "check_executor", "check_workers", "chunks", "dask_client", "default_workers", "run_batches"]
