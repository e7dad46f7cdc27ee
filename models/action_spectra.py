"""Registry of action spectra (biological and hazard weighting functions) and bands.

An action spectrum A(λ) weights spectral irradiance E(λ) (W m⁻² nm⁻¹) into an
effective irradiance E_eff = ∫ E(λ) A(λ) dλ (W m⁻², "effective"). Every spectrum here
is on an energy basis, dimensionless, 1 at its ``normalisation_nm``, and cites its
published source. ``weight_matrix`` folds the wavelength quadrature into the weights,
so for spectra ``(N, W)`` on the engine grid ``spectra @ weight_matrix(names, grid)``
gives the ``(N, S)`` effective irradiances in one matrix product.

Quadrature. The trapezoidal rule on the grid points (``models.spectral_grid``):
1 nm for interior points, 0.5 nm at the ends of the integration range. Bands use the
CIE limits UVB = [280, 315] nm and UVA = [315, 400] nm; the 315 nm point is split
half-and-half between them, so UVB + UVA equals the trapezoidal 280–400 nm integral
exactly. Weighted spectra are integrated over the whole grid with the action spectrum
evaluated at the grid points (a spectrum that ends inside the grid, such as the plant
damage spectrum at 313.3 nm, is simply zero beyond its end).

Sources of the tabulated values are stated in each table's header under
``models/data/``; values written from memory are marked there and in ``source``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from typing import Callable, Sequence

import numpy as np
import yaml

__all__ = [
    "ActionSpectrum",
    "ReferenceLevel",
    "ACTION_SPECTRA",
    "weight_matrix",
    "catalogue",
]

_DATA_DIR = Path(__file__).resolve().parent / "data"


@dataclass(frozen=True)
class ReferenceLevel:
    """A published figure a client may compare a weighted quantity with."""

    label: str
    value: float
    unit: str
    note: str
    source: str


@dataclass(frozen=True)
class ActionSpectrum:
    """One weighting function.

    name: registry key used by the API.
    title: human-readable name.
    source: full citation of the published spectrum.
    normalisation_nm: wavelength where the weight is 1 (for bands, the band's lower edge).
    kind: "analytic" (closed form), "tabulated" (interpolated table) or "band" (unweighted).
    description: what the weighted quantity estimates.
    defined_nm: wavelength range over which the spectrum is defined (zero outside it
        within 280–400 nm unless stated otherwise).
    reference_levels: trade and guideline figures that go with the spectrum.
    units: of the weights.
    """

    name: str
    title: str
    source: str
    normalisation_nm: float
    kind: str
    description: str
    defined_nm: tuple[float, float]
    _function: Callable[[np.ndarray], np.ndarray] = field(repr=False)
    reference_levels: tuple[ReferenceLevel, ...] = ()
    units: str = "relative, 1 at normalisation_nm"

    def weights(self, wavelength_nm) -> np.ndarray:
        """Relative effectiveness at ``wavelength_nm`` (nm), same shape as the input.

        Raises ValueError for non-finite wavelengths. Outside ``defined_nm`` the weight
        is 0 (these spectra are not used outside 280–400 nm in this service)."""
        wavelength = np.asarray(wavelength_nm, dtype=float)
        if not np.all(np.isfinite(wavelength)):
            raise ValueError(f"{self.name}: wavelength_nm must be finite")
        low, high = self.defined_nm
        inside = (wavelength >= low) & (wavelength <= high)
        values = np.zeros(wavelength.shape)
        values[inside] = self._function(wavelength[inside])
        return values

    def as_dict(self) -> dict:
        """Plain description for the catalogue endpoint (no arrays, no callables)."""
        return {
            "name": self.name,
            "title": self.title,
            "kind": self.kind,
            "source": self.source,
            "normalisation_nm": self.normalisation_nm,
            "defined_nm": list(self.defined_nm),
            "units": self.units,
            "description": self.description,
            "reference_levels": [
                {"label": r.label, "value": r.value, "unit": r.unit, "note": r.note,
                 "source": r.source}
                for r in self.reference_levels
            ],
        }


# --- analytic forms ---------------------------------------------------------------

def _erythema_cie(wavelength_nm: np.ndarray) -> np.ndarray:
    """CIE S 007/E-1998 = ISO 17166:1999 reference erythema action spectrum
    (McKinlay & Diffey 1987): 1 for λ ≤ 298 nm; 10^(0.094(298 − λ)) for 298 < λ ≤ 328 nm;
    10^(0.015(140 − λ)) for 328 < λ ≤ 400 nm. Continuous at 328 nm (both 10^−2.82)."""
    lam = wavelength_nm
    return np.where(lam <= 298.0, 1.0,
                    np.where(lam <= 328.0, 10.0 ** (0.094 * (298.0 - lam)),
                             10.0 ** (0.015 * (140.0 - lam))))


_PLANT_DAMAGE_LIMIT_NM = 313.3


def _green_plant_damage_raw(wavelength_nm: np.ndarray) -> np.ndarray:
    # Green, Sawada & Shettle (1974) fit of Caldwell's (1971) generalised plant action
    # spectrum. As published it is ≈1 at 280 nm (1.0025) and 0.2176 at 300 nm.
    lam = wavelength_nm
    values = 2.618 * (1.0 - (lam / _PLANT_DAMAGE_LIMIT_NM) ** 2) * np.exp(-(lam - 300.0) / 31.08)
    return np.where(lam < _PLANT_DAMAGE_LIMIT_NM, values, 0.0)


def _plant_damage(wavelength_nm: np.ndarray) -> np.ndarray:
    """Generalised plant damage, Caldwell (1971) in the form of Green, Sawada & Shettle
    (1974): 2.618 [1 − (λ/313.3)²] exp(−(λ − 300)/31.08) for λ < 313.3 nm, 0 above,
    renormalised here to 1 at 300 nm (divided by its value there, 0.2176)."""
    return _green_plant_damage_raw(wavelength_nm) / _green_plant_damage_raw(np.array(300.0))


def _flint_caldwell_raw(wavelength_nm: np.ndarray) -> np.ndarray:
    # Flint & Caldwell (2003), appendix: exp{4.688272 exp[−exp(0.1703411(λ − 307.867)/1.15)]
    # + (390 − λ)/121.7557 − 4.183832}; 0.9878 at 300 nm as published.
    lam = wavelength_nm
    return np.exp(4.688272 * np.exp(-np.exp(0.1703411 * (lam - 307.867) / 1.15))
                  + (390.0 - lam) / 121.7557 - 4.183832)


def _plant_growth(wavelength_nm: np.ndarray) -> np.ndarray:
    """Plant growth inhibition, Flint & Caldwell (2003) analytic fit, renormalised to 1 at
    300 nm, applied up to 390 nm. The responses were measured up to 366 nm and the paper
    gives no long-wave end; where the function is cut (366 or 390 nm) changes weighted
    sunlight and its ozone sensitivity a great deal, as Micheletti, Piacentini & Madronich
    (2003) show for both limits: the limit is a choice, stated in the catalogue."""
    return _flint_caldwell_raw(wavelength_nm) / _flint_caldwell_raw(np.array(300.0))


def _setlow_green_miller_raw(wavelength_nm: np.ndarray) -> np.ndarray:
    # Green & Miller (1975) fit of Setlow's (1974) DNA action spectrum:
    # exp{13.82 [1/(1 + exp((λ − 310)/9)) − 1]}; 0.032604 at 300 nm.
    lam = wavelength_nm
    return np.exp(13.82 * (1.0 / (1.0 + np.exp((lam - 310.0) / 9.0)) - 1.0))


def _dna_damage(wavelength_nm: np.ndarray) -> np.ndarray:
    """DNA damage, Setlow (1974) in the analytic form of Green & Miller (1975),
    normalised to 1 at 300 nm. Used over the fit's 280–340 nm range only: beyond it the
    form levels off at exp(−13.82)/0.0326 ≈ 3.1e-5, which is a property of the fit, not
    of the measurements, and would otherwise add several per cent of UVA to sunlight."""
    return _setlow_green_miller_raw(wavelength_nm) / _setlow_green_miller_raw(np.array(300.0))


# --- tabulated forms --------------------------------------------------------------

@lru_cache(maxsize=None)
def _table(file_name: str) -> tuple[np.ndarray, np.ndarray]:
    """(wavelength_nm, weight) columns of a table in models/data/: '#' lines are
    provenance, the first other line is the column header."""
    lines = (_DATA_DIR / file_name).read_text(encoding="utf-8").splitlines()
    rows = [line for line in lines if line.strip() and not line.startswith("#")][1:]
    numbers = np.array([[float(cell) for cell in row.split(",")] for row in rows])
    return numbers[:, 0], numbers[:, 1]


def _log_linear(file_name: str) -> Callable[[np.ndarray], np.ndarray]:
    """Interpolate a positive table linearly in log10(weight) against wavelength, the
    usual practice for action spectra that span several decades."""
    def evaluate(wavelength_nm: np.ndarray) -> np.ndarray:
        x, y = _table(file_name)
        return 10.0 ** np.interp(wavelength_nm, x, np.log10(y))
    return evaluate


def _band(wavelength_nm: np.ndarray) -> np.ndarray:
    return np.ones(np.shape(wavelength_nm))


# --- the registry: models/data/action_spectra.yaml ----------------------------------

_ANALYTIC: dict[str, Callable[[np.ndarray], np.ndarray]] = {
    "cie_erythema": _erythema_cie,
    "green_plant_damage": _plant_damage,
    "flint_caldwell_growth": _plant_growth,
    "setlow_green_miller_dna": _dna_damage,
}
"""The closed forms the registry's analytic spectra name."""


def _spectrum(entry: dict) -> ActionSpectrum:
    """One entry of the registry file as an :class:`ActionSpectrum`."""
    kind = entry["kind"]
    if kind == "band":
        function = _band
    elif kind == "tabulated":
        function = _log_linear(entry["table"])
    else:
        function = _ANALYTIC[entry["function"]]
    optional = {"units": entry["units"]} if "units" in entry else {}
    return ActionSpectrum(
        name=entry["name"], title=entry["title"], source=entry["source"],
        normalisation_nm=float(entry["normalisation_nm"]), kind=kind, description=entry["description"],
        defined_nm=tuple(float(x) for x in entry["defined_nm"]), _function=function,
        reference_levels=tuple(ReferenceLevel(**level) for level in entry.get("reference_levels", ())),
        **optional)


_SPECTRA = tuple(_spectrum(entry) for entry in
                 yaml.safe_load((_DATA_DIR / "action_spectra.yaml").read_text(encoding="utf-8")))

ACTION_SPECTRA: dict[str, ActionSpectrum] = {spectrum.name: spectrum for spectrum in _SPECTRA}
"""Action spectra by name."""


def _trapezoid_weights_nm(wavelength_nm: np.ndarray, lower_nm: float, upper_nm: float) -> np.ndarray:
    """Trapezoidal quadrature weights (nm) over [lower_nm, upper_nm] ∩ grid; both limits
    must be grid points when they fall inside the grid."""
    wl = wavelength_nm
    lower, upper = max(lower_nm, wl[0]), min(upper_nm, wl[-1])
    for limit in (lower, upper):
        if not np.any(wl == limit):
            raise ValueError(f"integration limit {limit:g} nm is not a grid wavelength")
    inside = (wl >= lower) & (wl <= upper)
    x = wl[inside]
    weights = np.zeros(wl.shape)
    if x.size > 1:
        gaps = np.diff(x)
        local = np.zeros(x.size)
        local[:-1] += gaps / 2.0
        local[1:] += gaps / 2.0
        weights[inside] = local
    return weights


def weight_matrix(names: Sequence[str], wavelength_nm) -> np.ndarray:
    """Quadrature-weighted action spectra, shape (W, S), for ``spectra @ matrix``.

    Column s holds A_s(λ_i)·w_i with trapezoidal weights w_i (nm) over the whole grid
    for weighted spectra and over the band for "band" spectra (see the module notes).
    ``wavelength_nm`` must be strictly increasing. Unknown names raise KeyError listing
    them and the known names.
    """
    unknown = [name for name in names if name not in ACTION_SPECTRA]
    if unknown:
        raise KeyError(f"unknown action spectra {unknown}; known: {sorted(ACTION_SPECTRA)}")
    wl = np.asarray(wavelength_nm, dtype=float)
    if wl.ndim != 1 or wl.size < 2 or np.any(np.diff(wl) <= 0):
        raise ValueError("wavelength_nm must be a strictly increasing 1-D grid")
    matrix = np.empty((wl.size, len(names)))
    whole_grid = _trapezoid_weights_nm(wl, wl[0], wl[-1])
    for column, name in enumerate(names):
        spectrum = ACTION_SPECTRA[name]
        if spectrum.kind == "band":
            quadrature = _trapezoid_weights_nm(wl, *spectrum.defined_nm)
        else:
            quadrature = whole_grid
        matrix[:, column] = spectrum.weights(wl) * quadrature
    return matrix


def catalogue() -> list[dict]:
    """Every action spectrum as a plain dict, in registry order."""
    return [spectrum.as_dict() for spectrum in ACTION_SPECTRA.values()]
