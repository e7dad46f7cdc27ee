"""The request deadline: every request may compute for ``UVDOSE_REQUEST_DEADLINE_S``.

The clock starts when the app receives the request (the body has arrived by then: the
server's worker buffers it, see service/buffering_worker.py). The engine gateway calls
:func:`check` between the parts of a batch (each chunk of dose samples, each transfer
the cache cannot answer), so a request past its deadline stops at the next part and
answers a 503 problem (``deadline-exceeded``) with ``Retry-After``, logged as a
warning; nothing partial is ever answered. gunicorn's own worker timeout cannot do
this: with threads it is a heartbeat of the worker's main loop and bounds no request.

When the server is told to stop, :func:`stop_by` brings every running request's
deadline forward to the end of the graceful period, so a request the drain cannot wait
for still gets its 503 instead of a cut connection.
"""
from __future__ import annotations

import logging
import time

from flask import Flask, current_app, g, has_request_context

from uvdose.service.problems import Problem

DEADLINE_KEY = "UVDOSE_REQUEST_DEADLINE_S"
RETRY_AFTER_S = 5
"""Told to clients after a deadline problem: long enough for a busy worker to drain, short
enough that a client's retry with a smaller batch is not held back (no source: our choice)."""

log = logging.getLogger(__name__)
_stop_at: float | None = None  # monotonic time by which this process must have answered everything


def stop_by(monotonic_s: float) -> None:
    """Bring every request's deadline in this process forward to ``monotonic_s`` (the
    server calls this on SIGTERM)."""
    global _stop_at
    _stop_at = monotonic_s if _stop_at is None else min(_stop_at, monotonic_s)


def check() -> None:
    """Raise the 503 problem if the current request is past its deadline (no-op outside
    a request)."""
    if not has_request_context():
        return
    now = time.monotonic()
    deadline = g.get("uvdose_deadline")
    stopping = _stop_at is not None and now > _stop_at
    if not stopping and (deadline is None or now <= deadline):
        return
    allowed = current_app.config[DEADLINE_KEY]
    elapsed = now - g.get("uvdose_received", now)
    reason = "the server is stopping" if stopping else f"the request deadline of {allowed:g} s passed"
    log.warning("request stopped: %s after %.1f s of work", reason, elapsed)
    raise Problem(503, "deadline-exceeded", "The request took too long",
                  f"Computing the answer stopped after {elapsed:.1f} s: {reason} "
                  f"(UVDOSE_REQUEST_DEADLINE_S). Nothing was answered; retry later or split the batch.",
                  extensions={"deadline_s": allowed},
                  headers={"Retry-After": str(RETRY_AFTER_S)})


def init_app(app: Flask) -> None:
    """Start each request's clock."""

    @app.before_request
    def _start_clock() -> None:
        g.uvdose_received = time.monotonic()
        g.uvdose_deadline = g.uvdose_received + app.config[DEADLINE_KEY]
