"""Prometheus metrics: request counters, latency histograms and the cache helpers."""
import pytest
from prometheus_client.parser import text_string_to_metric_families

from uvdose.service import metrics


def _samples(text):
    return {
        (sample.name, tuple(sorted(sample.labels.items()))): sample.value
        for family in text_string_to_metric_families(text)
        for sample in family.samples
    }


def _scrape(client):
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.mimetype == "text/plain"
    return _samples(response.get_data(as_text=True))


def test_requests_are_counted_by_route_method_and_status(client):
    key = ("uvdose_http_requests_total", (("method", "GET"), ("route", "/livez"), ("status", "200")))
    before = _scrape(client).get(key, 0.0)
    client.get("/livez")
    client.get("/livez")
    assert _scrape(client)[key] == before + 2


def test_unmatched_paths_share_one_route_label(client):
    client.get("/a/b/c")
    client.get("/x/y/z")
    samples = _scrape(client)
    assert ("uvdose_http_requests_total", (("method", "GET"), ("route", "unmatched"), ("status", "404"))) in samples
    assert not any("/a/b/c" in str(labels) for _, labels in samples)


def test_latency_histogram_counts_each_request(client):
    key = ("uvdose_http_request_duration_seconds_count", (("method", "GET"), ("route", "/livez")))
    before = _scrape(client).get(key, 0.0)
    client.get("/livez")
    assert _scrape(client)[key] == before + 1


def test_cache_helpers_feed_the_cache_metrics(client):
    before = _scrape(client)
    metrics.count_cache("hit", 7)
    metrics.count_cache("miss")
    metrics.observe_cache_latency(0.002)
    after = _scrape(client)
    hit = ("uvdose_cache_events_total", (("event", "hit"),))
    miss = ("uvdose_cache_events_total", (("event", "miss"),))
    latency = ("uvdose_cache_operation_duration_seconds_count", ())
    assert after[hit] == before.get(hit, 0.0) + 7
    assert after[miss] == before.get(miss, 0.0) + 1
    assert after[latency] == before.get(latency, 0.0) + 1


def test_an_unknown_cache_event_is_refused():
    with pytest.raises(ValueError, match="hit"):
        metrics.count_cache("evicted")


def test_computed_records_are_counted_per_route(client):
    key = ("uvdose_records_computed_total", (("route", "/v1/irradiance"),))
    before = _scrape(client).get(key, 0.0)
    records = [{"time": "2026-06-21T12:00:00Z", "lat": 44.0 + i, "lon": 4.9} for i in range(4)]
    assert client.post("/v1/irradiance", json={"records": records}).status_code == 200
    assert client.post("/v1/irradiance", json={"records": [{**records[0], "lat": 99}]}).status_code == 422
    assert _scrape(client)[key] == before + 4  # rejected batches compute nothing
