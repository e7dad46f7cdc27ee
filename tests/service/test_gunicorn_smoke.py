"""The service under a real gunicorn (2 workers) on a loopback port."""
import http.client
import json
import urllib.error
import urllib.request
from concurrent.futures import ThreadPoolExecutor

import pytest
from prometheus_client.parser import text_string_to_metric_families

pytestmark = pytest.mark.gunicorn

# Demo scenario of our own: the invented "Vaubrise" parcel depot's yard, one van's day.
STOPS = [{"id": f"yard-{i}", "time": f"2026-08-03T{8 + i // 4:02d}:{(i % 4) * 15:02d}:00+02:00",
          "lat": 45.7485, "lon": 4.8467, "surface_type": "asphalt"} for i in range(40)]


def call(base_url, path, body=None, headers=None, method=None):
    data = None if body is None else (body if isinstance(body, bytes) else json.dumps(body).encode())
    request = urllib.request.Request(base_url + path, data=data, method=method,
                                     headers={"Content-Type": "application/json", **(headers or {})})
    try:
        with urllib.request.urlopen(request, timeout=60) as reply:
            return reply.status, reply.headers.get_content_type(), reply.read()
    except urllib.error.HTTPError as error:
        return error.code, error.headers.get_content_type(), error.read()


def test_health_and_a_batch_over_real_http(gunicorn_server):
    assert call(gunicorn_server, "/livez")[0] == 200
    status, _, body = call(gunicorn_server, "/readyz")
    assert status == 200 and json.loads(body)["checks"]["engine"]["ok"]
    status, media, body = call(gunicorn_server, "/v1/irradiance", {"records": STOPS})
    assert status == 200 and media == "application/json"
    results = json.loads(body)["results"]
    assert [r["id"] for r in results] == [s["id"] for s in STOPS]
    assert max(r["uv_index"] for r in results) > 3  # an August midday in Lyon's latitude band


def test_errors_are_problem_documents_over_real_http(gunicorn_server):
    status, media, body = call(gunicorn_server, "/v1/irradiance", {"records": [{**STOPS[0], "lat": -100}]})
    assert (status, media) == (422, "application/problem+json")
    assert json.loads(body)["errors"][0]["field"] == "lat"
    assert call(gunicorn_server, "/nowhere")[:2] == (404, "application/problem+json")
    # Announce a body over the 16 MiB default limit; the server must refuse before reading it.
    host, port = gunicorn_server.removeprefix("http://").split(":")
    connection = http.client.HTTPConnection(host, int(port), timeout=30)
    connection.putrequest("POST", "/v1/irradiance")
    connection.putheader("Content-Type", "application/json")
    connection.putheader("Content-Length", str(17 * 1024 * 1024))
    connection.endheaders()
    reply = connection.getresponse()
    assert (reply.status, reply.headers.get_content_type()) == (413, "application/problem+json")
    connection.close()


def test_concurrent_requests_and_metrics_pooled_across_workers(gunicorn_server):
    def one(_):
        return call(gunicorn_server, "/v1/irradiance", {"records": STOPS[:10]})[0]

    with ThreadPoolExecutor(max_workers=6) as pool:
        statuses = list(pool.map(one, range(18)))
    assert statuses == [200] * 18
    _, media, body = call(gunicorn_server, "/metrics")
    assert media == "text/plain"
    samples = {(s.name, tuple(sorted(s.labels.items()))): s.value
               for family in text_string_to_metric_families(body.decode()) for s in family.samples}
    computed = samples[("uvdose_records_computed_total", (("route", "/v1/irradiance"),))]
    ok = samples[("uvdose_http_requests_total",
                  (("method", "POST"), ("route", "/v1/irradiance"), ("status", "200")))]
    # Whichever worker answered the scrape, it reports the other's requests as well.
    assert ok >= 18 and computed >= 180
