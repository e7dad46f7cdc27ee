"""The ``uvdose`` command.

``uvdose serve``
    Run the service under gunicorn: with ``deploy/gunicorn.conf.py`` when the source tree
    has it (the container's configuration), else with the same server settings read here
    (``UVDOSE_BIND``, ``UVDOSE_WORKERS``, …; pooled Prometheus metrics). Everything comes
    from the environment (README, "Configuration"; parsed by ``service/config.py``).
``uvdose batch IN OUT``
    Run a CSV or JSON batch file through the same schemas and engine offline, in chunks,
    with a progress bar on stderr. The format of each file follows its extension
    (``.csv`` or ``.json``); ``-`` reads stdin / writes stdout. A file with any bad record
    is rejected whole: the problem document goes to stderr and the exit status is 2.
"""
from __future__ import annotations

import argparse
import os
import runpy
import shutil
import sys
import tempfile
from pathlib import Path
from typing import Any, Sequence

_DEPLOY_CONFIG = Path(__file__).resolve().parent.parent / "deploy" / "gunicorn.conf.py"

EXIT_INVALID = 2


# ---------------------------------------------------------------------------------------
# serve


def _default_server_settings(own_metrics_dir: str | None) -> dict[str, Any]:
    """gunicorn settings without a config file: the same variables as
    ``deploy/gunicorn.conf.py`` (``config.SERVER_SETTINGS``), the same defaults."""
    from uvdose.service.config import ConfigurationError, server_settings_from_environment

    try:
        settings = server_settings_from_environment()
    except ConfigurationError as error:
        raise SystemExit(str(error)) from None

    def child_exit(server, worker):
        from prometheus_client import multiprocess

        multiprocess.mark_process_dead(worker.pid)

    def on_exit(server):
        if own_metrics_dir:
            shutil.rmtree(own_metrics_dir, ignore_errors=True)

    return {
        "bind": [settings["UVDOSE_BIND"]],
        "workers": settings["UVDOSE_WORKERS"],
        "worker_class": "gthread",
        "threads": settings["UVDOSE_THREADS"],
        "timeout": settings["UVDOSE_WORKER_TIMEOUT"],
        "graceful_timeout": settings["UVDOSE_GRACEFUL_TIMEOUT"],
        "keepalive": settings["UVDOSE_KEEPALIVE"],
        "max_requests": settings["UVDOSE_MAX_REQUESTS"],
        "max_requests_jitter": settings["UVDOSE_MAX_REQUESTS"] // 10,
        "preload_app": settings["UVDOSE_PRELOAD"],
        "loglevel": settings["UVDOSE_LOG_LEVEL"].lower(),
        "accesslog": None,
        "child_exit": child_exit,
        "on_exit": on_exit,
    }


def serve(bind: str | None, workers: int | None, config_path: Path | None) -> None:
    """Run gunicorn in this process until it is told to stop."""
    from gunicorn.app.base import BaseApplication

    own_metrics_dir = None
    if config_path is None and not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        # Must be set before prometheus_client is first imported (by the app, below).
        own_metrics_dir = tempfile.mkdtemp(prefix="uvdose-serve-metrics-")
        os.environ["PROMETHEUS_MULTIPROC_DIR"] = own_metrics_dir

    class Server(BaseApplication):
        def load_config(self) -> None:
            if config_path is not None:
                # As gunicorn's own -c does: run the file, keep the names that are settings.
                for key, value in runpy.run_path(str(config_path)).items():
                    if key in self.cfg.settings and value is not None:
                        self.cfg.set(key, value)
            else:
                for key, value in _default_server_settings(own_metrics_dir).items():
                    self.cfg.set(key, value)
            if bind:
                self.cfg.set("bind", [bind])
            if workers:
                self.cfg.set("workers", workers)

        def load(self):
            from uvdose.service.app import create_app

            return create_app()

    Server().run()


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
            body = orjson.loads(data)
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
    except (Problem, orjson.JSONDecodeError) as error:
        problem = error if isinstance(error, Problem) else Problem(400, "malformed-body", "Unreadable input", str(error))
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
    serve_parser.add_argument("--config", type=Path, help="gunicorn config file (default deploy/gunicorn.conf.py "
                              "when present)")

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
        config = args.config or (_DEPLOY_CONFIG if _DEPLOY_CONFIG.is_file() else None)
        serve(args.bind, args.workers, config)
        return 0
    if args.chunk_size <= 0:
        sys.stderr.write("uvdose batch: --chunk-size must be positive\n")
        return EXIT_INVALID
    return run_batch(args.input, args.output, spectra=args.spectra, include_spectrum=args.include_spectrum,
                     chunk_size=args.chunk_size, input_format=args.input_format,
                     output_format=args.output_format, progress=args.progress)


if __name__ == "__main__":
    sys.exit(main())
