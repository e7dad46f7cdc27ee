"""Service settings read from the environment.

Every setting has an embedded default, so ``uvdose serve`` runs with no environment at
all. The README's "Configuration" section lists the same variables; keep both in step.
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Callable, Mapping


@dataclass(frozen=True)
class Setting:
    """One environment variable: the Flask config key it fills, its default and parser."""

    env: str
    key: str
    default: Any
    parse: Callable[[str], Any]
    help: str


def _positive_int(text: str) -> int:
    value = int(text)
    if value <= 0:
        raise ValueError(f"must be a positive integer, got {text!r}")
    return value


def _flag(text: str) -> bool:
    lowered = text.strip().lower()
    if lowered in ("1", "true", "yes", "on"):
        return True
    if lowered in ("0", "false", "no", "off", ""):
        return False
    raise ValueError(f"must be true or false, got {text!r}")


def _text_or_none(text: str) -> str | None:
    return text or None


SETTINGS: tuple[Setting, ...] = (
    Setting("UVDOSE_MAX_RECORDS", "UVDOSE_MAX_RECORDS", 10_000, _positive_int,
            "Most records accepted in one request; larger batches get a 413 problem."),
    Setting("UVDOSE_MAX_FULL_SOLVE_RECORDS", "UVDOSE_MAX_FULL_SOLVE_RECORDS", 1_000, _positive_int,
            "Most records (after the cache, and counting dose samples) one request may send to "
            "the full radiative-transfer solve, about 100 records/s per core; more get a 413 problem."),
    Setting("UVDOSE_MAX_BODY_BYTES", "MAX_CONTENT_LENGTH", 16 * 1024 * 1024, _positive_int,
            "Largest request body in bytes; larger bodies get a 413 problem."),
    Setting("UVDOSE_MAX_ERRORS_LISTED", "UVDOSE_MAX_ERRORS_LISTED", 10_000, _positive_int,
            "Most record errors listed in one 422 problem (the count of all errors is always given)."),
    Setting("UVDOSE_OPENAPI_PATH", "UVDOSE_OPENAPI_PATH", None, _text_or_none,
            "Path of the OpenAPI document served at /openapi.yaml (default: the packaged one)."),
    Setting("UVDOSE_HANDLE_ERRORS_AS_PROBLEMS", "UVDOSE_HANDLE_ERRORS_AS_PROBLEMS", True, _flag,
            "Turn unexpected exceptions into a 500 problem (switch off only to debug)."),
    Setting("REDIS_URL", "REDIS_URL", None, _text_or_none,
            "Redis for the grid-cell cache; unset means the in-process cache."),
    Setting("PROMETHEUS_MULTIPROC_DIR", "PROMETHEUS_MULTIPROC_DIR", None, _text_or_none,
            "Directory shared by gunicorn workers for Prometheus metrics (multiprocess mode)."),
)
"""The service's own settings. Other modules (auth, cache, logging) read their own."""


class ConfigurationError(ValueError):
    """An environment variable holds a value the service cannot use."""


def settings_from_environment(environ: Mapping[str, str] | None = None) -> dict[str, Any]:
    """Flask config entries from ``environ`` (default ``os.environ``), defaults filled in.

    A variable that is set but unparseable raises :class:`ConfigurationError` naming it,
    so a misconfigured container fails at start rather than serving with a guess.
    """
    environ = os.environ if environ is None else environ
    values: dict[str, Any] = {}
    for setting in SETTINGS:
        raw = environ.get(setting.env)
        if raw is None:
            values[setting.key] = setting.default
            continue
        try:
            values[setting.key] = setting.parse(raw)
        except ValueError as error:
            raise ConfigurationError(f"{setting.env}: {error}") from None
    return values
