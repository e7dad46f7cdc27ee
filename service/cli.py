"""The ``uvdose`` command.

``uvdose serve``
    Run the service under gunicorn with the settings the container uses
    (:mod:`service.server`: ``UVDOSE_BIND``, ``UVDOSE_WORKERS``, …, JSON logs, pooled
    Prometheus metrics), from any directory and any install; ``--config`` runs a gunicorn
    config file of your own instead. Everything comes from the environment (README,
    "Configuration"; parsed by ``service/config.py``).
``uvdose batch IN OUT [--operation fields]``
    Run a batch file of any size through one batch endpoint (irradiance, ozone, windows,
    fields, routes) as a job on Dask (:mod:`service.jobs`, the same engine as
    ``POST /v1/jobs``): on the local cluster by default, or on ``--scheduler`` (or
    ``UVDOSE_DASK_SCHEDULER``), with a progress bar on stderr. Input CSV, JSON or Parquet,
    output JSON (the synchronous answer's shape), NDJSON, CSV or Parquet, each by its
    extension; ``-`` reads stdin / writes stdout. A file with any bad record is rejected
    whole: the problem document goes to stderr and the exit status is 2.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Sequence

from uvdose.service.server import serve

EXIT_INVALID = 2


# ---------------------------------------------------------------------------------------
# batch

_MEDIA_TYPES = {"csv": "text/csv", "json": "application/json", "parquet": "application/vnd.apache.parquet"}
OUTPUT_FORMATS = ("json", "ndjson", "csv", "parquet")


def _kind(path: str, option: str | None, choices: Sequence[str]) -> str:
    if option:
        return option
    suffix = Path(path).suffix.lstrip(".").lower()
    return suffix if suffix in choices else "json"


def _read(path: str) -> bytes:
    return sys.stdin.buffer.read() if path == "-" else Path(path).read_bytes()


def _with_options(data: bytes, media_type: str, options: dict[str, str], spectra, include_spectrum: bool):
    """(body, query): the command line's options over those in a JSON file, or as the query
    of a CSV or Parquet file."""
    import orjson

    query = dict(options)
    if spectra:
        query["spectra"] = ",".join(spectra)
    if include_spectrum:
        query["include_spectrum"] = "true"
    if media_type != "application/json" or not query:
        return data, query
    from uvdose.service.json_body import parse_json_body

    body = parse_json_body(data)  # the service's strict reading: its 400 problem on a bad file
    if isinstance(body, dict):
        body.update({key: value for key, value in options.items()})
        if spectra:
            body["spectra"] = list(spectra)
        if include_spectrum:
            body["include_spectrum"] = True
    return orjson.dumps(body), {}


def _write_rows(job, job_id: str, parts: int, target: str, kind: str) -> None:
    import orjson

    from uvdose.service import cautions, job_results

    envelope = job.envelope(job_id) or {}
    pieces = (job.part_rows(job_id, part) for part in range(parts))
    caution = cautions.csv_caution(envelope.get("caution", cautions.CAUTION), envelope.get("figure_cautions"))
    if kind == "parquet":
        job_results.write_parquet(pieces, sys.stdout.buffer if target == "-" else target, caution)
        return
    out = sys.stdout.buffer if target == "-" else open(target, "wb")
    try:
        if kind in ("csv", "ndjson"):
            chunks = job_results.csv_parts(pieces, caution) if kind == "csv" else job_results.ndjson_parts(pieces)
            for chunk in chunks:
                out.write(chunk)
        else:  # the synchronous answer's shape: its members, then every row in `results`
            envelope.pop("samples", None)
            head = orjson.dumps(envelope)
            out.write(head[:-1] + (b"," if envelope else b"") + b'"results":[')
            first = True
            for piece in pieces:
                lines = [line for line in piece.splitlines() if line]
                if lines:
                    out.write((b"" if first else b",") + b",".join(lines))
                    first = False
            out.write(b"]}\n")
    finally:
        if out is not sys.stdout.buffer:
            out.close()


def run_batch(
    source: str,
    target: str,
    *,
    operation: str = "irradiance",
    spectra: Sequence[str] | None = None,
    include_spectrum: bool = False,
    options: dict[str, str] | None = None,
    chunk_size: int | None = None,
    input_format: str | None = None,
    output_format: str | None = None,
    progress: bool | None = None,
    scheduler: str | None = None,
    workers: int | None = None,
) -> int:
    """Run every record of ``source`` through ``operation`` as a job on the Dask cluster
    (``scheduler``, else ``UVDOSE_DASK_SCHEDULER``, else a local cluster of ``workers``
    processes) into ``target``; returns the process exit status."""
    import tempfile
    import time

    import orjson
    from tqdm import tqdm

    from uvdose.service import jobs
    from uvdose.service.app import create_app
    from uvdose.service.config import settings_from_environment
    from uvdose.service.job_operations import OPERATIONS
    from uvdose.service.problems import Problem, response_for

    in_kind = _kind(source, input_format, tuple(_MEDIA_TYPES))
    out_kind = _kind(target, output_format, OUTPUT_FORMATS)
    try:
        data, query = _with_options(_read(source), _MEDIA_TYPES[in_kind], options or {}, spectra, include_spectrum)
    except Problem as problem:
        sys.stderr.write(response_for(problem).get_data(as_text=True) + "\n")
        return EXIT_INVALID
    with tempfile.TemporaryDirectory(prefix="uvdose-batch-") as store:
        overrides = {"UVDOSE_JOBS_STORE": store, "UVDOSE_JOBS_METADATA_DIR": str(Path(store) / ".metadata"),
                     "REDIS_URL": None, "UVDOSE_DASK_WORKERS": workers}
        if scheduler:
            overrides["UVDOSE_DASK_SCHEDULER"] = scheduler
        if chunk_size:
            overrides["UVDOSE_JOB_PART_WORK"] = chunk_size
        job = jobs.Jobs(settings_from_environment(overrides=overrides), create_app)
        try:
            try:
                status = job.submit(OPERATIONS[operation], data, _MEDIA_TYPES[in_kind], query)
            except Problem as problem:
                sys.stderr.write(response_for(problem).get_data(as_text=True) + "\n")
                return EXIT_INVALID
            del data
            show = progress if progress is not None else status["parts"] > 1
            with tqdm(total=status["records"], unit="record", disable=not show, file=sys.stderr) as bar:
                while status["state"] not in jobs.FINISHED:
                    time.sleep(0.2)
                    status = job.status(status["id"])
                    if status["records_done"] > bar.n:
                        bar.update(status["records_done"] - bar.n)
            if status["state"] != "succeeded":
                sys.stderr.write(orjson.dumps(status.get("problem") or status).decode() + "\n")
                return EXIT_INVALID
            _write_rows(job, status["id"], status["parts"], target, out_kind)
        finally:
            job.close()
    return 0


# ---------------------------------------------------------------------------------------


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="uvdose", description="UV exposure estimates for planning "
                                     "(not a measurement, not medical or occupational-health advice).")
    commands = parser.add_subparsers(dest="command", required=True)
    serve_parser = commands.add_parser("serve", help="run the HTTP service under gunicorn")
    serve_parser.add_argument("--bind", help="host:port to listen on (default 127.0.0.1:8080 or UVDOSE_BIND)")
    serve_parser.add_argument("--workers", type=int, help="worker processes")
    serve_parser.add_argument("--config", type=Path, help="a gunicorn config file of your own (default: the "
                              "container's settings, from the environment)")

    batch = commands.add_parser("batch", help="run a batch file of any size through one endpoint on Dask")
    batch.add_argument("input", help="records file (.csv, .json or .parquet; - for stdin)")
    batch.add_argument("output", help="results file (.json, .ndjson, .csv or .parquet; - for stdout)")
    batch.add_argument("--operation", choices=("irradiance", "ozone", "windows", "fields", "routes"),
                       default="irradiance", help="the batch endpoint (default irradiance)")
    batch.add_argument("--option", action="append", default=[], metavar="NAME=VALUE",
                       help="an option of the endpoint (first_day=2026-04-01); over the file's own")
    batch.add_argument("--spectra", nargs="+", metavar="NAME", help="action spectra (see GET /v1/catalogue)")
    batch.add_argument("--include-spectrum", action="store_true", help="add the spectral irradiance")
    batch.add_argument("--chunk-size", type=int, default=None,
                       help="work per part: records, field-days or route points (default UVDOSE_JOB_PART_WORK)")
    batch.add_argument("--scheduler", help="a Dask scheduler address (default UVDOSE_DASK_SCHEDULER, else a "
                       "local cluster on this machine's cores)")
    batch.add_argument("--workers", type=int, help="worker processes of the local cluster (default: one per core)")
    batch.add_argument("--input-format", choices=tuple(_MEDIA_TYPES), help="override the input file's extension")
    batch.add_argument("--output-format", choices=OUTPUT_FORMATS, help="override the output file's extension")
    batch.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                       help="progress bar on stderr (default: on for more than one part)")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    if args.command == "serve":
        serve(args.bind, args.workers, args.config)
        return 0
    if (args.chunk_size is not None and args.chunk_size <= 0) or (args.workers is not None and args.workers <= 0):
        sys.stderr.write("uvdose batch: --chunk-size and --workers must be positive\n")
        return EXIT_INVALID
    options = dict(item.split("=", 1) for item in args.option if "=" in item)
    if len(options) != len(args.option):
        sys.stderr.write("uvdose batch: --option takes NAME=VALUE\n")
        return EXIT_INVALID
    return run_batch(args.input, args.output, operation=args.operation, spectra=args.spectra,
                     include_spectrum=args.include_spectrum, options=options, chunk_size=args.chunk_size,
                     input_format=args.input_format, output_format=args.output_format, progress=args.progress,
                     scheduler=args.scheduler, workers=args.workers)

if __name__ == "__main__":
    sys.exit(main())
