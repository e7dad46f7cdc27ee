"""The uvdose service from Python: :class:`Client`, one typed method per endpoint.

Batches of any length go out in the column layout (``{"columns": ...}``, the fastest the
service reads and writes) where the endpoint takes it, split under the limits the
deployment's catalogue reports, and come back put together in the order given; see
:mod:`uvdose.client.parts`. Connection errors, 429 and 503 are retried with backoff
(:mod:`uvdose.client.retries`); every other error raises a :class:`ProblemError` with the
service's problem document. Answers arrive gzip- or zstd-coded when httpx can decode
them (it asks by itself).

>>> with Client("http://127.0.0.1:8080") as uv:                          # doctest: +SKIP
...     answer = uv.irradiance({"time": ["2026-06-21T13:30:00+02:00"], "lat": [44.05], "lon": [4.92]})
...     answer.columns["uv_index"]
"""
from __future__ import annotations

import re
import threading
from datetime import date
from typing import Any, Callable, Mapping, Sequence

import httpx
import orjson

from uvdose.client import parts as batch_parts
from uvdose.client.answers import Catalogue, DoseAnswer, IrradianceAnswer, Limits, OzoneAnswer, Readiness
from uvdose.client.errors import InconsistentAnswer, RecordProblem, problem_error
from uvdose.client.jobs import Jobs
from uvdose.client.retries import RetryPolicy, send
from uvdose.client.tables import Columns, as_columns, as_records, column_length

JSON = "application/json"


def _dumps(body: Any) -> bytes:
    return orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY)


def _given(**options: Any) -> dict[str, Any]:
    """The options a call was given (``None`` means "use the service's default")."""
    return {name: value for name, value in options.items() if value is not None}


def _check_size(path: str, part: "batch_parts.Part", body: bytes, limits: Limits) -> None:
    if len(body) > limits.max_body_bytes:
        raise batch_parts.BodyTooLarge(f"{path}: records {part.start}–{part.stop - 1} make a body of {len(body)} "
                                       f"bytes; this deployment takes at most {limits.max_body_bytes} (max_body_bytes)")


def _shifted(problem_errors: list[dict[str, Any]], offset: int,
             path: Callable[[str], str] = lambda field: field) -> list[RecordProblem]:
    out = []
    for entry in problem_errors:
        index = entry.get("index")
        out.append(RecordProblem(None if index is None else index + offset, entry.get("id"),
                                 path(str(entry.get("field", ""))), str(entry.get("reason", ""))))
    return out


class Client:
    """A client of one uvdose deployment.

    ``parallel``: parts of a split batch sent at once (one per gunicorn worker is plenty).
    ``http``: an ``httpx.Client`` of your own (its base URL is then used as given).
    """

    def __init__(self, base_url: str = "http://127.0.0.1:8080", *, api_key: str | None = None,
                 timeout_s: float = 300.0, retry: RetryPolicy | None = None, parallel: int = 1,
                 http: httpx.Client | None = None) -> None:
        headers = {"X-API-Key": api_key} if api_key else {}
        self.http = http or httpx.Client(base_url=base_url, timeout=timeout_s, headers=headers)
        self.retry = retry or RetryPolicy()
        self.parallel = max(1, int(parallel))
        self._catalogue: Catalogue | None = None
        self._catalogue_lock = threading.Lock()

    # -- plumbing ---------------------------------------------------------------------------

    def close(self) -> None:
        self.http.close()

    def __enter__(self) -> "Client":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def _request(self, method: str, path: str, *, body: bytes | None = None,
                 headers: Mapping[str, str] | None = None) -> httpx.Response:
        all_headers = {"Accept": JSON, **(headers or {})}
        if body is not None:
            all_headers["Content-Type"] = JSON
        request = self.http.build_request(method, path, content=body, headers=all_headers)
        return send(self.http, request, self.retry)

    @staticmethod
    def _checked(response: httpx.Response, errors: Callable[[list[dict]], list[RecordProblem]] | None = None) -> Any:
        """The JSON of a successful answer; a :class:`ProblemError` for any other."""
        if response.status_code < 400 and response.status_code != 304:
            return orjson.loads(response.content)
        try:
            problem = orjson.loads(response.content)
        except orjson.JSONDecodeError:
            problem = {"title": response.reason_phrase, "detail": response.text[:500]}
        if not isinstance(problem, dict):
            problem = {"title": response.reason_phrase}
        translated = errors(problem.get("errors", [])) if errors else None
        raise problem_error(response.status_code, problem, translated)

    def _text(self, path: str, accept: str) -> str:
        response = self._request("GET", path, headers={"Accept": accept})
        if response.status_code >= 400:
            self._checked(response)
        return response.text

    # -- reference and operations ----------------------------------------------------------

    def catalogue(self, refresh: bool = False) -> Catalogue:
        """``GET /v1/catalogue``, kept and revalidated with its ETag (a 304 costs no body)."""
        with self._catalogue_lock:
            held = self._catalogue
            if held is not None and not refresh:
                return held
            headers = {"If-None-Match": held.etag} if held is not None and held.etag else {}
            response = self._request("GET", "/v1/catalogue", headers=headers)
            if response.status_code == 304 and held is not None:
                return held
            self._catalogue = Catalogue.from_json(self._checked(response), response.headers.get("ETag"))
            return self._catalogue

    def limits(self) -> Limits:
        return self.catalogue().limits

    def readiness(self) -> Readiness:
        """``GET /readyz`` (a 503 is an answer here, not an error: ``ready`` is then false)."""
        response = self._request("GET", "/readyz")
        body = orjson.loads(response.content) if response.status_code in (200, 503) else self._checked(response)
        return Readiness(body["status"], body["model_version"], body["checks"])

    def liveness(self) -> str:
        return self._checked(self._request("GET", "/livez"))["status"]

    def openapi(self) -> str:
        """The contract, ``GET /openapi.yaml``."""
        return self._text("/openapi.yaml", "application/yaml")

    def metrics(self) -> str:
        return self._text("/metrics", "text/plain")

    @property
    def jobs(self) -> Jobs:
        """The jobs API for batches too large for one synchronous call (see :mod:`uvdose.client.jobs`)."""
        return Jobs(self)

    # -- batches in columns ----------------------------------------------------------------

    def _columns_batch(self, path: str, columns: Columns, options: dict[str, Any]) -> tuple[Columns, dict]:
        n = column_length(columns)
        if n == 0:
            raise ValueError("the batch is empty")
        limits = self.limits()
        ids = columns.get("id")

        def send_part(part: batch_parts.Part) -> dict:
            piece = {name: values[part.start:part.stop] for name, values in columns.items()}
            body = _dumps({"columns": piece, **options})
            _check_size(path, part, body, limits)
            answer = self._checked(self._request("POST", path, body=body),
                                   lambda errors: _shifted(errors, part.start))
            got = answer["columns"]
            sent_ids = ids[part.start:part.stop] if ids is not None else None
            if column_length(got) != len(part) or (sent_ids is not None and got.get("id") != sent_ids):
                raise InconsistentAnswer(f"{path}: records {part.start}–{part.stop - 1} came back other than sent")
            return answer

        answered = batch_parts.run(batch_parts.plan(n, limits.max_records), send_part, self.parallel)
        return _joined_columns([answer for _, answer in answered], path)

    def irradiance(self, data: Any, *, spectra: Sequence[str] | None = None, include_spectrum: bool | None = None,
                   ozone_climatology: str | None = None, options: Mapping[str, Any] | None = None) -> IrradianceAnswer:
        """``POST /v1/irradiance`` for records, columns or a DataFrame of any length.

        ``options``: further request members, passed as given (for options newer than
        this client)."""
        given = _given(spectra=list(spectra) if spectra is not None else None, include_spectrum=include_spectrum,
                       ozone_climatology=ozone_climatology, **(options or {}))
        columns, envelope = self._columns_batch("/v1/irradiance", as_columns(data), given)
        return IrradianceAnswer(envelope["model_version"], envelope["caution"], columns, envelope,
                                spectra=list(envelope.get("spectra", [])), wavelength_nm=envelope.get("wavelength_nm"))

    def ozone(self, data: Any, *, ozone_climatology: str | None = None,
              options: Mapping[str, Any] | None = None) -> OzoneAnswer:
        """``POST /v1/ozone`` for records, columns or a DataFrame of any length."""
        given = _given(ozone_climatology=ozone_climatology, **(options or {}))
        columns, envelope = self._columns_batch("/v1/ozone", as_columns(data), given)
        return OzoneAnswer(envelope["model_version"], envelope["caution"], columns, envelope,
                           ozone_grids=list(envelope.get("ozone_grids", [])))

    # -- batches in rows (the dose endpoints) ----------------------------------------------

    def _rows_batch(self, path: str, member: str, rows: list[dict[str, Any]], options: dict[str, Any],
                    extra: Callable[[batch_parts.Part], tuple[dict[str, Any], Callable[[str], str]]] | None = None
                    ) -> DoseAnswer:
        if not rows:
            raise ValueError("the batch is empty")
        limits = self.limits()

        def send_part(part: batch_parts.Part) -> dict:
            more, rename = extra(part) if extra else ({}, _route_paths(member, part.start))
            body = _dumps({member: rows[part.start:part.stop], **options, **more})
            _check_size(path, part, body, limits)
            answer = self._checked(self._request("POST", path, body=body),
                                   lambda errors: _shifted(errors, part.start, rename))
            if len(answer["results"]) != len(part):
                raise InconsistentAnswer(f"{path}: {len(part)} {member} sent, {len(answer['results'])} answered")
            return answer

        answered = [answer for _, answer in batch_parts.run(batch_parts.plan(len(rows), limits.max_records),
                                                            send_part, self.parallel)]
        envelope = _common_envelope(answered, path)
        envelope["samples"] = sum(answer.get("samples", 0) for answer in answered)
        results = [result for answer in answered for result in answer["results"]]
        envelope.pop("results", None)
        return DoseAnswer(envelope["model_version"], envelope["caution"], results, envelope)

    def window_doses(self, records: Any, *, spectra: Sequence[str] | None = None, step_s: float | None = None,
                     glazing: str | None = None, transmittance_curve: Mapping[str, Sequence[float]] | None = None,
                     ozone_climatology: str | None = None, options: Mapping[str, Any] | None = None) -> DoseAnswer:
        """``POST /v1/doses/windows``: doses over time windows (records, columns or a DataFrame)."""
        given = _given(spectra=list(spectra) if spectra is not None else None, step_s=step_s, glazing=glazing,
                       transmittance_curve=transmittance_curve, ozone_climatology=ozone_climatology,
                       **(options or {}))
        return self._rows_batch("/v1/doses/windows", "records", as_records(records), given)

    def field_doses(self, records: Any, first_day: str | date, last_day: str | date, *, daily: Any = None,
                    spectra: Sequence[str] | None = None, step_s: float | None = None, glazing: str | None = None,
                    transmittance_curve: Mapping[str, Sequence[float]] | None = None,
                    ozone_climatology: str | None = None, options: Mapping[str, Any] | None = None) -> DoseAnswer:
        """``POST /v1/doses/fields``: daily and season doses for fields; ``daily`` (columns or
        a DataFrame with ``field`` = record index) goes with the fields it names."""
        given = _given(first_day=str(first_day), last_day=str(last_day),
                       spectra=list(spectra) if spectra is not None else None, step_s=step_s, glazing=glazing,
                       transmittance_curve=transmittance_curve, ozone_climatology=ozone_climatology,
                       **(options or {}))
        table = as_columns(daily) if daily is not None else None
        return self._rows_batch("/v1/doses/fields", "records", as_records(records), given,
                                extra=(lambda part: _daily_part(table, part)) if table is not None else None)

    def route_doses(self, routes: Sequence[Mapping[str, Any]], *, driver_side: str | None = None,
                    roof_cutoff_elevation_deg: float | None = None, cab_sky_view_factor: float | None = None,
                    spectra: Sequence[str] | None = None, step_s: float | None = None, glazing: str | None = None,
                    transmittance_curve: Mapping[str, Sequence[float]] | None = None,
                    ozone_climatology: str | None = None, options: Mapping[str, Any] | None = None) -> DoseAnswer:
        """``POST /v1/doses/routes``: in-cab doses along routes (point lists or GeoJSON Features)."""
        given = _given(driver_side=driver_side, roof_cutoff_elevation_deg=roof_cutoff_elevation_deg,
                       cab_sky_view_factor=cab_sky_view_factor, spectra=list(spectra) if spectra is not None else None,
                       step_s=step_s, glazing=glazing, transmittance_curve=transmittance_curve,
                       ozone_climatology=ozone_climatology, **(options or {}))
        return self._rows_batch("/v1/doses/routes", "routes", [dict(route) for route in routes], given)


# -- putting parts together ----------------------------------------------------------------

def _common_envelope(answers: list[dict], path: str) -> dict[str, Any]:
    """The members of the first answer besides its records; every part must share its model."""
    versions = {answer["model_version"] for answer in answers}
    if len(versions) > 1:
        raise InconsistentAnswer(f"{path}: parts of the batch were answered by model versions {sorted(versions)} "
                                 "(a deployment changed during the batch); send it again")
    return {key: value for key, value in answers[0].items() if key != "columns"}


def _joined_columns(answers: list[dict], path: str) -> tuple[Columns, dict[str, Any]]:
    envelope = _common_envelope(answers, path)
    if len(answers) == 1:
        return answers[0]["columns"], envelope
    columns: Columns = {name: [] for name in answers[0]["columns"]}
    for answer in answers:
        for name, values in answer["columns"].items():
            columns[name].extend(values)
    return columns, envelope


_INDEXED = re.compile(r"^(\w+)\[(\d+)\]")


def _route_paths(member: str, offset: int) -> Callable[[str], str]:
    """Renames ``routes[3].points[7].lat`` of a part to the route's place in the batch."""
    def rename(field: str) -> str:
        found = _INDEXED.match(field)
        if found and found.group(1) == member:
            return f"{member}[{int(found.group(2)) + offset}]{field[found.end():]}"
        return field

    return rename


def _daily_part(table: Columns, part: batch_parts.Part) -> tuple[dict[str, Any], Callable[[str], str]]:
    """The ``daily`` entries of the fields in ``part`` (their ``field`` counted in the part),
    and the renaming of ``daily.<column>[i]`` back to the caller's entry numbers."""
    fields = table.get("field", [])
    chosen = [i for i, f in enumerate(fields) if isinstance(f, int) and part.start <= f < part.stop]
    piece = {name: [values[i] for i in chosen] for name, values in table.items()}
    piece["field"] = [fields[i] - part.start for i in chosen]

    def rename(field: str) -> str:
        found = re.match(r"^daily\.(\w+)\[(\d+)\]", field)
        if found and int(found.group(2)) < len(chosen):
            return f"daily.{found.group(1)}[{chosen[int(found.group(2))]}]{field[found.end():]}"
        return field

    return ({"daily": piece} if chosen else {}), rename

