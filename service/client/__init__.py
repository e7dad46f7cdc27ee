"""``uvdose.client``: the first-party Python client of the uvdose service (on httpx).

Typed calls for every endpoint; batches of any length split under the deployment's
limits and put back together in order; the column layout on the wire; retries with
exponential backoff and jitter on connection errors, 429 and 503 only; records, columns
or pandas DataFrames in, rows or DataFrames out; errors that carry the service's problem
document. The answers are estimates for planning, not measurements, and not medical or
occupational-health advice; each carries the service's ``caution``.
"""
from uvdose.client.answers import (Catalogue, ColumnsAnswer, DoseAnswer, IrradianceAnswer, Limits, OzoneAnswer,
                                   Readiness)
from uvdose.client.api import Client
from uvdose.client.errors import (Busy, ConnectionFailed, InconsistentAnswer, InvalidRecords, NotAcceptable,
                                  ProblemError, RecordProblem, TooLarge, Unauthorized, UvdoseError)
from uvdose.client.jobs import JobFailed, Jobs, JobsNotAvailable
from uvdose.client.parts import BodyTooLarge
from uvdose.client.retries import NO_RETRY, RetryPolicy

__all__ = [
    "BodyTooLarge", "Busy", "Catalogue", "Client", "ColumnsAnswer", "ConnectionFailed", "DoseAnswer", "InconsistentAnswer",
    "InvalidRecords", "IrradianceAnswer", "JobFailed", "Jobs", "JobsNotAvailable", "Limits", "NO_RETRY", "NotAcceptable", "OzoneAnswer",
    "ProblemError", "Readiness", "RecordProblem", "RetryPolicy", "TooLarge", "Unauthorized", "UvdoseError",
]
