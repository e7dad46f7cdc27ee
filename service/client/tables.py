"""Batches in the shapes callers hold them: records (a list of dicts), columns (a dict of
equal-length lists) or a pandas DataFrame; and answers back as rows or DataFrames.

pandas is optional: it is imported only when a DataFrame comes in or one is asked for.
A DataFrame's missing values (NaN, None, NaT) become ``null`` ("not given"); its
timezone-aware datetime columns become ISO 8601 texts with their offset. A naive
datetime column is refused: the service needs the offset, and guessing one would change
the answer silently.
"""
from __future__ import annotations

import math
from typing import Any, Iterable, Mapping, Sequence

Columns = dict[str, list]


def is_dataframe(data: Any) -> bool:
    return type(data).__name__ == "DataFrame" and hasattr(data, "columns") and hasattr(data, "to_dict")


def columns_from_records(records: Sequence[Mapping[str, Any]]) -> Columns:
    """Rows as columns; a field a row leaves out is ``None`` there."""
    names: dict[str, None] = {}
    for record in records:
        if not isinstance(record, Mapping):
            raise TypeError(f"a record must be a mapping, not {type(record).__name__}")
        names.update(dict.fromkeys(record))
    return {name: [record.get(name) for record in records] for name in names}


def records_from_columns(columns: Mapping[str, Sequence]) -> list[dict[str, Any]]:
    names = list(columns)
    return [dict(zip(names, row)) for row in zip(*(columns[name] for name in names))]


def _column_values(series) -> list:
    import pandas as pd

    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        if getattr(series.dt, "tz", None) is None:
            raise ValueError(f"column {series.name!r}: datetimes without a time zone; localise them "
                             "(Series.dt.tz_localize) so each carries its UTC offset")
        return [None if value is pd.NaT else value.isoformat() for value in series]
    values = series.astype(object).where(series.notna(), None).tolist()
    return [None if isinstance(v, float) and math.isnan(v) else v for v in values]


def columns_from_dataframe(frame) -> Columns:
    """A DataFrame as columns of JSON values."""
    return {str(name): _column_values(frame[name]) for name in frame.columns}


def as_columns(data: Any) -> Columns:
    """Records, columns or a DataFrame as columns (wire names to lists of JSON values)."""
    if is_dataframe(data):
        return columns_from_dataframe(data)
    if isinstance(data, Mapping):
        columns = {str(name): list(values) for name, values in data.items()}
        lengths = {len(values) for values in columns.values()}
        if len(lengths) > 1:
            raise ValueError(f"columns differ in length: {sorted(lengths)}")
        return columns
    if isinstance(data, Iterable) and not isinstance(data, (str, bytes)):
        return columns_from_records(list(data))
    raise TypeError("give records (a list of dicts), columns (a dict of lists) or a pandas DataFrame")


def as_records(data: Any) -> list[dict[str, Any]]:
    """Records, columns or a DataFrame as records (for the endpoints that take rows)."""
    if is_dataframe(data) or isinstance(data, Mapping):
        return records_from_columns(as_columns(data))
    return [dict(record) for record in data]


def column_length(columns: Mapping[str, Sequence]) -> int:
    return len(next(iter(columns.values()))) if columns else 0


def dataframe(columns: Mapping[str, Sequence]):
    """Columns as a pandas DataFrame (pandas imported here)."""
    import pandas as pd

    return pd.DataFrame({name: list(values) for name, values in columns.items()})
