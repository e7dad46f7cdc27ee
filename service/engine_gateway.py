"""The one way from the service to the engine: the app's ozone resolver, its cache, the
full-solve bound, and every engine call.

``init_app(app)`` attaches the resolver (``app.extensions["uvdose_ozone"]``; operator
grids from config ``UVDOSE_OZONE_GRIDS``) and the physics-state cache
(``app.extensions["uvdose_cache"]``), and loads the engine's precomputed tables, so that a
bad grid file or table fails the start, not a request. In a request, :func:`current`
gives the :class:`Gateway` of the app; the offline ``uvdose batch`` uses :func:`offline`
(the operator grids of the environment's settings, no cache, no bound). Blueprints, the catalogue and the
CLI reach the engine only through here.

The cache sits behind the engine's ``transfer_memo``: it keeps the radiative transfer of
each rounded physics state under the engine's own description of that transfer (weights,
filter, method); the cache adds ``MODEL_VERSION``. Ozone enters as its value in the state,
so operator grids need no part in the key. One request (one :meth:`Gateway.irradiance`
call, or one dose evaluator with all its chunks) shares one full-solve budget and one
cache write allowance.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, replace
from typing import Any, Callable, Mapping, Sequence

import numpy as np
from flask import Flask, current_app

from uvdose.models import clear_sky, dose
from uvdose.models.ozone_grids import OzoneResolver
from uvdose.service import cache, request_deadline, uncertainty_fields
from uvdose.service.config import settings_from_environment

OZONE_EXTENSION = "uvdose_ozone"
CACHE_EXTENSION = "uvdose_cache"
GRIDS_CONFIG_KEY = "UVDOSE_OZONE_GRIDS"

Columns = Mapping[str, np.ndarray]


def init_app(app: Flask) -> None:
    """Attach the ozone resolver and the cache to ``app`` and load the engine's tables now
    (with gunicorn's preload, once before the workers fork), not on the first request."""
    if OZONE_EXTENSION not in app.extensions:
        app.extensions[OZONE_EXTENSION] = resolver_for(app)
    app.extensions[CACHE_EXTENSION] = cache.build_cache(app.config)
    engine_check()


def resolver_for(app: Flask) -> OzoneResolver:
    """The app's resolver: the grids of config ``UVDOSE_OZONE_GRIDS`` (set from the
    environment by ``service.config``), then the climatology."""
    return grid_resolver(app.config.get(GRIDS_CONFIG_KEY))


def grid_resolver(setting: str | None) -> OzoneResolver:
    """The resolver for a ``UVDOSE_OZONE_GRIDS`` value: comma-separated grid files, tried in
    order; unset or empty means the climatology only."""
    return OzoneResolver.from_paths([part.strip() for part in (setting or "").split(",")
                                     if part.strip()])


@dataclass(frozen=True)
class Gateway:
    """The engine as one caller sees it.

    ``ozone_resolver`` ``None`` means the engine's default, the embedded climatology alone;
    ``cache`` ``None`` computes every
    record; ``max_full_solve_records`` bounds the records one call (one request) may send
    to the full solve, ``None`` for no bound.
    """

    ozone_resolver: OzoneResolver | None = None
    cache: Any = None
    max_full_solve_records: int | None = None
    check_deadline: Callable[[], None] | None = None  # raises once the request is past its deadline

    def _on_time(self) -> None:
        if self.check_deadline is not None:
            self.check_deadline()

    def _budget(self) -> clear_sky.FullSolveBudget | None:
        limit = self.max_full_solve_records
        return None if limit is None else clear_sky.FullSolveBudget(limit)

    @property
    def caches(self) -> bool:
        """Whether results come from rounded physics states (a cache with a backend)."""
        return self.cache is not None and getattr(self.cache, "store", None) is not None

    def _memo(self) -> Callable | None:
        """The engine's ``transfer_memo`` for one request: the cache with one write allowance."""
        if self.cache is None:
            return None
        writes = self.cache.allowance()

        def memo(description: str, state: Columns, transfer: Callable) -> dict[str, np.ndarray]:
            self._on_time()
            return self.cache.compute_through(state, transfer, description, writes)

        return memo

    def _with_cache_share(self, result: dict[str, np.ndarray], quantities: Sequence[str]) -> dict[str, np.ndarray]:
        """``result`` with the cache's error added to the uncertainty of ``quantities`` when
        the transfer came from rounded states."""
        return uncertainty_fields.with_cache_share(result, quantities) if self.caches else result

    def irradiance(self, columns: Columns, spectra: Sequence[str], include_spectrum: bool) -> dict[str, np.ndarray]:
        """``models.engine.compute`` on validated condition columns; result columns
        (``EngineResult.as_columns`` names), the transfer through the cache."""
        from uvdose.models import engine

        self._on_time()
        conditions = engine.Conditions.from_columns(columns)
        result = engine.compute(conditions, spectra=spectra, include_spectrum=include_spectrum,
                                ozone_resolver=self.ozone_resolver, full_solve_budget=self._budget(),
                                transfer_memo=self._memo()).as_columns()
        return self._with_cache_share(result, ("uv_index", *spectra))

    def dose_evaluator(self, spectra: Sequence[str], transmittance: np.ndarray | None, glazing: str,
                       kind: str) -> dose.Evaluator:
        """The evaluator the dose and route integrations of models/ call: the engine
        behind ``transmittance`` (``glazing`` names it in messages), the transfer through
        the cache, with one full-solve bound and one cache write allowance over every call;
        ``kind`` names the endpoint."""
        compute = dose.engine_evaluator(spectra, transmittance=transmittance, ozone_resolver=self.ozone_resolver,
                                        full_solve_budget=self._budget(), transfer_memo=self._memo())

        def evaluate(columns: Columns) -> dict[str, np.ndarray]:
            # Samples are built from validated input, so a ValueError inside the engine is
            # our fault, not the client's: keep it out of the 422 path of the endpoints.
            self._on_time()  # between chunks of samples
            try:
                return self._with_cache_share(compute(columns), ("uv_index", *spectra))
            except ValueError as error:
                raise RuntimeError(f"engine failed on dose samples: {error}") from error

        return evaluate

    def _resolver(self) -> OzoneResolver:
        return self.ozone_resolver if self.ozone_resolver is not None else OzoneResolver()

    def with_ozone_climatology(self, name: str | None) -> "Gateway":
        """This gateway with the embedded climatology ``name`` (``None``: unchanged). The
        cache needs no word of it: the ozone value it gives is part of each record's state."""
        if name is None or name == self._resolver().climatology:
            return self
        return replace(self, ozone_resolver=self._resolver().with_climatology(name))

    def reference_ozone(self, latitude_deg, longitude_deg, time_unix_s) -> np.ndarray:
        """The climatological column (DU) of this gateway's climatology, grids ignored."""
        from uvdose.models.ozone_climatology import climatological_ozone_du, day_of_year_from_unix

        return climatological_ozone_du(latitude_deg, longitude_deg, day_of_year_from_unix(time_unix_s),
                                       self._resolver().climatology)

    def ozone(self, latitude_deg: np.ndarray, longitude_deg: np.ndarray,
              time_unix_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(total ozone DU, source) the engine would use for records that give none."""
        return self._resolver().resolve(latitude_deg, longitude_deg, time_unix_s, None)

    @property
    def ozone_climatology(self) -> str:
        """Name of the embedded climatology this gateway's resolver falls back to."""
        return self._resolver().climatology

    def ozone_grids(self) -> list[dict]:
        """The operator grids the resolver consults, in order."""
        return self._resolver().describe()


def offline() -> Gateway:
    """The offline ``uvdose batch``: the operator grids of ``UVDOSE_OZONE_GRIDS`` as the
    service reads it from the environment, no cache, no full-solve bound."""
    return Gateway(ozone_resolver=grid_resolver(settings_from_environment()[GRIDS_CONFIG_KEY]))


def current(ozone_climatology: str | None = None) -> Gateway:
    """The current app's gateway (inside a request or an app context), with the request's
    ``ozone_climatology`` option if it gives one."""
    app = current_app
    return Gateway(app.extensions.get(OZONE_EXTENSION), app.extensions.get(CACHE_EXTENSION),
                   app.config["UVDOSE_MAX_FULL_SOLVE_RECORDS"],
                   request_deadline.check).with_ozone_climatology(ozone_climatology)


def default_spectra() -> list[str]:
    """The spectra an irradiance answer weights by when the request names none."""
    from uvdose.models.engine import DEFAULT_SPECTRA

    return list(DEFAULT_SPECTRA)


# ---------------------------------------------------------------------------------------
# Readiness


def engine_check() -> dict[str, Any]:
    """Import the engine and load its precomputed irradiance table when there is one.

    A table file that is not there yet is reported but does not make the engine unready;
    a table that is there and fails to load does.
    """
    started = time.perf_counter()
    try:
        from uvdose.models import aerosol_table, engine, irradiance_table  # noqa: F401  (importable is part of ready)

        tables = {}
        for name, module in (("irradiance_table", irradiance_table), ("aerosol_table", aerosol_table)):
            try:
                module.load_table()  # memoised: loads once per process
                tables[name] = "loaded"
            except FileNotFoundError:
                tables[name] = "missing"
        if tables["irradiance_table"] == "loaded":
            from uvdose.models import weighted_table

            weighted_table.warm()  # the default path's integrals, once per process
    except Exception as error:  # readiness must report, not raise
        return {"ok": False, "error": f"{type(error).__name__}: {error}"}
    return {"ok": True, **tables, "seconds": round(time.perf_counter() - started, 4)}


def cache_check() -> dict[str, Any]:
    """Name the current app's cache backend and say whether it answers (``None``: no backend to ask)."""
    attached = current_app.extensions.get(CACHE_EXTENSION)
    if attached is None:
        return {"backend": "none", "answers": None}
    try:
        if hasattr(attached, "status"):
            state = dict(attached.status())
        else:
            state = {"backend": type(attached).__name__, "answers": bool(attached.ping())}
    except Exception as error:  # readiness must report, not raise
        return {"backend": str(getattr(attached, "backend", type(attached).__name__)), "answers": False,
                "error": f"{type(error).__name__}: {error}"}
    state["backend"] = str(state.get("backend", type(attached).__name__))
    if state["backend"] == "off":
        state["answers"] = None
    else:
        state["answers"] = bool(state.get("answers"))
    return state
