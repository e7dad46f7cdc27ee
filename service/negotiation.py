"""Content negotiation (``Accept``) for every endpoint, in one place.

Each view declares the media types it can answer with, first the default:
``@produces(JSON_MEDIA_TYPE, CSV_MEDIA_TYPE)``. Before the view runs (and before any body
is read) the request's ``Accept`` header is matched against that list (RFC 9110 §12.5.1,
with quality values and wildcards, by werkzeug); if none is acceptable the answer is a
406 problem naming what the resource offers, so nothing is computed for an answer the
client would refuse. Without an ``Accept`` header, or with ``*/*``, the first type is
chosen. The view reads the choice with :func:`chosen_media_type`.

Error answers stay ``application/problem+json`` whatever the client accepts
(RFC 9110 §15.5.7 lets a server send an error in a type the client did not ask for).
Automatic ``OPTIONS`` answers and unknown paths (404/405 problems) are not negotiated.
"""
from __future__ import annotations

from typing import Callable, TypeVar

from flask import Flask, current_app, g, request

from uvdose.service.problems import Problem

JSON_MEDIA_TYPE = "application/json"
CSV_MEDIA_TYPE = "text/csv"
NDJSON_MEDIA_TYPE = "application/x-ndjson"
YAML_MEDIA_TYPE = "application/yaml"
HTML_MEDIA_TYPE = "text/html"
PROMETHEUS_TEXT_MEDIA_TYPE = "text/plain"

_ATTRIBUTE = "uvdose_produces"
View = TypeVar("View", bound=Callable)


def produces(*media_types: str) -> Callable[[View], View]:
    """Declare the media types a view answers with (the first is the default)."""
    if not media_types:
        raise ValueError("a view produces at least one media type")

    def declare(view: View) -> View:
        setattr(view, _ATTRIBUTE, tuple(media_types))
        return view

    return declare


def produced_by(view: Callable) -> tuple[str, ...] | None:
    """The media types ``view`` declared with :func:`produces` (None if it declared none)."""
    return getattr(view, _ATTRIBUTE, None)


def best_media_type(accept_header: str | None, offered: tuple[str, ...]) -> str | None:
    """The offered type the ``Accept`` header prefers (the first offered without a header)."""
    if not accept_header or not accept_header.strip():
        return offered[0]
    return request.accept_mimetypes.best_match(offered)


def not_acceptable(offered: tuple[str, ...]) -> Problem:
    return Problem(406, "not-acceptable", "Not Acceptable",
                   f"This resource is available as {' or '.join(offered)}; the Accept header allows none of them.",
                   extensions={"available": list(offered)})


def chosen_media_type() -> str:
    """The media type negotiated for this request's answer."""
    return g.uvdose_media_type


def init_app(app: Flask) -> None:
    """Negotiate every request to a view that declared what it produces."""

    @app.before_request
    def _negotiate() -> None:
        if request.method == "OPTIONS" or request.endpoint is None:
            return
        offered = produced_by(current_app.view_functions[request.endpoint])
        if offered is None:
            return  # tests/service/test_negotiation.py holds every view to a declaration
        chosen = best_media_type(request.headers.get("Accept"), offered)
        if chosen is None:
            raise not_acceptable(offered)
        g.uvdose_media_type = chosen
