"""What reading JSON bodies strictly costs: ``service.json_body.parse_json_body`` against
orjson and the standard library's parser (a script; pytest does not collect it).

    python tests/benchmarks/bench_json_body.py [--points 190000] [--repeats 5]

Scenario (invented, our own): a fleet operator sends a day of its vans' fixes, 100 points
per route, to ``POST /v1/doses/routes`` in one body near the 16 MiB body limit.

Printed, best of ``--repeats`` (seconds) and the ratio to the baseline, ``orjson.loads``
(fast, but it keeps the last of duplicate members, and orjson 3.8 crashes the process on
objects nested 100 000 deep): ``json.loads``; ``json.loads`` with the duplicate-member hook;
the vectorised pre-pass (depth, number length, stray bytes, surrogates) alone; the whole
strict reading.

The machine is shared: read the ratios; the absolute figures move with the load.
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np
import orjson
from timing import best_of, whole_number_options  # noqa: E402  (this folder; see timing.py)

REPO = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO))


def fleet_body(points: int) -> bytes:
    fixes = [{"time": f"2026-07-15T{9 + i // 3600 % 8:02d}:{i // 60 % 60:02d}:{i % 60:02d}Z",
              "lat": 48.1 + i * 1e-6, "lon": 11.5 - i * 1e-6, "stop": i % 17 == 0} for i in range(points)]
    routes = [{"id": f"van-{r}", "points": fixes[r * 100:(r + 1) * 100]} for r in range(points // 100)]
    return json.dumps({"routes": routes, "spectra": ["erythema"]}).encode()


def main() -> None:
    args = whole_number_options(__doc__, points=190_000, repeats=5)
    from uvdose.service import json_body

    body = fleet_body(args.points)
    codes = np.frombuffer(body, dtype=np.uint8)
    variants = [
        ("orjson.loads (baseline)", lambda: orjson.loads(body)),
        ("json.loads", lambda: json.loads(body)),
        ("json.loads + duplicate hook", lambda: json.loads(body, object_pairs_hook=json_body._members)),
        ("pre-pass alone", lambda: (json_body._structure(codes), json_body._surrogates(body, codes))),
        ("parse_json_body (strict)", lambda: json_body.parse_json_body(body)),
    ]
    print(f"{len(body) / 1e6:.1f} MB body, {args.points} points; best of {args.repeats}")
    baseline = None
    for name, call in variants:
        seconds = best_of(args.repeats, call, warmup=True)
        baseline = baseline or seconds
        print(f"{name:>30} {seconds:>8.3f} s {seconds / baseline:>6.2f}x")


if __name__ == "__main__":
    main()
