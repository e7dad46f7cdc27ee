"""Liveness and readiness: ``GET /livez`` and ``GET /readyz``.

``/livez`` answers as long as the process serves HTTP. ``/readyz`` answers 200 when the
engine can compute (its modules import and its precomputed tables load) and 503 when it
cannot. The cache is reported but never makes the service unready: without it the
engine still computes every record, only slower.
"""
from __future__ import annotations

import time
from typing import Any

from flask import Blueprint, current_app, jsonify

from uvdose.models import MODEL_VERSION

blueprint = Blueprint("health", __name__)

@blueprint.get("/livez")
def livez():
    return jsonify({"status": "alive"})


def engine_check() -> dict[str, Any]:
    """Import the engine and load its precomputed irradiance table when there is one.

    A table file that is not there yet is reported but does not make the engine unready
    (``models.clear_sky`` then solves every record directly, slower); a table that is
    there and fails to load does.
    """
    started = time.perf_counter()
    try:
        from uvdose.models import engine, irradiance_table  # noqa: F401  (importable is part of ready)

        try:
            irradiance_table.load_table()  # memoised: loads once per process
            table = "loaded"
        except FileNotFoundError:
            table = "missing (direct solve)"
    except Exception as error:  # readiness must report, not raise
        return {"ok": False, "error": f"{type(error).__name__}: {error}"}
    return {"ok": True, "irradiance_table": table,
            "seconds": round(time.perf_counter() - started, 4)}


def cache_check() -> dict[str, Any]:
    """Name the cache backend and say whether it answers (``None``: no backend to ask)."""
    cache = current_app.extensions.get("uvdose_cache")
    if cache is None:
        return {"backend": "none", "answers": None}
    try:
        if hasattr(cache, "status"):
            state = dict(cache.status())
        else:
            state = {"backend": type(cache).__name__, "answers": bool(cache.ping())}
    except Exception as error:  # readiness must report, not raise
        return {"backend": str(getattr(cache, "backend", type(cache).__name__)), "answers": False,
                "error": f"{type(error).__name__}: {error}"}
    state["backend"] = str(state.get("backend", type(cache).__name__))
    if state["backend"] == "off":
        state["answers"] = None
    else:
        state["answers"] = bool(state.get("answers"))
    return state


@blueprint.get("/readyz")
def readyz():
    engine = engine_check()
    cache = cache_check()
    ready = engine["ok"]
    status = "ready" if ready and cache["answers"] is not False else ("degraded" if ready else "unready")
    body = {"status": status, "model_version": MODEL_VERSION, "checks": {"engine": engine, "cache": cache}}
    return jsonify(body), (200 if ready else 503)
