"""``python -m uvdose.service.dask_local_cluster [--workers N] [--port P]``: the embedded Dask cluster.

A ``distributed.LocalCluster`` of worker processes (one per core unless ``--workers``), one
thread each and numpy's BLAS on one thread, glibc's allocator on its own dynamic thresholds
(see below), on loopback. Prints ``{"address": ...}`` on one
line once the scheduler listens, and runs until SIGTERM or until its parent process ends
(:mod:`service.job_cluster` starts it).
"""
from __future__ import annotations

import argparse
import json
import os
import signal
import time


def _run(n_workers: int | None, port: int) -> None:
    from uvdose.service.server import pin_numeric_threads

    pin_numeric_threads()  # inherited by the worker processes, before numpy is imported
    parent = os.getppid()
    import dask
    from distributed import LocalCluster

    # Dask's nanny starts its workers with MALLOC_TRIM_THRESHOLD_=65536, which also freezes
    # glibc's mmap threshold, so every large array is mapped and unmapped anew: a season
    # part of 54 fields took 1.10x the wall time and 1.17x the CPU time with it (measured
    # in one process, the same body). The workers keep glibc's dynamic thresholds instead.
    environ = dict(dask.config.get("distributed.nanny.pre-spawn-environ"))
    environ.pop("MALLOC_TRIM_THRESHOLD_", None)
    dask.config.set({"distributed.nanny.pre-spawn-environ": environ})

    cluster = LocalCluster(n_workers=n_workers or os.cpu_count() or 1, threads_per_worker=1, processes=True,
                           host="127.0.0.1", scheduler_port=port, dashboard_address=None)
    try:
        print(json.dumps({"address": cluster.scheduler_address}), flush=True)
        while os.getppid() == parent:
            time.sleep(0.5)
    except KeyboardInterrupt:
        pass
    finally:
        cluster.close(timeout=10)


def _terminated(signum, frame) -> None:
    raise KeyboardInterrupt


if __name__ == "__main__":
    signal.signal(signal.SIGTERM, _terminated)
    arguments = argparse.ArgumentParser(prog="python -m uvdose.service.dask_local_cluster")
    arguments.add_argument("--workers", type=int, default=None)
    arguments.add_argument("--port", type=int, default=0, help="the scheduler's port (default: any free one)")
    given = arguments.parse_args()
    _run(given.workers, given.port)
