"""Every setting of the service, in one table, and the one place they are parsed.

The table is ``service/settings.yaml`` (variable, config key, default, parser, meaning);
the parsers are here. :data:`SETTINGS` are the app's: :func:`settings_from_environment`
reads them from the environment (and from the ``config`` given to ``create_app``, under
the same keys) into ``app.config``, where the parts that use them read them (limits,
cache, ozone grids, API keys, request log). :data:`SERVER_SETTINGS` are the server's:
``deploy/gunicorn.conf.py`` and ``uvdose serve`` read them through
:func:`server_settings_from_environment`, since gunicorn takes them before any app exists.
The README's "Configuration" section lists exactly these variables (a test holds the two
in step).

Every setting has an embedded default, so ``uvdose serve`` runs with no environment at
all. A variable set to the empty string counts as unset. A value that cannot be used
raises :class:`ConfigurationError` naming the variable, so a misconfigured container
fails at start rather than serving with a guess.

The table is plain data rather than Flask's ``from_prefixed_env`` (which reads values
as JSON and checks nothing, and would miss ``REDIS_URL`` and ``PROMETHEUS_MULTIPROC_DIR``)
or a settings library (one more dependency for the same table and the same checks).
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Mapping

import yaml


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


_PARSERS: dict[str, Callable[[str], Any]] = {
    "positive_number": _positive_number, "switch": _switch, "text": _text,
    "cache_backend": _cache_backend, "log_level": _log_level,
}


def _setting(entry: Mapping[str, Any]) -> Setting:
    """One entry of service/settings.yaml as a :class:`Setting`."""
    parse = _whole_number(entry["minimum"]) if entry["parse"] == "whole_number" else _PARSERS[entry["parse"]]
    return Setting(entry["env"], entry.get("key", entry["env"]), entry["default"], parse, entry["help"])


_TABLE = yaml.safe_load((Path(__file__).parent / "settings.yaml").read_text(encoding="utf-8"))

SETTINGS: tuple[Setting, ...] = tuple(_setting(entry) for entry in _TABLE["app"])
"""The app's settings, read into ``app.config``."""

SERVER_SETTINGS: tuple[Setting, ...] = tuple(_setting(entry) for entry in _TABLE["server"])
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
