"""The API contract and its human-readable page: ``GET /openapi.yaml``, ``GET /docs`` and
the page's own stylesheet and script (``/docs/style.css``, ``/docs/page.js``).

``/docs`` is HTML rendered on the server from the same OpenAPI document
(:mod:`service.docs_page`); it reads completely with scripts off, and nothing on it is
fetched from elsewhere, so it works on an isolated network and under a strict
``Content-Security-Policy: default-src 'self'``.
"""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path
from typing import Any

from flask import Blueprint, Response

from uvdose.service import cautions, problems
from uvdose.service import docs_page as docs_page_html
from uvdose.service.caching_headers import cacheable
from uvdose.service.contract import load_document, openapi_document, openapi_path
from uvdose.service.negotiation import HTML_MEDIA_TYPE, YAML_MEDIA_TYPE, produces

blueprint = Blueprint("docs", __name__)


@blueprint.get("/openapi.yaml")
@produces(YAML_MEDIA_TYPE)
def openapi_yaml() -> Response:
    text, _ = openapi_document()
    return cacheable(Response(text, mimetype=YAML_MEDIA_TYPE), shared=True)


CSS_MEDIA_TYPE = "text/css"
SCRIPT_MEDIA_TYPE = "text/javascript"
STYLESHEET_PATH = "/docs/style.css"
SCRIPT_PATH = "/docs/page.js"
_STATIC = Path(__file__).resolve().parent / "static"


@blueprint.get("/docs")
@produces(HTML_MEDIA_TYPE)
def docs_page() -> Response:
    path = openapi_path()
    page = _rendered(str(path), path.stat().st_mtime_ns)
    return cacheable(Response(page, mimetype=HTML_MEDIA_TYPE), shared=True)


@lru_cache(maxsize=4)
def _rendered(path: str, mtime_ns: int) -> str:
    """The page for one version of the document (rendered once, not per request)."""
    _, spec = load_document(path, mtime_ns)
    return render_html(spec)


def render_html(spec: dict[str, Any]) -> str:
    """The whole API reference page for an OpenAPI 3.1 document."""
    return docs_page_html.render(
        spec, problem_types=problems.PROBLEM_TYPES, caution_header=cautions.CAUTION_HEADER,
        caution_header_text=cautions.HEADER_TEXT, figure_cautions=cautions.FIGURE_CAUTIONS,
        stylesheet=STYLESHEET_PATH, script=SCRIPT_PATH)


@blueprint.get(STYLESHEET_PATH)
@produces(CSS_MEDIA_TYPE)
def docs_stylesheet() -> Response:
    return cacheable(Response((_STATIC / "docs.css").read_bytes(), mimetype=CSS_MEDIA_TYPE), shared=True)


@blueprint.get(SCRIPT_PATH)
@produces(SCRIPT_MEDIA_TYPE)
def docs_script() -> Response:
    return cacheable(Response((_STATIC / "docs.js").read_bytes(), mimetype=SCRIPT_MEDIA_TYPE), shared=True)
