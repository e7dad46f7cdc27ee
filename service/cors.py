"""Cross-origin access (the Fetch standard's CORS protocol, WHATWG): off unless configured.

By default the service sends no CORS headers, so browsers let only pages of its own
origin (the docs page) read its answers; servers, scripts and the Python client are
not browsers and are not affected. An operator who serves a web page from another
origin lists it in ``UVDOSE_CORS_ORIGINS`` (comma-separated ``scheme://host[:port]``,
or ``*`` for any origin). Then answers to a listed ``Origin`` carry
``Access-Control-Allow-Origin`` (that origin; ``Vary: Origin``) and expose the headers a
client reads (request id, caution, ETag, Retry-After), and preflights (``OPTIONS`` with
``Access-Control-Request-Method``) get a 204 naming the path's methods and the request
headers the service reads, cached by the browser for :data:`PREFLIGHT_MAX_AGE_S`.
Credentials (cookies) are never allowed: the API key travels in a header the preflight
names, so no ambient authority crosses origins.

A preflight carries no API key by design (the browser strips it), so ``OPTIONS`` is
never refused with 401 (service/auth.py lets it through); without a configured origin
it gets Flask's plain ``OPTIONS`` answer (``Allow``) and no CORS header, which the
browser takes as a refusal.
"""
from __future__ import annotations

from flask import Flask, Response, current_app, request
from werkzeug.exceptions import HTTPException

ORIGINS_KEY = "UVDOSE_CORS_ORIGINS"
PREFLIGHT_MAX_AGE_S = 600
ALLOWED_REQUEST_HEADERS = ("Content-Type", "Content-Encoding", "Accept", "Accept-Encoding", "X-API-Key",
                           "Authorization", "X-Request-ID", "If-None-Match")
EXPOSED_HEADERS = ("X-Request-ID", "Uvdose-Caution", "ETag", "Retry-After", "Content-Encoding")


def allowed_origins(setting: str | None) -> frozenset[str]:
    """The origins of a ``UVDOSE_CORS_ORIGINS`` value (empty: CORS off)."""
    return frozenset(part.strip().rstrip("/") for part in (setting or "").split(",") if part.strip())


def _allowed(origin: str | None) -> bool:
    origins = current_app.extensions["uvdose_cors"]
    return bool(origin) and ("*" in origins or origin in origins)


def _path_methods() -> list[str]:
    adapter = current_app.url_map.bind("")
    try:
        adapter.match(request.path, method="--")
    except HTTPException as error:
        return sorted(getattr(error, "valid_methods", None) or [])
    return []


def _preflight() -> Response | None:
    if request.method != "OPTIONS" or "Access-Control-Request-Method" not in request.headers:
        return None
    if not _allowed(request.headers.get("Origin")):
        return None
    methods = _path_methods()
    if not methods:
        return None  # an unknown path: the 404 as for any method
    response = Response(status=204)
    response.headers["Access-Control-Allow-Methods"] = ", ".join(methods)
    response.headers["Access-Control-Allow-Headers"] = ", ".join(ALLOWED_REQUEST_HEADERS)
    response.headers["Access-Control-Max-Age"] = str(PREFLIGHT_MAX_AGE_S)
    return response


def _add_headers(response: Response) -> Response:
    origin = request.headers.get("Origin")
    if current_app.extensions["uvdose_cors"]:
        response.vary.add("Origin")
    if _allowed(origin):
        response.headers["Access-Control-Allow-Origin"] = origin
        response.headers["Access-Control-Expose-Headers"] = ", ".join(EXPOSED_HEADERS)
    return response


def init_app(app: Flask) -> None:
    """Answer preflights from the configured origins and mark their answers."""
    app.extensions["uvdose_cors"] = allowed_origins(app.config.get(ORIGINS_KEY))
    app.before_request(_preflight)
    app.after_request(_add_headers)
