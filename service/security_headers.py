"""Security headers on every answer, and the Content-Security-Policy of the docs page.

Every answer, problems and 304s included, carries ``X-Content-Type-Options: nosniff``
(browsers take the declared media type and never guess one: a CSV or JSON answer whose
text looks like HTML is not run as a page), ``Referrer-Policy: no-referrer`` (links off
the docs page leak no URL with coordinates in its query), and a framing policy twice
over: ``frame-ancestors 'none'`` in the CSP (CSP Level 2, W3C) and ``X-Frame-Options:
DENY`` (RFC 7034) for browsers that predate it.

The docs page (``/docs`` and its files) is served with :data:`DOCS_POLICY`, which allows
nothing but the service itself; the browser test runs the page under it. Every other
answer is data, not a page, and gets :data:`DATA_POLICY`, which allows nothing at all.
Strict-Transport-Security is left to the TLS front (ingress or proxy) that terminates
HTTPS: the service itself speaks plain HTTP.
"""
from __future__ import annotations

from flask import Flask, Response, request

DOCS_POLICY = ("default-src 'self'; img-src 'self'; style-src 'self'; script-src 'self'; "
               "form-action 'self'; base-uri 'none'; frame-ancestors 'none'; object-src 'none'")
DATA_POLICY = "default-src 'none'; frame-ancestors 'none'; base-uri 'none'; form-action 'none'"
DOCS_PATH_PREFIX = "/docs"

EVERY_ANSWER = {
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "no-referrer",
}


def _add_headers(response: Response) -> Response:
    for name, value in EVERY_ANSWER.items():
        response.headers.setdefault(name, value)
    on_docs = request.path == DOCS_PATH_PREFIX or request.path.startswith(DOCS_PATH_PREFIX + "/")
    response.headers.setdefault("Content-Security-Policy", DOCS_POLICY if on_docs else DATA_POLICY)
    return response


def init_app(app: Flask) -> None:
    """Add the headers to every answer of ``app``."""
    app.after_request(_add_headers)
