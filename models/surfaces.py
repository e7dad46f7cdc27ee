"""Named ground surfaces and their ultraviolet (erythemally weighted) albedo.

The albedo here is the fraction of incident solar UV reflected by the ground, used by
the radiative-transfer solver and the receiver model as one broadband UV value for
280–400 nm. Real surfaces vary with wetness, age, roughness and solar angle; a client
that knows its surface better should send ``surface_albedo`` directly.

Sources (cited on each entry):
    [SWA] Safe Work Australia (2019). Guide on exposure to solar ultraviolet radiation
          (UVR), table of UV reflectance of common surfaces. Figures taken from a public
          reproduction of that table, not checked against the guide itself.
    [WHO] WHO, WMO, UNEP, ICNIRP (2002). Global Solar UV Index: A Practical Guide,
          "ground reflection": fresh snow up to 80 %, dry beach sand about 15 %, sea
          foam about 25 %, most natural surfaces (grass, soil, water) under 10 %.
    [memory] written from memory; treat as approximate.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["SurfaceType", "SURFACE_TYPES", "albedo_for", "catalogue"]

_SWA = ("Safe Work Australia (2019), Guide on exposure to solar ultraviolet radiation "
        "(UVR), table of UV reflectance of surfaces (figures via a public reproduction "
        "of the table)")
_WHO = "WHO/WMO/UNEP/ICNIRP (2002), Global Solar UV Index: A Practical Guide"


@dataclass(frozen=True)
class SurfaceType:
    """A named ground surface: UV albedo (0–1), its source and a note on its spread."""

    name: str
    uv_albedo: float
    source: str
    note: str

    def as_dict(self) -> dict:
        return {"name": self.name, "uv_albedo": self.uv_albedo, "source": self.source,
                "note": self.note}


_SURFACES = (
    SurfaceType("fresh_snow", 0.88, _SWA,
                "new snow 88 %; WHO: fresh snow reflects up to 80 %"),
    SurfaceType("old_snow", 0.50, _SWA, "old snow 50 %; ageing and soot lower it further"),
    SurfaceType("dry_sand", 0.15, f"{_WHO}; {_SWA}",
                "dry beach sand about 15 % (WHO), 15-18 % (SWA)"),
    SurfaceType("wet_sand", 0.071, _SWA, "wet beach sand 7.1 %"),
    SurfaceType("sea_surf_foam", 0.25, f"{_WHO}; {_SWA}",
                "sea surf and white foam about 25 % (WHO), 25-30 % (SWA)"),
    SurfaceType("water", 0.08, _SWA,
                "open ocean 8 %; calm inland open water 3.3 %; rises at low sun"),
    SurfaceType("grass", 0.02, _SWA, "lawn 2-5 %, grassland 0.8-1.6 %"),
    SurfaceType("bare_soil", 0.05, _SWA, "clay or humus soil 4-6 %"),
    SurfaceType("asphalt", 0.065, _SWA,
                "midpoint of new black (4.1 %) and old grey (8.9 %) roadway"),
    SurfaceType("concrete", 0.10, _SWA, "concrete footpath 8.2-12 %"),
    SurfaceType("crop_canopy", 0.03, "from memory; no source checked",
                "green crop canopy, taken as comparable to lawn (2-5 %)"),
)

SURFACE_TYPES: dict[str, SurfaceType] = {surface.name: surface for surface in _SURFACES}
"""Surface types by name."""

_NAMES = np.array(sorted(SURFACE_TYPES), dtype=object)
_ALBEDOS = np.array([SURFACE_TYPES[name].uv_albedo for name in _NAMES])


def albedo_for(types) -> np.ndarray:
    """UV albedo for each surface-type name in ``types`` (array-like of str), shape (N,).

    Vectorised: the distinct names are looked up once. Raises KeyError listing the
    unknown names, the first records that carry them, and the known names.
    """
    names = np.asarray(types, dtype=object)
    distinct, inverse = np.unique(names.astype(str), return_inverse=True)
    position = np.searchsorted(_NAMES.astype(str), distinct)
    position = np.clip(position, 0, _NAMES.size - 1)
    known = _NAMES.astype(str)[position] == distinct
    if not np.all(known):
        unknown = distinct[~known]
        records = np.flatnonzero(np.isin(names.astype(str).reshape(-1), unknown))
        raise KeyError(f"unknown surface types {unknown.tolist()} (records "
                       f"{records[:5].tolist()}); known: {_NAMES.tolist()}")
    return _ALBEDOS[position][inverse].reshape(names.shape)


def catalogue() -> list[dict]:
    """Every surface type as a plain dict, in registry order."""
    return [surface.as_dict() for surface in SURFACE_TYPES.values()]
