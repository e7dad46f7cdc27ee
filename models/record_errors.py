"""Typed errors for inputs of particular records that a model cannot use.

The models take arrays with one entry per record. When some records hold a value a model
refuses, it raises :class:`RecordErrors`, one :class:`RecordError` per offending record
and input, each naming the record by its 0-based position in the arrays the model was
given and the input by the model's own name (its argument or column name, e.g.
``cloud_cover_oktas``, ``time_unix_s``). Callers that know the records' own names (the
service's wire names, record ids) translate from these; nothing parses the message.

Arguments that are wrong for every record alike (an unknown method, arrays of the wrong
shape) stay plain ``ValueError``.
"""
from __future__ import annotations

from typing import Iterable

import numpy as np


class RecordError(ValueError):
    """One input of one record that a model cannot use.

    Attributes
    ----------
    index : int
        0-based position of the record in the arrays the model was given.
    field : str or None
        The model's name of the input; ``None`` when the record as a whole is at fault
        (e.g. a route whose points all lie at one position).
    reason : str
        What is wrong, worded to follow the input's name ("must be a number in [0, 1.5]").
    point : int or None
        For records made of points (vehicle routes): the 0-based point within the record.
    value : float or None
        The value given, where one value is at fault.
    kind : str
        What the records are ("record", "window", "route"), for the message only.
    """

    def __init__(self, index: int, field: str | None, reason: str, point: int | None = None,
                 value: float | None = None, kind: str = "record"):
        self.index = int(index)
        self.field = field
        self.reason = reason
        self.point = None if point is None else int(point)
        self.value = None if value is None else float(value)
        self.kind = kind
        super().__init__(self.message)

    @property
    def message(self) -> str:
        """E.g. ``record 3: cloud_cover_oktas=9 must be a whole number 0–8``."""
        where = f"{self.kind} {self.index}" + ("" if self.point is None else f", point {self.point}")
        if self.field is None:
            return f"{where}: {self.reason}"
        given = "" if self.value is None else f"={self.value:g}"
        return f"{where}: {self.field}{given} {self.reason}"


class RecordErrors(ValueError):
    """Every :class:`RecordError` one check found, in record order (``errors``, never empty)."""

    def __init__(self, errors: Iterable[RecordError]):
        self.errors = list(errors)
        if not self.errors:
            raise ValueError("RecordErrors needs at least one RecordError")
        more = len(self.errors) - 1
        super().__init__(self.errors[0].message + (f" (and {more} more)" if more else ""))


def check_records(bad, field: str | None, reason: str, values=None, kind: str = "record") -> None:
    """Raise :class:`RecordErrors` naming every record flagged in ``bad``, if any.

    Parameters
    ----------
    bad : array of bool (N,) or (N, ...)
        Records at fault (a record with more than one entry: any of them).
    field, reason, kind :
        As in :class:`RecordError`.
    values : array broadcastable to (N,), optional
        The values given, quoted in the message of each flagged record (for (N,) ``bad``).
    """
    bad = np.atleast_1d(np.asarray(bad, dtype=bool))
    if not bad.any():
        return
    given = None
    if values is not None and bad.ndim == 1:
        given = np.broadcast_to(np.asarray(values, dtype=float), bad.shape)
    if bad.ndim > 1:  # (N, ...) per record: a record is at fault if any of its entries is
        bad = bad.reshape(bad.shape[0], -1).any(axis=1)
    raise RecordErrors(
        RecordError(i, field, reason, value=None if given is None else given[i], kind=kind)
        for i in np.flatnonzero(bad).tolist())
