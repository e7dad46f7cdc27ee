"""Application factory for the uvdose service."""
from __future__ import annotations

import os
from typing import Any

from flask import Flask

from service import auth, cache, metrics, request_log


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the Flask app. Settings come from the environment (see README), then ``config``."""
    app = Flask(__name__)
    app.config.from_mapping(_settings_from_environment())
    if config:
        app.config.from_mapping(config)

    request_log.init_app(app)
    auth.init_app(app)
    metrics.init_app(app)
    cache.init_app(app)
    _register_blueprints(app)
    return app


def _settings_from_environment() -> dict[str, Any]:
    env = os.environ
    return {
        "REDIS_URL": env.get("REDIS_URL") or None,
    }


def _register_blueprints(app: Flask) -> None:
    pass
