"""The jobs API: batches too large or too long for one synchronous call, submitted, waited
for (with a progress bar on stderr) and downloaded.

``Client.jobs`` is a :class:`Jobs` on the client's own connection, retries and API key::

    with Client("http://uvdose:8080") as uv:
        job = uv.jobs.submit("fields", {"records": fields, "first_day": "2026-04-01",
                                        "last_day": "2026-09-30"})
        uv.jobs.wait(job)                        # the final status; a failed job raises
        uv.jobs.download(job, "season.parquet")  # or rows = list(uv.jobs.rows(job))

A job that its endpoint refused before acceptance raises the same :class:`InvalidRecords`
as the synchronous call would; a job that failed later raises it from :meth:`Jobs.wait`.
"""
from __future__ import annotations

import time
from pathlib import Path
from typing import Any, Iterator, Mapping

import orjson

from uvdose.client.errors import UvdoseError, problem_error
from uvdose.client.retries import send

OPERATIONS = ("irradiance", "ozone", "windows", "fields", "routes")
_BY_PATH = {"/v1/irradiance": "irradiance", "/v1/ozone": "ozone", "/v1/doses/windows": "windows",
            "/v1/doses/fields": "fields", "/v1/doses/routes": "routes"}
FORMATS = {"ndjson": "application/x-ndjson", "csv": "text/csv", "parquet": "application/vnd.apache.parquet"}
FINISHED = ("succeeded", "failed", "cancelled")


class JobsNotAvailable(UvdoseError):
    """The service answering has no jobs API (an older version)."""


class JobFailed(UvdoseError):
    """A job was cancelled (a failed one raises its problem as :class:`ProblemError`)."""


def _operation(name: str) -> str:
    operation = _BY_PATH.get(name, name)
    if operation not in OPERATIONS:
        raise ValueError(f"unknown operation {name!r}: one of {', '.join(OPERATIONS)} (or its endpoint's path)")
    return operation


class Jobs:
    """Jobs on the deployment of ``client`` (a :class:`uvdose.client.Client`)."""

    def __init__(self, client: Any) -> None:
        self.client = client

    def _checked(self, response) -> Any:
        if response.status_code in (404, 405) and b"urn:uvdose:problem:job-" not in response.content:
            raise JobsNotAvailable("this service offers no jobs API (/v1/jobs); split the batch into "
                                   "synchronous calls (Client splits by itself)")
        return self.client._checked(response)

    def submit(self, operation: str, body: Any, *, content_type: str = "application/json",
               options: Mapping[str, Any] | None = None) -> str:
        """Submit ``body`` (what the operation's endpoint takes: a JSON-able object, or the
        bytes of a CSV or Parquet file with its ``content_type`` and its ``options`` as the
        query) as a job of ``operation`` (``"fields"`` or ``"/v1/doses/fields"``...); its id."""
        path = f"/v1/jobs/{_operation(operation)}"
        data = body if isinstance(body, (bytes, bytearray)) else orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY)
        query = {key: ",".join(map(str, value)) if isinstance(value, (list, tuple)) else str(value)
                 for key, value in (options or {}).items()}
        request = self.client.http.build_request("POST", path, content=bytes(data), params=query,
                                                 headers={"Accept": "application/json", "Content-Type": content_type})
        return self._checked(send(self.client.http, request, self.client.retry))["id"]

    def status(self, job_id: str) -> dict[str, Any]:
        """The job's status: ``state``, ``records_done`` of ``records``, ``parts_done``,
        ``seconds_left_estimate``, ``expires``..."""
        return self._checked(self.client._request("GET", f"/v1/jobs/{job_id}"))

    def cancel(self, job_id: str) -> dict[str, Any]:
        return self._checked(self.client._request("DELETE", f"/v1/jobs/{job_id}"))

    def wait(self, job_id: str, *, progress: bool = True, poll_s: float = 2.0,
             timeout_s: float | None = None) -> dict[str, Any]:
        """Poll until the job ends (a tqdm progress bar of records on stderr); its final
        status. A failed job raises its problem; a cancelled one :class:`JobFailed`."""
        from tqdm import tqdm

        deadline = None if timeout_s is None else time.monotonic() + timeout_s
        status = self.status(job_id)
        with tqdm(total=status["records"], unit="record", disable=not progress, desc=f"job {job_id[:8]}") as bar:
            while True:
                if status["records_done"] > bar.n:
                    bar.update(status["records_done"] - bar.n)
                if status["state"] in FINISHED:
                    break
                if deadline is not None and time.monotonic() > deadline:
                    raise TimeoutError(f"job {job_id} is still {status['state']} after {timeout_s} s")
                time.sleep(poll_s)
                status = self.status(job_id)
        if status["state"] == "failed":
            problem = status.get("problem") or {"title": "The job failed"}
            raise problem_error(int(problem.get("status", 422)), problem)
        if status["state"] == "cancelled":
            raise JobFailed(f"job {job_id} was cancelled")
        return status

    def _stream(self, job_id: str, format: str, part: int | None):
        if format not in FORMATS:
            raise ValueError(f"format must be one of {', '.join(FORMATS)}")
        path = f"/v1/jobs/{job_id}/results" + ("" if part is None else f"/{part}")
        request = self.client.http.build_request("GET", path, params={"format": format},
                                                 headers={"Accept": FORMATS[format]})
        return self.client.http.send(request, stream=True)

    def download(self, job_id: str, target: str | Path, *, format: str | None = None,
                 part: int | None = None) -> Path:
        """Write the job's rows (or one part's) to ``target``, in ``format`` (default: from
        the file's extension, ``.ndjson``, ``.csv`` or ``.parquet``), streamed; its path."""
        target = Path(target)
        format = format or target.suffix.lstrip(".").lower()
        response = self._stream(job_id, format, part)
        try:
            if response.status_code != 200:
                response.read()
                self._checked(response)
            with open(target, "wb") as out:
                for chunk in response.iter_bytes():
                    out.write(chunk)
        finally:
            response.close()
        return target

    def rows(self, job_id: str, *, part: int | None = None) -> Iterator[dict[str, Any]]:
        """The job's rows (or one part's), as the synchronous answer's ``results`` hold them,
        read as they arrive."""
        response = self._stream(job_id, "ndjson", part)
        try:
            if response.status_code != 200:
                response.read()
                self._checked(response)
            for line in response.iter_lines():
                if line:
                    yield orjson.loads(line)
        finally:
            response.close()
