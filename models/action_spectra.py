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

from uvdose.models.spectral_grid import UVA_BAND_NM, UVB_BAND_NM

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


_PLANT_GROWTH_LIMIT_NM = 390.0


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


def _unweighted_band(name: str, band_nm: tuple[float, float],
                     reference_levels: tuple[ReferenceLevel, ...] = ()) -> ActionSpectrum:
    """A band spectrum: weight 1 inside the CIE band limits, 0 outside."""
    low, high = band_nm
    label = name.upper()
    return ActionSpectrum(
        name=name,
        title=f"{label}, unweighted {low:g}–{high:g} nm",
        source=f"CIE band limits (CIE S 017:2020 ILV, {label[:2]}-{label[2:]} "
               f"{low:g}-{high:g} nm)",
        normalisation_nm=low,
        kind="band",
        description=f"Unweighted irradiance in the {label} band, {low:g}–{high:g} nm.",
        defined_nm=band_nm,
        _function=_band,
        reference_levels=reference_levels,
    )


# --- the registry -----------------------------------------------------------------

_CIE_ERYTHEMA = ("CIE S 007/E:1998 Erythema reference action spectrum and standard erythema "
                 "dose (= ISO 17166:1999), after McKinlay A.F. & Diffey B.L. (1987), CIE "
                 "Journal 6:17-22")
_ICNIRP_2004 = ("International Commission on Non-Ionizing Radiation Protection (2004). "
                "ICNIRP guidelines on limits of exposure to ultraviolet radiation of "
                "wavelengths between 180 nm and 400 nm (incoherent optical radiation). "
                "Health Physics 87(2):171-186")
_WHO_2002 = ("WHO, WMO, UNEP, ICNIRP (2002). Global Solar UV Index: A Practical Guide. "
             "World Health Organization, Geneva")

_SPECTRA = (
    ActionSpectrum(
        name="erythema",
        title="Erythema (sunburn) reference action spectrum",
        source=_CIE_ERYTHEMA,
        normalisation_nm=298.0,
        kind="analytic",
        description="Erythemally weighted irradiance, the basis of the UV Index and of "
                    "sunburn doses in SED.",
        defined_nm=(250.0, 400.0),
        _function=_erythema_cie,
        reference_levels=(
            ReferenceLevel("standard erythema dose (SED)", 100.0, "J m-2 effective",
                           "1 SED = 100 J m-2 erythemally weighted", _CIE_ERYTHEMA),
            ReferenceLevel("UV Index per erythemal irradiance", 40.0, "m2 W-1",
                           "UVI = 40 m2 W-1 x erythemal irradiance; UVI 1 = 25 mW m-2",
                           _WHO_2002),
        ),
    ),
    ActionSpectrum(
        name="actinic_icnirp",
        title="Actinic UV hazard to skin and eye, S(λ)",
        source=_ICNIRP_2004 + ". Table values transcribed from memory; see "
               "models/data/action_spectrum_icnirp_2004.csv",
        normalisation_nm=270.0,
        kind="tabulated",
        description="Effective irradiance for occupational exposure limits to ultraviolet "
                    "radiation (photokeratitis, conjunctivitis, erythema).",
        defined_nm=(270.0, 400.0),
        _function=_log_linear("action_spectrum_icnirp_2004.csv"),
        reference_levels=(
            ReferenceLevel("exposure limit, skin and eye", 30.0, "J m-2 effective",
                           "per 8 h working day, unprotected skin and eye, S(λ)-weighted; "
                           "local occupational rules take precedence", _ICNIRP_2004),
        ),
    ),
    ActionSpectrum(
        name="plant_damage",
        title="Generalised plant damage (Caldwell)",
        source=("Caldwell M.M. (1971). Solar UV irradiation and the growth and development "
                "of higher plants. In: Giese A.C. (ed.) Photophysiology 6:131-177, Academic "
                "Press; analytic form of Green A.E.S., Sawada T. & Shettle E.P. (1974). The "
                "middle ultraviolet reaching the ground. Photochemistry and Photobiology "
                "19:251-259"),
        normalisation_nm=300.0,
        kind="analytic",
        description="Generalised UV-B damage to higher plants; zero at and above 313.3 nm.",
        defined_nm=(280.0, 400.0),
        _function=_plant_damage,
    ),
    ActionSpectrum(
        name="plant_growth",
        title="Plant growth inhibition (Flint & Caldwell)",
        source=("Flint S.D. & Caldwell M.M. (2003). A biological spectral weighting function "
                "for ozone depletion research with higher plants. Physiologia Plantarum "
                "117:137-144 (analytic fit of the appendix; responses measured up to 366 nm, no "
                "long-wave end given). Applied up to 390 nm; the effect of that limit against "
                "366 nm: Micheletti M.I., Piacentini R.D. & Madronich S. (2003). Sensitivity of biologically active UV radiation to stratospheric "
                "ozone changes: effects of action spectrum shape and wavelength range. "
                "Photochemistry and Photobiology 78:456-461"),
        normalisation_nm=300.0,
        kind="analytic",
        description="Growth inhibition of higher plants in UV-B and UV-A; applied up to 390 nm.",
        defined_nm=(280.0, _PLANT_GROWTH_LIMIT_NM),
        _function=_plant_growth,
    ),
    ActionSpectrum(
        name="dna_damage",
        title="DNA damage (Setlow)",
        source=("Setlow R.B. (1974). The wavelengths in sunlight effective in producing skin "
                "cancer: a theoretical analysis. Proc. Natl. Acad. Sci. USA 71:3363-3366; "
                "analytic form of Green A.E.S. & Miller J.H. (1975). Measures of "
                "biologically active radiation in the 280-340 nm region. CIAP Monograph 5, "
                "Part 1, ch. 2.2.4, US Department of Transportation"),
        normalisation_nm=300.0,
        kind="analytic",
        description="Relative DNA damage (naked DNA); normalised at 300 nm; zero above "
                    "340 nm, the upper end of the fitted range.",
        defined_nm=(280.0, 340.0),
        _function=_dna_damage,
    ),
    ActionSpectrum(
        name="previtamin_d3",
        title="Previtamin D3 production in human skin",
        source=("CIE 174:2006 Action spectrum for the production of previtamin D3 in human "
                "skin, after MacLaughlin J.A., Anderson R.R. & Holick M.F. (1982), Science "
                "216:1001-1003. APPROXIMATE values from memory, not the standard's table; "
                "see models/data/action_spectrum_cie_174.csv"),
        normalisation_nm=298.0,
        kind="tabulated",
        description="Indicative previtamin-D3-weighted irradiance; zero above 330 nm. "
                    "Not a measure of vitamin D status.",
        defined_nm=(255.0, 330.0),
        _function=_log_linear("action_spectrum_cie_174.csv"),
    ),
    _unweighted_band("uvb", UVB_BAND_NM),
    _unweighted_band("uva", UVA_BAND_NM, reference_levels=(
        ReferenceLevel("UVA limit for the unprotected eye", 10_000.0, "J m-2",
                       "radiant exposure 315-400 nm for exposures under 1000 s; "
                       "10 W m-2 for longer ones (from memory); local occupational "
                       "rules take precedence", _ICNIRP_2004),
    )),
)

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
