"""The cache of an app, built from the parsed settings (:mod:`uvdose.service.config`)."""
from __future__ import annotations

from typing import Any, Mapping

from uvdose.service import metrics
from uvdose.service.cache.state_cache import StateCache
from uvdose.service.config import ConfigurationError


def build_cache(settings: Mapping[str, Any]) -> StateCache:
    """The cache the settings describe, its lookups counted and timed in the metrics.

    ``settings`` are parsed config entries: ``app.config``, or
    ``config.settings_from_environment()``. ``UVDOSE_CACHE=auto`` is ``redis`` when
    ``REDIS_URL`` is set, else ``memory``. Raises :class:`ConfigurationError` naming the
    variable for Redis without a URL.
    """
    backend, redis_url = settings["UVDOSE_CACHE"], settings["REDIS_URL"]
    if backend == "auto":
        backend = "redis" if redis_url else "memory"
    if backend == "redis" and not redis_url:
        raise ConfigurationError("UVDOSE_CACHE=redis needs REDIS_URL")
    return StateCache(
        backend=backend,
        redis_url=redis_url,
        ttl_s=settings["UVDOSE_CACHE_TTL_S"],
        max_entries=settings["UVDOSE_CACHE_MAX_ENTRIES"],
        max_writes=settings["UVDOSE_CACHE_MAX_WRITES"],
        prefix=settings["UVDOSE_CACHE_PREFIX"],
        connect_timeout_s=settings["UVDOSE_REDIS_CONNECT_TIMEOUT_S"],
        timeout_s=settings["UVDOSE_REDIS_TIMEOUT_S"],
        retry_initial_s=settings["UVDOSE_CACHE_RETRY_S"],
        retry_max_s=settings["UVDOSE_CACHE_RETRY_MAX_S"],
        count=metrics.count_cache,
        observe_latency=metrics.observe_cache_latency,
    )
