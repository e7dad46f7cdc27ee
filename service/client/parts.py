"""A batch of any length as requests the service takes: split under its limits, sent (in
parallel if asked), and put back together in the caller's order.

Parts are planned from the limits the catalogue reports (``max_records``; a part whose
body would pass ``max_body_bytes`` is halved before it is sent). A part the service still
finds too large (413: the full-solve bound, or any bound of work the deployment sets) is
halved and sent again, down to one record, so a batch never fails on a limit the client
could not know in advance. Record errors (422) of every part are gathered and raised
once, with each index counted in the whole batch, as the service would for one request.
"""
from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Callable, TypeVar

from uvdose.client.errors import InvalidRecords, TooLarge, UvdoseError

T = TypeVar("T")


@dataclass(frozen=True)
class Part:
    """Records ``start`` (inclusive) to ``stop`` (exclusive) of the caller's batch."""

    start: int
    stop: int

    def __len__(self) -> int:
        return self.stop - self.start

    def halves(self) -> tuple["Part", "Part"]:
        middle = self.start + len(self) // 2
        return Part(self.start, middle), Part(middle, self.stop)


def plan(n: int, max_records: int) -> list[Part]:
    """Consecutive parts of at most ``max_records`` records, of near-equal size."""
    if n <= 0:
        return []
    count = -(-n // max_records)
    size = -(-n // count)
    return [Part(start, min(start + size, n)) for start in range(0, n, size)]


class BodyTooLarge(UvdoseError):
    """A part's body would pass the deployment's ``max_body_bytes`` (halved if it can be;
    raised to the caller when one record alone is too large)."""


def run(parts: list[Part], send: Callable[[Part], T], parallel: int = 1) -> list[tuple[Part, T]]:
    """``send`` every part; the answers in batch order, as (part, answer) pairs.

    ``send`` raises :class:`BodyTooLarge` or :class:`TooLarge` to have a part halved, and
    :class:`InvalidRecords` with batch-wide indices for its record errors; those of all
    parts are raised together at the end.
    """

    def one(part: Part) -> list[tuple[Part, T]]:
        try:
            return [(part, send(part))]
        except (BodyTooLarge, TooLarge):
            if len(part) < 2:
                raise
            left, right = part.halves()
            return one(left) + one(right)

    def guarded(part: Part) -> list[tuple[Part, T]] | InvalidRecords:
        try:
            return one(part)
        except InvalidRecords as invalid:
            return invalid

    if parallel > 1 and len(parts) > 1:
        with ThreadPoolExecutor(max_workers=min(parallel, len(parts))) as pool:
            outcomes = list(pool.map(guarded, parts))
    else:
        outcomes = [guarded(part) for part in parts]
    invalid = [outcome for outcome in outcomes if isinstance(outcome, InvalidRecords)]
    if invalid:
        raise merged(invalid)
    return [pair for outcome in outcomes for pair in outcome]


def merged(invalid: list[InvalidRecords]) -> InvalidRecords:
    """One 422 for the whole batch from those of its parts."""
    if len(invalid) == 1:
        return invalid[0]
    errors = [error for part in invalid for error in part.errors]
    errors.sort(key=lambda e: (-1 if e.index is None else e.index))
    problem = dict(invalid[0].problem)
    problem["error_count"] = sum(part.problem.get("error_count", len(part.errors)) for part in invalid)
    problem["detail"] = (f"{len(invalid)} parts of the batch have invalid records; nothing of the "
                         "batch is returned.")
    problem["errors"] = [vars(error) for error in errors]
    return InvalidRecords(invalid[0].status, problem, errors)
