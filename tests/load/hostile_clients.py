"""Bounded hostile-client replay: careless and hostile requests against a real gunicorn.

    python tests/load/hostile_clients.py [--workers 2] [--threads 4]

Not collected by pytest. It starts gunicorn with deploy/gunicorn.conf.py on a free
loopback port (in-process cache, no Redis), then, a few minutes at most:

1. holds 40 stalled connections (half stop inside their headers, half inside a body) and
   10 that drip their headers a byte a second, for the whole run, probing ``/livez``
   meanwhile;
2. replays malformed and hostile requests (bad JSON, deep nesting, huge numbers, lone
   surrogates, duplicate members, formula and control-character ids, loose route points,
   GeoJSON of the wrong shape, routes spanning centuries, over-limit bodies of every
   framing and coding, cut bodies, gunicorn-level junk, long URIs and headers);
3. sends valid batches in every framing (Content-Length, chunked, gzip, zstd,
   Expect: 100-continue, CSV) and checks every record comes back, in order;
4. sends the heavy requests (a season of 1 000 fields in 8 spectra, 1 000 windows of a
   month), which must be refused up front or answered;
5. stops the server with SIGTERM.

Throughout it samples the workers' resident memory. It prints the counts by status and
case and exits 1 unless there were zero 5xx answers, zero records lost, every ``/livez``
probe answered, the peak worker RSS stayed under 1 GiB and gunicorn exited 0.

Scenario (invented for this script): an orchard cooperative's survey plots in the
Rhône valley, and the clients a public endpoint meets.
"""
from __future__ import annotations

import argparse
import collections
import gzip
import http.client
import json
import os
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import zstandard

ROOT = Path(__file__).resolve().parents[2]
RSS_LIMIT_BYTES = 1 << 30
SLOW_HOLD_S = 14.0
HOST = "127.0.0.1"


def free_loopback_port() -> int:
    with socket.socket() as s:
        s.bind((HOST, 0))
        return s.getsockname()[1]


def start_gunicorn(port: int, workdir: Path, workers: int, threads: int) -> subprocess.Popen:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("UVDOSE_", "PROMETHEUS_")) and k != "REDIS_URL"}
    env.update({"UVDOSE_BIND": f"{HOST}:{port}", "UVDOSE_WORKERS": str(workers), "UVDOSE_THREADS": str(threads),
                "UVDOSE_CACHE": "memory", "UVDOSE_REQUEST_LOG": "off", "PYTHONPATH": str(ROOT),
                "TMPDIR": str(workdir)})
    log = (workdir / "gunicorn.log").open("wb")
    process = subprocess.Popen([sys.executable, "-m", "gunicorn", "--config", str(ROOT / "deploy" / "gunicorn.conf.py"),
                                "uvdose.service.app:create_app()"], cwd=workdir, env=env, stdout=log,
                               stderr=subprocess.STDOUT)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise SystemExit(f"gunicorn exited with {process.returncode}; see {workdir}/gunicorn.log")
        try:
            if request("GET", port, "/livez", timeout=2)[0] == 200:
                return process
        except OSError:
            time.sleep(0.2)
    process.kill()
    raise SystemExit("gunicorn did not start")


# -- sending ------------------------------------------------------------------------------

def request(method: str, port: int, path: str, body: bytes | None = None, headers: dict | None = None,
            timeout: float = 120.0) -> tuple[int, bytes]:
    connection = http.client.HTTPConnection(HOST, port, timeout=timeout)
    try:
        connection.request(method, path, body=body, headers=headers or {})
        reply = connection.getresponse()
        return reply.status, reply.read()
    finally:
        connection.close()


def raw(port: int, data: bytes, timeout: float = 60.0, close_after_send: bool = False) -> tuple[int, bytes]:
    """Send bytes as they are; the status of the answer (0 for none) and its body."""
    sock = socket.create_connection((HOST, port), timeout=timeout)
    received = b""
    try:
        sender = threading.Thread(target=_send_ignoring_errors, args=(sock, data, close_after_send))
        sender.start()
        while True:
            try:
                piece = sock.recv(65536)
            except (ConnectionResetError, socket.timeout):
                break
            if not piece:
                break
            received += piece
        sender.join(timeout=timeout)
    finally:
        sock.close()
    head, _, body = received.partition(b"\r\n\r\n")
    while head.startswith(b"HTTP/1.1 1"):  # interim answers (100 Continue) come first
        head, _, body = body.partition(b"\r\n\r\n")
    try:
        return int(head.split(b" ", 2)[1]), body
    except (IndexError, ValueError):
        return 0, received


def _send_ignoring_errors(sock: socket.socket, data: bytes, half_close: bool) -> None:
    try:
        for start in range(0, len(data), 1 << 16):
            sock.sendall(data[start:start + (1 << 16)])
        if half_close:
            sock.shutdown(socket.SHUT_WR)
    except OSError:
        pass  # the server answered and closed first


def chunked(path: str, body: bytes, content_type: str = "application/json", piece: int = 1 << 16,
            extra: bytes = b"") -> bytes:
    head = (f"POST {path} HTTP/1.1\r\nHost: uvdose\r\nContent-Type: {content_type}\r\nAccept: application/json\r\n"
            "Transfer-Encoding: chunked\r\nConnection: close\r\n").encode() + extra + b"\r\n"
    chunks = b"".join(b"%x\r\n%s\r\n" % (len(body[i:i + piece]), body[i:i + piece]) for i in range(0, len(body), piece))
    return head + chunks + b"0\r\n\r\n"


# -- bodies (an invented survey of orchard plots) -------------------------------------------

def plots(n: int, id_width: int = 12) -> list[dict]:
    return [{"id": f"plot-{i:0{id_width - 5}d}", "time": "2026-06-21T11:00:00Z",
             "lat": round(44.0 + (i // 100) * 0.01, 3), "lon": round(4.5 + (i % 100) * 0.01, 3)} for i in range(n)]


def as_json(records: list[dict]) -> bytes:
    return json.dumps({"records": records}).encode()


def as_csv(records: list[dict]) -> bytes:
    return ("id,time,lat,lon\n" + "".join(f"{r['id']},{r['time']},{r['lat']},{r['lon']}\n" for r in records)).encode()


JSON = {"Content-Type": "application/json"}
POINT = {"time": "2026-06-21T10:00:00Z", "lat": 44.0, "lon": 4.8}


def route(points: list) -> bytes:
    return json.dumps({"routes": [{"id": "r", "points": points}]}).encode()


def hostile_cases(port: int) -> dict[str, callable]:
    """name -> call returning the answer's status."""
    def post(path, body, headers=JSON):
        return lambda: request("POST", port, path, body, headers)[0]

    def send(data, **kwargs):
        return lambda: raw(port, data, **kwargs)[0]

    irr = "/v1/irradiance"
    big_csv = as_csv(plots(8889, id_width=1960))  # 17.8 MB
    lying = b"POST /v1/irradiance HTTP/1.1\r\nHost: u\r\nContent-Type: application/json\r\nContent-Length: 5000\r\n\r\n"
    cases = {
        "json: cut": post(irr, b'{"records": ['),
        "json: empty body": post(irr, b""),
        "json: null": post(irr, b"null"),
        "json: invalid utf-8": post(irr, b'{"records": [{"id": "\xff"}]}'),
        "json: 100 000 deep arrays": post(irr, b'{"records": ' + b"[" * 100_000 + b"]" * 100_000 + b"}"),
        "json: 100 000 deep objects": post(irr, b'{"records": [{"id": ' + b'{"a":' * 100_000 + b"1" + b"}" * 100_000 + b"}]}"),
        "json: 400-digit lat": post(irr, b'{"records": [{"time": "2026-06-21T11:00:00Z", "lat": ' + b"9" * 400 + b', "lon": 4}]}'),
        "json: lone surrogate id": post(irr, b'{"records": [{"id": "\\ud800", "time": "2026-06-21T11:00:00Z", "lat": 44, "lon": 4}]}'),
        "json: duplicate members": post(irr, b'{"records": [{"lat": 44, "lat": 45, "time": "2026-06-21T11:00:00Z", "lon": 4}]}'),
        "json: NaN": post(irr, b'{"records": [{"lat": NaN, "time": "2026-06-21T11:00:00Z", "lon": 4}]}'),
        "json: string lat": post(irr, as_json([{"time": "2026-06-21T11:00:00Z", "lat": "44.1", "lon": 4}])),
        "json: 1 MB id": post(irr, as_json([{"id": "x" * 1_000_000, "time": "2026-06-21T11:00:00Z", "lat": 44, "lon": 4}])),
        "json: NUL id": post(irr, as_json([{"id": "a\u0000b", "time": "2026-06-21T11:00:00Z", "lat": 44, "lon": 4}])),
        "json: 10 001 records": post(irr, as_json(plots(10_001))),
        "json: text/plain": post(irr, as_json(plots(2)), {"Content-Type": "text/plain"}),
        "routes: geometry a string": post("/v1/doses/routes", json.dumps({"routes": [{"type": "Feature", "geometry": "LineString", "properties": {}}]}).encode()),
        "routes: properties a list": post("/v1/doses/routes", json.dumps({"routes": [{"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[4, 44], [4.1, 44]]}, "properties": []}]}).encode()),
        "routes: coordinates [[0],[1]]": post("/v1/doses/routes", json.dumps({"routes": [{"type": "Feature", "geometry": {"type": "LineString", "coordinates": [[0], [1]]}, "properties": {"times": ["2026-06-21T10:00:00Z", "2026-06-21T11:00:00Z"]}}]}).encode()),
        "routes: 1900 to 2100, step 10 s": post("/v1/doses/routes", json.dumps({"step_s": 10, "routes": [{"id": "r", "points": [dict(POINT, time="1900-01-01T00:00:00Z"), dict(POINT, time="2100-01-01T00:00:00Z")]}]}).encode()),
        "routes: ten years": post("/v1/doses/routes", route([dict(POINT, time="2016-01-01T00:00:00Z"), dict(POINT, time="2026-01-01T00:00:00Z")])),
        "routes: empty points": post("/v1/doses/routes", route([])),
        "routes: boolean lon": post("/v1/doses/routes", route([dict(POINT, lon=True), POINT])),
        "routes: 10 001 routes": post("/v1/doses/routes", json.dumps({"routes": [{"id": "r", "points": [POINT, dict(POINT, time="2026-06-21T10:05:00Z")]}] * 10_001}).encode()),
        "fields: daily.field 2^63": post("/v1/doses/fields", json.dumps({"records": [{"lat": 44, "lon": 4}], "first_day": "2026-05-01", "last_day": "2026-05-02", "daily": {"field": [2 ** 63], "day": ["2026-05-01"], "cloud_factor": [0.5]}}).encode()),
        "ozone: time null": post("/v1/ozone", json.dumps({"records": [{"date": "2026-06-21", "time": None, "lat": 44, "lon": 4}]}).encode()),
        "csv: formula id": lambda: _formula_echo(port),
        "framing: chunked 17.8 MB CSV": send(chunked(irr, big_csv, "text/csv")),
        "framing: Content-Length 17.8 MB": post(irr, big_csv, {"Content-Type": "text/csv"}),
        "framing: Content-Length lies": send(lying + b'{"records": []', close_after_send=True),
        "framing: chunk size zz": send(b"POST /v1/irradiance HTTP/1.1\r\nHost: u\r\nTransfer-Encoding: chunked\r\n\r\nzz\r\n"),
        "framing: chunked cut": send(chunked(irr, as_json(plots(50)))[:-300], close_after_send=True),
        "framing: chunk of 2^64-1": send(b"POST /v1/irradiance HTTP/1.1\r\nHost: u\r\nTransfer-Encoding: chunked\r\n\r\nffffffffffffffff\r\nabc"),
        "coding: gzip bomb": post(irr, gzip.compress(b" " * (64 << 20) + as_json(plots(2))), {**JSON, "Content-Encoding": "gzip"}),
        "coding: zstd bomb": post(irr, zstandard.ZstdCompressor().compress(b" " * (1 << 30) + as_json(plots(2))), {**JSON, "Content-Encoding": "zstd"}),
        "coding: br": post(irr, as_json(plots(2)), {**JSON, "Content-Encoding": "br"}),
        "coding: gzip cut": post(irr, gzip.compress(as_json(plots(100)))[:200], {**JSON, "Content-Encoding": "gzip"}),
        "http: header without colon": send(b"GET /livez HTTP/1.1\r\nHost: u\r\nno colon\r\n\r\n"),
        "http: 5 000-byte URI": send(b"GET /" + b"a" * 5000 + b" HTTP/1.1\r\nHost: u\r\n\r\n"),
        "http: 120 headers": send(b"GET /livez HTTP/1.1\r\nHost: u\r\n" + b"X-F: 1\r\n" * 120 + b"\r\n"),
        "http: junk": send(b"\x16\x03\x01\x02\x00\x01\x00\x01\xfc\x03\x03" + os.urandom(200) + b"\r\n\r\n"),
        "http: long route path": lambda: request("GET", port, "/v1/" + "a" * 4000)[0],
        "http: TRACE": lambda: request("TRACE", port, "/v1/irradiance")[0],
        "http: preflight": lambda: request("OPTIONS", port, irr, headers={"Origin": "https://x.example", "Access-Control-Request-Method": "POST"})[0],
    }
    return cases


def _formula_echo(port: int) -> int:
    """A formula id must not come back as a formula in a CSV answer."""
    body = as_json([{"id": "=cmd|' /C calc'!A0", "time": "2026-06-21T11:00:00Z", "lat": 44, "lon": 4}])
    status, answer = request("POST", port, "/v1/irradiance", body, {**JSON, "Accept": "text/csv"})
    lines = answer.decode("utf-8", "replace").splitlines()
    if status == 200 and any(line.startswith("=") for line in lines):
        FINDINGS.append("a CSV answer echoes a formula id as a formula")
    return status


FINDINGS: list[str] = []


def lossless_cases(port: int) -> dict[str, callable]:
    """name -> call returning (status, records sent, records back in order)."""
    def check(n, status, body):
        if status != 200:
            return status, n, 0
        ids = [r["id"] for r in json.loads(body)["results"]]
        return status, n, sum(1 for got, sent in zip(ids, plots(n)) if got == sent["id"])

    def json_post(n, headers=JSON, encode=lambda b: b):
        return lambda: check(n, *request("POST", port, "/v1/irradiance", encode(as_json(plots(n))), headers))

    def chunked_post(n, csv=False, extra=b""):
        def run():
            body = as_csv(plots(n)) if csv else as_json(plots(n))
            status, answer = raw(port, chunked("/v1/irradiance", body, "text/csv" if csv else "application/json",
                                               extra=extra))
            return check(n, status, _unchunk(answer))
        return run

    return {
        "valid: 1 000 records, Content-Length": json_post(1000),
        "valid: 1 000 records, chunked": chunked_post(1000),
        "valid: 8 889 CSV records, chunked": chunked_post(8889, csv=True),
        "valid: 10 000 records, gzip": json_post(10_000, {**JSON, "Content-Encoding": "gzip"}, gzip.compress),
        "valid: 1 000 records, zstd": json_post(1000, {**JSON, "Content-Encoding": "zstd"},
                                                zstandard.ZstdCompressor().compress),
        "valid: 1 000 records, Expect: 100-continue": chunked_post(1000, extra=b"Expect: 100-continue\r\n"),
    }


def heavy_cases(port: int) -> dict[str, callable]:
    spectra = ["erythema", "actinic_icnirp", "plant_damage", "plant_growth", "dna_damage", "previtamin_d3", "uvb", "uva"]
    fields = {"records": [{"id": f"f{i}", "lat": 40 + i * 0.01, "lon": 4.8} for i in range(1000)],
              "first_day": "2026-01-01", "last_day": "2026-12-31", "spectra": spectra}
    windows = {"records": [{"id": f"w{i}", "start": "2026-06-01T00:00:00Z", "end": "2026-07-01T00:00:00Z",
                            "lat": 40 + i * 0.01, "lon": 4.8} for i in range(1000)]}
    return {"heavy: 1 000 fields x 366 days x 8 spectra":
            lambda: request("POST", port, "/v1/doses/fields", json.dumps(fields).encode(), JSON, timeout=300)[0],
            "heavy: 1 000 windows x 31 days":
            lambda: request("POST", port, "/v1/doses/windows", json.dumps(windows).encode(), JSON, timeout=300)[0]}


def _unchunk(body: bytes) -> bytes:
    if body.startswith(b"{"):
        return body
    out, rest = bytearray(), body
    while rest:
        size_line, _, rest = rest.partition(b"\r\n")
        size = int(size_line.split(b";")[0], 16)
        if size == 0:
            break
        out += rest[:size]
        rest = rest[size + 2:]
    return bytes(out)


# -- slow clients and memory ----------------------------------------------------------------

def hold_slow_clients(port: int, stop: threading.Event) -> collections.Counter:
    """40 stalled connections and 10 that drip headers, until ``stop``; counts what they got."""
    outcome = collections.Counter()
    head = b"POST /v1/irradiance HTTP/1.1\r\nHost: uvdose\r\nContent-Type: application/json\r\n"
    socks = []
    for i in range(40):
        sock = socket.create_connection((HOST, port), timeout=5)
        sock.sendall(head if i % 2 else head + b"Content-Length: 100000\r\n\r\n{\"records\": [")
        socks.append(sock)
    drips = [socket.create_connection((HOST, port), timeout=5) for _ in range(10)]
    text = head + b"X-Padding: " + b"p" * 200
    position = 0
    while not stop.wait(1.0):
        for sock in list(drips):
            try:
                sock.sendall(text[position:position + 1])
            except OSError:
                drips.remove(sock)
                outcome["drip: cut off"] += 1
        position += 1
    for sock in socks + drips:
        sock.setblocking(False)
        try:
            answer = sock.recv(64)
            outcome["stalled: " + (answer.split(b"\r\n", 1)[0].decode() if answer else "closed")] += 1
        except BlockingIOError:
            outcome["stalled: still open"] += 1
        except OSError:
            outcome["stalled: reset"] += 1
        sock.close()
    return outcome


def worker_rss_bytes(master_pid: int) -> int:
    """The largest resident set among the master's child processes."""
    peak = 0
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            status = Path(f"/proc/{entry}/status").read_text()
        except OSError:
            continue
        fields = dict(line.split(":", 1) for line in status.splitlines() if ":" in line)
        if fields.get("PPid", "").strip() == str(master_pid):
            peak = max(peak, int(fields.get("VmRSS", "0 kB").split()[0]) * 1024)
    return peak


def run(args) -> int:
    workdir = Path(tempfile.mkdtemp(prefix="uvdose-hostile-"))
    port = free_loopback_port()
    process = start_gunicorn(port, workdir, args.workers, args.threads)
    stop = threading.Event()
    peak = [0]

    def sample_memory():
        while not stop.wait(0.25):
            peak[0] = max(peak[0], worker_rss_bytes(process.pid))

    sampler = threading.Thread(target=sample_memory, daemon=True)
    sampler.start()
    slow_result: dict = {}
    slow = threading.Thread(target=lambda: slow_result.update(hold_slow_clients(port, stop)))
    slow.start()
    time.sleep(1.0)
    started = time.monotonic()
    statuses: dict[str, int | str] = {}
    losses: dict[str, tuple[int, int]] = {}
    probes = {"answered": 0, "sent": 0}

    def probe_livez():
        while not stop.is_set():
            probes["sent"] += 1
            try:
                if request("GET", port, "/livez", timeout=5)[0] == 200:
                    probes["answered"] += 1
            except OSError:
                pass
            stop.wait(2.0)

    prober = threading.Thread(target=probe_livez)
    prober.start()

    def attempt(name, call):
        try:
            return name, call()
        except Exception as error:  # a client-side failure is reported, not hidden
            return name, f"client error: {type(error).__name__}: {error}"

    with ThreadPoolExecutor(max_workers=6) as pool:
        heavy = [pool.submit(attempt, name, call) for name, call in heavy_cases(port).items()
                 if not args.without_heavy]
        for future in [pool.submit(attempt, name, call) for name, call in hostile_cases(port).items()]:
            name, status = future.result()
            statuses[name] = status
        for future in [pool.submit(attempt, name, call) for name, call in lossless_cases(port).items()]:
            name, result = future.result()
            if isinstance(result, tuple):
                status, sent, back = result
                statuses[name] = status
                losses[name] = (sent, back)
            else:
                statuses[name] = result
        for future in heavy:
            name, status = future.result()
            statuses[name] = status
    # Long enough for the slow clients to meet the header timeout (10 s) and their 408.
    stop.wait(max(0.0, SLOW_HOLD_S - (time.monotonic() - started)))
    stop.set()
    prober.join()
    slow.join()
    elapsed = time.monotonic() - started
    process.send_signal(signal.SIGTERM)
    try:
        exit_code = process.wait(timeout=60)
    except subprocess.TimeoutExpired:
        process.kill()
        exit_code = "killed"
    peak[0] = max(peak[0], 0)
    return report(statuses, losses, slow_result, probes, peak[0], exit_code, elapsed, workdir)


def report(statuses, losses, slow, probes, peak_rss, exit_code, elapsed, workdir) -> int:
    by_status = collections.Counter(str(s) if isinstance(s, int) else "client error" for s in statuses.values())
    print(f"hostile clients: {len(statuses)} cases in {elapsed:.0f} s (gunicorn log: {workdir}/gunicorn.log)")
    for name, status in statuses.items():
        print(f"  {status!s:>4.60}  {name}")
    print("counts by status: " + ", ".join(f"{k}: {v}" for k, v in sorted(by_status.items())))
    lost = {name: sent - back for name, (sent, back) in losses.items() if back != sent}
    print(f"records sent in valid batches: {sum(s for s, _ in losses.values())}, lost: {sum(lost.values())}")
    print("slow clients: " + ", ".join(f"{k}: {v}" for k, v in sorted(slow.items())))
    print(f"/livez probes during the run: {probes['answered']} of {probes['sent']} answered")
    print(f"peak worker RSS: {peak_rss / 2**20:.0f} MiB; gunicorn exit on SIGTERM: {exit_code}")
    failures = [f"{name}: {status}" for name, status in statuses.items()
                if not isinstance(status, int) or status >= 500 or status == 0]
    failures += [f"{name}: {n} records lost" for name, n in lost.items()]
    failures += FINDINGS
    if probes["answered"] != probes["sent"]:
        failures.append("/livez went unanswered while slow clients hung")
    if peak_rss >= RSS_LIMIT_BYTES:
        failures.append(f"peak worker RSS {peak_rss / 2**20:.0f} MiB, over 1 GiB")
    if exit_code != 0:
        failures.append(f"gunicorn exited {exit_code}")
    for failure in failures:
        print("FAIL " + failure)
    print("PASS" if not failures else f"{len(failures)} failures")
    return 0 if not failures else 1


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--threads", type=int, default=4)
    parser.add_argument("--without-heavy", action="store_true",
                        help="leave out step 4 (to tell the edge's share of memory and time from the heavy requests')")
    return run(parser.parse_args())


if __name__ == "__main__":
    sys.exit(main())
