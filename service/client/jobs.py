"""The seam where the jobs API goes: batches too large or too long for one synchronous
call, submitted, waited for (with a progress bar) and downloaded.

The service version this client ships with offers no jobs endpoint yet, so
``Client.jobs`` is this placeholder: every method raises :class:`JobsNotAvailable` with
that said, rather than guessing at an API. When the service gains ``/v1/jobs``, this
module gets ``submit``, ``wait`` and ``download`` with the signatures below, and
``Client.jobs`` returns the real thing; the synchronous calls of :class:`Client` stay
as they are (a synchronous 413 pointing at ``/v1/jobs`` will then name this API).
"""
from __future__ import annotations

from typing import Any

from uvdose.client.errors import UvdoseError


class JobsNotAvailable(UvdoseError):
    """This client and service version have no jobs API."""


class JobsNotOffered:
    """Placeholder for the jobs API (see the module docstring)."""

    def _missing(self) -> JobsNotAvailable:
        return JobsNotAvailable("the jobs API (/v1/jobs) is not offered by this version of the client and "
                                "service; split the batch into synchronous calls (Client splits by itself)")

    def submit(self, endpoint: str, body: Any, **options: Any) -> str:
        """Submit ``body`` for ``endpoint`` as a job; its job id."""
        raise self._missing()

    def wait(self, job_id: str, *, progress: bool = True, poll_s: float = 2.0) -> dict[str, Any]:
        """Poll until the job ends (a tqdm progress bar on stderr); its final status."""
        raise self._missing()

    def download(self, job_id: str, target: str | None = None) -> Any:
        """The job's results (to ``target`` when given)."""
        raise self._missing()
