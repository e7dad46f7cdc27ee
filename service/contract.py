"""The OpenAPI document the service answers by: where it is, its text and data, and
whether it can be served (a readiness check).

The document travels with the package (``uvdose/service/openapi.yaml`` in the wheel and
the sdist; in the source tree that file links to the top-level ``openapi.yaml``), so an
installed service serves it from any directory. ``UVDOSE_OPENAPI_PATH`` points elsewhere.
"""
from __future__ import annotations

from functools import lru_cache
from pathlib import Path
from typing import Any

import yaml
from flask import Flask, current_app

PACKAGED = Path(__file__).resolve().parent / "openapi.yaml"


def openapi_path(app: Flask | None = None) -> Path:
    """Where the OpenAPI document is: the configured path, else the packaged copy."""
    app = app or current_app
    configured = app.config.get("UVDOSE_OPENAPI_PATH")
    return Path(configured) if configured else PACKAGED


@lru_cache(maxsize=4)
def load_document(path: str, mtime_ns: int) -> tuple[str, dict[str, Any]]:
    """The document at ``path`` as text and data (one read per version of the file)."""
    text = Path(path).read_text(encoding="utf-8")
    data = yaml.safe_load(text)
    if not isinstance(data, dict) or "openapi" not in data:
        raise ValueError(f"{path} is not an OpenAPI document")
    return text, data


def openapi_document(app: Flask | None = None) -> tuple[str, dict[str, Any]]:
    """The OpenAPI document as text and as parsed data (reloaded when the file changes)."""
    path = openapi_path(app)
    return load_document(str(path), path.stat().st_mtime_ns)


def contract_check() -> dict[str, Any]:
    """Whether ``/openapi.yaml`` and ``/docs`` can be served (for ``/readyz``)."""
    try:
        _, data = openapi_document()
    except Exception as error:  # readiness must report, not raise
        return {"ok": False, "error": f"{type(error).__name__}: {error}"}
    return {"ok": True, "version": str(data.get("info", {}).get("version", ""))}
