"""The jobs' request schemas of openapi.yaml, derived from the synchronous ones, and rewritten.

``POST /v1/jobs/<operation>`` takes exactly the body of the operation's synchronous
endpoint, but without that endpoint's per-request counts: any number of records, daily
entries or weather readings, the body's size (``UVDOSE_MAX_BODY_BYTES``, as sent or
decoded) being the bound. So each request schema of a job is the synchronous schema with
every array bounded by a per-request count (``UVDOSE_MAX_RECORDS``, records × season days,
``UVDOSE_MAX_WEATHER_READINGS``) bounded by the body instead: an array item takes at least
two bytes of it (one character and a comma), so ``UVDOSE_MAX_BODY_BYTES // 2`` items.
Those schemas, and every schema that refers to one of them, are copied as
``<name>ForJobs``; the rest (records, options, routes' points) are shared.

``python -m tests.service.job_request_schemas`` rewrites the generated block at the end of
openapi.yaml; tests/service/test_openapi_conventions.py holds the block to :func:`derived`.
"""
from __future__ import annotations

import copy
import re
import sys
from typing import Any

import yaml

from tests.service.conftest import SPEC_PATH

JOB_ROOTS = ("IrradianceRequest", "OzoneRequest", "WindowDosesRequest", "FieldDosesRequest", "RouteDosesRequest")
SUFFIX = "ForJobs"
BLOCK_START = "    # --- generated: the jobs' request schemas"
BLOCK_HEADER = f"""{BLOCK_START} (python -m tests.service.job_request_schemas) ---
    # The synchronous request schemas above with their per-request array counts bounded by
    # the body instead (UVDOSE_MAX_BODY_BYTES // 2 items); edit those, then rerun.
"""
REF_PREFIX = "#/components/schemas/"
ARRAY_NOTE = ("In a job, any number within the body's size (`UVDOSE_MAX_BODY_BYTES`, default 16 MiB, "
              "as sent or decoded).")
# The synchronous counts as the schemas' descriptions state them, and what a job says instead.
_STATED_COUNTS = (
    (re.compile(r"\(at most\s+`UVDOSE_MAX_RECORDS`, default [\d  ]+\)"), "(any length within the body's size)"),
    (re.compile(r"At most\s+`UVDOSE_MAX_WEATHER_READINGS`\s+entries\s+\(default [\d  ]+\)\."),
     "Any number of entries within the body's size."),
)


def limits() -> tuple[set[int], int]:
    """(the per-request array counts of the synchronous schemas, the jobs' array bound)."""
    from uvdose.service import routes_doses
    from uvdose.service.config import settings_from_environment

    settings = settings_from_environment({})
    records = settings["UVDOSE_MAX_RECORDS"]
    counts = {records, records * routes_doses.MAX_SEASON_DAYS, settings["UVDOSE_MAX_WEATHER_READINGS"]}
    return counts, settings["MAX_CONTENT_LENGTH"] // 2  # UVDOSE_MAX_BODY_BYTES


def _refs(node: Any) -> set[str]:
    if isinstance(node, dict):
        found = {node["$ref"][len(REF_PREFIX):]} if isinstance(node.get("$ref"), str) else set()
        return found.union(*(_refs(value) for value in node.values()))
    if isinstance(node, list):
        return set().union(*(_refs(value) for value in node))
    return set()


def _counted_arrays(node: Any, counts: set[int]) -> bool:
    """Whether ``node`` itself (not through a reference) holds an array bounded by a count."""
    if isinstance(node, dict):
        if node.get("maxItems") in counts:
            return True
        return any(_counted_arrays(value, counts) for key, value in node.items() if key != "$ref")
    if isinstance(node, list):
        return any(_counted_arrays(value, counts) for value in node)
    return False


def _rewritten(node: Any, copied: set[str], counts: set[int], bound: int) -> Any:
    if isinstance(node, dict):
        out = {}
        for key, value in node.items():
            if key == "$ref" and value[len(REF_PREFIX):] in copied:
                out[key] = value + SUFFIX
            elif key == "description" and isinstance(value, str):
                for stated, instead in _STATED_COUNTS:
                    value = stated.sub(instead, value)
                out[key] = value
            else:
                out[key] = _rewritten(value, copied, counts, bound)
        if out.get("maxItems") in counts:
            out["maxItems"] = bound
            # A description that states the synchronous count gives way to the jobs' bound.
            if out.get("description", "").startswith("At most `UVDOSE_MAX_"):
                out["description"] = ARRAY_NOTE
        return out
    if isinstance(node, list):
        return [_rewritten(value, copied, counts, bound) for value in node]
    return node


def derived(schemas: dict[str, Any]) -> dict[str, Any]:
    """The jobs' request schemas, by name, from the synchronous ``schemas`` (those without
    the suffix)."""
    counts, bound = limits()
    reachable, todo = set(), list(JOB_ROOTS)
    while todo:
        name = todo.pop()
        if name not in reachable:
            reachable.add(name)
            todo.extend(_refs(schemas[name]))
    copied = {name for name in reachable if _counted_arrays(schemas[name], counts)}
    while True:  # and every schema that refers to a copied one
        more = {name for name in reachable - copied if _refs(schemas[name]) & copied}
        if not more:
            break
        copied |= more
    return {name + SUFFIX: _rewritten(copy.deepcopy(schemas[name]), copied, counts, bound)
            for name in sorted(copied, key=list(schemas).index)}


class _Dumper(yaml.SafeDumper):
    """Text of several lines as a literal block, as the hand-written schemas have it."""


_Dumper.add_representer(str, lambda dumper, text: dumper.represent_scalar(
    "tag:yaml.org,2002:str", text, style="|" if "\n" in text else None))


def block(schemas: dict[str, Any]) -> str:
    text = yaml.dump(derived(schemas), Dumper=_Dumper, sort_keys=False, allow_unicode=True, width=110)
    return BLOCK_HEADER + "".join(f"    {line}\n" if line else "\n" for line in text.splitlines())


def rewrite() -> bool:
    """Put today's derived block at the end of openapi.yaml; whether the file changed."""
    text = SPEC_PATH.read_text(encoding="utf-8")
    head = text.split(BLOCK_START, 1)[0].rstrip("\n") + "\n"
    schemas = {name: schema for name, schema in yaml.safe_load(head)["components"]["schemas"].items()}
    new = head + block(schemas)
    if new != text:
        SPEC_PATH.write_text(new, encoding="utf-8")
    return new != text


if __name__ == "__main__":
    changed = rewrite()
    print("openapi.yaml: jobs' request schemas " + ("rewritten" if changed else "already current"))
    sys.exit(0)
