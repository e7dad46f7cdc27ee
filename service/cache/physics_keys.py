"""Which cache entry a record's radiative transfer falls in: its physics state, rounded.

This is the cache's *keying* concern. The cache (:class:`.state_cache.StateCache`) wraps the
radiative transfer of ``models.engine`` (``transfer_memo``), whose inputs are the columns of
``models.engine.TRANSFER_STATE_COLUMNS``: solar zenith, total ozone, surface pressure,
surface albedo and the aerosol. Place and time do not enter: two records that share a
state share an entry, whatever their position, date or receiver. The solar position, the
Earth–Sun distance, the cloud factor and the receiver are applied exactly per record after
the transfer, so no answer carries a position or time error.

Each state column is rounded to a step (:data:`STATE_STEPS`) and the transfer is run on
the rounded state, for hits and misses alike, so one record always gets the same answer.
The steps are set by how fast the answer moves with each input, as coarse as the error
bound allows (:data:`CACHE_ERROR_BOUND`, measured in ``tests/service/test_cache_accuracy.py``
and stated in the README, *Cache*): the coarser the steps, the more records share an entry.

- solar zenith 0.05° bins: erythemal irradiance goes roughly as cos(zenith)^2.4 and
  plant-weighted as ^3 (Madronich 2007 and the engine), so half a bin moves it by
  2.4–3 tan(zenith) × 4.4e-4: 0.1 % at 45°, 0.2 % at 60°, 0.75 % at 80° (where the UV
  Index is below 0.3, so under 0.003 absolute);
- total ozone 0.3 % of the column (a logarithmic step): with the erythemal radiation
  amplification factor of about 1.1–1.3 (WMO ozone assessments, from memory) and
  about 2 for plant damage, half a step is 0.2–0.3 %;
- surface pressure 2 hPa: UV rises about 5–8 % per km, 0.05 % per hPa (from memory),
  so half a step is 0.05 %;
- surface albedo 0.005: the global irradiance goes as 1/(1 − a S) with the spherical
  albedo S ≤ 0.5 in the UV, so half a step is under 0.2 %;
- aerosol optical depth 0.001, Ångström exponent 0.0005, single scattering albedo
  0.0002, asymmetry factor 0.0005: values given with up to three decimals sit exactly on
  a step; for others, half a step moves the answer by under 0.2 % even at AOD 5.

Every step divides 0.001 (or 1) into whole parts, so that decimal inputs land on steps.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Protocol

import numpy as np

Indices = dict[str, np.ndarray]
Centres = dict[str, np.ndarray]

STATE_STEPS: dict[str, tuple[str, float]] = {
    "true_zenith_deg": ("bin", 0.05),
    "ozone_du": ("log", 0.003),
    "pressure_hpa": ("linear", 2.0),
    "surface_albedo": ("linear", 0.005),
    "aod_550": ("linear", 0.001),
    "angstrom_exponent": ("linear", 0.0005),
    "single_scattering_albedo": ("linear", 0.0002),
    "asymmetry_factor": ("linear", 0.0005),
}
"""State column -> (scale, step): the entry's state is the nearest multiple of the step,
of the value ("linear") or of its natural logarithm ("log"), or the middle of the step
the value falls in ("bin": the zenith, whose bins end on whole degrees, so that no record
is moved across the horizon or the end of twilight, where the sky's light ends)."""

CACHE_ERROR_BOUND = {"uv_index_relative": 0.005, "uv_index_absolute": 0.02,
                     "effective_relative": 0.005, "effective_high_sun_fraction": 0.002}
"""What serving a rounded state may change in an answer, against the record's exact state
(``UVDOSE_CACHE=off``): the UV Index by at most max(0.5 %, 0.02), every effective
irradiance and band integral by at most max(0.5 %, 0.2 % of its value under a high sun:
zenith 2.8°, 300 DU, sea level, default aerosol); doses by the same relative bound.
Measured over random records of every input range in
``tests/service/test_cache_accuracy.py`` (worst case 0.7 and 0.85 of these bounds). The
part of an answer's uncertainty that comes from the cache."""

_INDEX_LIMIT = float(np.iinfo(np.int32).max - 1)


class Keying(Protocol):
    """What the cache needs of a key scheme."""

    def describe(self) -> str:
        """Text that changes whenever the scheme would map a record elsewhere (part of every key)."""

    def quantise(self, columns: Mapping[str, np.ndarray]) -> tuple[Indices, Centres] | None:
        """Per column, an integer index of each record (equal indices in every column: one
        cached result) and the input value the transfer is run on; ``None`` for a batch
        that cannot be keyed (the cache then leaves it to the transfer, uncached)."""


@dataclass(frozen=True)
class PhysicsKeying:
    """Rounds every state column to its step in :data:`STATE_STEPS`; a column without a
    step (not expected) is keyed on its exact bits."""

    def describe(self) -> str:
        return "state;" + ";".join(f"{name}={scale}:{step!r}" for name, (scale, step) in sorted(STATE_STEPS.items()))

    def quantise(self, columns: Mapping[str, np.ndarray]) -> tuple[Indices, Centres] | None:
        """Integer step indices and rounded values of every column, or ``None`` when a value
        cannot be rounded (not finite, not positive on a logarithmic step, or too large for
        an index): the engine then computes the batch unrounded and its own checks speak."""
        indices: Indices = {}
        centres: Centres = {}
        for name, raw in columns.items():
            values = np.asarray(raw, dtype=np.float64)
            if name not in STATE_STEPS:
                if not np.isfinite(values).all():
                    return None
                indices[name] = values.view(np.int64)
                centres[name] = values
                continue
            scale, step = STATE_STEPS[name]
            if not np.isfinite(values).all():
                return None
            if scale == "log":
                if not (values > 0).all():
                    return None
                index = np.floor(np.log(values) / step + 0.5)
            else:
                index = np.floor(values / step + (0.0 if scale == "bin" else 0.5))
            if np.abs(index).max(initial=0.0) > _INDEX_LIMIT:
                return None
            middle = index + 0.5 if scale == "bin" else index
            inverse_step = 1.0 / step
            if step < 1.0 and abs(inverse_step - round(inverse_step)) < 1e-9:
                # Dividing by the whole number 1/step keeps decimal values such as 0.931 exact.
                linear = middle / round(inverse_step)
            else:
                linear = middle * step
            centres[name] = np.exp(linear) if scale == "log" else linear
            indices[name] = index.astype(np.int32)
        return indices, centres
