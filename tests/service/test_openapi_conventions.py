"""openapi.yaml follows the conventions that make general-purpose generators turn it into a
complete typed client (DEVELOPERS.md, "openapi.yaml conventions"), and states every range
the service enforces, read from the same marshmallow declarations the validation uses.

These checks walk the whole document, so a path or field added later is held to them too.
"""
from __future__ import annotations

from typing import Any, Iterator

import pytest
import yaml

from tests.service.conftest import SPEC_PATH

HTTP_METHODS = ("get", "put", "post", "delete", "patch", "head", "options")
# Keys whose value is data rather than a part of the document: a null there is meant.
DATA_KEYS = frozenset({"default", "example", "examples", "const", "enum", "value"})
TIME_BOUNDS = {"x-earliest": "1950-01-01T00:00:00Z", "x-before": "2101-01-01T00:00:00Z"}


def _walk(node: Any, path: str = "") -> Iterator[tuple[str, Any, Any]]:
    """(path, key, value) of every mapping entry, depth first."""
    if isinstance(node, dict):
        for key, value in node.items():
            yield f"{path}/{key}", key, value
            if key not in DATA_KEYS:
                yield from _walk(value, f"{path}/{key}")
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _walk(value, f"{path}[{index}]")


def _operations(spec: dict) -> Iterator[tuple[str, str, dict]]:
    for path, item in spec["paths"].items():
        for method, operation in item.items():
            if method in HTTP_METHODS:
                yield path, method, operation


def _media_types(spec: dict) -> Iterator[tuple[str, str, dict]]:
    """(where, media type, media type object) of every request and response body."""
    responses = spec["components"].get("responses", {})
    for path, method, operation in _operations(spec):
        for media, body in operation.get("requestBody", {}).get("content", {}).items():
            yield f"{method.upper()} {path} request", media, body
        for status, response in operation.get("responses", {}).items():
            if "$ref" in response:
                response = responses[response["$ref"].rsplit("/", 1)[-1]]
            for media, body in response.get("content", {}).items():
                yield f"{method.upper()} {path} {status}", media, body


def _resolve(spec: dict, schema: dict) -> dict:
    while "$ref" in schema:
        schema = spec["components"]["schemas"][schema["$ref"].rsplit("/", 1)[-1]]
    return schema


def _subschemas(schema: Any, path: str) -> Iterator[tuple[str, dict]]:
    """Every schema nested in ``schema`` (itself included), without following $refs."""
    if not isinstance(schema, dict):
        return
    yield path, schema
    for key in ("items", "additionalProperties", "not"):
        if isinstance(schema.get(key), dict):
            yield from _subschemas(schema[key], f"{path}/{key}")
    for name, member in schema.get("properties", {}).items():
        yield from _subschemas(member, f"{path}/properties/{name}")
    for key in ("allOf", "oneOf", "anyOf"):
        for index, part in enumerate(schema.get(key, [])):
            yield from _subschemas(part, f"{path}/{key}[{index}]")


def _all_schemas(spec: dict) -> Iterator[tuple[str, dict]]:
    for name, schema in spec["components"]["schemas"].items():
        yield from _subschemas(schema, f"#/components/schemas/{name}")


def _reachable(spec: dict, schema: dict, path: str, seen: set[str] | None = None) -> Iterator[tuple[str, dict]]:
    """Every schema reachable from ``schema``, following $refs (each named schema once)."""
    seen = set() if seen is None else seen
    for where, part in _subschemas(schema, path):
        if "$ref" in part:
            name = part["$ref"].rsplit("/", 1)[-1]
            if name not in seen:
                seen.add(name)
                yield from _reachable(spec, spec["components"]["schemas"][name], f"#/components/schemas/{name}", seen)
        else:
            yield where, part


@pytest.fixture(scope="module")
def spec() -> dict:
    return yaml.safe_load(SPEC_PATH.read_text(encoding="utf-8"))


# --- the text parses as meant --------------------------------------------------------------

def test_every_description_is_a_plain_string(spec):
    # An unquoted comma in a flow mapping (`{description: Latitude, degrees north.}`) cuts
    # the description short and leaves a stray key with a null value behind.
    wrong = []
    for path, key, value in _walk(spec):
        if key == "description" and not path.endswith("/properties/description") and not isinstance(value, str):
            wrong.append(f"{path}: {value!r}")
        elif value is None and key not in DATA_KEYS:
            wrong.append(f"{path}: a key with no value (a description cut at a comma or colon?)")
    assert not wrong, "\n".join(wrong)


def test_the_walk_finds_a_cut_description():
    cut = yaml.safe_load("a: {type: number, description: Latitude, degrees north.}")
    assert [path for path, key, value in _walk(cut) if value is None] == ["/a/degrees north."]


# --- bodies and types ----------------------------------------------------------------------

def test_every_body_is_a_named_schema(spec):
    unnamed = [f"{where} {media}" for where, media, body in _media_types(spec)
               if set(body.get("schema", {})) != {"$ref"}]
    assert not unnamed, "bodies without a named schema:\n" + "\n".join(unnamed)


def test_every_array_has_typed_items(spec):
    untyped = [path for path, schema in _all_schemas(spec)
               if schema.get("type") == "array" or "array" in (schema.get("type") or [])
               if not ({"type", "$ref", "oneOf", "allOf"} & set(schema.get("items", {})))]
    assert not untyped, "arrays without typed items:\n" + "\n".join(untyped)


def test_every_map_has_typed_values(spec):
    untyped = [path for path, schema in _all_schemas(spec)
               if isinstance(schema.get("additionalProperties"), dict)
               if not ({"type", "$ref"} & set(schema["additionalProperties"]))]
    assert not untyped, "\n".join(untyped)


def test_unions_are_of_named_object_schemas(spec):
    wrong = []
    for path, schema in _all_schemas(spec):
        for key in ("oneOf", "anyOf"):
            for index, branch in enumerate(schema.get(key, [])):
                if set(branch) != {"$ref"}:
                    wrong.append(f"{path}/{key}[{index}]: not a $ref to a named schema")
                    continue
                target = _resolve(spec, branch)
                kind = target.get("type") or (_resolve(spec, target["allOf"][0]).get("type") if "allOf" in target else None)
                if kind != "object":
                    wrong.append(f"{path}/{key}[{index}]: {branch['$ref']} is not an object schema")
    assert not wrong, "\n".join(wrong)


def test_every_request_array_states_its_limit(spec):
    unbounded = []
    for where, media, body in _media_types(spec):
        if not where.endswith("request"):
            continue
        for path, schema in _reachable(spec, body["schema"], where):
            if (schema.get("type") == "array" or "array" in (schema.get("type") or [])) and "maxItems" not in schema:
                unbounded.append(path)
    assert not unbounded, "request arrays without maxItems:\n" + "\n".join(sorted(set(unbounded)))


def test_query_options_only_where_a_body_takes_them(spec):
    # The batch endpoints read options from the query string only for CSV bodies (a JSON
    # body carries them as members); an operation with a JSON-only body takes none.
    for path, method, operation in _operations(spec):
        query = [p for p in operation.get("parameters", []) if p.get("in") == "query"]
        content = operation.get("requestBody", {}).get("content", {})
        if not query or not content:
            continue
        assert "text/csv" in content, f"{method.upper()} {path}: query options but no CSV body"
        for parameter in query:
            assert parameter["description"].startswith("For CSV bodies only"), (path, parameter["name"])


# --- ranges equal to the service's declarations --------------------------------------------

def _record_schemas():
    from uvdose.service import routes_doses, routes_ozone
    from uvdose.service.irradiance_batch import IrradianceRecordSchema

    return [
        ("IrradianceRecord", IrradianceRecordSchema, ()),
        ("OzoneRecord", routes_ozone.OzoneRecordSchema, ()),
        ("WindowRecord", routes_doses.WindowRecordSchema, ()),
        ("FieldRecord", routes_doses.FieldRecordSchema, ()),
        ("RoutePoint", routes_doses.RoutePointSchema, ()),
        ("PointRoute", routes_doses.RouteConditionsSchema, ("points",)),
        ("RouteFeatureProperties", routes_doses.RouteConditionsSchema, ("times", "stops", "gaps")),
    ]


def _column_schemas():
    from uvdose.service import routes_doses, routes_ozone
    from uvdose.service.irradiance_batch import IrradianceRecordSchema
    from uvdose.service.weather_series_table import FieldWeatherSchema, WindowWeatherSchema

    return [
        ("IrradianceRecordColumns", IrradianceRecordSchema),
        ("OzoneRecordColumns", routes_ozone.OzoneRecordSchema),
        ("DailyTable", routes_doses.DailyEntrySchema),
        ("FieldWeatherTable", FieldWeatherSchema),
        ("WindowWeatherTable", WindowWeatherSchema),
    ]


def _types(schema: dict) -> set[str]:
    kind = schema.get("type")
    return set(kind) if isinstance(kind, list) else {kind}


def _assert_states_rule(documented: dict, rule, where: str) -> None:
    expected_type = {"number": "number", "whole": "integer", "time": "string", "date": "string",
                     "text": "string", "boolean": "boolean"}[rule.kind]
    assert expected_type in _types(documented), (where, documented)
    assert ("null" in _types(documented)) == (not rule.required), where
    if rule.kind in ("number", "whole"):
        assert (documented.get("minimum"), documented.get("maximum")) == (rule.minimum, rule.maximum), where
        assert rule.max_inclusive, where
    elif rule.kind in ("time", "date"):
        from uvdose.service.record_fields import EARLIEST_TIME, TIME_BEFORE

        assert documented["format"] == ("date-time" if rule.kind == "time" else "date"), where
        assert {key: documented.get(key) for key in TIME_BOUNDS} == TIME_BOUNDS, where
        assert (rule.minimum, rule.maximum, rule.max_inclusive) == (
            EARLIEST_TIME.timestamp(), TIME_BEFORE.timestamp(), False), where
    elif rule.kind == "text":
        assert documented.get("maxLength") == rule.max_length, where


@pytest.mark.parametrize("name, schema_class, extra", _record_schemas(), ids=[n for n, _, _ in _record_schemas()])
def test_record_schema_states_what_the_service_enforces(spec, name, schema_class, extra):
    from uvdose.service.column_checks import column_rules

    record = spec["components"]["schemas"][name]
    rules = {rule.wire: rule for rule in column_rules(schema_class())}
    assert set(record["properties"]) - set(extra) == set(rules), name
    required = {wire for wire, rule in rules.items() if rule.required}
    assert set(record.get("required", [])) - set(extra) == required, name
    for wire, rule in rules.items():
        _assert_states_rule(record["properties"][wire], rule, f"{name}.{wire}")


@pytest.mark.parametrize("name, schema_class", _column_schemas(), ids=[n for n, _ in _column_schemas()])
def test_column_schema_states_what_the_service_enforces(spec, name, schema_class):
    from uvdose.service.column_checks import column_rules

    columns = spec["components"]["schemas"][name]
    rules = {rule.wire: rule for rule in column_rules(schema_class())}
    assert set(columns["properties"]) == set(rules), name
    assert set(columns["required"]) == {wire for wire, rule in rules.items() if rule.required}, name
    assert columns["additionalProperties"] is False
    for wire, rule in rules.items():
        _assert_states_rule(columns["properties"][wire]["items"], rule, f"{name}.{wire}[]")


def test_array_limits_are_the_service_limits(spec):
    from uvdose.service import routes_doses
    from uvdose.service.config import settings_from_environment

    max_records = settings_from_environment({})["UVDOSE_MAX_RECORDS"]
    schemas = spec["components"]["schemas"]

    def merged(name):
        schema = schemas[name]
        properties = dict(schema.get("properties", {}))
        for part in schema.get("allOf", []):
            properties.update(_resolve(spec, part).get("properties", {}))
        return properties

    for name in ("IrradianceRowsRequest", "OzoneRowsRequest", "WindowDosesRequest", "FieldDosesRequest"):
        assert merged(name)["records"]["maxItems"] == max_records, name
    assert merged("RouteDosesRequest")["routes"]["maxItems"] == max_records
    for name in ("IrradianceRecordColumns", "OzoneRecordColumns"):
        assert {column["maxItems"] for column in schemas[name]["properties"].values()} == {max_records}, name
    assert {column["maxItems"] for column in schemas["DailyTable"]["properties"].values()} == {
        max_records * routes_doses.MAX_SEASON_DAYS}
    max_readings = settings_from_environment({})["UVDOSE_MAX_WEATHER_READINGS"]
    for name in ("FieldWeatherTable", "WindowWeatherTable"):
        assert {column["maxItems"] for column in schemas[name]["properties"].values()} == {max_readings}, name
    points = settings_from_environment({})["UVDOSE_MAX_ROUTE_POINTS"]
    assert schemas["PointRoute"]["properties"]["points"]["maxItems"] == points
    assert schemas["RouteGeometry"]["properties"]["coordinates"]["maxItems"] == points
    assert {schemas["RouteFeatureProperties"]["properties"][name]["maxItems"]
            for name in ("times", "stops", "gaps")} == {points}
    curve = schemas["TransmittanceCurve"]["properties"]
    assert {(curve[name]["minItems"], curve[name]["maxItems"]) for name in curve} == {(2, routes_doses.MAX_CURVE_POINTS)}


def test_the_jobs_take_their_bodies_without_the_per_request_counts(spec):
    # A job takes the synchronous endpoint's body with no per-request count; the body's size
    # bounds it. Its request schemas are the synchronous ones with those counts lifted to
    # that bound, derived (tests/service/job_request_schemas.py), never edited by hand.
    from tests.service import job_request_schemas

    schemas = spec["components"]["schemas"]
    synchronous = {name: schema for name, schema in schemas.items() if not name.endswith(job_request_schemas.SUFFIX)}
    derived = job_request_schemas.derived(synchronous)
    in_file = {name: schema for name, schema in schemas.items() if name.endswith(job_request_schemas.SUFFIX)}
    assert in_file == derived, "rerun: python -m tests.service.job_request_schemas"
    counts, bound = job_request_schemas.limits()
    assert not any(key == "maxItems" and value in counts for _, key, value in _walk(derived))
    for operation in ("irradiance", "ozone", "windows", "fields", "routes"):
        body = spec["paths"][f"/v1/jobs/{operation}"]["post"]["requestBody"]["content"]["application/json"]["schema"]
        assert body["$ref"].endswith(job_request_schemas.SUFFIX) and body["$ref"].rsplit("/", 1)[1] in derived


def test_the_columns_answer_names_every_spectrum(spec):
    from uvdose.models.action_spectra import ACTION_SPECTRA

    columns = spec["components"]["schemas"]["IrradianceResultColumns"]["properties"]
    assert {name.split(".", 1)[1] for name in columns if name.startswith("effective_w_m2.")} == set(ACTION_SPECTRA)
    schemas = spec["components"]["schemas"]
    rows = schemas["IrradianceResult"]["properties"]
    # The rows' nested uncertainty object is flattened in the columns answer, like effective_w_m2.
    flat_uncertainty = set()
    for member in schemas["IrradianceUncertainty"]["properties"]:
        if member == "effective_w_m2":
            flat_uncertainty |= {f"uncertainty.effective_w_m2.{name}" for name in ACTION_SPECTRA}
        elif member == "components":
            flat_uncertainty |= {f"uncertainty.components.{part}"
                                 for part in schemas["UncertaintyComponents"]["properties"]}
        else:
            flat_uncertainty.add(f"uncertainty.{member}")
    assert set(columns) == ((set(rows) - {"effective_w_m2", "uncertainty"})
                            | {f"effective_w_m2.{name}" for name in ACTION_SPECTRA} | flat_uncertainty)


def test_the_catalogue_limits_are_documented(spec, client):
    limits = client.get("/v1/catalogue").get_json()["limits"]
    documented = spec["components"]["schemas"]["CatalogueLimits"]
    assert set(limits) == set(documented["properties"]) == set(documented["required"])
