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

Settings
--------
From the environment, parsed by ``service/config.py`` (``SERVER_SETTINGS``: the variables,
their defaults and meanings; README "Configuration"): ``UVDOSE_BIND`` (the container
image sets ``0.0.0.0:8080``), ``UVDOSE_WORKERS``, ``UVDOSE_THREADS``,
``UVDOSE_WORKER_TIMEOUT``, ``UVDOSE_GRACEFUL_TIMEOUT``, ``UVDOSE_KEEPALIVE``,
``UVDOSE_MAX_REQUESTS``, ``UVDOSE_PRELOAD`` and ``UVDOSE_LOG_LEVEL``. They stay out of the
app's settings because gunicorn takes them before any app exists. A value that cannot be
used stops gunicorn at start with a message naming the variable.

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
import tempfile
from pathlib import Path

from uvdose.service import config as _config

try:
    _settings = _config.server_settings_from_environment()
except _config.ConfigurationError as _error:
    raise SystemExit(str(_error)) from None

bind = [_settings["UVDOSE_BIND"]]
workers = _settings["UVDOSE_WORKERS"]
worker_class = "gthread"
threads = _settings["UVDOSE_THREADS"]
timeout = _settings["UVDOSE_WORKER_TIMEOUT"]
graceful_timeout = _settings["UVDOSE_GRACEFUL_TIMEOUT"]
keepalive = _settings["UVDOSE_KEEPALIVE"]
max_requests = _settings["UVDOSE_MAX_REQUESTS"]
max_requests_jitter = max_requests // 10
preload_app = _settings["UVDOSE_PRELOAD"]
# Heartbeat files on tmpfs: on overlay filesystems a slow write can get a busy worker killed.
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
proc_name = "uvdose"
# gunicorn >= 25 opens a control socket under $HOME by default: several servers on one
# host would share its path, and the image's root filesystem is read-only.
control_socket_disable = True

accesslog = None
loglevel = _settings["UVDOSE_LOG_LEVEL"].lower()
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
