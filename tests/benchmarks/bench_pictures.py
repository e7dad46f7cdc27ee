"""Pictures: the hand-written SVG (service/svg_charts.py) against matplotlib's SVG backend
drawing the same picture (a day's UV Index with five category bands, axes, labels and a
four-line caption), and the whole ``GET /v1/pictures/uv-index-day`` in process.

    python tests/benchmarks/bench_pictures.py

matplotlib is not a dependency of the service; install it to run the comparison
(``pip install matplotlib``), else that line is skipped. Ratios against the hand-written
drawing, measured in the same process; best of N on a shared 2-core machine.
Scenario (invented, our own): block B of the Combe Basse orchard on the June solstice.
"""
from __future__ import annotations

import io

import numpy as np
from timing import best_of

from uvdose.service import cautions, svg_charts


def _day():
    hours = np.arange(145) / 6.0
    uv_index = np.clip(8.2 * np.cos((hours - 13.6) / 12.0 * np.pi) ** 3, 0.0, None) * (np.abs(hours - 13.6) < 6.5)
    return hours, uv_index


def hand_written(hours, uv_index) -> str:
    return svg_charts.uv_index_day(hours, uv_index, title="UV Index over 2026-06-21 at combe-basse/block-b",
                                   x_label="Local time (UTC+02:00), every 10 minutes", caution=cautions.UV_DAY_CAUTION)


def with_matplotlib(hours, uv_index) -> str:
    import matplotlib

    matplotlib.use("svg")
    from matplotlib import pyplot

    figure, axes = pyplot.subplots(figsize=(8, 4.5), dpi=100)
    for _, low, high, colour in svg_charts.UV_BANDS:
        axes.axhspan(low, min(high, 12.0), color=colour, alpha=0.28, lw=0)
    axes.plot(hours, uv_index, color="#1d1b18", lw=2.2)
    axes.set_xlim(0, 24)
    axes.set_ylim(0, 12)
    axes.set_xticks(range(0, 25, 3), [f"{h:02d}:00" for h in range(0, 25, 3)])
    axes.set_xlabel("Local time (UTC+02:00), every 10 minutes")
    axes.set_ylabel("UV Index (WHO), horizontal surface")
    axes.set_title("UV Index over 2026-06-21 at combe-basse/block-b")
    figure.text(0.02, 0.01, "\n".join(svg_charts.wrap(cautions.UV_DAY_CAUTION, 118)), fontsize=7)
    out = io.StringIO()
    matplotlib.rcParams["svg.fonttype"] = "none"  # text as text, as ours
    figure.savefig(out, format="svg")
    pyplot.close(figure)
    return out.getvalue()


def main() -> None:
    hours, uv_index = _day()
    baseline = best_of(50, lambda: hand_written(hours, uv_index), warmup=True)
    size = len(hand_written(hours, uv_index))
    print(f"hand-written SVG: {baseline * 1000:.2f} ms, {size / 1000:.1f} kB (baseline 1.00x)")
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        print("matplotlib not installed: comparison skipped")
    else:
        other = best_of(10, lambda: with_matplotlib(hours, uv_index), warmup=True)
        other_size = len(with_matplotlib(hours, uv_index))
        print(f"matplotlib SVG:   {other * 1000:.2f} ms, {other_size / 1000:.1f} kB "
              f"({other / baseline:.1f}x the time, {other_size / size:.1f}x the bytes)")

    from uvdose.service.app import create_app

    client = create_app({"TESTING": True, "UVDOSE_CACHE": "off", "UVDOSE_REQUEST_LOG": "off"}).test_client()
    query = {"lat": 44.05, "lon": 4.92, "elevation_m": 120, "date": "2026-06-21", "utc_offset": "+02:00"}
    whole = best_of(10, lambda: client.get("/v1/pictures/uv-index-day", query_string=query), warmup=True)
    print(f"GET /v1/pictures/uv-index-day (145 samples, cache off, in process): {whole * 1000:.1f} ms "
          f"({whole / baseline:.0f}x the drawing)")


if __name__ == "__main__":
    main()
