"""Every setting of the service, in one list, and the one place they are parsed.

:data:`SETTINGS` are the app's: :func:`settings_from_environment` reads them from the
environment (and from the ``config`` given to ``create_app``, under the same keys) into
``app.config``, where the parts that use them read them (limits, cache, ozone grids, API
keys, request log). :data:`SERVER_SETTINGS` are the server's: ``deploy/gunicorn.conf.py``
and ``uvdose serve`` read them through :func:`server_settings_from_environment`, since
gunicorn takes them before any app exists. The README's "Configuration" section lists
exactly these variables (a test holds the two in step).

Every setting has an embedded default, so ``uvdose serve`` runs with no environment at
all. A variable set to the empty string counts as unset. A value that cannot be used
raises :class:`ConfigurationError` naming the variable, so a misconfigured container
fails at start rather than serving with a guess.

The list is a plain table rather than Flask's ``from_prefixed_env`` (which reads values
as JSON and checks nothing, and would miss ``REDIS_URL`` and ``PROMETHEUS_MULTIPROC_DIR``)
or a settings library (one more dependency for the same table and the same checks).
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Callable, Mapping


class ConfigurationError(ValueError):
    """A setting holds a value the service cannot use; the message names the variable."""


@dataclass(frozen=True)
class Setting:
    """One environment variable: the config key it fills, its default, parser and meaning."""

    env: str
    key: str
    default: Any
    parse: Callable[[str], Any]
    help: str

    @property
    def kind(self) -> str:
        """What the variable takes, in words (the parser's docstring)."""
        return self.parse.__doc__ or "text"


# -- parsers: text in, value out, ValueError with the reason ------------------------------

def _whole_number(minimum: int) -> Callable[[str], int]:
    def parse(text: str) -> int:
        value = int(text)
        if value < minimum:
            raise ValueError(f"must be at least {minimum}, got {text!r}")
        return value

    parse.__doc__ = f"a whole number ≥ {minimum}"
    return parse


def _positive_number(text: str) -> float:
    """a number > 0"""
    value = float(text)
    if not value > 0:
        raise ValueError(f"must be positive, got {text!r}")
    return value


def _switch(text: str) -> bool:
    """on or off (also true/false, yes/no, 1/0)"""
    lowered = text.strip().lower()
    if lowered in ("1", "true", "yes", "on"):
        return True
    if lowered in ("0", "false", "no", "off"):
        return False
    raise ValueError(f"must be on or off, got {text!r}")


def _text(text: str) -> str:
    """text"""
    return text


def _cache_backend(text: str) -> str:
    """auto, redis, memory or off"""
    lowered = text.strip().lower()
    lowered = "off" if lowered == "none" else lowered
    if lowered not in ("auto", "redis", "memory", "off"):
        raise ValueError(f"must be auto, redis, memory or off, got {text!r}")
    return lowered


LOG_LEVELS = ("DEBUG", "INFO", "WARNING", "ERROR", "CRITICAL")


def _log_level(text: str) -> str:
    """debug, info, warning, error or critical"""
    upper = text.strip().upper()
    if upper not in LOG_LEVELS:
        raise ValueError(f"must be one of {', '.join(LOG_LEVELS)}, got {text!r}")
    return upper


def _same(env: str, default: Any, parse: Callable[[str], Any], help: str) -> Setting:
    """A setting whose config key is its variable's name."""
    return Setting(env, env, default, parse, help)


SETTINGS: tuple[Setting, ...] = (
    # Requests
    _same("UVDOSE_MAX_RECORDS", 10_000, _whole_number(1),
          "Most records accepted in one request; larger batches get a 413 problem."),
    _same("UVDOSE_MAX_FULL_SOLVE_RECORDS", 1_000, _whole_number(1),
          "Most records (after the cache, and counting dose samples) one request may send to "
          "the full radiative-transfer solve, about 100 records/s per core; more get a 413 problem."),
    _same("UVDOSE_MAX_WEATHER_READINGS", 200_000, _whole_number(1),
          "Most weather-series readings (the `weather` table of a field or window dose request) "
          "in one request; more get a 413 problem."),
    _same("UVDOSE_MAX_ROUTE_POINTS", 500_000, _whole_number(2),
          "Most route points (fixes) in one routes request, all routes together; more get a 413 problem."),
    _same("UVDOSE_MAX_SAMPLE_SPECTRA", 6_000_000, _whole_number(1),
          "Most work one dose request may imply, in engine samples × action spectra (about 25 s "
          "on one core); more get a 413 problem pointing to the jobs API."),
    _same("UVDOSE_CHUNK_SAMPLE_SPECTRA", 250_000, _whole_number(1),
          "Dose requests are computed in chunks of records of at most this much work (samples × "
          "spectra), which bounds a worker's memory; one record implying more gets a 413 problem."),
    _same("UVDOSE_MAX_ANSWER_BYTES", 32 * 1024 * 1024, _whole_number(1),
          "Largest whole JSON dose answer, estimated before any work; larger get a 413 problem "
          "(stream it as NDJSON or CSV, or submit a job)."),
    _same("UVDOSE_MAX_STREAMED_ANSWER_BYTES", 256 * 1024 * 1024, _whole_number(1),
          "Largest streamed (NDJSON or CSV) dose answer, estimated before any work; larger get a "
          "413 problem pointing to the jobs API."),
    Setting("UVDOSE_MAX_BODY_BYTES", "MAX_CONTENT_LENGTH", 16 * 1024 * 1024, _whole_number(1),
            "Largest request body in bytes; larger bodies get a 413 problem."),
    _same("UVDOSE_REQUEST_DEADLINE_S", 60.0, _positive_number,
          "Seconds one request may compute; past it (checked between parts of the batch) the "
          "answer is a 503 problem with Retry-After, logged."),
    _same("UVDOSE_CORS_ORIGINS", None, _text,
          "Origins (scheme://host[:port], comma-separated, or *) whose pages may call the API "
          "from a browser; unset means no CORS headers (only the service's own origin)."),
    _same("UVDOSE_MAX_ERRORS_LISTED", 10_000, _whole_number(1),
          "Most record errors listed in one 422 problem (the count of all errors is always given)."),
    _same("UVDOSE_OPENAPI_PATH", None, _text,
          "Path of the OpenAPI document served at /openapi.yaml (default: the packaged one)."),
    _same("UVDOSE_HANDLE_ERRORS_AS_PROBLEMS", True, _switch,
          "Turn unexpected exceptions into a 500 problem (switch off only to debug)."),
    _same("UVDOSE_COMPRESS_MIN_BYTES", 1024, _whole_number(0),
          "Smallest answer body sent gzip- or zstd-coded when the client's Accept-Encoding asks for it."),
    # Total ozone
    _same("UVDOSE_OZONE_GRIDS", None, _text,
          "Operator total-ozone grid files, comma-separated, tried in order before the climatology."),
    # Physics-state cache
    _same("UVDOSE_CACHE", "auto", _cache_backend,
          "Cache backend; auto is redis when REDIS_URL is set, else memory (in-process, per worker)."),
    _same("REDIS_URL", None, _text,
          "Redis for the physics-state cache; unset means the in-process cache."),
    _same("UVDOSE_CACHE_TTL_S", 86_400.0, _positive_number,
          "Lifetime of a cache entry in seconds (both backends)."),
    _same("UVDOSE_CACHE_MAX_ENTRIES", 50_000, _whole_number(1),
          "Bound of the in-process cache, entries per worker."),
    _same("UVDOSE_CACHE_PREFIX", "uvdose:", _text,
          "Prefix of every cache key, to share one Redis between deployments."),
    _same("UVDOSE_CACHE_MAX_WRITES", 10_000, _whole_number(0),
          "Most new cache entries one request writes (those most of its records use first); "
          "the rest it answers without storing."),
    _same("UVDOSE_REDIS_CONNECT_TIMEOUT_S", 0.25, _positive_number,
          "Connect timeout of every Redis call, seconds."),
    _same("UVDOSE_REDIS_TIMEOUT_S", 0.5, _positive_number,
          "Read timeout of every Redis call, seconds."),
    _same("UVDOSE_CACHE_RETRY_S", 1.0, _positive_number,
          "After a Redis fault, seconds before Redis is tried again."),
    _same("UVDOSE_CACHE_RETRY_MAX_S", 30.0, _positive_number,
          "The wait after repeated Redis faults doubles up to this many seconds."),
    # API keys
    _same("UVDOSE_API_KEYS", None, _text,
          "Comma-separated API keys; unset (and no key file) means authentication is off."),
    _same("UVDOSE_API_KEYS_FILE", None, _text,
          "File of API keys or their SHA-256 digests, one per line."),
    # Jobs (POST /v1/jobs) on Dask distributed
    _same("UVDOSE_DASK_SCHEDULER", None, _text,
          "Address of an existing Dask scheduler (tcp://host:8786) that runs the jobs; unset means "
          "an embedded local cluster on this machine's cores, started by the service itself."),
    _same("UVDOSE_DASK_WORKERS", None, _whole_number(1),
          "Worker processes of the embedded local cluster (default: one per core)."),
    _same("UVDOSE_JOBS_STORE", None, _text,
          "Results store of the jobs, a directory or any fsspec URL (s3://bucket/prefix) every API "
          "instance and Dask worker can reach (default: uvdose-jobs in the system's temporary directory)."),
    _same("UVDOSE_JOBS_METADATA_DIR", None, _text,
          "Directory of the job metadata when REDIS_URL is unset (with it, the metadata is kept in Redis; "
          "default: uvdose-jobs-metadata in the system's temporary directory)."),
    _same("UVDOSE_JOB_PART_WORK", 20_000, _whole_number(1),
          "Work per part of a job (records; field-days for fields; route points for routes): one part is "
          "one Dask task and one downloadable piece of the result."),
    _same("UVDOSE_JOB_TTL_S", 604_800.0, _positive_number,
          "Seconds a finished (or cancelled) job and its results are kept before they expire (default 7 days)."),
    # Logs and metrics
    _same("UVDOSE_REQUEST_LOG", True, _switch,
          "One JSON line per request on stdout."),
    _same("UVDOSE_LOG_LEVEL", "INFO", _log_level,
          "Level of the service's and gunicorn's logs."),
    _same("PROMETHEUS_MULTIPROC_DIR", None, _text,
          "Directory shared by gunicorn workers for Prometheus metrics (prometheus_client "
          "reads it itself; uvdose serve and the gunicorn config make a fresh one when unset)."),
)
"""The app's settings, read into ``app.config``."""

SERVER_SETTINGS: tuple[Setting, ...] = (
    _same("UVDOSE_BIND", "127.0.0.1:8080", _text, "Address gunicorn listens on (host:port)."),
    _same("UVDOSE_WORKERS", 2, _whole_number(1), "Worker processes, about one per CPU the container may use."),
    _same("UVDOSE_THREADS", 4, _whole_number(1), "Threads per worker."),
    _same("UVDOSE_WORKER_TIMEOUT", 120, _whole_number(1),
          "Seconds a worker's main loop may go silent before the master restarts it (a hung "
          "process, not a long request: UVDOSE_REQUEST_DEADLINE_S bounds those)."),
    _same("UVDOSE_HEADER_TIMEOUT_S", 10.0, _positive_number,
          "Seconds a client has, from its request's first byte, to send the request line and "
          "headers; then a 408 problem and the connection is closed (logged)."),
    _same("UVDOSE_BODY_TIMEOUT_S", 60.0, _positive_number,
          "Seconds a client has, after the headers, to send the whole body (then a 408 problem "
          "and the connection is closed, logged); also the longest an answer may make no progress "
          "because the client stopped reading (then it is cut, logged)."),
    _same("UVDOSE_GRACEFUL_TIMEOUT", 30, _whole_number(1),
          "Seconds in-flight requests get to finish after SIGTERM."),
    _same("UVDOSE_KEEPALIVE", 5, _whole_number(0), "Seconds an idle keep-alive connection stays open."),
    _same("UVDOSE_MAX_REQUESTS", 0, _whole_number(0),
          "Recycle a worker after this many requests (0: never; jitter 10 %)."),
    _same("UVDOSE_PRELOAD", True, _switch, "Load the app in the master before the workers fork."),
)
"""The server's settings, read by ``deploy/gunicorn.conf.py`` and ``uvdose serve``
(with ``UVDOSE_LOG_LEVEL`` of :data:`SETTINGS`)."""

_BY_ENV = {setting.env: setting for setting in SETTINGS + SERVER_SETTINGS}


def parse_value(setting: Setting, raw: Any) -> Any:
    """The value of ``setting`` for ``raw`` (text, or a value given in code, read from its
    text form); ``None`` or empty text gives the default."""
    if raw is None:
        return setting.default
    text = raw if isinstance(raw, str) else str(raw)
    if text.strip() == "":
        return setting.default
    try:
        return setting.parse(text)
    except ValueError as error:
        raise ConfigurationError(f"{setting.env}: {error}") from None


def settings_from_environment(environ: Mapping[str, str] | None = None,
                              overrides: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """Flask config entries of every app setting, from ``environ`` (default
    ``os.environ``), with defaults filled in.

    An entry of ``overrides`` under a setting's config key replaces the environment's
    value and is parsed the same way (``create_app(config)`` passes its ``config``).
    """
    environ = os.environ if environ is None else environ
    overrides = overrides or {}
    return {
        setting.key: parse_value(setting, overrides[setting.key] if setting.key in overrides
                                 else environ.get(setting.env))
        for setting in SETTINGS
    }


def server_settings_from_environment(environ: Mapping[str, str] | None = None) -> dict[str, Any]:
    """The server's settings (and the log level) by variable name, from ``environ``
    (default ``os.environ``), with defaults filled in."""
    environ = os.environ if environ is None else environ
    wanted = SERVER_SETTINGS + (_BY_ENV["UVDOSE_LOG_LEVEL"],)
    return {setting.env: parse_value(setting, environ.get(setting.env)) for setting in wanted}
