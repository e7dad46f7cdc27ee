"""Row building for JSON responses: the service's generated dict display against library
and plain-Python alternatives (a script; pytest does not collect it).

    python tests/benchmarks/bench_rows.py [--rows 10000] [--repeats 15]

Scenario (invented, our own): the "Vaubrise" parcel depot's planner gets 10 000
irradiance results back as rows: an id, four scalars, three effective irradiances nested
under ``effective_w_m2`` and seven used values, i.e. the columns
``service.irradiance_batch.result_rows`` turns into rows.

Printed, all in one run, best of ``--repeats`` (seconds) and the ratio to the baseline,
``service.wire_formats.rows_from_columns`` (a dict display with constant keys, compiled
once per column layout):

* ``dict(zip(keys, row))`` per row, the nested member built the same way first;
* pandas ``DataFrame.to_dict("records")`` on the flat columns, then the nested member
  moved into place (only when pandas is importable; it is not a dependency);
* each variant followed by ``orjson.dumps``, since the rows exist only to be serialised.

orjson serialises numpy structured arrays only as lists, not as objects, so "orjson on a
structured array" is no alternative for rows of named members.

The machine is shared: read the ratios; the absolute figures move with the load.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import orjson
from timing import best_of, whole_number_options  # noqa: E402  (this folder; see timing.py)

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))

NEST = "effective_w_m2"


def result_columns(n: int, seed: int = 7) -> dict[str, list]:
    rng = np.random.default_rng(seed)
    columns: dict[str, list] = {"id": [f"van-{i % 40}/stop-{i}" for i in range(n)]}
    for name in ("solar_zenith_deg", "solar_azimuth_deg", "uv_index"):
        columns[name] = rng.uniform(0, 90, n).tolist()
    columns["exposure_category"] = rng.choice(["low", "moderate", "high"], n).tolist()
    for name in ("erythema", "actinic_icnirp", "plant_damage"):
        columns[f"{NEST}.{name}"] = rng.uniform(0, 0.3, n).tolist()
    for name in ("uvb_w_m2", "uva_w_m2", "ozone_du", "pressure_hpa", "surface_albedo", "cloud_factor"):
        columns[name] = rng.uniform(0, 400, n).tolist()
    columns["ozone_source"] = ["climatology"] * n
    return columns


def _split(columns: dict[str, list]) -> tuple[list[str], list[str], int]:
    keys = list(columns)
    nested = [key for key in keys if key.startswith(NEST + ".")]
    return keys, nested, keys.index(nested[0])


def rows_dict_zip(columns: dict[str, list]) -> list[dict]:
    keys, nested, at = _split(columns)
    inner_keys = [key[len(NEST) + 1:] for key in nested]
    inner = [dict(zip(inner_keys, values)) for values in zip(*(columns[key] for key in nested))]
    outer_keys = [key for key in keys if key not in nested]
    outer_keys.insert(at, NEST)
    outer = [columns[key] for key in keys if key not in nested]
    outer.insert(at, inner)
    return [dict(zip(outer_keys, values)) for values in zip(*outer)]


def rows_pandas(columns: dict[str, list]) -> list[dict]:
    import pandas

    keys, nested, at = _split(columns)
    inner_keys = [key[len(NEST) + 1:] for key in nested]
    inner = pandas.DataFrame({k: columns[n] for k, n in zip(inner_keys, nested)}).to_dict("records")
    flat = {key: columns[key] for key in keys if key not in nested}
    items = list(flat.items())
    items.insert(at, (NEST, inner))
    return pandas.DataFrame(dict(items)).to_dict("records")


def main() -> None:
    args = whole_number_options(__doc__, rows=10_000, repeats=15)

    from uvdose.service.wire_formats import rows_from_columns

    columns = result_columns(args.rows)
    variants = {"generated dict display (baseline)": lambda c: rows_from_columns(c, nest=NEST),
                "dict(zip(keys, row))": rows_dict_zip}
    try:
        import pandas  # noqa: F401
        variants['pandas DataFrame.to_dict("records")'] = rows_pandas
    except ImportError:
        print("pandas is not installed here: its variant is skipped")
    expected = rows_from_columns(columns, nest=NEST)
    for name, build in variants.items():
        if build(columns) != expected:
            raise SystemExit(f"{name} builds different rows")

    print(f"{args.rows} rows, {len(columns)} columns ({sum(k.startswith(NEST) for k in columns)} nested); "
          f"best of {args.repeats}")
    print(f"{'variant':>38} {'build s':>9} {'ratio':>6} {'build+orjson s':>15} {'ratio':>6}")
    baseline = baseline_dump = None
    for name, build in variants.items():
        build_s = best_of(args.repeats, lambda: build(columns), warmup=True)
        dump_s = best_of(args.repeats, lambda: orjson.dumps(build(columns)), warmup=True)
        baseline, baseline_dump = baseline or build_s, baseline_dump or dump_s
        print(f"{name:>38} {build_s:>9.4f} {build_s / baseline:>6.2f} {dump_s:>15.4f} {dump_s / baseline_dump:>6.2f}")


if __name__ == "__main__":
    main()
