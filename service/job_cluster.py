"""The Dask cluster the jobs run on: an existing one (``UVDOSE_DASK_SCHEDULER``), or the
embedded local cluster.

The embedded cluster is a ``distributed.LocalCluster`` of worker processes (one per core
unless ``UVDOSE_DASK_WORKERS`` says otherwise, one thread each, numpy's BLAS on one thread)
run by a child process of its own (:mod:`service.dask_local_cluster`), which prints
the scheduler's address and ends with its parent. ``uvdose serve`` starts it before
gunicorn forks its workers, which all use it; an app without one starts it at its first job.
A child rather than a cluster inside the API process: gunicorn forks its workers after the
app is loaded, and a forked copy of Dask's event loop thread would not run.
"""
from __future__ import annotations

import atexit
import json
import socket
import subprocess
import sys
import threading

_EMBEDDED: dict[int | None, tuple[subprocess.Popen, str]] = {}
_LOCK = threading.Lock()
START_TIMEOUT_S = 60.0


def _command(n_workers: int | None, port: int | None) -> list[str]:
    command = [sys.executable, "-m", "uvdose.service.dask_local_cluster"]
    if n_workers:
        command += ["--workers", str(n_workers)]
    if port:
        command += ["--port", str(port)]
    return command


def start_embedded(n_workers: int | None = None) -> tuple[subprocess.Popen, str]:
    """Start an embedded cluster and wait for it; (its process, its scheduler address)."""
    process = subprocess.Popen(_command(n_workers, None), stdout=subprocess.PIPE, stdin=subprocess.DEVNULL,
                               text=True)
    line = process.stdout.readline()
    if not line:
        process.wait(timeout=START_TIMEOUT_S)
        raise RuntimeError(f"the embedded Dask cluster did not start (exit status {process.returncode})")
    return process, json.loads(line)["address"]


def start_embedded_in_background(n_workers: int | None = None) -> tuple[subprocess.Popen, str]:
    """Start an embedded cluster on a free loopback port without waiting for it (``uvdose
    serve``: the server answers at once; the first job's client waits for the scheduler)."""
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    # Its logs are Dask's own plain text; the server's stderr carries JSON lines only.
    process = subprocess.Popen(_command(n_workers, port), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               stdin=subprocess.DEVNULL)
    return process, f"tcp://127.0.0.1:{port}"


def stop_process(process: subprocess.Popen, grace_s: float = 10.0) -> None:
    """Stop a child process: SIGTERM, then SIGKILL if it is still running after ``grace_s``."""
    if process.poll() is None:
        process.terminate()
        try:
            process.wait(timeout=grace_s)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()


def stop_embedded(process: subprocess.Popen) -> None:
    stop_process(process)


def embedded_address(n_workers: int | None = None) -> str:
    """The address of this process's embedded cluster, started on first call (stopped at exit)."""
    with _LOCK:
        held = _EMBEDDED.get(n_workers)
        if held is None or held[0].poll() is not None:
            held = _EMBEDDED[n_workers] = start_embedded(n_workers)
            atexit.register(stop_embedded, held[0])
        return held[1]


def scheduler_address(config) -> str:
    """Where the app's jobs go: ``UVDOSE_DASK_SCHEDULER`` or the embedded cluster."""
    return config.get("UVDOSE_DASK_SCHEDULER") or embedded_address(config.get("UVDOSE_DASK_WORKERS"))
