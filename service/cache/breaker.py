"""The circuit breaker in front of a remote cache backend."""
from __future__ import annotations

import logging
import threading
import time
from typing import Callable

log = logging.getLogger("uvdose.cache")


class Breaker:
    """After a failure, skip the backend for a backoff (``initial_s``, doubling to
    ``max_s``); then let one batch try it again, while the others keep skipping."""

    def __init__(self, initial_s: float, max_s: float, clock: Callable[[], float] = time.monotonic):
        self.initial_s, self.max_s, self.clock = initial_s, max_s, clock
        self._lock = threading.Lock()
        self._backoff_s = initial_s
        self._open_until: float | None = None

    @property
    def is_open(self) -> bool:
        return self._open_until is not None

    def retry_in_s(self) -> float:
        return 0.0 if self._open_until is None else max(0.0, self._open_until - self.clock())

    def allow(self) -> bool:
        with self._lock:
            if self._open_until is None:
                return True
            now = self.clock()
            if now < self._open_until:
                return False
            self._open_until = now + self._backoff_s  # others keep skipping while one tries
            return True

    def success(self) -> None:
        with self._lock:
            was_open = self._open_until is not None
            self._open_until, self._backoff_s = None, self.initial_s
        if was_open:
            log.info("cache backend answers again; caching resumed")

    def failure(self, error: BaseException) -> None:
        with self._lock:
            backoff_s = self._backoff_s
            self._open_until = self.clock() + backoff_s
            self._backoff_s = min(backoff_s * 2.0, self.max_s)
        log.warning("cache backend failed (%s: %s); answering from the engine, retry in %.1f s",
                    type(error).__name__, error, backoff_s)
