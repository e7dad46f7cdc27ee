"""What goes wrong, as exceptions that carry the service's problem document.

The service answers every error with an RFC 9457 problem document; :class:`ProblemError`
keeps it whole (``problem``) and its record errors as :class:`RecordProblem` entries
(``errors``: index, id, field, reason). When the client split a batch, each ``index``
is the record's position in the batch you passed, not in the part that was sent.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping


@dataclass(frozen=True)
class RecordProblem:
    """One error in one record (``index``, ``id``) or in the request options (``index`` None)."""

    index: int | None
    id: str | None
    field: str
    reason: str

    @classmethod
    def from_entry(cls, entry: Mapping[str, Any]) -> "RecordProblem":
        return cls(entry.get("index"), entry.get("id"), str(entry.get("field", "")), str(entry.get("reason", "")))


class UvdoseError(Exception):
    """Anything the client reports."""


class ConnectionFailed(UvdoseError):
    """The service could not be reached, every attempt the retry policy allows."""


class InconsistentAnswer(UvdoseError):
    """The parts of a split batch do not fit together (another model version answered one
    part, or a part came back with other record ids than were sent)."""


class ProblemError(UvdoseError):
    """The service answered with a problem document (``status``, ``problem``, ``errors``)."""

    def __init__(self, status: int, problem: Mapping[str, Any], errors: list[RecordProblem] | None = None) -> None:
        self.status = status
        self.problem = dict(problem)
        self.type = str(problem.get("type", "about:blank"))
        self.title = str(problem.get("title", ""))
        self.detail = problem.get("detail")
        self.errors = errors if errors is not None else [RecordProblem.from_entry(e) for e in problem.get("errors", [])]
        super().__init__(self._text())

    def _text(self) -> str:
        text = f"{self.status} {self.title}" + (f": {self.detail}" if self.detail else "")
        shown = "; ".join(f"[{e.index}] {e.field}: {e.reason}" if e.index is not None else f"{e.field}: {e.reason}"
                          for e in self.errors[:5])
        more = f" (and {len(self.errors) - 5} more)" if len(self.errors) > 5 else ""
        return text + (f" — {shown}{more}" if shown else "")


class InvalidRecords(ProblemError):
    """422: records or options are invalid; nothing was computed."""


class TooLarge(ProblemError):
    """413: a single record (or route) is more than one request may carry."""


class NotAcceptable(ProblemError):
    """406: the resource cannot answer in the media type asked for."""


class Unauthorized(ProblemError):
    """401: the deployment wants an API key, and got none or one it does not accept."""


class Busy(ProblemError):
    """429 or 503 after every retry the policy allows."""


_BY_STATUS = {422: InvalidRecords, 413: TooLarge, 406: NotAcceptable, 401: Unauthorized, 429: Busy, 503: Busy}


def problem_error(status: int, problem: Mapping[str, Any], errors: list[RecordProblem] | None = None) -> ProblemError:
    """The :class:`ProblemError` subclass for ``status``."""
    return _BY_STATUS.get(status, ProblemError)(status, problem, errors)
