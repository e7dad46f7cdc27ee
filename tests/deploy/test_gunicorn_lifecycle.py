"""A real gunicorn under deploy/gunicorn.conf.py: it serves, and SIGTERM drains in-flight work."""
from __future__ import annotations

import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

from tests.deploy.dockerfile import dockerfile_instructions, exec_form
from tests.service.conftest import free_loopback_port, wait_until_answers

pytestmark = pytest.mark.gunicorn

ROOT = Path(__file__).resolve().parents[2]
CONFIG = ROOT / "deploy" / "gunicorn.conf.py"


def _start(tmp_path: Path, app: str, extra_env: dict[str, str]):
    port = free_loopback_port()
    private_tmp = tmp_path / "tmp"
    private_tmp.mkdir()
    env = {k: v for k, v in os.environ.items()
           if not k.startswith(("UVDOSE_", "PROMETHEUS_")) and k != "REDIS_URL"}
    env.update({
        "UVDOSE_BIND": f"127.0.0.1:{port}",
        "UVDOSE_WORKERS": "1",
        "UVDOSE_THREADS": "2",
        "UVDOSE_GRACEFUL_TIMEOUT": "15",
        "TMPDIR": str(private_tmp),
        "PYTHONPATH": str(ROOT),
        **extra_env,
    })
    stderr = (tmp_path / "stderr.log").open("wb")
    stdout = (tmp_path / "stdout.log").open("wb")
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--config", str(CONFIG), app],
        cwd=tmp_path, env=env, stdout=stdout, stderr=stderr,
    )
    base_url = f"http://127.0.0.1:{port}"
    try:
        wait_until_answers(base_url + "/livez", process)
    except Exception:
        process.kill()
        process.wait()
        raise
    return process, base_url, private_tmp, (stdout, stderr)


def _clean_up(process: subprocess.Popen, logs) -> None:
    """Kill the server if a failed assertion left it running; close its log files."""
    if process.poll() is None:
        process.kill()
        process.wait()
    for log in logs:
        log.close()


def _run_healthcheck(bind: str) -> int:
    (healthcheck,) = [args for keyword, args in dockerfile_instructions(ROOT / "deploy" / "Dockerfile")
                      if keyword == "HEALTHCHECK"]
    command = exec_form(healthcheck.split("CMD", 1)[1].strip())
    assert command[0] == "python"
    env = {**os.environ, "UVDOSE_BIND": bind}
    return subprocess.run([sys.executable, *command[1:]], env=env, capture_output=True, timeout=30).returncode


def _json_lines(path: Path) -> list[dict]:
    return [json.loads(line) for line in path.read_text().splitlines() if line.strip()]


def test_sigterm_lets_the_in_flight_request_finish_and_exits_cleanly(tmp_path):
    marker = tmp_path / "hold-started"
    process, base_url, private_tmp, logs = _start(
        tmp_path, "tests.deploy.slow_app:create_app()", {"UVDOSE_TEST_HOLD_MARKER": str(marker)}
    )
    outcome: dict = {}

    def hold():
        started = time.monotonic()
        request = urllib.request.Request(base_url + "/v1/test-hold?seconds=1.5", data=b"{}",
                                         headers={"X-Request-ID": "drain-1"}, method="POST")
        try:
            with urllib.request.urlopen(request, timeout=30) as reply:
                outcome.update(status=reply.status, body=json.loads(reply.read()),
                               seconds=time.monotonic() - started)
        except Exception as error:  # reported by the assertions below
            outcome["error"] = repr(error)

    try:
        with urllib.request.urlopen(base_url + "/livez", timeout=5) as reply:
            assert reply.status == 200 and reply.headers["X-Request-ID"]
        # The image's HEALTHCHECK command, run as Docker would, against this server.
        bind = base_url.removeprefix("http://")
        assert _run_healthcheck(bind) == 0
        assert _run_healthcheck(f"127.0.0.1:{free_loopback_port()}") != 0
        # A request gunicorn itself refuses: its log line must not name the client or query.
        with socket.create_connection(("127.0.0.1", int(base_url.rsplit(":", 1)[1])), timeout=5) as raw:
            raw.sendall(b"GET /livez?lat=47.123456&lon=8.654321 HTTP/1.1\r\nHost: x\r\nno colon here\r\n\r\n")
            assert raw.recv(64).startswith(b"HTTP/1.1 400")
        client = threading.Thread(target=hold)
        client.start()
        deadline = time.monotonic() + 10
        while not marker.exists():
            assert time.monotonic() < deadline, "the held request never reached the app"
            time.sleep(0.02)
        process.send_signal(signal.SIGTERM)
        client.join(timeout=30)
        exit_code = process.wait(timeout=30)
    finally:
        _clean_up(process, logs)

    assert "error" not in outcome, outcome.get("error")
    assert outcome["status"] == 200
    assert outcome["body"]["held"] == list(range(5000))
    assert outcome["seconds"] >= 1.5
    assert exit_code == 0

    requests = _json_lines(tmp_path / "stdout.log")
    (held,) = [line for line in requests if line["request_id"] == "drain-1"]
    assert held["status"] == 200 and held["route"] == "/v1/test-hold"
    server_lines = _json_lines(tmp_path / "stderr.log")  # every line must be JSON
    messages = [line.get("message", "") for line in server_lines]
    assert any("Handling signal: term" in m for m in messages)
    assert any("Shutting down: Master" in m for m in messages)
    refused = [m for m in messages if m.startswith("Invalid request from")]
    assert refused and all("ip=<redacted>" in m for m in refused)
    stderr_text = (tmp_path / "stderr.log").read_text()
    assert "47.123456" not in stderr_text and "ip=127.0.0.1" not in stderr_text
    # The metrics directory the config made for itself is gone with the server.
    assert not list(private_tmp.glob("uvdose-metrics-*"))


def _daytime_batch(size: int) -> bytes:
    """Distinct places around solar noon over southern Europe (an invented survey grid)."""
    records = [{"id": f"plot-{i}", "time": f"2026-06-21T11:{i % 60:02d}:00Z",
                "lat": round(36.0 + (i // 100) * 0.25, 3), "lon": round(-5.0 + (i % 100) * 0.25, 3)}
               for i in range(size)]
    return json.dumps({"records": records}).encode()


def test_sigterm_during_a_real_batch_still_answers_it_in_full(tmp_path):
    size = 10_000  # the default most records per request; about 1 s of engine time
    body = _daytime_batch(size)
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()", {"UVDOSE_CACHE": "off"})
    port = int(base_url.rsplit(":", 1)[1])
    try:
        connection = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
        connection.request("POST", "/v1/irradiance", body=body,
                           headers={"Content-Type": "application/json", "X-Request-ID": "drain-batch"})
        time.sleep(0.05)  # the whole body is on the wire; let the worker start on it
        process.send_signal(signal.SIGTERM)
        signalled = time.monotonic()
        reply = connection.getresponse()
        payload = reply.read()
        answered = time.monotonic()
        exit_code = process.wait(timeout=30)
    finally:
        _clean_up(process, logs)
    assert answered > signalled, "the batch finished before SIGTERM; nothing was in flight"
    assert reply.status == 200
    results = json.loads(payload)["results"]
    assert [r["id"] for r in results] == [f"plot-{i}" for i in range(size)]
    assert all(r["uv_index"] > 0 for r in results), "every record is in daylight"
    assert exit_code == 0
    (line,) = [line for line in _json_lines(tmp_path / "stdout.log") if line["request_id"] == "drain-batch"]
    assert (line["status"], line["route"]) == (200, "/v1/irradiance")


def test_a_broken_key_file_stops_the_server_at_start(tmp_path):
    port = free_loopback_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith(("UVDOSE_", "PROMETHEUS_"))}
    env.update({"UVDOSE_BIND": f"127.0.0.1:{port}", "UVDOSE_WORKERS": "1", "TMPDIR": str(tmp_path),
                "UVDOSE_API_KEYS_FILE": str(tmp_path / "not-mounted"), "PYTHONPATH": str(ROOT)})
    result = subprocess.run(
        [sys.executable, "-m", "gunicorn", "--config", str(CONFIG), "uvdose.service.app:create_app()"],
        cwd=tmp_path, env=env, capture_output=True, timeout=60,
    )
    assert result.returncode != 0
    assert b"UVDOSE_API_KEYS_FILE" in result.stderr


def _post_outcome(url: str, outcome: dict, key: str, request_id: str) -> None:
    request = urllib.request.Request(url, data=b"{}", method="POST", headers={"X-Request-ID": request_id})
    try:
        with urllib.request.urlopen(request, timeout=60) as reply:
            outcome[key] = (reply.status, dict(reply.headers), reply.read())
    except urllib.error.HTTPError as error:
        outcome[key] = (error.code, dict(error.headers), error.read())
    except Exception as error:  # a cut connection: reported by the assertions
        outcome[key] = (None, {}, repr(error).encode())


def _wait_for(marker: Path, what: str) -> None:
    deadline = time.monotonic() + 10
    while not marker.exists():
        assert time.monotonic() < deadline, f"{what} never reached the app"
        time.sleep(0.02)
    marker.unlink()


def test_sigterm_answers_a_long_request_refuses_new_connections_and_logs_what_it_cut(tmp_path):
    marker = tmp_path / "hold-started"
    graceful_s = 6  # running requests are told to stop at 4 s (service/buffering_worker.py)
    process, base_url, _, logs = _start(tmp_path, "tests.deploy.slow_app:create_app()",
                                        {"UVDOSE_TEST_HOLD_MARKER": str(marker),
                                         "UVDOSE_GRACEFUL_TIMEOUT": str(graceful_s)})
    port = int(base_url.rsplit(":", 1)[1])
    outcome: dict = {}
    # One request works in parts and checks its deadline (as the engine gateway does);
    # the other sleeps through and can only be cut.
    clients = [threading.Thread(target=_post_outcome, args=(base_url + "/v1/test-parts?seconds=100", outcome,
                                                            "parts", "drain-parts")),
               threading.Thread(target=_post_outcome, args=(base_url + "/v1/test-hold?seconds=100", outcome,
                                                            "hold", "drain-hold"))]
    refused_after_s = None
    try:
        for client in clients:
            client.start()
            _wait_for(marker, "a long request")
        process.send_signal(signal.SIGTERM)
        signalled = time.monotonic()
        while refused_after_s is None and time.monotonic() - signalled < graceful_s:
            try:
                socket.create_connection(("127.0.0.1", port), timeout=1).close()
                time.sleep(0.05)
            except ConnectionRefusedError:
                refused_after_s = time.monotonic() - signalled
        for client in clients:
            client.join(timeout=60)
        exit_code = process.wait(timeout=60)
    finally:
        _clean_up(process, logs)

    assert refused_after_s is not None, "new connections were not refused during the drain"
    status, headers, body = outcome["parts"]
    assert status == 503, body[:300]
    assert int(headers["Retry-After"]) >= 1
    problem = json.loads(body)
    assert problem["type"] == "urn:uvdose:problem:deadline-exceeded" and "stopping" in problem["detail"]
    assert outcome["hold"][0] is None  # slept through the graceful timeout: cut, and logged below
    assert exit_code == 0
    messages = [line.get("message", "") for line in _json_lines(tmp_path / "stderr.log")]
    assert any(m.startswith("stopping: 2 requests in progress") for m in messages)
    assert any(m.startswith("request stopped: the server is stopping") for m in messages)
    assert any(f"stopped after the {graceful_s} s graceful timeout: cut 1 requests in progress" in m
               for m in messages)
    (parts,) = [line for line in _json_lines(tmp_path / "stdout.log") if line["request_id"] == "drain-parts"]
    assert parts["status"] == 503
