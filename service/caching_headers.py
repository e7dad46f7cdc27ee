"""Validators and freshness for answers that change only with a deployment: the catalogue
and the contract (``GET /v1/catalogue``, ``/openapi.yaml``, ``/docs``).

:func:`cacheable` gives such an answer a strong ``ETag`` (a digest of its body, RFC 9110
§8.8.3) and a ``Cache-Control`` (RFC 9111 §5.2), and turns it into ``304 Not Modified``
when the request's ``If-None-Match`` names that tag (RFC 9110 §13.1.2, weak comparison).
A compressed answer is another representation, so :mod:`service.response_compression`
suffixes its tag with the coding (``"<digest>-gzip"``); a tag a client holds for any
coding of the same body matches here.
"""
from __future__ import annotations

import hashlib

from flask import Response, request

CODING_SUFFIXES = ("-gzip", "-zstd")
"""Suffixes the compression step adds to a tag (one per content coding it applies)."""

MAX_AGE_S = 300
"""How long a client may use the catalogue or the contract without asking again: five
minutes, so a redeployment reaches clients soon, while the ETag makes asking cheap
(common practice, no source)."""


def body_tag(body: bytes) -> str:
    """The entity tag of an identity-coded body (without quotes)."""
    return hashlib.sha256(body).hexdigest()[:32]


def _identity_tag(tag: str) -> str:
    for suffix in CODING_SUFFIXES:
        if tag.endswith(suffix):
            return tag[: -len(suffix)]
    return tag


def cacheable(response: Response, shared: bool, max_age_s: int = MAX_AGE_S) -> Response:
    """Tag ``response``, give it a lifetime, and answer 304 when the client holds it already.

    ``shared``: whether shared caches (proxies) may keep it (``public``), else ``private``.
    """
    tag = body_tag(response.get_data())
    response.set_etag(tag)
    response.headers["Cache-Control"] = f"{'public' if shared else 'private'}, max-age={max_age_s}"
    held = request.if_none_match
    if held and (held.star_tag or any(_identity_tag(t) == tag for t in held.as_set(include_weak=True))):
        not_modified = Response(status=304)
        del not_modified.headers["Content-Type"]  # a 304 carries no representation
        for name in ("ETag", "Cache-Control"):
            not_modified.headers[name] = response.headers[name]
        not_modified.uvdose_body_bytes = response.content_length  # for the coding's tag, if any
        return not_modified
    return response
