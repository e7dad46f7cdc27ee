"""Spectral transmittance of glazing, films and openings between the sky and a receiver.

Each named filter is a short table of (wavelength nm, transmittance 0–1) nodes,
interpolated linearly onto the requested wavelengths. None of these curves is a
measurement of a particular product: they are representative shapes written from
common practice and memory (stated per curve in ``source``). Real glazing varies with
thickness, coating and age; a client with a measured curve should send it instead
(``transmittance_from_curve``).

The engine multiplies the receiver's spectral irradiance by the transmittance before
weighting it, so a filter acts on direct, diffuse and ground-reflected light alike
(normal-incidence transmittance; the angular dependence of glass is ignored).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

GRID_START_NM = 280.0
GRID_END_NM = 400.0


@dataclass(frozen=True)
class Filter:
    """A named spectral transmittance curve."""

    name: str
    title: str
    source: str
    nodes_nm: tuple[float, ...]
    nodes_transmittance: tuple[float, ...]

    def transmittance(self, wavelength_nm) -> np.ndarray:
        """Transmittance (0–1) at ``wavelength_nm`` (array, nm), linear between nodes."""
        return transmittance_from_curve(self.nodes_nm, self.nodes_transmittance, wavelength_nm)


def transmittance_from_curve(wavelength_nm_pairs, transmittance_pairs, wavelength_nm) -> np.ndarray:
    """Interpolate a client's transmittance curve onto ``wavelength_nm``.

    ``wavelength_nm_pairs``: strictly increasing wavelengths in nm, at least two, that
    cover every requested wavelength (no extrapolation: a curve that stops short of
    the grid, 280–400 nm for the engine, is rejected rather than extended).
    ``transmittance_pairs``: same length, each a fraction in [0, 1].
    Returns linear interpolation, same shape as ``wavelength_nm``.
    Raises ValueError naming the offending entry.
    """
    nodes = np.asarray(wavelength_nm_pairs, dtype=float)
    values = np.asarray(transmittance_pairs, dtype=float)
    target = np.asarray(wavelength_nm, dtype=float)
    if nodes.ndim != 1 or values.ndim != 1 or nodes.size != values.size:
        raise ValueError("transmittance curve: wavelength_nm and transmittance must be "
                         "lists of the same length")
    if nodes.size < 2:
        raise ValueError("transmittance curve: needs at least two points")
    for label, arr in (("wavelength_nm", nodes), ("transmittance", values)):
        if not np.isfinite(arr).all():
            i = int(np.flatnonzero(~np.isfinite(arr))[0])
            raise ValueError(f"transmittance curve: {label}[{i}] is not a finite number")
    steps = np.diff(nodes)
    if (steps <= 0).any():
        i = int(np.flatnonzero(steps <= 0)[0]) + 1
        raise ValueError(f"transmittance curve: wavelength_nm must increase strictly; "
                         f"wavelength_nm[{i}] = {nodes[i]:g} follows {nodes[i - 1]:g}")
    outside = (values < 0.0) | (values > 1.0)
    if outside.any():
        i = int(np.flatnonzero(outside)[0])
        raise ValueError(f"transmittance curve: transmittance[{i}] = {values[i]:g} "
                         f"is outside [0, 1]")
    if target.size and (target.min() < nodes[0] or target.max() > nodes[-1]):
        raise ValueError(f"transmittance curve: must cover {target.min():g}–{target.max():g} nm, "
                         f"given {nodes[0]:g}–{nodes[-1]:g} nm (no extrapolation)")
    return np.interp(target, nodes, values)


_FROM_MEMORY = ("Representative shape from common practice / from memory, not a "
                "measured product; send a measured curve for a specific glazing.")

FILTERS: dict[str, Filter] = {f.name: f for f in (
    Filter("open_window", "Open window or no glazing", "Physical: nothing in the path.",
           (GRID_START_NM, GRID_END_NM), (1.0, 1.0)),
    Filter("laminated_windscreen", "Laminated windscreen (PVB interlayer)",
           "PVB interlayers absorb almost all UV below about 380 nm. " + _FROM_MEMORY,
           (280.0, 375.0, 380.0, 385.0, 390.0, 395.0, 400.0),
           (0.0, 0.0, 0.01, 0.05, 0.20, 0.45, 0.65)),
    Filter("clear_side_glass", "Clear tempered side glass (soda-lime, ~4 mm)",
           "Soda-lime glass cuts on between about 300 and 320 nm and passes most UVA. "
           + _FROM_MEMORY,
           (280.0, 300.0, 305.0, 310.0, 315.0, 320.0, 325.0, 330.0, 340.0, 350.0, 360.0,
            380.0, 400.0),
           (0.0, 0.0, 0.005, 0.04, 0.15, 0.33, 0.50, 0.62, 0.74, 0.80, 0.83, 0.86, 0.88)),
    Filter("tinted_side_glass", "Tinted (privacy) side glass",
           "Body-tinted glass: later cut-on and lower UVA transmittance than clear glass. "
           + _FROM_MEMORY,
           (280.0, 310.0, 320.0, 330.0, 340.0, 360.0, 380.0, 400.0),
           (0.0, 0.0, 0.05, 0.15, 0.25, 0.35, 0.40, 0.45)),
    Filter("greenhouse_glass", "Horticultural float glass (~4 mm)",
           "Float glass as used in greenhouses: UVB mostly blocked, UVA mostly passed. "
           + _FROM_MEMORY,
           (280.0, 300.0, 310.0, 320.0, 330.0, 350.0, 400.0),
           (0.0, 0.0, 0.05, 0.40, 0.65, 0.82, 0.90)),
    Filter("polyethylene_film", "UV-transparent polyethylene film (no UV additive)",
           "Plain polyethylene transmits most UV down to 280 nm. " + _FROM_MEMORY,
           (280.0, 300.0, 350.0, 400.0), (0.70, 0.78, 0.85, 0.88)),
    Filter("uv_blocking_film", "UV-blocking film (cut-off ~380 nm)",
           "UV-absorbing films and cladding block below about 380 nm. " + _FROM_MEMORY,
           (280.0, 375.0, 380.0, 390.0, 400.0), (0.0, 0.0, 0.02, 0.30, 0.70)),
)}


def catalogue() -> list[dict]:
    """Named filters for a catalogue listing: name, title, source, nodes."""
    return [
        {"name": f.name, "title": f.title, "source": f.source,
         "wavelength_nm": list(f.nodes_nm), "transmittance": list(f.nodes_transmittance)}
        for f in FILTERS.values()
    ]


def resolve_transmittance(filter_name: str | None, curve: dict | None, wavelength_nm) -> np.ndarray | None:
    """Transmittance on ``wavelength_nm`` from a filter name or a client curve, or None.

    ``curve`` is ``{"wavelength_nm": [...], "transmittance": [...]}``. Giving both, or
    an unknown name, raises ValueError.
    """
    if filter_name is not None and curve is not None:
        raise ValueError("give either a named filter or a transmittance curve, not both")
    if curve is not None:
        return transmittance_from_curve(curve["wavelength_nm"], curve["transmittance"], wavelength_nm)
    if filter_name is None:
        return None
    if filter_name not in FILTERS:
        raise ValueError(f"unknown filter {filter_name!r}; known: {', '.join(sorted(FILTERS))}")
    return FILTERS[filter_name].transmittance(wavelength_nm)
