"""How each answer's uncertainty appears on the wire (irradiance and dose responses).

The numbers come from the engine (``models.uncertainty``, ``EngineResult.relative_sigma``,
``models.dose``); this module only adds the cache's share, totals the components and
lays them out: flat ``uncertainty.*`` columns for the column and CSV layouts, one nested
``uncertainty`` object per row.
"""
from __future__ import annotations

from typing import Any, Mapping, Sequence

import numpy as np

from uvdose.models import uncertainty
from uvdose.models.engine import sigma_column

PREFIX = "uncertainty."

BASIS = ("1-sigma relative uncertainty (fractional standard deviation) of each value; about "
         "nine true values in ten lie within value x exp(+-1.645 sigma). With no cloud input "
         "(cloud_source 'none') the value is the clear-sky one: an upper bound, apart from minutes "
         "of broken-cloud enhancement, whose clouds part is not included.")
"""The ``uncertainty_basis`` member of every irradiance and dose response."""


def with_cache_share(result: Mapping[str, np.ndarray], quantities: Sequence[str]) -> dict[str, np.ndarray]:
    """Result columns with the cache's error (``models.uncertainty.CACHE_RELATIVE_SIGMA``)
    as the ``cache`` component of every lit quantity: the transfer ran on a rounded state."""
    out = dict(result)
    for quantity in quantities:
        key = sigma_column(quantity, "cache")
        if key not in out:
            continue
        share = uncertainty.CACHE_RELATIVE_SIGMA["uv_index" if quantity == "uv_index" else "effective"]
        lit = out[sigma_column(quantity, "model")] > 0.0
        out[key] = np.where(lit, share, 0.0)
    return out


def _components(result: Mapping[str, np.ndarray], quantity: str) -> dict[str, np.ndarray]:
    return {c: np.asarray(result[sigma_column(quantity, c)], dtype=float) for c in uncertainty.COMPONENTS}


def irradiance_columns(result: Mapping[str, np.ndarray], spectra: Sequence[str]) -> dict[str, Any]:
    """Flat ``uncertainty.*`` output columns of an irradiance batch: the UV Index's total and
    components, each effective irradiance's total, the ozone column's own relative sigma,
    and the cloud source."""
    uvi = _components(result, "uv_index")
    out: dict[str, Any] = {f"{PREFIX}uv_index": uncertainty.combined(uvi)}
    for name in spectra:
        out[f"{PREFIX}effective_w_m2.{name}"] = uncertainty.combined(_components(result, name))
    for component, values in uvi.items():
        out[f"{PREFIX}components.{component}"] = values
    out[f"{PREFIX}ozone_relative"] = np.asarray(result["ozone_relative_sigma"], dtype=float)
    out[f"{PREFIX}cloud_source"] = np.asarray(result["cloud_source"]).tolist()
    return out


def nested_column(columns: dict[str, Any]) -> list[dict[str, Any]]:
    """Pop the flat ``uncertainty.*`` columns (lists) and return one ``uncertainty`` object per
    row, with ``effective_w_m2`` and ``components`` nested inside it (built column-wise by
    ``rows_from_columns``, not row by row)."""
    from uvdose.service.wire_formats import rows_from_columns

    flat = {key[len(PREFIX):]: columns.pop(key) for key in [k for k in columns if k.startswith(PREFIX)]}
    groups: dict[str, dict[str, Any]] = {}
    plain: dict[str, Any] = {}
    for key, values in flat.items():
        head, _, tail = key.partition(".")
        if tail:
            groups.setdefault(head, {})[tail] = values
        else:
            plain[key] = values
    order = {"uv_index": plain.pop("uv_index")}
    for head, members in groups.items():
        order[head] = rows_from_columns(members)
    order.update(plain)
    return rows_from_columns(order)


def dose_object(sigma: Mapping[str, Mapping[str, np.ndarray]], index, cloud_source: str | None = None) -> dict[str, Any]:
    """The ``uncertainty`` object of one dose result, at ``index`` of the (K,) or (F, D)
    arrays of ``models.dose``: ``dose_j_m2`` the total per spectrum, then per component a
    map spectrum -> relative sigma, and where known the ``cloud_source``."""
    parts = {name: {c: float(np.asarray(v)[index]) for c, v in components.items()}
             for name, components in sigma.items()}
    out: dict[str, Any] = {"dose_j_m2": {name: float(np.sqrt(sum(v * v for v in values.values())))
                                         for name, values in parts.items()}}
    for component in uncertainty.COMPONENTS:
        out[component] = {name: values[component] for name, values in parts.items()}
    if cloud_source is not None:
        out["cloud_source"] = cloud_source
    return out
