"""The HTML reference page (``GET /docs``), rendered on the server from the OpenAPI document.

Everything a reader needs is in the HTML itself, so the page reads the same with scripts
off: every operation with its parameters, request bodies and answers; every schema with
its fields expanded through ``$ref``, ``allOf``, ``oneOf`` and ``anyOf``, with units and
enforced ranges; the contract's examples (as JSON and as a curl command); the problem
types; the cautions; and the pictures, as images. The one script (``/docs/page.js``) only
makes the example forms send their request and show the answer on the page; the one
stylesheet is ``/docs/style.css``. Neither is inline and nothing is fetched from
elsewhere, so the page works under ``Content-Security-Policy: default-src 'self'``.

Field paths: ``a.b`` is member ``b`` of object ``a``; ``a[]`` an item of array ``a``;
``a.{key}`` any member of a map ``a``. Each field row carries ``data-field`` with its path.
"""
from __future__ import annotations

import json
import re
from dataclasses import dataclass
from html import escape
from typing import Any, Iterable, Iterator, Sequence
from urllib.parse import urlencode

from uvdose.service.problems import ProblemType

HTTP_METHODS = ("get", "put", "post", "delete", "patch")
MAX_INLINE_DEPTH = 4
"""Named schemas are expanded inline up to this depth of nesting, then linked."""

_RANGE_KEYS = (("minimum", "≥ {}"), ("exclusiveMinimum", "> {}"), ("maximum", "≤ {}"),
               ("exclusiveMaximum", "< {}"), ("minLength", "length ≥ {}"), ("maxLength", "length ≤ {}"),
               ("minItems", "≥ {} items"), ("maxItems", "≤ {} items"), ("pattern", "pattern {}"),
               ("format", "format {}"), ("x-earliest", "from {}"), ("x-before", "before {}"))

_UNITS = (
    # (name suffix, unit); the longest matching suffix wins.
    ("_w_m2_nm", "W m⁻² nm⁻¹"), ("_w_m2", "W m⁻²"), ("_j_m2", "J m⁻²"), ("_deg", "degrees"),
    ("_hpa", "hPa"), ("_du", "Dobson units"), ("_nm", "nm"), ("_s", "seconds"), ("_m", "metres"),
    ("_bytes", "bytes"), ("_fraction", "fraction (0–1)"),
)
_NAMED_UNITS = {
    "lat": "degrees north", "lon": "degrees east", "uv_index": "UV Index (dimensionless)",
    "peak_uv_index": "UV Index (dimensionless)", "cloud_oktas": "oktas (0–8)",
    "standard_erythemal_doses": "SED (100 J m⁻²)", "time": "ISO 8601 with offset",
    "start": "ISO 8601 with offset", "end": "ISO 8601 with offset",
}


# -- text -------------------------------------------------------------------------------

def inline_text(text: str) -> str:
    """Escape ``text`` and render its inline marks: ```code```, ``**strong**``."""
    parts = re.split(r"(`[^`]+`)", text)
    out = []
    for part in parts:
        if len(part) > 1 and part.startswith("`") and part.endswith("`"):
            out.append(f"<code>{escape(part[1:-1])}</code>")
        else:
            out.append(re.sub(r"\*\*(.+?)\*\*", r"<strong>\1</strong>", escape(part)))
    return "".join(out)


def prose(text: str | None) -> str:
    """A description as HTML: paragraphs at blank lines, ``- `` lines as a list."""
    if not text:
        return ""
    blocks = re.split(r"\n\s*\n", str(text).strip())
    out = []
    for block in blocks:
        lines = [line.strip() for line in block.splitlines()]
        if all(line.startswith("- ") for line in lines):
            out.append("<ul>" + "".join(f"<li>{inline_text(line[2:])}</li>" for line in lines) + "</ul>")
        else:
            out.append(f"<p>{inline_text(' '.join(lines))}</p>")
    return "".join(out)


def slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-")


def unit_of(path: str) -> str:
    """The unit a field's name states (suffix convention), for the field or the map it is in."""
    for segment in reversed([s for s in re.split(r"[.\[\]]+", path) if s and s != "{key}"]):
        if segment in _NAMED_UNITS:
            return _NAMED_UNITS[segment]
        for suffix, unit in _UNITS:
            if segment.endswith(suffix):
                return unit
        if path.endswith(segment):
            return ""
    return ""


# -- schemas ----------------------------------------------------------------------------

@dataclass
class FieldRow:
    path: str
    kind: str  # HTML
    required: bool
    constraints: str
    description: str
    origin: str = ""  # the named schema it comes from, when merged in


class SchemaWalker:
    """Turns schemas into field rows, following ``$ref`` and compositions."""

    def __init__(self, spec: dict[str, Any]):
        self.schemas: dict[str, Any] = spec.get("components", {}).get("schemas", {})

    def resolve(self, schema: Any) -> tuple[dict[str, Any], str | None]:
        if isinstance(schema, dict) and "$ref" in schema:
            name = schema["$ref"].rsplit("/", 1)[-1]
            return self.schemas.get(name, {}), name
        return (schema if isinstance(schema, dict) else {}), None

    def type_text(self, schema: Any) -> str:
        """A short HTML description of a schema's type, named schemas as links."""
        resolved, name = self.resolve(schema)
        if name is not None:
            inner = self.type_text(resolved) if not _is_structured(resolved) else "object"
            return f'<a href="#schema-{escape(name)}">{escape(name)}</a>' + (
                f" ({inner})" if inner and inner != "object" else "")
        for key, joiner in (("oneOf", " or "), ("anyOf", " or "), ("allOf", " and ")):
            if key in resolved:
                return joiner.join(self.type_text(part) for part in resolved[key])
        kind = resolved.get("type", "")
        kinds = [k for k in (kind if isinstance(kind, list) else [kind]) if k]
        nullable = "null" in kinds
        kinds = [k for k in kinds if k != "null"]
        text = " or ".join(escape(k) for k in kinds) or ("object" if "properties" in resolved else "any")
        if "array" in kinds:
            text = "array of " + self.type_text(resolved.get("items", {}))
        elif kinds == ["object"] and isinstance(resolved.get("additionalProperties"), dict) \
                and "properties" not in resolved:
            text = "map of " + self.type_text(resolved["additionalProperties"])
        if "enum" in resolved:
            text += " (one of " + ", ".join(f"<code>{escape(str(v))}</code>" for v in resolved["enum"]) + ")"
        return text + (" or null" if nullable else "")

    def constraints(self, schema: Any) -> str:
        resolved, _ = self.resolve(schema)
        parts = [template.format(resolved[key]) for key, template in _RANGE_KEYS if key in resolved]
        if resolved.get("uniqueItems"):
            parts.append("unique items")
        if "default" in resolved:
            parts.append(f"default {json.dumps(resolved['default'])}")
        return escape("; ".join(parts))

    def rows(self, schema: Any, prefix: str = "", depth: int = 0, seen: tuple[str, ...] = (),
             required: bool = False, origin: str = "") -> Iterator[FieldRow]:
        """Field rows of ``schema``: its members (and theirs), compositions merged in.

        ``oneOf``/``anyOf`` alternatives come one after another, each row saying which
        alternative it belongs to."""
        resolved, name = self.resolve(schema)
        if name is not None:
            if name in seen or depth > MAX_INLINE_DEPTH:
                return
            seen = seen + (name,)
        for part in resolved.get("allOf", ()):
            part_origin = self.resolve(part)[1] or origin
            yield from self.rows(part, prefix, depth, seen, required, part_origin)
        for key in ("oneOf", "anyOf"):
            for number, part in enumerate(resolved.get(key, ()), start=1):
                label = self.resolve(part)[1] or f"alternative {number}"
                yield from self.rows(part, prefix, depth, seen, required,
                                     f"{'one' if key == 'oneOf' else 'any'} of: {label}")
        needed = set(resolved.get("required", ()))
        for member, sub in (resolved.get("properties") or {}).items():
            path = f"{prefix}.{member}" if prefix else member
            yield from self.member(path, sub, member in needed, depth, seen, origin)
        extra = resolved.get("additionalProperties")
        if isinstance(extra, dict):
            yield from self.member(f"{prefix}.{{key}}" if prefix else "{key}", extra, False, depth, seen, origin)

    def member(self, path: str, schema: Any, required: bool, depth: int, seen: tuple[str, ...],
               origin: str) -> Iterator[FieldRow]:
        resolved, _ = self.resolve(schema)
        description = resolved.get("description", "") if isinstance(schema, dict) and "$ref" in schema \
            else (schema.get("description", "") if isinstance(schema, dict) else "")
        if isinstance(schema, dict) and "$ref" in schema and schema.get("description"):
            description = schema["description"]
        yield FieldRow(path, self.type_text(schema), required, self.constraints(schema), description, origin)
        yield from self.nested(path, schema, depth + 1, seen, origin)

    def nested(self, path: str, schema: Any, depth: int, seen: tuple[str, ...], origin: str) -> Iterator[FieldRow]:
        resolved, name = self.resolve(schema)
        if name is not None:
            if name in seen or depth > MAX_INLINE_DEPTH:
                return
            seen = seen + (name,)
        if _is_structured(resolved):
            yield from self.rows(resolved, path, depth, seen, origin=origin)
        kind = resolved.get("type")
        if kind == "array" or (isinstance(kind, list) and "array" in kind):
            items = resolved.get("items", {})
            if _is_structured(self.resolve(items)[0]):
                yield from self.rows(items, path + "[]", depth, seen, origin=origin)
        for key in ("oneOf", "anyOf", "allOf"):
            if key in resolved and not _is_structured(resolved):
                for part in resolved[key]:
                    yield from self.nested(path, part, depth, seen, origin)


def _is_structured(schema: dict[str, Any]) -> bool:
    return bool(schema.get("properties")) or any(k in schema for k in ("allOf", "oneOf", "anyOf")) \
        or isinstance(schema.get("additionalProperties"), dict)


def field_table(rows: Iterable[FieldRow], caption: str) -> str:
    body = []
    for row in rows:
        origin = f'<span class="origin">{escape(row.origin)}</span>' if row.origin else ""
        required = '<span class="required">required</span>' if row.required else "optional"
        body.append(
            f'<tr data-field="{escape(row.path)}"><th scope="row"><code>{escape(row.path)}</code>{origin}</th>'
            f"<td>{row.kind}</td><td>{escape(unit_of(row.path))}</td><td>{required}</td>"
            f"<td>{row.constraints}</td><td>{prose(row.description)}</td></tr>")
    if not body:
        return ""
    return (f'<div class="table-wrap"><table class="fields"><caption>{escape(caption)}</caption><thead><tr>'
            '<th scope="col">field</th><th scope="col">type</th><th scope="col">unit</th>'
            '<th scope="col">presence</th><th scope="col">range and format</th>'
            '<th scope="col">meaning</th></tr></thead><tbody>' + "".join(body) + "</tbody></table></div>")


# -- operations -------------------------------------------------------------------------

@dataclass
class Operation:
    path: str
    method: str
    spec: dict[str, Any]
    parameters: list[dict[str, Any]]  # references resolved

    @property
    def id(self) -> str:
        return self.spec.get("operationId") or slug(f"{self.method}-{self.path}")

    @property
    def anchor(self) -> str:
        return f"op-{self.id}"


def operations(spec: dict[str, Any]) -> list[Operation]:
    shared = spec.get("components", {}).get("parameters", {})

    def resolved(parameter: dict[str, Any]) -> dict[str, Any]:
        if "$ref" in parameter:
            return shared.get(parameter["$ref"].rsplit("/", 1)[-1], {})
        return parameter

    return [Operation(path, method, item[method], [resolved(p) for p in item[method].get("parameters") or []])
            for path, item in spec.get("paths", {}).items() for method in HTTP_METHODS if method in item]


def _parameters_html(walker: SchemaWalker, operation: Operation) -> str:
    parameters = operation.parameters
    if not parameters:
        return "<p>No parameters.</p>"
    rows = []
    for parameter in parameters:
        schema = parameter.get("schema", {})
        required = '<span class="required">required</span>' if parameter.get("required") else "optional"
        example = f"<code>{escape(str(parameter['example']))}</code>" if "example" in parameter else ""
        rows.append(
            f'<tr data-param="{escape(parameter["name"])}"><th scope="row"><code>{escape(parameter["name"])}</code>'
            f'</th><td>{escape(parameter.get("in", ""))}</td><td>{walker.type_text(schema)}</td>'
            f"<td>{escape(unit_of(parameter['name']))}</td><td>{required}</td>"
            f"<td>{walker.constraints(schema)}</td><td>{example}</td>"
            f"<td>{prose(parameter.get('description'))}</td></tr>")
    return ('<div class="table-wrap"><table class="params"><caption>Parameters</caption><thead><tr>'
            '<th scope="col">name</th><th scope="col">in</th><th scope="col">type</th>'
            '<th scope="col">unit</th><th scope="col">presence</th><th scope="col">range and format</th>'
            '<th scope="col">example</th><th scope="col">meaning</th></tr></thead><tbody>'
            + "".join(rows) + "</tbody></table></div>")


def _body_html(walker: SchemaWalker, content: dict[str, Any], what: str) -> str:
    out = []
    for media_type, media in (content or {}).items():
        schema = media.get("schema", {})
        out.append(f'<p class="media"><code>{escape(media_type)}</code>: {walker.type_text(schema)}</p>')
        resolved, _ = walker.resolve(schema)
        if resolved.get("description") and "$ref" not in schema:
            out.append(prose(resolved["description"]))
        out.append(field_table(walker.rows(schema), f"{what} fields, {media_type}"))
    return "".join(out)


def _responses_html(walker: SchemaWalker, spec: dict[str, Any], operation: Operation) -> str:
    shared = spec.get("components", {}).get("responses", {})
    rows, expanded = [], []
    for status, response in operation.spec.get("responses", {}).items():
        name = None
        if "$ref" in response:
            name = response["$ref"].rsplit("/", 1)[-1]
            response = shared.get(name, {})
        media = ", ".join(f"<code>{escape(m)}</code>: {walker.type_text(v.get('schema', {}))}"
                          for m, v in (response.get("content") or {}).items())
        headers = ", ".join(f"<code>{escape(h)}</code>" for h in (response.get("headers") or {}))
        rows.append(f'<tr><th scope="row">{escape(str(status))}</th><td>{prose(response.get("description"))}'
                    f"{'<p>Headers: ' + headers + '</p>' if headers else ''}</td><td>{media}</td></tr>")
        if str(status).startswith("2"):
            expanded.append(f"<h5>{escape(str(status))} answer</h5>"
                            + _body_html(walker, response.get("content") or {}, f"{status} answer"))
    return ('<div class="table-wrap"><table class="responses"><caption>Answers</caption><thead><tr>'
            '<th scope="col">status</th><th scope="col">meaning</th><th scope="col">body</th></tr></thead>'
            "<tbody>" + "".join(rows) + "</tbody></table></div>" + "".join(expanded))


def _examples(operation: Operation) -> list[tuple[str, str, str, str]]:
    """(name, summary, media type, body text) of each request body example."""
    content = (operation.spec.get("requestBody") or {}).get("content", {})
    found = []
    for media_type, media in content.items():
        for name, example in (media.get("examples") or {}).items():
            text = json.dumps(example.get("value"), indent=2, ensure_ascii=False)
            found.append((name, example.get("summary", name), media_type, text))
        if "example" in media:
            found.append((media_type, f"the same kind of request as {media_type}", media_type, str(media["example"])))
    return found


def _curl(base: str, operation: Operation, media_type: str | None, body: str | None, query: str = "") -> str:
    words = ["curl -s"]
    if operation.method != "get":
        words.append(f"-X {operation.method.upper()}")
    words.append(f"'{base}{operation.path}{query}'")
    if media_type:
        words.append(f"-H 'Content-Type: {media_type}'")
        if media_type == "application/json":
            words.append("-d '" + json.dumps(json.loads(body), ensure_ascii=False) + "'")
        else:
            words.append("--data-binary @- <<'BODY'\n" + body.rstrip("\n") + "\nBODY")
    return " ".join(words)


def _answer_types(operation: Operation) -> list[str]:
    return list((operation.spec.get("responses", {}).get("200") or {}).get("content", {}))


def _accept_select(ident: str, label: str, options: Sequence[str]) -> str:
    # No name: a form sent without scripts must not put it in the query.
    choices = "".join(f'<option{" selected" if number == 0 else ""}>{escape(option)}</option>'
                      for number, option in enumerate(options))
    return (f'<p class="control"><label for="{ident}">{escape(label)}</label>'
            f'<select id="{ident}" data-accept>{choices}</select></p>')


def _key_input(ident: str) -> str:
    # No name either: a key must never travel in a URL.
    return (f'<p class="control"><label for="{ident}">API key (only where the deployment asks for one; '
            f'sent as X-API-Key by the script)</label>'
            f'<input id="{ident}" data-api-key type="password" autocomplete="off" spellcheck="false"></p>')


def _result_region(ident: str) -> str:
    return (f'<div class="answer" id="{ident}" role="status" aria-live="polite" hidden>'
            f'<p class="answer-status"></p><p class="answer-caution"></p>'
            f'<div class="answer-picture"></div><pre class="answer-body" tabindex="0"></pre></div>')


def _body_form(operation: Operation, number: int, name: str, summary: str, media_type: str, text: str) -> str:
    ident = f"try-{operation.id}-{number}"
    answers = _answer_types(operation)
    return (
        f'<form class="try" id="{ident}" method="post" action="{escape(operation.path)}" '
        f'data-method="{operation.method.upper()}" data-path="{escape(operation.path)}">'
        f'<fieldset><legend>Try it: {escape(summary)}</legend>'
        f'<p class="control"><label for="{ident}-body">Request body ({escape(media_type)}; edit it freely)</label>'
        f'<textarea id="{ident}-body" name="body" rows="{min(24, text.count(chr(10)) + 2)}" '
        f'spellcheck="false">{escape(text)}</textarea></p>'
        f'<input type="hidden" data-content-type value="{escape(media_type)}">'
        + _accept_select(f"{ident}-accept", "Answer as (Accept)", answers)
        + _key_input(f"{ident}-key")
        + '<p class="control"><button type="submit" data-needs-script hidden>Send to this service</button>'
        '<span class="noscript-note">Sending from this page needs scripts; with scripts off, '
        "copy the curl command above.</span></p>"
        + _result_region(f"{ident}-answer") + "</fieldset></form>")


def _query_form(operation: Operation, number: int) -> str:
    """A GET form: its fields are the query parameters, so it works with scripts off too."""
    ident = f"try-{operation.id}-{number}"
    fields = []
    for parameter in operation.parameters:
        if parameter.get("in") != "query":
            continue
        pname = parameter["name"]
        value = parameter.get("example", "")
        fields.append(f'<p class="control"><label for="{ident}-{escape(pname)}"><code>{escape(pname)}</code>'
                      f'{" (required)" if parameter.get("required") else ""}</label>'
                      f'<input id="{ident}-{escape(pname)}" name="{escape(pname)}" value="{escape(str(value))}"'
                      f'{" required" if parameter.get("required") else ""}></p>')
    answers = _answer_types(operation)
    accept = _accept_select(f"{ident}-accept", "Answer as (Accept; sent by the script only)", answers) \
        if len(answers) > 1 else ""
    return (
        f'<form class="try" id="{ident}" method="get" action="{escape(operation.path)}" '
        f'data-method="GET" data-path="{escape(operation.path)}">'
        f'<fieldset><legend>Try it: {escape(operation.spec.get("summary", operation.path))}</legend>'
        + "".join(fields) + accept + (_key_input(f"{ident}-key") if fields else "")
        + '<p class="control"><button type="submit">Send to this service</button></p>'
        + _result_region(f"{ident}-answer") + "</fieldset></form>")


def _examples_html(base: str, operation: Operation) -> str:
    found = _examples(operation)
    out = ['<h4>Examples</h4>']
    if not found:
        query = {p["name"]: p["example"] for p in operation.parameters if "example" in p}
        suffix = ("?" + urlencode(query)) if query else ""
        out.append(f'<pre class="curl"><code>{escape(_curl(base, operation, None, None, suffix))}</code></pre>')
        if "{" not in operation.path:  # a path naming a job has no example that stays true
            out.append(_query_form(operation, 0))
        return "".join(out)
    for number, (name, summary, media_type, text) in enumerate(found):
        out.append(f'<div class="example" id="example-{escape(operation.id)}-{escape(slug(name))}">'
                   f"<h5>{inline_text(summary)}</h5>"
                   f'<pre class="example-body"><code>{escape(text)}</code></pre>'
                   f'<pre class="curl"><code>{escape(_curl(base, operation, media_type, text))}</code></pre>'
                   + _body_form(operation, number, name, summary, media_type, text) + "</div>")
    return "".join(out)


def operation_html(walker: SchemaWalker, spec: dict[str, Any], base: str, operation: Operation) -> str:
    body = operation.spec.get("requestBody")
    return (
        f'<section class="operation" id="{escape(operation.anchor)}" data-operation-id="{escape(operation.id)}" '
        f'data-method="{operation.method}" data-path="{escape(operation.path)}">'
        f'<h3><span class="method">{escape(operation.method.upper())}</span> <code>{escape(operation.path)}</code>'
        f'<span class="op-summary">{inline_text(operation.spec.get("summary", ""))}</span></h3>'
        + prose(operation.spec.get("description"))
        + "<h4>Parameters</h4>" + _parameters_html(walker, operation)
        + (("<h4>Request body</h4>" + ("<p>Required.</p>" if body.get("required") else "")
            + _body_html(walker, body.get("content", {}), "Request")) if body else "")
        + "<h4>Answers</h4>" + _responses_html(walker, spec, operation)
        + _examples_html(base, operation)
        + '<p class="to-top"><a href="#contents">Back to the contents</a></p></section>')


# -- the page ---------------------------------------------------------------------------

def _problems_html(problem_types: Sequence[ProblemType]) -> str:
    rows = "".join(
        f'<tr data-problem="{escape(p.uri)}"><th scope="row"><code>{escape(p.uri)}</code></th>'
        f"<td>{p.status or 'any'}</td><td>{escape(p.title)}</td><td>{inline_text(p.meaning)}</td>"
        f"<td>{inline_text(p.remedy)}</td></tr>" for p in problem_types)
    return ('<section id="problems"><h2>Problem types</h2><p>Every error is an RFC 9457 problem document '
            "(<code>application/problem+json</code>) with <code>type</code>, <code>title</code>, "
            "<code>status</code> and <code>detail</code>; record errors add <code>error_count</code> and "
            "<code>errors</code> (see <a href=\"#schema-Problem\">Problem</a> and "
            '<a href="#schema-FieldError">FieldError</a>). A batch with any bad record is rejected whole '
            "and every error found is listed.</p>"
            '<div class="table-wrap"><table class="problems"><caption>Problem types</caption><thead><tr>'
            '<th scope="col">type</th><th scope="col">status</th><th scope="col">title</th>'
            '<th scope="col">when</th><th scope="col">what to do</th></tr></thead><tbody>'
            + rows + "</tbody></table></div></section>")


def _cautions_html(header: str, header_text: str, figure_cautions: dict[str, str]) -> str:
    figures = "".join(f'<dt><code>{escape(name)}</code></dt><dd>{escape(text)}</dd>'
                      for name, text in figure_cautions.items())
    return (
        '<section id="cautions" aria-labelledby="cautions-title"><h2 id="cautions-title">Cautions</h2>'
        '<div class="caution-box"><p><strong>Every figure this service gives is a modelled estimate for '
        "planning.</strong> It is not a measurement, and not medical, occupational-health or agronomic "
        "advice. Real exposure depends on shade, posture, reflections, clothing and local weather; "
        "individual sensitivity varies widely. Defer to local regulations, licensed practitioners and, "
        "for crops, agronomic advice.</p></div>"
        f"<p>Every answer carries the header <code>{escape(header)}: {escape(header_text)}</code>. "
        "JSON answers with computed figures carry <code>caution</code> and <code>figure_cautions</code>; "
        "CSV answers the column <code>caution</code>, last, on every row; the pictures draw the caution "
        "on the picture. The cautions of particular figures:</p>"
        f'<dl class="figure-cautions">{figures}</dl></section>')


def _pictures_html(operations_: Sequence[Operation]) -> str:
    figures = []
    for operation in operations_:
        if "image/svg+xml" not in _answer_types(operation) or operation.method != "get":
            continue
        query = {p["name"]: p["example"] for p in operation.parameters if "example" in p}
        url = operation.path + ("?" + urlencode(query) if query else "")
        alt = operation.spec.get("summary", "")
        figures.append(
            f'<figure class="picture"><a href="{escape(url)}"><img src="{escape(url)}" alt="{escape(alt)}" '
            f'width="800" height="450"></a><figcaption>{inline_text(operation.spec.get("summary", ""))}: '
            f'<a href="#{escape(operation.anchor)}">the operation</a>, '
            f'<a href="{escape(url)}">this picture on its own</a>.</figcaption></figure>')
    if not figures:
        return ""
    return ('<section id="pictures"><h2>Pictures</h2><p>The service draws these from the same engine '
            "and the same validated inputs as the JSON answers; change the query to draw your own "
            "(the forms under each operation help).</p>" + "".join(figures) + "</section>")


def _contents_html(spec: dict[str, Any], operations_: Sequence[Operation], sections: Sequence[tuple[str, str]]) -> str:
    by_tag: dict[str, list[Operation]] = {}
    for operation in operations_:
        tag = (operation.spec.get("tags") or ["other"])[0]
        by_tag.setdefault(tag, []).append(operation)
    tags = "".join(
        f"<li>{escape(tag)}<ol>" + "".join(
            f'<li><a href="#{escape(op.anchor)}"><span class="method">{escape(op.method.upper())}</span> '
            f"<code>{escape(op.path)}</code></a></li>" for op in ops) + "</ol></li>"
        for tag, ops in by_tag.items())
    schema_links = "".join(f'<li><a href="#schema-{escape(name)}">{escape(name)}</a></li>'
                           for name in spec.get("components", {}).get("schemas", {}))
    first = "".join(f'<li><a href="#{anchor}">{escape(title)}</a></li>' for anchor, title in sections)
    return (f'<nav id="contents" aria-label="Contents"><h2>Contents</h2><ol>{first}'
            f'<li><a href="#operations">Operations</a><ol>{tags}</ol></li>'
            f'<li><a href="#schemas">Schemas</a><ol class="schema-list">{schema_links}</ol></li></ol></nav>')


def render(spec: dict[str, Any], *, problem_types: Sequence[ProblemType], caution_header: str,
           caution_header_text: str, figure_cautions: dict[str, str], stylesheet: str, script: str) -> str:
    """The whole reference page for an OpenAPI 3.1 document."""
    walker = SchemaWalker(spec)
    info = spec.get("info", {})
    title = escape(info.get("title", "API"))
    base = (spec.get("servers") or [{"url": ""}])[0]["url"].rstrip("/")
    ops = operations(spec)
    pictures = _pictures_html(ops)
    sections = [("introduction", "Introduction"), ("cautions", "Cautions")]
    if pictures:
        sections.append(("pictures", "Pictures"))
    sections.append(("problems", "Problem types"))
    schema_sections = []
    for name, schema in spec.get("components", {}).get("schemas", {}).items():
        schema_sections.append(
            f'<section class="schema" id="schema-{escape(name)}" data-schema="{escape(name)}">'
            f"<h3>{escape(name)}</h3><p class=\"kind\">{walker.type_text(schema) if not _is_structured(schema) else 'object'}"
            f"{(' — ' + walker.constraints(schema)) if walker.constraints(schema) else ''}</p>"
            + prose(schema.get("description"))
            + field_table(walker.rows(schema, seen=(name,)), f"{name} fields") + "</section>")
    return "".join([
        '<!doctype html><html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{title} {escape(str(info.get('version', '')))}: API reference</title>",
        f'<link rel="stylesheet" href="{escape(stylesheet)}">',
        f'<script src="{escape(script)}" defer></script></head><body>',
        '<a class="skip" href="#main">Skip to the reference</a>',
        f'<header class="masthead"><h1>{title} <span class="version">{escape(str(info.get("version", "")))}</span></h1>',
        f'<p class="summary">{inline_text(info.get("summary", ""))}</p>',
        '<p>Machine-readable contract: <a href="/openapi.yaml">/openapi.yaml</a> (OpenAPI 3.1).</p></header>',
        '<div class="layout">',
        _contents_html(spec, ops, sections),
        '<main id="main" tabindex="-1">',
        f'<section id="introduction"><h2>Introduction</h2>{prose(info.get("description"))}</section>',
        _cautions_html(caution_header, caution_header_text, figure_cautions),
        pictures,
        _problems_html(problem_types),
        '<section id="operations"><h2>Operations</h2>',
        "".join(operation_html(walker, spec, base, op) for op in ops),
        "</section>",
        '<section id="schemas"><h2>Schemas</h2>', "".join(schema_sections), "</section>",
        "</main></div>",
        f'<footer><p>{escape(caution_header_text)}</p></footer></body></html>',
    ])
