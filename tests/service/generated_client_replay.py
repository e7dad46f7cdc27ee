"""Replay request examples through a client generated from openapi.yaml (run by
tests/service/test_generated_client.py inside the environment the generated package is
installed in; it needs only that package and the standard library).

``python generated_client_replay.py PLAN.json`` where the plan holds the package name,
the base URL, the names of the schemas that are maps by design, and one entry per
example: the generated operation module, the body's candidate model classes (in the
document's order), the expected answer classes, the query options and the body. Each
example is sent with the generated operation function; the answer must parse into one of
the expected generated models, with nothing left over (no model holds members its schema
does not declare, except the maps) and nothing lost (the parsed model serialises back to
the JSON the server sent). Prints one JSON object per example.
"""
from __future__ import annotations

import datetime as dt
import importlib
import io
import json
import sys
import urllib.parse
from typing import Any


def _normalised(value: Any) -> Any:
    """JSON values with ISO 8601 texts as instants, so ``...Z`` equals ``...+00:00``."""
    if isinstance(value, dict):
        return {key: _normalised(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_normalised(item) for item in value]
    if isinstance(value, str) and len(value) >= 10 and value[4:5] == "-" and value[7:8] == "-":
        try:
            return dt.datetime.fromisoformat(value.replace("Z", "+00:00"))
        except ValueError:
            return value
    return value


def _leftovers(obj: Any, maps: set[str], path: str = "") -> list[str]:
    """Paths of generated models holding members their schema does not declare."""
    import attrs

    found = []
    if isinstance(obj, list):
        for index, item in enumerate(obj):
            found += _leftovers(item, maps, f"{path}[{index}]")
    elif attrs.has(type(obj)):
        extra = getattr(obj, "additional_properties", None)
        if extra and type(obj).__name__ not in maps:
            found.append(f"{path or type(obj).__name__}: {sorted(extra)}")
        for field in attrs.fields(type(obj)):
            if field.name != "additional_properties":
                found += _leftovers(getattr(obj, field.name), maps, f"{path}.{field.name}")
    return found


def _body(package: str, example: dict) -> Any:
    types = importlib.import_module(f"{package}.types")
    if example["csv"]:
        return types.File(payload=io.BytesIO(example["body"].encode()), mime_type="text/csv")
    if example["body"] is None:
        return None
    data = json.loads(example["body"])
    models = importlib.import_module(f"{package}.models")
    for name in example["body_models"]:
        try:
            body = getattr(models, name).from_dict(data)
        except (KeyError, TypeError, ValueError, AttributeError):
            continue
        if _normalised(body.to_dict()) == _normalised(data):
            return body
    raise AssertionError(f"no generated model takes the body of {example['path']} whole")


def replay(plan: dict) -> list[dict]:
    package = plan["package"]
    client_module = importlib.import_module(f"{package}.client")
    models = importlib.import_module(f"{package}.models")
    client = client_module.Client(base_url=plan["base_url"], timeout=120)
    maps = set(plan["maps"])
    outcomes = []
    for example in plan["examples"]:
        operation = importlib.import_module(f"{package}.api.{example['module']}")
        kwargs = {key: value for key, value in urllib.parse.parse_qsl(example["query"])}
        body = _body(package, example)
        if body is not None:
            kwargs["body"] = body
        response = operation.sync_detailed(client=client, **kwargs)
        parsed = response.parsed
        expected = tuple(getattr(models, name) for name in example["answer_models"])
        outcome = {"path": example["path"], "status": int(response.status_code),
                   "parsed_as": type(parsed).__name__, "parsed": isinstance(parsed, expected)}
        if outcome["parsed"]:
            outcome["leftovers"] = _leftovers(parsed, maps)
            outcome["round_trip"] = _normalised(parsed.to_dict()) == _normalised(json.loads(response.content))
            if type(parsed).__name__ == "Problem":
                outcome["errors"] = [type(error).__name__ for error in parsed.errors]
        outcomes.append(outcome)
    return outcomes


if __name__ == "__main__":
    with open(sys.argv[1], encoding="utf-8") as plan_file:
        print(json.dumps(replay(json.load(plan_file))))
