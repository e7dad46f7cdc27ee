"""Which grid cell a record falls in, and the cell-centre inputs the engine is run on.

This is the cache's *keying* concern. :class:`GridCellCache` asks of it only what
:class:`Keying` states: a description that goes into every key, and for a batch of input
columns the integer index of each record in each column plus the value the engine is run
on. Another keying (say, on the physics state the engine sees) can replace
:class:`CellGrid` behind the same two methods.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Protocol

import numpy as np

from uvdose.service.cache.byte_rows import digest
from uvdose.service.config import ConfigurationError

# Round-to-nearest resolution of each input besides place and time. What half a step
# changes in the erythemal irradiance: ozone 0.5 DU ≈ 0.2 % (radiation amplification factor
# ≈ 1.2, WMO ozone assessments, from memory); pressure 0.5 hPa ≈ 0.05 % of the Rayleigh
# optical depth; elevation 5 m ≈ 0.04 % (≈ 7 %/km, from memory); the cloud factor ±0.001,
# which is ±0.016 UVI at a clear-sky UVI of 16; the aerosol single-scattering albedo
# ±0.001, as under a thick aerosol (AOD 0.8) a 0.005 change moved the UVI by 1.2 % in
# the engine; the others are dimensionless factors at a resolution below what clients
# know them to. Every fractional step is 1/k for a whole k.
INPUT_RESOLUTIONS: dict[str, float] = {
    "elevation_m": 10.0,
    "pressure_hpa": 1.0,
    "ozone_du": 1.0,
    "aod_550": 0.01,
    "angstrom_exponent": 0.05,
    "single_scattering_albedo": 0.002,
    "asymmetry_factor": 0.005,
    "surface_albedo": 0.01,
    "cloud_modification_factor": 0.002,
    "tilt_deg": 1.0,
    "receiver_azimuth_deg": 1.0,
    "sky_view_factor": 0.01,
}
"""Input column -> step. The cell centre takes the nearest multiple of the step."""

_WRAPPED_360 = ("receiver_azimuth_deg",)
_CELL_COLUMNS = ("time_unix_s", "latitude_deg", "longitude_deg")
_NAN_INDEX = np.iinfo(np.int32).min
_INDEX_LIMITS = {np.int32: np.iinfo(np.int32).max - 1, np.int64: 2.0**62}

Indices = dict[str, np.ndarray]
Centres = dict[str, np.ndarray]


class Keying(Protocol):
    """What the cache needs of a key scheme."""

    def describe(self) -> str:
        """Text that changes whenever the scheme would map a record elsewhere (part of every key)."""

    def quantise(self, columns: Mapping[str, np.ndarray]) -> tuple[Indices, Centres] | None:
        """Per column, an integer index of each record (equal indices in every column: one
        cached result) and the input value the engine is run on; ``None`` for a batch that
        cannot be keyed (the cache then leaves it to the engine uncached)."""


@dataclass(frozen=True)
class CellGrid:
    """How records are mapped to cells: ``cell_deg`` × ``cell_deg`` in latitude and
    longitude, counted from (-90°, -180°); ``cell_minutes`` of time, counted from the Unix
    epoch; the other inputs rounded to :data:`INPUT_RESOLUTIONS`."""

    cell_deg: float = 0.05
    cell_minutes: float = 2.0

    def __post_init__(self) -> None:
        for total in (180.0, 360.0):
            cells = total / self.cell_deg if self.cell_deg > 0 else 0.0
            if not (cells >= 1 and abs(cells - round(cells)) < 1e-9):
                raise ConfigurationError(
                    f"UVDOSE_CELL_DEG must divide 180 and 360 into whole cells, got {self.cell_deg}"
                )
        if not self.cell_minutes > 0:
            raise ConfigurationError(f"UVDOSE_CELL_MINUTES must be positive, got {self.cell_minutes}")

    def describe(self) -> str:
        steps = ",".join(f"{k}={v!r}" for k, v in sorted(INPUT_RESOLUTIONS.items()))
        return f"deg={self.cell_deg!r};min={self.cell_minutes!r};{steps}"

    def quantise(self, columns: Mapping[str, np.ndarray]) -> tuple[Indices, Centres] | None:
        """Integer cell indices and cell-centre values of every column.

        Returns ``(indices, centres)`` keyed by column name, or ``None`` when some value
        cannot be placed in a cell (infinite, or too large for a cell index); the caller
        then leaves the batch to the engine uncached, so the engine's own validation speaks.
        Not-given values (NaN) get their own index and stay NaN.
        """
        indices: Indices = {}
        centres: Centres = {}
        for name, raw in columns.items():
            values = np.asarray(raw)
            if values.dtype.kind in "OUS":
                indices[name] = _string_codes(values)
                centres[name] = values
                continue
            values = values.astype(np.float64)
            if name not in _CELL_COLUMNS and name not in INPUT_RESOLUTIONS:
                # An input without a stated resolution is keyed on its exact bits.
                indices[name] = np.where(np.isnan(values), np.nan, values).view(np.int64)
                centres[name] = values
                continue
            index_dtype = np.int64 if name == "time_unix_s" else np.int32
            nan = np.isnan(values)
            if nan.all():  # an optional input no record gives: nothing to compute
                indices[name] = np.full(len(values), _NAN_INDEX, dtype=index_dtype)
                centres[name] = values
                continue
            some_nan = nan.any()
            given = np.where(nan, 0.0, values) if some_nan else values
            if np.isinf(given).any():
                return None
            index, centre = self._cell_of(name, given)
            if np.abs(index).max() > _INDEX_LIMITS[index_dtype]:
                return None
            index = index.astype(index_dtype)
            if some_nan:
                index[nan] = _NAN_INDEX
                centre = np.where(nan, np.nan, centre)
            indices[name] = index
            centres[name] = centre
        return indices, centres

    def _cell_of(self, name: str, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(cell index as float, cell-centre value) of finite ``values`` of column ``name``."""
        if name == "time_unix_s":
            step_s = self.cell_minutes * 60.0
            index = np.floor(values / step_s)
            return index, (index + 0.5) * step_s
        if name == "latitude_deg":
            index = np.clip(np.floor((values + 90.0) / self.cell_deg), 0, round(180.0 / self.cell_deg) - 1)
            return index, -90.0 + (index + 0.5) * self.cell_deg
        if name == "longitude_deg":
            index = np.mod(np.floor((values + 180.0) / self.cell_deg), round(360.0 / self.cell_deg))
            return index, -180.0 + (index + 0.5) * self.cell_deg
        step = INPUT_RESOLUTIONS[name]
        index = np.floor(values / step + 0.5)
        if name in _WRAPPED_360:
            index = np.mod(index, round(360.0 / step))
        # Dividing by the whole number 1/step keeps centres such as 1.5 exact.
        return index, (index / round(1.0 / step) if step < 1.0 else index * step)

    def cell_centres(self, columns: Mapping[str, np.ndarray]) -> Centres:
        """The cell-centre inputs the cache hands to the engine for ``columns``."""
        quantised = self.quantise(columns)
        if quantised is None:
            return {name: np.asarray(value) for name, value in columns.items()}
        return quantised[1]


def _string_codes(values: np.ndarray) -> np.ndarray:
    """A 64-bit code per string, the same in every batch (digest of the UTF-8 text)."""
    uniques, inverse = np.unique(values.astype(str), return_inverse=True)
    codes = np.array([int.from_bytes(digest(u), "little", signed=True) for u in uniques], dtype=np.int64)
    return codes[inverse.reshape(-1)]
