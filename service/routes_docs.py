"""The API contract and its human-readable page: ``GET /openapi.yaml`` and ``GET /docs``.

``/docs`` is plain HTML rendered on the server from the same OpenAPI document, with no
scripts and nothing fetched from elsewhere, so it works on an isolated network.
"""
from __future__ import annotations

from functools import lru_cache
from html import escape
from pathlib import Path
from typing import Any

import yaml
from flask import Blueprint, Flask, Response, current_app

from uvdose.service.caching_headers import cacheable
from uvdose.service.negotiation import HTML_MEDIA_TYPE, YAML_MEDIA_TYPE, produces

blueprint = Blueprint("docs", __name__)

_HTTP_METHODS = ("get", "put", "post", "delete", "patch", "head", "options")
_RANGE_KEYS = ("minimum", "exclusiveMinimum", "maximum", "exclusiveMaximum", "minLength",
               "maxLength", "minItems", "maxItems", "pattern", "format", "default")


def openapi_path(app: Flask | None = None) -> Path:
    """Where the OpenAPI document is: the configured path, the packaged copy, or the repo's."""
    app = app or current_app
    configured = app.config.get("UVDOSE_OPENAPI_PATH")
    if configured:
        return Path(configured)
    here = Path(__file__).resolve().parent
    for candidate in (here / "openapi.yaml", here.parent / "openapi.yaml"):
        if candidate.is_file():
            return candidate
    raise FileNotFoundError("openapi.yaml is neither packaged with the service nor beside it")


@lru_cache(maxsize=4)
def _load(path: str, mtime_ns: int) -> tuple[str, dict[str, Any]]:
    text = Path(path).read_text(encoding="utf-8")
    return text, yaml.safe_load(text)


def openapi_document(app: Flask | None = None) -> tuple[str, dict[str, Any]]:
    """The OpenAPI document as text and as parsed data (reloaded when the file changes)."""
    path = openapi_path(app)
    return _load(str(path), path.stat().st_mtime_ns)


@blueprint.get("/openapi.yaml")
@produces(YAML_MEDIA_TYPE)
def openapi_yaml() -> Response:
    text, _ = openapi_document()
    return cacheable(Response(text, mimetype=YAML_MEDIA_TYPE), shared=True)


@blueprint.get("/docs")
@produces(HTML_MEDIA_TYPE)
def docs_page() -> Response:
    _, spec = openapi_document()
    return cacheable(Response(render_html(spec), mimetype=HTML_MEDIA_TYPE), shared=True)


def _ref_name(ref: str) -> str:
    return ref.rsplit("/", 1)[-1]


def _type_text(schema: dict[str, Any]) -> str:
    if not isinstance(schema, dict):
        return ""
    if "$ref" in schema:
        name = _ref_name(schema["$ref"])
        return f'<a href="#schema-{escape(name)}">{escape(name)}</a>'
    for combiner in ("oneOf", "anyOf", "allOf"):
        if combiner in schema:
            joiner = " & " if combiner == "allOf" else " | "
            return joiner.join(_type_text(part) for part in schema[combiner])
    kind = schema.get("type", "")
    if isinstance(kind, list):
        kind = " | ".join(kind)
    if kind == "array":
        return f"array of {_type_text(schema.get('items', {}))}"
    if "enum" in schema:
        return f"{escape(str(kind))} (one of {escape(', '.join(map(str, schema['enum'])))})"
    return escape(str(kind))


def _constraints(schema: dict[str, Any]) -> str:
    parts = [f"{key}: {schema[key]}" for key in _RANGE_KEYS if key in schema]
    return escape("; ".join(str(part) for part in parts))


def _properties_table(schema: dict[str, Any]) -> str:
    properties = schema.get("properties")
    if not properties:
        return ""
    required = set(schema.get("required", ()))
    rows = []
    for name, prop in properties.items():
        rows.append(
            "<tr><td><code>{}</code>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>".format(
                escape(name),
                " <strong>required</strong>" if name in required else "",
                _type_text(prop),
                _constraints(prop) if isinstance(prop, dict) else "",
                escape(prop.get("description", "")) if isinstance(prop, dict) else "",
            )
        )
    return ("<table><thead><tr><th>field</th><th>type</th><th>constraints</th>"
            "<th>description</th></tr></thead><tbody>" + "".join(rows) + "</tbody></table>")


def _content_text(content: dict[str, Any]) -> str:
    items = []
    for media_type, media in (content or {}).items():
        items.append(f"<li><code>{escape(media_type)}</code>: {_type_text(media.get('schema', {}))}</li>")
    return "<ul>" + "".join(items) + "</ul>" if items else ""


def _operation_html(path: str, method: str, operation: dict[str, Any]) -> str:
    parts = [
        f'<section class="op" id="op-{escape(method)}-{escape(path)}">',
        f"<h3><span class=\"verb\">{escape(method.upper())}</span> <code>{escape(path)}</code></h3>",
    ]
    if operation.get("summary"):
        parts.append(f"<p><strong>{escape(operation['summary'])}</strong></p>")
    if operation.get("description"):
        parts.append(f"<pre class=\"desc\">{escape(operation['description'])}</pre>")
    body = operation.get("requestBody")
    if body:
        parts.append("<h4>Request body</h4>" + _content_text(body.get("content", {})))
    parts.append("<h4>Responses</h4><ul>")
    for status, response in operation.get("responses", {}).items():
        if "$ref" in response:
            parts.append(f"<li><code>{escape(str(status))}</code>: {escape(_ref_name(response['$ref']))}</li>")
            continue
        parts.append(
            f"<li><code>{escape(str(status))}</code> {escape(response.get('description', ''))}"
            f"{_content_text(response.get('content', {}))}</li>"
        )
    parts.append("</ul></section>")
    return "".join(parts)


_STYLE = """
body{font-family:system-ui,sans-serif;max-width:70rem;margin:2rem auto;padding:0 1rem;color:#222}
table{border-collapse:collapse;margin:.5rem 0 1.5rem}td,th{border:1px solid #ccc;padding:.25rem .5rem;
text-align:left;vertical-align:top}code{background:#f4f4f4;padding:0 .2rem}.verb{color:#fff;
background:#3a6;padding:.1rem .4rem;border-radius:.2rem}.op{border-top:1px solid #ddd;padding-top:.5rem}
pre.desc{white-space:pre-wrap;font-family:inherit}
"""


def render_html(spec: dict[str, Any]) -> str:
    """The whole API reference page for an OpenAPI 3.1 document."""
    info = spec.get("info", {})
    title = escape(info.get("title", "API"))
    parts = [
        "<!doctype html><html lang=\"en\"><head><meta charset=\"utf-8\">",
        f"<title>{title} reference</title><style>{_STYLE}</style></head><body>",
        f"<h1>{title} <small>{escape(str(info.get('version', '')))}</small></h1>",
        f"<pre class=\"desc\">{escape(info.get('description', ''))}</pre>",
        '<p>Machine-readable contract: <a href="/openapi.yaml">/openapi.yaml</a></p>',
        "<h2>Operations</h2>",
    ]
    for path, item in spec.get("paths", {}).items():
        for method in _HTTP_METHODS:
            if method in item:
                parts.append(_operation_html(path, method, item[method]))
    parts.append("<h2>Schemas</h2>")
    for name, schema in spec.get("components", {}).get("schemas", {}).items():
        parts.append(f'<section id="schema-{escape(name)}"><h3>{escape(name)}</h3>')
        if schema.get("description"):
            parts.append(f"<pre class=\"desc\">{escape(schema['description'])}</pre>")
        table = _properties_table(schema)
        parts.append(table or f"<p>{_type_text(schema)} {_constraints(schema)}</p>")
        parts.append("</section>")
    parts.append("</body></html>")
    return "".join(parts)
