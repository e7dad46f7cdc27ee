"""gunicorn settings for uvdose: ``gunicorn -c deploy/gunicorn.conf.py 'uvdose.service.app:create_app()'``.

Worker and thread model
-----------------------
Each request is one numpy-vectorised engine call over its whole batch: CPU-bound work
that holds the GIL for most of its time, with short waits on Redis and on the client's
socket. So the unit of parallelism is the **process**: ``UVDOSE_WORKERS`` sync
processes, about one per CPU core the service may use (container CPU limit, not the
host's core count, which ``os.cpu_count()`` would report). Each worker runs the
``gthread`` worker with ``UVDOSE_THREADS`` threads, so slow clients, Redis round trips
and small requests do not queue behind one large batch; more threads than 2–4 per
worker buy nothing for CPU-bound batches. The app is preloaded in the master
(``UVDOSE_PRELOAD``) so tables are read once and shared copy-on-write, and a broken
configuration (say a missing API-key file) stops the server at start, before any worker
forks.

Settings (environment; defaults in brackets)
--------------------------------------------
``UVDOSE_BIND`` [``127.0.0.1:8080``; the container image sets ``0.0.0.0:8080``],
``UVDOSE_WORKERS`` [2], ``UVDOSE_THREADS`` [4], ``UVDOSE_WORKER_TIMEOUT`` seconds a
request may run before its worker is restarted [120], ``UVDOSE_GRACEFUL_TIMEOUT``
seconds in-flight requests get to finish after SIGTERM [30], ``UVDOSE_KEEPALIVE``
seconds [5], ``UVDOSE_MAX_REQUESTS`` requests before a worker is recycled, 0 = never
[0], ``UVDOSE_PRELOAD`` [on], ``UVDOSE_LOG_LEVEL`` [info].

Metrics: with more than one process, Prometheus samples must be pooled across workers.
When ``PROMETHEUS_MULTIPROC_DIR`` is unset it is set here to a fresh private directory
before the app (and so ``prometheus_client``) is imported; an existing directory is
emptied at start, and a dead worker's files are marked so (see service/metrics.py).

Logs: gunicorn's access log is off, since the app writes one JSON line per request itself
(service/request_log.py); gunicorn's own messages and everything on the root logger go to
stderr as JSON lines with the same formatter.

Shutdown: on SIGTERM the master stops accepting, tells workers to finish what they hold,
waits up to ``graceful_timeout`` and exits 0. Orchestrators should allow
``graceful_timeout`` plus any pre-stop delay before they send SIGKILL.
"""
from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

# The config sits in deploy/ of the source tree (also inside the image); make the
# service package importable for the log formatter below whatever the working directory.
_SOURCE_ROOT = str(Path(__file__).resolve().parent.parent)
if _SOURCE_ROOT not in sys.path:
    sys.path.insert(0, _SOURCE_ROOT)


def _int_setting(name: str, default: int, minimum: int) -> int:
    raw = os.environ.get(name)
    if raw is None or raw.strip() == "":
        return default
    try:
        value = int(raw)
    except ValueError:
        raise SystemExit(f"{name}: must be an integer, got {raw!r}") from None
    if value < minimum:
        raise SystemExit(f"{name}: must be at least {minimum}, got {value}")
    return value


def _flag_setting(name: str, default: bool) -> bool:
    raw = os.environ.get(name)
    if raw is None or raw.strip() == "":
        return default
    lowered = raw.strip().lower()
    if lowered in {"1", "true", "yes", "on"}:
        return True
    if lowered in {"0", "false", "no", "off"}:
        return False
    raise SystemExit(f"{name}: must be on or off, got {raw!r}")


bind = [os.environ.get("UVDOSE_BIND", "127.0.0.1:8080")]
workers = _int_setting("UVDOSE_WORKERS", 2, 1)
worker_class = "gthread"
threads = _int_setting("UVDOSE_THREADS", 4, 1)
timeout = _int_setting("UVDOSE_WORKER_TIMEOUT", 120, 1)
graceful_timeout = _int_setting("UVDOSE_GRACEFUL_TIMEOUT", 30, 1)
keepalive = _int_setting("UVDOSE_KEEPALIVE", 5, 0)
max_requests = _int_setting("UVDOSE_MAX_REQUESTS", 0, 0)
max_requests_jitter = max_requests // 10
preload_app = _flag_setting("UVDOSE_PRELOAD", True)
# Heartbeat files on tmpfs: on overlay filesystems a slow write can get a busy worker killed.
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
proc_name = "uvdose"
# gunicorn >= 25 opens a control socket under $HOME by default: several servers on one
# host would share its path, and the image's root filesystem is read-only.
control_socket_disable = True

accesslog = None
loglevel = os.environ.get("UVDOSE_LOG_LEVEL", "info").strip().lower()
if loglevel not in {"debug", "info", "warning", "error", "critical"}:
    raise SystemExit(f"UVDOSE_LOG_LEVEL: must be debug, info, warning, error or critical, got {loglevel!r}")
logconfig_dict = {
    "version": 1,
    "disable_existing_loggers": False,
    "formatters": {"json": {"()": "uvdose.service.request_log.JsonLogFormatter"}},
    # gunicorn names client addresses and request URIs in some messages: redact them.
    "filters": {"redact": {"()": "uvdose.service.request_log.ServerLogRedaction"}},
    "handlers": {
        "stderr": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr",
                   "filters": ["redact"]},
    },
    "root": {"level": loglevel.upper(), "handlers": ["stderr"]},
    "loggers": {
        "gunicorn.error": {"level": loglevel.upper(), "handlers": ["stderr"], "propagate": False},
        "gunicorn.access": {"level": "CRITICAL", "handlers": [], "propagate": False},
    },
}

_OWN_METRICS_DIR_PREFIX = "uvdose-metrics-"
if not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix=_OWN_METRICS_DIR_PREFIX)


def on_starting(server):
    """Start from an empty metrics directory: files of an earlier run would be merged in."""
    directory = Path(os.environ["PROMETHEUS_MULTIPROC_DIR"])
    directory.mkdir(parents=True, exist_ok=True)
    for stale in directory.glob("*.db"):
        stale.unlink()


def child_exit(server, worker):
    """Tell prometheus_client a worker is gone (its live gauges stop counting)."""
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)


def on_exit(server):
    """Remove the metrics directory if this file made it (an operator's is left alone)."""
    directory = Path(os.environ["PROMETHEUS_MULTIPROC_DIR"])
    if directory.parent == Path(tempfile.gettempdir()) and directory.name.startswith(_OWN_METRICS_DIR_PREFIX):
        shutil.rmtree(directory, ignore_errors=True)
