"""The ``uvdose`` command.

``uvdose serve``
    Run the service under gunicorn with the settings the container uses
    (:mod:`service.server`: ``UVDOSE_BIND``, ``UVDOSE_WORKERS``, …, JSON logs, pooled
    Prometheus metrics), from any directory and any install; ``--config`` runs a gunicorn
    config file of your own instead. Everything comes from the environment (README,
    "Configuration"; parsed by ``service/config.py``).
``uvdose batch IN OUT``
    Run a CSV or JSON batch file through the same schemas and engine offline, in chunks,
    with a progress bar on stderr. The format of each file follows its extension
    (``.csv`` or ``.json``); ``-`` reads stdin / writes stdout. A file with any bad record
    is rejected whole: the problem document goes to stderr and the exit status is 2.
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


def _media_type(path: str, option: str | None) -> str:
    kind = option or ("csv" if path.lower().endswith(".csv") else "json")
    return {"csv": "text/csv", "json": "application/json"}[kind]


def _read(path: str) -> bytes:
    return sys.stdin.buffer.read() if path == "-" else Path(path).read_bytes()


def run_batch(
    source: str,
    target: str,
    *,
    spectra: Sequence[str] | None = None,
    include_spectrum: bool = False,
    chunk_size: int = 2000,
    input_format: str | None = None,
    output_format: str | None = None,
    progress: bool | None = None,
) -> int:
    """Compute every record of ``source`` into ``target``; returns the process exit status."""
    import orjson
    from tqdm import tqdm

    from uvdose.service import engine_gateway, irradiance_batch as irr, wire_formats
    from uvdose.service.problems import Problem, response_for

    options: dict[str, str] = {}
    if spectra:
        options["spectra"] = ",".join(spectra)
    if include_spectrum:
        options["include_spectrum"] = "true"
    in_type = _media_type(source, input_format)
    data = _read(source)
    try:
        if in_type == wire_formats.JSON_MEDIA_TYPE and options:
            # Command-line options override those in the file.
            body = wire_formats.parse_json_body(data)
            if isinstance(body, dict):
                if spectra:
                    body["spectra"] = list(spectra)
                if include_spectrum:
                    body["include_spectrum"] = True
                data = orjson.dumps(body)
        query = options if in_type == wire_formats.CSV_MEDIA_TYPE else {}
        batch_request = wire_formats.read_batch_bytes(
            data, in_type, query, record_schema=irr.IrradianceRecordSchema(),
            options_schema=irr.IrradianceOptionsSchema(), max_records=sys.maxsize)
    except Problem as problem:
        sys.stderr.write(response_for(problem).get_data(as_text=True) + "\n")
        return EXIT_INVALID
    del data

    batch = batch_request.batch
    try:  # whole-file checks first, so a bad record is reported by its index in the file
        all_columns = irr.with_cloud_factor_from_measurement(batch.columns, batch.ids)
    except Problem as problem:
        sys.stderr.write(response_for(problem).get_data(as_text=True) + "\n")
        return EXIT_INVALID
    gateway = engine_gateway.offline()
    chosen = batch_request.options.get("spectra") or engine_gateway.default_spectra()
    with_spectrum = batch_request.options["include_spectrum"]
    out_type = _media_type(target, output_format)
    n = len(batch)
    show = progress if progress is not None else n > chunk_size
    stream = sys.stdout if target == "-" else open(target, "w", encoding="utf-8", newline="")
    try:
        with tqdm(total=n, unit="record", disable=not show, file=sys.stderr) as bar:
            for start in range(0, n, chunk_size):
                part = slice(start, min(start + chunk_size, n))
                columns = {name: values[part] for name, values in all_columns.items()}
                out, wavelength_nm, spectrum = irr.compute(gateway, columns, batch.ids[part], chosen,
                                                           with_spectrum)
                first = start == 0
                if out_type == wire_formats.CSV_MEDIA_TYPE:
                    stream.write(wire_formats.csv_text(irr.csv_columns(out, wavelength_nm, spectrum, chosen), header=first))
                else:
                    if first:
                        head = orjson.dumps(irr.envelope(chosen, wavelength_nm),
                                            option=orjson.OPT_SERIALIZE_NUMPY).decode()
                        stream.write(head[:-1] + ',"results":[')
                    rows = orjson.dumps(irr.result_rows(out, spectrum)).decode()[1:-1]
                    stream.write(("" if first else ",") + rows)
                bar.update(part.stop - part.start)
        if out_type == wire_formats.JSON_MEDIA_TYPE:
            stream.write("]}\n")
    finally:
        if stream is not sys.stdout:
            stream.close()
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

    batch = commands.add_parser("batch", help="compute a CSV or JSON batch file offline")
    batch.add_argument("input", help="records file (.csv or .json; - for stdin)")
    batch.add_argument("output", help="results file (.csv or .json; - for stdout)")
    batch.add_argument("--spectra", nargs="+", metavar="NAME", help="action spectra (see GET /v1/catalogue)")
    batch.add_argument("--include-spectrum", action="store_true", help="add the spectral irradiance")
    batch.add_argument("--chunk-size", type=int, default=2000, help="records per engine call (default 2000)")
    batch.add_argument("--input-format", choices=("csv", "json"), help="override the input file's extension")
    batch.add_argument("--output-format", choices=("csv", "json"), help="override the output file's extension")
    batch.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                       help="progress bar on stderr (default: on for more than one chunk)")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    if args.command == "serve":
        serve(args.bind, args.workers, args.config)
        return 0
    if args.chunk_size <= 0:
        sys.stderr.write("uvdose batch: --chunk-size must be positive\n")
        return EXIT_INVALID
    return run_batch(args.input, args.output, spectra=args.spectra, include_spectrum=args.include_spectrum,
                     chunk_size=args.chunk_size, input_format=args.input_format,
                     output_format=args.output_format, progress=args.progress)


if __name__ == "__main__":
    sys.exit(main())
