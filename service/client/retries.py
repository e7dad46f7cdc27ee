"""Sending a request again when the service may answer on a later try, and only then.

Retried: connection errors (refused, reset, closed before an answer), ``429 Too Many
Requests`` and ``503 Service Unavailable``. Never retried: any other status, 4xx above
all (a request the service refused once it refuses again), and read timeouts (the
service may still be computing the first try). Waits grow exponentially with "full
jitter" (a uniform draw between 0 and the capped exponential; Brooker 2015, "Exponential
Backoff And Jitter", AWS Architecture Blog), so many clients do not retry in step; a
``Retry-After`` header of a 429/503 is waited at least.
"""
from __future__ import annotations

import random
import time
from dataclasses import dataclass, field
from typing import Callable

import httpx

from uvdose.client.errors import ConnectionFailed

RETRY_STATUSES = frozenset({429, 503})
CONNECTION_ERRORS = (httpx.ConnectError, httpx.ConnectTimeout, httpx.RemoteProtocolError, httpx.ReadError,
                     httpx.WriteError)


@dataclass(frozen=True)
class RetryPolicy:
    """``attempts`` tries in all; before try k+1 a wait of uniform(0, min(``max_backoff_s``,
    ``backoff_s`` · 2^k)) seconds, at least a 429/503's ``Retry-After`` (up to
    ``max_retry_after_s``)."""

    attempts: int = 5
    backoff_s: float = 0.25
    max_backoff_s: float = 8.0
    max_retry_after_s: float = 60.0
    rng: random.Random = field(default_factory=random.Random, compare=False, repr=False)

    def __post_init__(self) -> None:
        if self.attempts < 1:
            raise ValueError("attempts must be at least 1")

    def wait_s(self, attempt: int, retry_after_s: float | None = None) -> float:
        """Seconds to wait after failed try ``attempt`` (0-based)."""
        wait = self.rng.uniform(0.0, min(self.max_backoff_s, self.backoff_s * 2 ** attempt))
        if retry_after_s is not None:
            wait = max(wait, min(retry_after_s, self.max_retry_after_s))
        return wait


NO_RETRY = RetryPolicy(attempts=1)


def retry_after_s(response: httpx.Response) -> float | None:
    """A ``Retry-After`` given in seconds (the date form is not used by the service)."""
    value = response.headers.get("Retry-After", "").strip()
    try:
        return max(0.0, float(value)) if value else None
    except ValueError:
        return None


def send(http: httpx.Client, request: httpx.Request, policy: RetryPolicy,
         sleep: Callable[[float], None] = time.sleep) -> httpx.Response:
    """``request`` through ``http`` under ``policy``: the first answer that is not a 429/503,
    or the last 429/503; :class:`ConnectionFailed` if no try reached the service."""
    for attempt in range(policy.attempts):
        last = attempt == policy.attempts - 1
        try:
            response = http.send(request)
        except CONNECTION_ERRORS as error:
            if last:
                raise ConnectionFailed(f"{request.method} {request.url}: {type(error).__name__}: {error} "
                                       f"(after {policy.attempts} attempts)") from error
            sleep(policy.wait_s(attempt))
            continue
        if response.status_code not in RETRY_STATUSES or last:
            return response
        response.close()
        sleep(policy.wait_s(attempt, retry_after_s(response)))
    raise AssertionError("unreachable")
