"""gunicorn for uvdose, defined once: the settings, the server hooks and ``uvdose serve``.

``deploy/gunicorn.conf.py`` (the container's ``gunicorn -c``) and ``uvdose serve`` (any
directory, any install) both take :func:`gunicorn_settings` and the hooks below, so the
service runs, listens and logs the same way wherever it is started.

Worker and thread model
-----------------------
Each request is one numpy-vectorised engine call over its whole batch: CPU-bound work
that holds the GIL for most of its time, with short waits on Redis and on the client's
socket. So the unit of parallelism is the **process**: ``UVDOSE_WORKERS`` worker
processes, about one per CPU core the service may use (container CPU limit, not the
host's core count, which ``os.cpu_count()`` would report). Each worker runs
:class:`uvdose.service.buffering_worker.BufferingWorker` (gunicorn's ``gthread`` with each
request received whole, under ``UVDOSE_HEADER_TIMEOUT_S`` and ``UVDOSE_BODY_TIMEOUT_S``, before
a thread takes it, so slow clients hold no thread) with ``UVDOSE_THREADS`` threads, so Redis
round trips and small requests do not queue behind one large batch; more threads than 2–4 per
worker buy nothing for CPU-bound batches, and numpy's BLAS runs one thread per process
(:func:`pin_numeric_threads`; ``OPENBLAS_NUM_THREADS`` and its kin, when set, win). The
app is preloaded in the master
(``UVDOSE_PRELOAD``) so tables are read once and shared copy-on-write, and a broken
configuration (say a missing API-key file) stops the server at start, before any worker
forks.

Settings
--------
From the environment, parsed by ``service/config.py`` (``SERVER_SETTINGS``: the variables,
their defaults and meanings; README "Configuration"): ``UVDOSE_BIND`` (the container
image sets ``0.0.0.0:8080``), ``UVDOSE_WORKERS``, ``UVDOSE_THREADS``,
``UVDOSE_WORKER_TIMEOUT``, ``UVDOSE_HEADER_TIMEOUT_S``, ``UVDOSE_BODY_TIMEOUT_S``,
``UVDOSE_GRACEFUL_TIMEOUT``, ``UVDOSE_KEEPALIVE``,
``UVDOSE_MAX_REQUESTS``, ``UVDOSE_PRELOAD`` and ``UVDOSE_LOG_LEVEL``. They stay out of the
app's settings because gunicorn takes them before any app exists. A value that cannot be
used stops gunicorn at start with a message naming the variable.

Metrics: with more than one process, Prometheus samples must be pooled across workers.
When ``PROMETHEUS_MULTIPROC_DIR`` is unset, :func:`metrics_directory` sets it to a fresh
private directory before the app (and so ``prometheus_client``) is imported; an existing directory is
emptied at start, and a dead worker's files are marked so (see service/metrics.py).

Logs: gunicorn's access log is off, since the app writes one JSON line per request itself
(service/request_log.py); gunicorn's own messages and everything on the root logger go to
stderr as JSON lines with the same formatter.

Shutdown: on SIGTERM the master and the workers close their listening sockets (new
connections are refused), workers finish what they hold, running requests are told to
stop shortly before ``graceful_timeout`` (they answer 503) and what is still cut then is
logged; the master exits 0. Orchestrators should allow ``graceful_timeout`` plus any
pre-stop delay before they send SIGKILL.
"""
from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path
from typing import Any

OWN_METRICS_DIR_PREFIX = "uvdose-metrics-"

NUMERIC_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
"""Variables the numeric libraries under numpy read for their own thread pools."""


def pin_numeric_threads(environ=None) -> None:
    """One thread for numpy's BLAS and OpenMP pools in each server process, unless set.

    The server's unit of parallelism is the worker process (about one per CPU); BLAS threads
    on top oversubscribe the CPUs. Measured on the shared 2-core development machine: the
    engine's small matrix products (300 × 27 by 27 × 121) took 10 ms with OpenBLAS's own
    threads and 0.18 ms with one, and a 300-record request 66 ms against 21 ms. Must run
    before numpy is first imported (the gunicorn config and :func:`serve` call it first).
    """
    environ = os.environ if environ is None else environ
    for name in NUMERIC_THREAD_VARIABLES:
        environ.setdefault(name, "1")


def metrics_directory() -> str:
    """``PROMETHEUS_MULTIPROC_DIR``; when unset, a fresh private directory is made and set
    (before ``prometheus_client`` is first imported, which reads it on import)."""
    if not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        os.environ["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix=OWN_METRICS_DIR_PREFIX)
    return os.environ["PROMETHEUS_MULTIPROC_DIR"]


def log_config(level: str) -> dict[str, Any]:
    """gunicorn's ``logconfig_dict``: its own messages and the root logger as JSON lines on
    stderr (the app's formatter), client addresses and request URIs redacted."""
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "formatters": {"json": {"()": "uvdose.service.request_log.JsonLogFormatter"}},
        "filters": {"redact": {"()": "uvdose.service.request_log.ServerLogRedaction"}},
        "handlers": {
            "stderr": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr",
                       "filters": ["redact"]},
        },
        "root": {"level": level.upper(), "handlers": ["stderr"]},
        "loggers": {
            "gunicorn.error": {"level": level.upper(), "handlers": ["stderr"], "propagate": False},
            "gunicorn.access": {"level": "CRITICAL", "handlers": [], "propagate": False},
        },
    }


def gunicorn_settings() -> dict[str, Any]:
    """gunicorn settings (their gunicorn names) from the environment; a value that cannot be
    used stops the start with a message naming the variable."""
    from uvdose.service import config

    try:
        settings = config.server_settings_from_environment()
    except config.ConfigurationError as error:
        raise SystemExit(str(error)) from None
    level = settings["UVDOSE_LOG_LEVEL"].lower()
    return {
        "bind": [settings["UVDOSE_BIND"]],
        "workers": settings["UVDOSE_WORKERS"],
        "worker_class": "uvdose.service.buffering_worker.BufferingWorker",
        "threads": settings["UVDOSE_THREADS"],
        "timeout": settings["UVDOSE_WORKER_TIMEOUT"],
        "graceful_timeout": settings["UVDOSE_GRACEFUL_TIMEOUT"],
        "keepalive": settings["UVDOSE_KEEPALIVE"],
        "max_requests": settings["UVDOSE_MAX_REQUESTS"],
        "max_requests_jitter": settings["UVDOSE_MAX_REQUESTS"] // 10,
        "preload_app": settings["UVDOSE_PRELOAD"],
        # Heartbeat files on tmpfs: on overlay filesystems a slow write can get a busy worker killed.
        "worker_tmp_dir": "/dev/shm" if os.path.isdir("/dev/shm") else None,
        "proc_name": "uvdose",
        # gunicorn >= 25 opens a control socket under $HOME by default: several servers on one
        # host would share its path, and the image's root filesystem is read-only.
        "control_socket_disable": True,
        "accesslog": None,
        "loglevel": level,
        "logconfig_dict": log_config(level),
    }


def on_starting(server) -> None:
    """Start from an empty metrics directory: files of an earlier run would be merged in."""
    directory = Path(metrics_directory())
    directory.mkdir(parents=True, exist_ok=True)
    for stale in directory.glob("*.db"):
        stale.unlink()


def child_exit(server, worker) -> None:
    """Tell prometheus_client a worker is gone (its live gauges stop counting)."""
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)


def on_exit(server) -> None:
    """Remove the metrics directory if :func:`metrics_directory` made it (an operator's stays)."""
    directory = Path(metrics_directory())
    if directory.parent == Path(tempfile.gettempdir()) and directory.name.startswith(OWN_METRICS_DIR_PREFIX):
        shutil.rmtree(directory, ignore_errors=True)


HOOKS = {"on_starting": on_starting, "child_exit": child_exit, "on_exit": on_exit}


def embedded_dask_cluster() -> None:
    """Without ``UVDOSE_DASK_SCHEDULER``, start the jobs' embedded Dask cluster (one for all
    gunicorn workers, stopped with the server) and point the workers at it."""
    import atexit

    from uvdose.service import config, job_cluster

    if os.environ.get("UVDOSE_DASK_SCHEDULER"):
        return
    workers = config.settings_from_environment()["UVDOSE_DASK_WORKERS"]
    process, address = job_cluster.start_embedded_in_background(workers)
    os.environ["UVDOSE_DASK_SCHEDULER"] = address
    atexit.register(job_cluster.stop_embedded, process)


def serve(bind: str | None = None, workers: int | None = None, config_path: Path | None = None) -> None:
    """Run gunicorn in this process until it is told to stop: :func:`gunicorn_settings` and
    :data:`HOOKS`, or the gunicorn config file ``config_path``; ``bind`` and ``workers``
    override either."""
    import runpy

    from gunicorn.app.base import BaseApplication

    pin_numeric_threads()  # before the app, and numpy, is imported
    metrics_directory()
    embedded_dask_cluster()

    class Server(BaseApplication):
        def load_config(self) -> None:
            if config_path is not None:
                # As gunicorn's own -c does: run the file, keep the names that are settings.
                chosen = {key: value for key, value in runpy.run_path(str(config_path)).items()
                          if key in self.cfg.settings}
            else:
                chosen = {**gunicorn_settings(), **HOOKS}
            for key, value in chosen.items():
                if value is not None:
                    self.cfg.set(key, value)
            if bind:
                self.cfg.set("bind", [bind])
            if workers:
                self.cfg.set("workers", workers)

        def load(self):
            from uvdose.service.app import create_app

            return create_app()

    Server().run()
