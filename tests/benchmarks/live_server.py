"""A gunicorn on a free loopback port for the benchmark scripts in this folder (not
collected by pytest; the scripts import it as ``live_server``, this folder being first on
``sys.path``)."""
from __future__ import annotations

import os
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def start_server(port: int, workers: int = 1, **settings: str) -> subprocess.Popen:
    """gunicorn serving the app with ``workers`` workers and ``settings`` in its environment
    (no Redis, a private metrics directory); returns once ``/livez`` answers."""
    env = {**os.environ, "PROMETHEUS_MULTIPROC_DIR": tempfile.mkdtemp(prefix="uvdose-bench-"), **settings}
    if "REDIS_URL" not in settings:
        env.pop("REDIS_URL", None)
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--workers", str(workers), "--bind", f"127.0.0.1:{port}", "--timeout",
         "300", "uvdose.service.app:create_app()"], cwd=REPO, env=env, stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL)
    return answering(process, port)


def answering(process: subprocess.Popen, port: int) -> subprocess.Popen:
    """``process`` once its ``/livez`` on ``port`` answers (stopped, and the script with it,
    if that takes over a minute)."""
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/livez", timeout=1):
                return process
        except OSError:
            time.sleep(0.2)
    process.terminate()
    raise SystemExit("gunicorn did not start")
