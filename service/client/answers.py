"""What the calls return: the service's answers as typed objects, whole batches put back
together, with rows and (optionally) pandas DataFrames on request."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from uvdose.client.tables import Columns, column_length, dataframe, records_from_columns

EFFECTIVE_PREFIX = "effective_w_m2."


@dataclass(frozen=True)
class Limits:
    """A deployment's request limits (``GET /v1/catalogue``, ``limits``)."""

    max_records: int
    max_body_bytes: int
    max_full_solve_records: int | None = None
    extra: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def from_json(cls, limits: dict[str, Any]) -> "Limits":
        known = {"max_records", "max_body_bytes", "max_full_solve_records"}
        return cls(int(limits["max_records"]), int(limits["max_body_bytes"]), limits.get("max_full_solve_records"),
                   {k: v for k, v in limits.items() if k not in known})


@dataclass(frozen=True)
class Catalogue:
    """``GET /v1/catalogue``: what the service can weight by, reflect from and filter through."""

    model_version: str
    caution: str
    default_spectra: list[str]
    action_spectra: list[dict[str, Any]]
    surface_types: list[dict[str, Any]]
    filters: list[dict[str, Any]]
    record_fields: list[dict[str, Any]]
    limits: Limits
    etag: str | None = None

    @classmethod
    def from_json(cls, body: dict[str, Any], etag: str | None = None) -> "Catalogue":
        return cls(body["model_version"], body["caution"], list(body["default_spectra"]), list(body["action_spectra"]),
                   list(body["surface_types"]), list(body["filters"]), list(body["record_fields"]),
                   Limits.from_json(body["limits"]), etag)


@dataclass(frozen=True)
class Readiness:
    """``GET /readyz``: ``ready``, ``degraded`` or ``unready``, with each check's report."""

    status: str
    model_version: str
    checks: dict[str, dict[str, Any]]

    @property
    def ready(self) -> bool:
        return self.status in ("ready", "degraded")


@dataclass
class ColumnsAnswer:
    """A batch answered in the column layout: one list per result field, in batch order."""

    model_version: str
    caution: str
    columns: Columns
    envelope: dict[str, Any]

    def __len__(self) -> int:
        return column_length(self.columns)

    def rows(self) -> list[dict[str, Any]]:
        return records_from_columns(self.columns)

    def to_dataframe(self):
        """The columns as a pandas DataFrame (one row per record)."""
        return dataframe(self.columns)


@dataclass
class IrradianceAnswer(ColumnsAnswer):
    """``POST /v1/irradiance``: UV Index, weighted and band irradiance, the values used."""

    spectra: list[str] = field(default_factory=list)
    wavelength_nm: list[float] | None = None

    def rows(self) -> list[dict[str, Any]]:
        """One dict per record, the effective irradiances nested as ``effective_w_m2``
        (as the service's row layout has them)."""
        rows = []
        for row in records_from_columns(self.columns):
            effective = {key[len(EFFECTIVE_PREFIX):]: row.pop(key) for key in list(row)
                         if key.startswith(EFFECTIVE_PREFIX)}
            rows.append({**row, "effective_w_m2": effective})
        return rows

    def to_dataframe(self):
        """One row per record; the spectrum (with include_spectrum) stays one list per row."""
        return dataframe(self.columns)


@dataclass
class OzoneAnswer(ColumnsAnswer):
    """``POST /v1/ozone``: the total ozone column per record and its source."""

    ozone_grids: list[dict[str, Any]] = field(default_factory=list)


@dataclass
class DoseAnswer:
    """``POST /v1/doses/*``: one result per record (window, field or route), in batch order."""

    model_version: str
    caution: str
    results: list[dict[str, Any]]
    envelope: dict[str, Any]

    def __len__(self) -> int:
        return len(self.results)

    def rows(self) -> list[dict[str, Any]]:
        return self.results

    def to_dataframe(self):
        """The results flattened into columns (``dose_j_m2.erythema``, …) by
        ``pandas.json_normalize``; a field season's ``days`` stay one list per field."""
        import pandas as pd

        return pd.json_normalize(self.results)
