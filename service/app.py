"""Application factory for the uvdose service."""
from __future__ import annotations

from importlib import import_module
from typing import Any

from flask import Flask

from uvdose.service import (auth, cautions, cors, engine_gateway, jobs, metrics, negotiation, problems,
                            request_log, request_deadline, response_compression, security_headers)
from uvdose.service.config import settings_from_environment


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the Flask app. Every service setting comes from the environment (see README,
    "Configuration") unless ``config`` gives it under its config key; both are parsed by
    :mod:`service.config`. Other entries of ``config`` (say ``TESTING``) pass as given."""
    app = Flask(__name__)
    app.config.from_mapping(config or {})
    app.config.from_mapping(settings_from_environment(overrides=config))
    # Responses are built by the service itself; keep Flask's JSON compact and in key order.
    app.json.compact = True
    app.json.sort_keys = False

    # Registered first, so its after_request hook runs last and codes the final body.
    response_compression.init_app(app)
    problems.init_app(app)
    cautions.init_app(app)  # the caution header on every answer
    security_headers.init_app(app)  # nosniff, framing, referrer and content policies on every answer
    request_log.init_app(app)
    request_deadline.init_app(app)  # each request's clock starts here
    cors.init_app(app)  # preflights answered before the key check; none unless origins are configured
    auth.init_app(app)
    metrics.init_app(app)
    negotiation.init_app(app)  # Accept against what each view produces, before any body is read
    engine_gateway.init_app(app)  # ozone resolver, cache, the engine's tables loaded now
    jobs.init_app(app, create_app)  # the results store and job metadata; Dask at the first job
    _register_blueprints(app)
    return app


def _register_blueprints(app: Flask) -> None:
    """One line per resource blueprint (imported here so each line stands alone)."""
    app.register_blueprint(import_module("uvdose.service.routes_health").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_docs").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_catalogue").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_irradiance").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_ozone").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_doses").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_pictures").blueprint)
    app.register_blueprint(import_module("uvdose.service.routes_jobs").blueprint)
