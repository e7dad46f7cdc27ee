"""The requests openapi.yaml gives as examples, one per example of every operation.

The docs page shows these and its form sends them; the tests send them too, so an example
that stops working fails a test before a reader finds out.
"""
from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any, Iterator
from urllib.parse import urlencode

HTTP_METHODS = ("get", "put", "post", "delete", "patch")


@dataclass(frozen=True)
class Example:
    """One runnable request: method, path with its query, body bytes and media type."""

    operation_id: str
    name: str
    method: str
    path: str
    content_type: str | None = None
    body: bytes | None = None
    query: dict[str, Any] = field(default_factory=dict)

    @property
    def url(self) -> str:
        return self.path + ("?" + urlencode(self.query) if self.query else "")


def operations(spec: dict) -> Iterator[tuple[str, str, dict]]:
    """(path, method, operation) of every operation, in document order."""
    for path, item in spec["paths"].items():
        for method in HTTP_METHODS:
            if method in item:
                yield path, method, item[method]


def query_example(operation: dict) -> dict[str, Any]:
    """The query of an operation's parameter examples (those that have one)."""
    return {p["name"]: p["example"] for p in operation.get("parameters", ())
            if p.get("in") == "query" and "example" in p}


def examples(spec: dict) -> list[Example]:
    """Every example request of the document; an operation without a body is its own
    example (with its parameters' examples as the query)."""
    found = []
    for path, method, operation in operations(spec):
        content = (operation.get("requestBody") or {}).get("content", {})
        query = query_example(operation)
        if not content:
            found.append(Example(operation["operationId"], "request", method, path, query=query))
            continue
        for media_type, media in content.items():
            for name, example in (media.get("examples") or {}).items():
                found.append(Example(operation["operationId"], name, method, path, media_type,
                                     json.dumps(example["value"]).encode()))
            if "example" in media:
                found.append(Example(operation["operationId"], media_type, method, path, media_type,
                                     str(media["example"]).encode()))
    return found


def success_media_types(operation: dict) -> list[str]:
    """The media types of an operation's 200 answer."""
    return list((operation["responses"].get("200") or {}).get("content", {}))
