"""Prometheus metrics and ``GET /metrics``.

Under gunicorn several worker processes serve requests; with ``PROMETHEUS_MULTIPROC_DIR``
set (before ``prometheus_client`` is first imported, which ``uvdose serve`` arranges),
each worker writes its samples to that directory and ``/metrics`` merges them with
``prometheus_client.multiprocess.MultiProcessCollector``. Without it a plain
per-process registry is exposed.

Other modules record through the helpers here (``count_cache``, ``observe_cache_latency``,
``count_records``) rather than touching metric objects, so names stay in one place.
"""
from __future__ import annotations

import os
import time

from flask import Blueprint, Flask, Response, g, request
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    REGISTRY,
    CollectorRegistry,
    Counter,
    Histogram,
    generate_latest,
    multiprocess,
)

from uvdose.service.negotiation import PROMETHEUS_TEXT_MEDIA_TYPE, produces

_LATENCY_BUCKETS_S = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0)

HTTP_REQUESTS = Counter(
    "uvdose_http_requests_total",
    "HTTP requests answered, by route template, method and status code.",
    ("route", "method", "status"),
)
HTTP_LATENCY = Histogram(
    "uvdose_http_request_duration_seconds",
    "Time from request start to response, by route template and method.",
    ("route", "method"),
    buckets=_LATENCY_BUCKETS_S,
)
RECORDS_COMPUTED = Counter(
    "uvdose_records_computed_total",
    "Records whose results were returned, by route template.",
    ("route",),
)
CACHE_EVENTS = Counter(
    "uvdose_cache_events_total",
    "Physics-state cache entries by outcome: hit, miss, error, or unstored (computed but not "
    "written, over the request's write bound).",
    ("event",),
)
CACHE_LATENCY = Histogram(
    "uvdose_cache_operation_duration_seconds",
    "Time spent talking to the cache backend per batch operation.",
    buckets=(0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 1.0),
)

CACHE_EVENT_NAMES = ("hit", "miss", "error", "unstored")


def count_cache(event: str, amount: int = 1) -> None:
    """Count ``amount`` cache entries with outcome ``event`` ("hit", "miss", "error" or "unstored")."""
    if event not in CACHE_EVENT_NAMES:
        raise ValueError(f"cache event must be one of {CACHE_EVENT_NAMES}, got {event!r}")
    if amount:
        CACHE_EVENTS.labels(event=event).inc(amount)


def observe_cache_latency(seconds: float) -> None:
    """Record the duration of one cache backend operation."""
    CACHE_LATENCY.observe(seconds)


def count_records(route: str, amount: int) -> None:
    """Count records computed and returned by ``route`` (its URL template)."""
    if amount:
        RECORDS_COMPUTED.labels(route=route).inc(amount)


def exposition() -> tuple[bytes, str]:
    """The current metrics in the Prometheus text format, and its content type."""
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)
        return generate_latest(registry), CONTENT_TYPE_LATEST
    return generate_latest(REGISTRY), CONTENT_TYPE_LATEST


blueprint = Blueprint("metrics", __name__)


@blueprint.get("/metrics")
@produces(PROMETHEUS_TEXT_MEDIA_TYPE)
def metrics_view() -> Response:
    body, content_type = exposition()
    return Response(body, content_type=content_type)


def _route_label() -> str:
    # The URL template keeps label cardinality bounded; unmatched paths share one label.
    return request.url_rule.rule if request.url_rule is not None else "unmatched"


def init_app(app: Flask) -> None:
    """Time and count every request; serve ``GET /metrics``."""

    @app.before_request
    def _start_timer() -> None:
        g.uvdose_request_started = time.perf_counter()

    @app.after_request
    def _record(response: Response) -> Response:
        started = g.pop("uvdose_request_started", None)
        route = _route_label()
        HTTP_REQUESTS.labels(route=route, method=request.method, status=str(response.status_code)).inc()
        if started is not None:
            HTTP_LATENCY.labels(route=route, method=request.method).observe(time.perf_counter() - started)
        return response

    app.register_blueprint(blueprint)
