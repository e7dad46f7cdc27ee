"""The Python client (uvdose.client) against the real app under gunicorn: batches of any
length split under the limits and put back in order, errors with the problem document,
retries after a refused connection and none on a 422; its retry policy, tables and
DataFrames in isolation."""
from __future__ import annotations

import random
import threading
import time
from datetime import datetime, timedelta, timezone

import httpx
import pytest

from tests.service.conftest import free_loopback_port, running_gunicorn
from uvdose.client import (BodyTooLarge, Busy, Client, ConnectionFailed, InvalidRecords, JobsNotAvailable,
                           NO_RETRY, RetryPolicy)
from uvdose.client import retries

pytestmark = pytest.mark.gunicorn

ORCHARD = {"time": "2026-06-21T13:30:00+02:00", "lat": 44.05, "lon": 4.92}
WINDOW = {"start": "2026-06-10T06:30:00+02:00", "end": "2026-06-10T09:30:00+02:00", "lat": 44.31, "lon": 4.62}
DELIVERY = [{"time": "2026-07-15T07:30:00+01:00", "lat": 51.512, "lon": -0.091},
            {"time": "2026-07-15T08:10:00+01:00", "lat": 51.547, "lon": -0.021},
            {"time": "2026-07-15T09:00:00+01:00", "lat": 51.601, "lon": 0.044}]


def van_stops(n: int, seed: int = 12) -> dict[str, list]:
    """Invented stops of the Quai Nord depot's vans (our own scenario), as columns."""
    rng = random.Random(seed)
    start = datetime(2026, 7, 1, 6, tzinfo=timezone(timedelta(hours=2)))
    times = [(start + timedelta(seconds=rng.uniform(0, 30 * 86400))).isoformat() for _ in range(n)]
    return {"id": [f"van-{i % 40}/stop-{i:05d}" for i in range(n)], "time": times,
            "lat": [round(rng.uniform(44.5, 46.5), 4) for _ in range(n)],
            "lon": [round(rng.uniform(3.5, 6.0), 4) for _ in range(n)]}


class Counting:
    """Counts the requests an httpx client sends, by method and path."""

    def __init__(self) -> None:
        self.sent: list[tuple[str, str]] = []

    def __call__(self, request: httpx.Request) -> None:
        self.sent.append((request.method, request.url.path))

    def count(self, method: str, path: str) -> int:
        return self.sent.count((method, path))


def counted_client(base_url: str, **options) -> tuple[Client, Counting]:
    counting = Counting()
    http = httpx.Client(base_url=base_url, timeout=300, event_hooks={"request": [counting]})
    return Client(http=http, **options), counting


@pytest.fixture(scope="module")
def small_limits_server(tmp_path_factory):
    """A gunicorn whose limits make every batch split: 7 records, 6 kB bodies, 5 full solves."""
    with running_gunicorn(tmp_path_factory, UVDOSE_MAX_RECORDS="7", UVDOSE_MAX_BODY_BYTES="6000",
                          UVDOSE_MAX_FULL_SOLVE_RECORDS="5", UVDOSE_CACHE="off") as base_url:
        yield base_url


# --- splitting and reassembly against the real app -----------------------------------------

def test_a_25000_record_batch_is_split_and_put_back_in_order(gunicorn_server):
    stops = van_stops(25_000)
    uv, counting = counted_client(gunicorn_server)
    with uv:
        answer = uv.irradiance(stops, spectra=["erythema", "actinic_icnirp"])
        assert counting.count("POST", "/v1/irradiance") == 3  # the default limit is 10 000 records
        assert len(answer) == 25_000 and answer.columns["id"] == stops["id"]
        # Records on both sides of each part boundary, asked for in one request, agree.
        around = [i for edge in (8333, 8334, 16667) for i in range(edge - 2, edge + 2)]
        direct = uv.irradiance({name: [values[i] for i in around] for name, values in stops.items()},
                               spectra=["erythema", "actinic_icnirp"])
    for key in ("uv_index", "effective_w_m2.erythema", "solar_zenith_deg", "ozone_du"):
        assert [answer.columns[key][i] for i in around] == pytest.approx(direct.columns[key], rel=1e-9), key
    assert answer.spectra == ["erythema", "actinic_icnirp"] and "not a measurement" in answer.caution


def test_parts_follow_every_limit_the_deployment_sets(small_limits_server):
    stops = van_stops(40)
    uv, counting = counted_client(small_limits_server, parallel=2)
    with uv:
        assert uv.limits().max_records == 7 and uv.limits().max_body_bytes == 6000
        answer = uv.irradiance(stops)
        assert answer.columns["id"] == stops["id"]
        assert counting.count("POST", "/v1/irradiance") >= 6  # 40 records / 7, and more when a body is too big
        # Outside the precomputed tables (a strongly absorbing aerosol) every record takes
        # the full solve: at most 5 per request here, so parts of 7 are halved until they fit.
        heavy = {name: values[:9] for name, values in stops.items()} | {"single_scattering_albedo": [0.3] * 9}
        solved = uv.irradiance(heavy)
    assert solved.columns["id"] == heavy["id"] and min(solved.columns["uv_index"]) >= 0


def test_answers_as_rows_and_dataframes_and_dataframes_in(gunicorn_server):
    pd = pytest.importorskip("pandas")
    frame = pd.DataFrame({"id": ["a", "b"], "time": pd.to_datetime(["2026-06-21T11:30:00Z", "2026-06-21T16:00:00Z"]),
                          "lat": [44.05, 44.05], "lon": [4.92, 4.92], "cloud_factor": [None, 0.7]})
    with Client(gunicorn_server) as uv:
        answer = uv.irradiance(frame, spectra=["erythema"])
        rows = answer.rows()
        out = answer.to_dataframe()
        naive = frame.assign(time=frame["time"].dt.tz_localize(None))
        with pytest.raises(ValueError, match="time zone"):
            uv.irradiance(naive)
    assert rows[0]["effective_w_m2"] == {"erythema": answer.columns["effective_w_m2.erythema"][0]}
    assert rows[1]["cloud_factor"] == 0.7 and rows[0]["cloud_factor"] == 1.0
    assert list(out["id"]) == ["a", "b"] and out["uv_index"].iloc[0] > out["uv_index"].iloc[1]


def test_ozone_in_columns(small_limits_server):
    records = [{"id": f"s{i}", "lat": 40 + i, "lon": 5.0, "date": "2026-04-14"} for i in range(10)]
    with Client(small_limits_server) as uv:
        answer = uv.ozone(records)
    assert answer.columns["id"] == [r["id"] for r in records] and len(set(answer.columns["ozone_du"])) > 1


@pytest.fixture(scope="module")
def uncached_server(tmp_path_factory):
    """Default limits, no cache: the reference one request gives, to compare split batches with."""
    with running_gunicorn(tmp_path_factory, UVDOSE_CACHE="off") as base_url:
        yield base_url


def _doses(answer) -> list:
    return [day["dose_j_m2"] for result in answer.results for day in result["days"]] \
        if "days" in answer.results[0] else [result["dose_j_m2"] for result in answer.results]


@pytest.mark.parametrize("call", ["window_doses", "route_doses", "field_doses"])
def test_a_split_dose_batch_gives_what_one_request_gives(uncached_server, small_limits_server, call):
    windows = [dict(WINDOW, id=f"crew-{i}", lat=40 + i) for i in range(9)]
    routes = [{"id": f"van-{i}", "points": [dict(p, lat=p["lat"] + i / 10) for p in DELIVERY]} for i in range(9)]
    fields = [{"id": f"plot-{i}", "lat": 50 + i / 2, "lon": -1.6} for i in range(9)]
    # Entries for the first and the last field: they travel with their fields' parts.
    daily = {"field": [0, 8, 8], "day": ["2026-04-01", "2026-04-01", "2026-04-02"], "cloud_oktas": [7, 2, None]}
    args, kwargs = {"window_doses": ((windows,), {}), "route_doses": ((routes,), {"driver_side": "right"}),
                    "field_doses": ((fields, "2026-04-01", "2026-04-02"), {"daily": daily})}[call]
    split, counting = counted_client(small_limits_server)
    with Client(uncached_server) as whole, split:
        one, parts = getattr(whole, call)(*args, **kwargs), getattr(split, call)(*args, **kwargs)
    assert sum(1 for method, _ in counting.sent if method == "POST") >= 2
    assert [r["id"] for r in parts.results] == [r["id"] for r in one.results]
    assert _doses(parts) == _doses(one)
    assert parts.envelope["samples"] == one.envelope["samples"]


# --- errors ----------------------------------------------------------------------------------

def test_a_422_is_raised_with_every_error_counted_in_the_whole_batch(gunicorn_server):
    stops = van_stops(25_000)
    stops["lat"][3] = 145.76
    stops["time"][20_005] = "2026-07-14T09:10:00"
    uv, counting = counted_client(gunicorn_server)
    with uv, pytest.raises(InvalidRecords) as raised:
        uv.irradiance(stops)
    errors = {(e.index, e.id, e.field): e.reason for e in raised.value.errors}
    assert errors == {(3, stops["id"][3], "lat"): "must be between -90 and 90",
                      (20_005, stops["id"][20_005], "time"): "must carry a UTC offset, e.g. "
                                                             "2026-05-20T12:00:00+02:00 or ...Z"}
    assert raised.value.status == 422 and raised.value.problem["error_count"] == 2
    assert raised.value.type == "urn:uvdose:problem:invalid-records"
    assert counting.count("POST", "/v1/irradiance") == 3  # no part is sent twice


def test_route_errors_name_the_route_in_the_whole_batch(small_limits_server):
    routes = [{"id": f"van-{i}", "points": DELIVERY} for i in range(10)]
    routes[8] = {"id": "van-8", "points": [DELIVERY[0], dict(DELIVERY[1], lat=95.0)]}
    with Client(small_limits_server) as uv, pytest.raises(InvalidRecords) as raised:
        uv.route_doses(routes)
    assert [(e.index, e.id, e.field) for e in raised.value.errors] == [(8, "van-8", "routes[8].points[1].lat")]


def test_a_record_too_large_alone_is_raised_not_sent(small_limits_server):
    huge = {"time": [ORCHARD["time"]], "lat": [44.0], "lon": [4.9], "id": ["x" * 7000]}
    uv, counting = counted_client(small_limits_server)
    with uv, pytest.raises(BodyTooLarge, match="at most 6000"):
        uv.irradiance(huge)
    assert counting.count("POST", "/v1/irradiance") == 0


def test_no_retry_on_a_422(gunicorn_server):
    uv, counting = counted_client(gunicorn_server, retry=RetryPolicy(attempts=5, backoff_s=0.01))
    with uv, pytest.raises(InvalidRecords):
        uv.irradiance([dict(ORCHARD, lat=145.76)])
    assert counting.count("POST", "/v1/irradiance") == 1


def test_a_refused_connection_is_retried_until_the_server_is_up(tmp_path_factory):
    port = free_loopback_port()
    started = {}

    def start_later():
        time.sleep(1.5)
        with running_gunicorn(tmp_path_factory, port=port) as base_url:
            started["url"] = base_url
            while not started.get("done"):
                time.sleep(0.1)

    server = threading.Thread(target=start_later, daemon=True)
    server.start()
    uv, counting = counted_client(f"http://127.0.0.1:{port}", retry=RetryPolicy(attempts=12, backoff_s=0.25,
                                                                                max_backoff_s=2.0))
    try:
        with uv:
            answer = uv.irradiance([dict(ORCHARD, id="after-refusal")])
        assert answer.columns["id"] == ["after-refusal"]
        assert counting.count("GET", "/v1/catalogue") >= 2  # refused at least once, then answered
    finally:
        started["done"] = True
        server.join(timeout=60)


def test_the_catalogue_is_revalidated_with_its_tag(gunicorn_server):
    uv, counting = counted_client(gunicorn_server)
    with uv:
        first = uv.catalogue()
        again = uv.catalogue(refresh=True)
    assert again is first and counting.count("GET", "/v1/catalogue") == 2
    assert first.etag and first.limits.max_records == 10_000


def test_jobs_on_a_service_without_them_say_so():
    # An older service answers the jobs paths with a plain 404 (the jobs themselves are
    # tested against gunicorn and a Dask cluster in tests/service/test_jobs.py).
    def no_such_path(request):
        return httpx.Response(404, json={"type": "about:blank", "title": "Not Found", "status": 404})

    http = httpx.Client(transport=httpx.MockTransport(no_such_path), base_url="http://uvdose.invalid")
    with Client(http=http) as uv, pytest.raises(JobsNotAvailable, match="/v1/jobs"):
        uv.jobs.submit("/v1/irradiance", {"records": []})


# --- the retry policy in isolation -----------------------------------------------------------

def _mocked(statuses: list[int], retry_after: str | None = None):
    answers = iter(statuses)
    seen = []

    def handler(request: httpx.Request) -> httpx.Response:
        seen.append(request.url.path)
        status = next(answers)
        headers = {"Retry-After": retry_after} if retry_after and status in (429, 503) else {}
        return httpx.Response(status, headers=headers, json={"type": "about:blank", "title": "x", "status": status})

    return httpx.Client(transport=httpx.MockTransport(handler), base_url="http://test"), seen


@pytest.mark.parametrize("status", [429, 503])
def test_429_and_503_are_retried_and_retry_after_is_waited(status):
    http, seen = _mocked([status, status, 200], retry_after="1.5")
    waits = []
    response = retries.send(http, http.build_request("GET", "/x"), RetryPolicy(attempts=4, backoff_s=0.01), waits.append)
    assert response.status_code == 200 and len(seen) == 3
    assert waits == [1.5, 1.5]


@pytest.mark.parametrize("status", [400, 401, 404, 406, 413, 415, 422, 500])
def test_other_statuses_are_never_retried(status):
    http, seen = _mocked([status, 200])
    response = retries.send(http, http.build_request("GET", "/x"), RetryPolicy(attempts=4), lambda s: None)
    assert response.status_code == status and len(seen) == 1


def test_a_503_after_every_attempt_raises_busy_with_the_problem():
    http, _ = _mocked([503] * 3)
    uv = Client(http=http, retry=RetryPolicy(attempts=3, backoff_s=0.001))
    with pytest.raises(Busy) as raised:
        uv.liveness()
    assert raised.value.status == 503 and raised.value.problem["title"] == "x"


def test_connection_errors_are_retried_then_reported():
    tries = []

    def refuse(request):
        tries.append(1)
        raise httpx.ConnectError("refused", request=request)

    http = httpx.Client(transport=httpx.MockTransport(refuse), base_url="http://test")
    with pytest.raises(ConnectionFailed, match="after 3 attempts"):
        retries.send(http, http.build_request("GET", "/x"), RetryPolicy(attempts=3, backoff_s=0.001))
    assert len(tries) == 3
    with pytest.raises(ConnectionFailed):
        retries.send(http, http.build_request("GET", "/x"), NO_RETRY)
    assert len(tries) == 4


def test_backoff_grows_exponentially_with_full_jitter_and_a_cap():
    policy = RetryPolicy(backoff_s=0.5, max_backoff_s=4.0, rng=random.Random(3))
    draws = {attempt: [policy.wait_s(attempt) for _ in range(400)] for attempt in range(6)}
    for attempt, waits in draws.items():
        ceiling = min(4.0, 0.5 * 2 ** attempt)
        assert 0 <= min(waits) and max(waits) <= ceiling
        assert max(waits) > 0.9 * ceiling and min(waits) < 0.1 * ceiling  # spread over [0, ceiling]
    assert policy.wait_s(0, retry_after_s=7.0) == 7.0
    assert policy.wait_s(0, retry_after_s=900.0) == policy.max_retry_after_s
