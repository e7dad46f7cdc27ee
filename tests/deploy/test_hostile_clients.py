"""Slow, idle and careless clients against a real gunicorn under deploy/gunicorn.conf.py
(the buffering worker, service/buffering_worker.py): nobody starves the service, nothing
is dropped, every cut is logged."""
from __future__ import annotations

import http.client
import json
import socket
import threading
import time
import urllib.error
import urllib.request

import pytest

from tests.deploy.test_gunicorn_lifecycle import _clean_up, _json_lines, _start

pytestmark = pytest.mark.gunicorn

SHIPPED_CONCURRENCY = {"UVDOSE_WORKERS": "2", "UVDOSE_THREADS": "4"}  # the defaults of service/config.py
JSON_HEAD = b"POST /v1/irradiance HTTP/1.1\r\nHost: uvdose\r\nContent-Type: application/json\r\n"


def _port(base_url: str) -> int:
    return int(base_url.rsplit(":", 1)[1])


def _plots(n: int) -> list[dict]:
    """Distinct places around solar noon (an invented survey grid)."""
    return [{"id": f"plot-{i}", "time": "2026-06-21T11:00:00Z", "lat": round(36.0 + (i // 100) * 0.25, 3),
             "lon": round(-5.0 + (i % 100) * 0.25, 3)} for i in range(n)]


def _post_json(url: str, payload: dict, timeout: float = 30.0):
    request = urllib.request.Request(url, data=json.dumps(payload).encode(), method="POST",
                                     headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(request, timeout=timeout) as reply:
        return reply.status, json.loads(reply.read())


def _read_all(sock: socket.socket, timeout: float = 20.0) -> bytes:
    sock.settimeout(timeout)
    received = b""
    try:
        while True:
            piece = sock.recv(65536)
            if not piece:
                return received
            received += piece
    except (ConnectionResetError, socket.timeout):
        return received


def _slow_clients(port: int, count: int) -> list[socket.socket]:
    """Half of them stop inside their headers, half inside a declared body."""
    held = []
    for i in range(count):
        sock = socket.create_connection(("127.0.0.1", port), timeout=5)
        if i % 2:
            sock.sendall(JSON_HEAD)
        else:
            sock.sendall(JSON_HEAD + b"Content-Length: 100000\r\n\r\n" + b'{"records": [')
        held.append(sock)
    return held


def test_fifty_slow_clients_do_not_starve_livez_or_a_real_batch(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()",
                                        {**SHIPPED_CONCURRENCY, "UVDOSE_CACHE": "off",
                                         "UVDOSE_HEADER_TIMEOUT_S": "60", "UVDOSE_BODY_TIMEOUT_S": "60"})
    held = []
    try:
        held = _slow_clients(_port(base_url), 50)
        time.sleep(0.5)  # every slow client is accepted and stalled
        # A starved server never answers these: the timeouts are generous bounds, not targets.
        with urllib.request.urlopen(base_url + "/livez", timeout=10) as reply:
            livez = reply.status
        status, body = _post_json(base_url + "/v1/irradiance", {"records": _plots(1000)}, timeout=30)
        for sock in held:  # still held: none was answered or closed meanwhile
            sock.setblocking(False)
            with pytest.raises(BlockingIOError):
                sock.recv(1)
    finally:
        for sock in held:
            sock.close()
        _clean_up(process, logs)
    assert livez == 200
    assert status == 200 and [r["id"] for r in body["results"]] == [f"plot-{i}" for i in range(1000)]


def test_a_stalled_client_is_cut_off_with_a_408_and_logged(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()",
                                        {"UVDOSE_HEADER_TIMEOUT_S": "1", "UVDOSE_BODY_TIMEOUT_S": "1"})
    try:
        held = _slow_clients(_port(base_url), 2)
        answers = [_read_all(sock) for sock in held]
        for sock in held:
            sock.close()
    finally:
        _clean_up(process, logs)
    for answer in answers:
        head, _, body = answer.partition(b"\r\n\r\n")
        assert head.startswith(b"HTTP/1.1 408") and b"application/problem+json" in head
        assert json.loads(body)["type"] == "urn:uvdose:problem:request-timeout"
    messages = [line.get("message", "") for line in _json_lines(tmp_path / "stderr.log")]
    assert any(m.startswith("client cut off: request headers not complete") for m in messages)
    assert any(m.startswith("client cut off: request body not complete") for m in messages)
    assert all("127.0.0.1" not in m for m in messages if m.startswith("client cut off"))


def _csv_batch(n: int, id_width: int) -> bytes:
    rows = ["id,time,lat,lon"] + [f"{'p' * (id_width - 8)}{i:08d},2026-06-21T11:00:00Z,{36 + (i // 100) * 0.25:.2f},"
                                  f"{-5 + (i % 100) * 0.25:.2f}" for i in range(n)]
    return ("\n".join(rows) + "\n").encode()


def _send_chunked(port: int, body: bytes, piece: int = 64 * 1024) -> bytes:
    """POST ``body`` as CSV with chunked framing, reading the answer while still sending."""
    sock = socket.create_connection(("127.0.0.1", port), timeout=20)

    def send() -> None:
        try:
            sock.sendall(b"POST /v1/irradiance HTTP/1.1\r\nHost: uvdose\r\nContent-Type: text/csv\r\n"
                         b"Accept: application/json\r\nTransfer-Encoding: chunked\r\nConnection: close\r\n\r\n")
            for start in range(0, len(body), piece):
                part = body[start:start + piece]
                sock.sendall(b"%x\r\n%s\r\n" % (len(part), part))
            sock.sendall(b"0\r\n\r\n")
        except OSError:
            pass  # the server answered and closed before the end: that is the point

    sender = threading.Thread(target=send)
    sender.start()
    answer = _read_all(sock, timeout=60)
    sender.join(timeout=30)
    sock.close()
    return answer


def test_a_chunked_body_over_the_limit_gets_413_and_nothing_is_computed(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()", {"UVDOSE_CACHE": "off"})
    try:
        over = _csv_batch(8889, 1960)  # 17.8 MB, over the 16 MiB default
        assert 17_500_000 < len(over) < 18_000_000
        refused = _send_chunked(_port(base_url), over)
        within = _send_chunked(_port(base_url), _csv_batch(8889, 20))
    finally:
        _clean_up(process, logs)
    head, _, body = refused.partition(b"\r\n\r\n")
    assert head.startswith(b"HTTP/1.1 413"), refused[:300]
    problem = json.loads(body)  # the answer arrived whole, not cut by a reset
    assert problem["type"] == "urn:uvdose:problem:body-too-large" and problem["max_body_bytes"] == 16 * 1024 * 1024
    head, _, body = within.partition(b"\r\n\r\n")
    assert head.startswith(b"HTTP/1.1 200")
    ids = [r["id"] for r in json.loads(_unchunked(body))["results"]]
    assert len(ids) == 8889 and ids[-1].endswith("00008888")  # no record dropped
    requests = [line for line in _json_lines(tmp_path / "stdout.log") if line.get("event") == "request"]
    assert [line["status"] for line in requests if line["route"] == "/v1/irradiance"] == [200]  # the 413 never reached the engine


def _unchunked(body: bytes) -> bytes:
    if body.startswith(b"{"):
        return body
    out, rest = b"", body
    while rest:
        size_line, _, rest = rest.partition(b"\r\n")
        size = int(size_line.split(b";")[0], 16)
        if size == 0:
            return out
        out, rest = out + rest[:size], rest[size + 2:]
    return out


def test_gunicorn_refusals_are_problem_documents(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()", {})
    cases = {400: b"GET /livez HTTP/1.1\r\nHost: x\r\nno colon here\r\n\r\n",
             414: b"GET /" + b"a" * 5000 + b" HTTP/1.1\r\nHost: x\r\n\r\n",
             431: b"GET /livez HTTP/1.1\r\nHost: x\r\n" + b"X-Filler: 1\r\n" * 120 + b"\r\n"}
    answers = {}
    try:
        for status, request in cases.items():
            with socket.create_connection(("127.0.0.1", _port(base_url)), timeout=10) as sock:
                sock.sendall(request)
                answers[status] = _read_all(sock)
    finally:
        _clean_up(process, logs)
    for status, answer in answers.items():
        head, _, body = answer.partition(b"\r\n\r\n")
        assert head.startswith(b"HTTP/1.1 %d" % status), answer[:200]
        assert b"Content-Type: application/problem+json" in head and b"X-Content-Type-Options: nosniff" in head
        problem = json.loads(body)
        assert problem["status"] == status and problem["type"] == "about:blank" and problem["detail"]


def test_the_request_deadline_holds_where_the_worker_timeout_did_not(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "tests.deploy.slow_app:create_app()",
                                        {"UVDOSE_WORKER_TIMEOUT": "10", "UVDOSE_REQUEST_DEADLINE_S": "2"})
    try:
        request = urllib.request.Request(base_url + "/v1/test-parts?seconds=40", data=b"{}", method="POST")
        with pytest.raises(urllib.error.HTTPError) as refused:
            urllib.request.urlopen(request, timeout=30)
    finally:
        _clean_up(process, logs)
    assert refused.value.code == 503
    assert int(refused.value.headers["Retry-After"]) >= 1
    assert json.loads(refused.value.read())["type"] == "urn:uvdose:problem:deadline-exceeded"
    messages = [line.get("message", "") for line in _json_lines(tmp_path / "stderr.log")]
    assert any(m.startswith("request stopped: the request deadline of 2 s passed") for m in messages)


def test_a_body_that_ends_early_is_a_400_and_nothing_is_computed(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()", {})
    body = json.dumps({"records": _plots(20)}).encode()
    try:
        with socket.create_connection(("127.0.0.1", _port(base_url)), timeout=10) as sock:
            sock.sendall(JSON_HEAD + b"Content-Length: %d\r\n\r\n" % len(body) + body[:-100])
            sock.shutdown(socket.SHUT_WR)  # the client's side ends, 100 bytes short
            answer = _read_all(sock)
    finally:
        _clean_up(process, logs)
    head, _, problem = answer.partition(b"\r\n\r\n")
    assert head.startswith(b"HTTP/1.1 400")
    assert json.loads(problem)["type"] == "urn:uvdose:problem:incomplete-body"
    assert not [line for line in _json_lines(tmp_path / "stdout.log") if line.get("route") == "/v1/irradiance"]


def test_bodies_past_the_memory_budget_wait_their_turn_and_are_all_answered(tmp_path):
    limit = 60_000  # a worker then buffers at most 8 x 60 kB (service/buffering_worker.py)
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()",
                                        {"UVDOSE_MAX_BODY_BYTES": str(limit), "UVDOSE_CACHE": "off"})
    batch = json.dumps({"records": _plots(3)}).encode()
    body = batch + b" " * (limit - 1000 - len(batch))  # JSON whitespace up to nearly the limit
    socks = []
    try:
        for _ in range(20):  # 20 x 59 kB in flight: over twice the budget
            sock = socket.create_connection(("127.0.0.1", _port(base_url)), timeout=30)
            sock.sendall(JSON_HEAD + b"Connection: close\r\nContent-Length: %d\r\n\r\n" % len(body) + body[:-10])
            socks.append(sock)
        time.sleep(0.5)
        for sock in socks:
            sock.sendall(body[-10:])
        answers = [_read_all(sock, timeout=30) for sock in socks]
    finally:
        for sock in socks:
            sock.close()
        _clean_up(process, logs)
    assert [answer.split(b"\r\n", 1)[0] for answer in answers] == [b"HTTP/1.1 200 OK"] * 20


def test_a_client_that_stops_reading_its_answer_is_cut_off_and_logged(tmp_path):
    process, base_url, _, logs = _start(tmp_path, "uvdose.service.app:create_app()",
                                        {"UVDOSE_BODY_TIMEOUT_S": "2", "UVDOSE_CACHE": "off"})
    body = json.dumps({"records": _plots(2000), "include_spectrum": True}).encode()
    try:
        sock = socket.socket()
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)  # a small window, never read
        sock.connect(("127.0.0.1", _port(base_url)))
        sock.sendall(JSON_HEAD + b"Content-Length: %d\r\n\r\n" % len(body) + body)
        deadline = time.monotonic() + 30
        cut = []
        while not cut and time.monotonic() < deadline:
            time.sleep(0.5)
            cut = [line for line in _json_lines(tmp_path / "stderr.log")
                   if line.get("message", "").startswith("client cut off: the answer made no progress")]
        with urllib.request.urlopen(base_url + "/livez", timeout=10) as reply:
            livez = reply.status
        sock.close()
    finally:
        _clean_up(process, logs)
    assert cut, "the stalled reader was never cut off"
    assert livez == 200
