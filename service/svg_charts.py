"""SVG pictures of computed answers, written by hand: a day's UV Index with the exposure
categories as bands, and a field's daily and cumulative season dose.

Plain SVG 1.1 with presentation attributes only (no ``<style>``, no ``style=""``, no
script, no external reference), so a picture shows the same in an ``<img>``, inlined in
a page under a strict Content-Security-Policy, or opened on its own. Every picture has a
``<title>``, a ``<desc>`` and the caution drawn as text. Axes carry their labels and
units; tick marks are ``<line class="x-tick|y-tick|y2-tick" data-value=...>`` so that a
reader (or a test) can map positions back to values.

Hand-written rather than drawn with a plotting library because it measures far faster:
``tests/benchmarks/bench_pictures.py``, the day picture, best of 50 / 10 on the shared
2-core box: this module 0.51 ms and 11.3 kB; matplotlib 3.11's SVG backend (text as text)
255 ms and 15.6 kB, 500x the time, which would dominate the request (the whole
``GET /v1/pictures/uv-index-day`` with 145 samples, cache off, took 24.9 ms).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence
from xml.sax.saxutils import escape

import numpy as np

WIDTH, HEIGHT = 800, 450
PLOT_LEFT, PLOT_RIGHT, PLOT_TOP, PLOT_BOTTOM = 70.0, 730.0, 56.0, 318.0
FONT = "DejaVu Sans, Arial, sans-serif"
INK = "#1d1b18"

UV_BANDS = (
    # (category, lower UVI bound, upper bound, WHO colour): WHO et al. (2002), Global Solar
    # UV Index: A Practical Guide, colour code; bounds on the whole-number UVI rounded half
    # up, as models.uv_index categorises (2.4 low, 2.5 moderate).
    ("low", 0.0, 2.5, "#3ea72d"),
    ("moderate", 2.5, 5.5, "#fff300"),
    ("high", 5.5, 7.5, "#f18b00"),
    ("very high", 7.5, 10.5, "#e53210"),
    ("extreme", 10.5, math.inf, "#b567a4"),
)


def nice_step(span: float, ticks: int = 5) -> float:
    """A 1, 2, 2.5 or 5 times a power of ten step giving about ``ticks`` intervals over ``span``."""
    if span <= 0 or not math.isfinite(span):
        return 1.0
    raw = span / ticks
    power = 10.0 ** math.floor(math.log10(raw))
    for factor in (1.0, 2.0, 2.5, 5.0, 10.0):
        if raw <= factor * power:
            return factor * power
    return 10.0 * power


def nice_top(value: float, floor: float) -> tuple[float, float]:
    """(axis top, tick step) for data up to ``value``, at least ``floor``."""
    top = max(float(value), floor)
    step = nice_step(top)
    return math.ceil(top / step - 1e-9) * step, step


@dataclass(frozen=True)
class Axis:
    """A linear map from values to pixels."""

    low: float
    high: float
    pixel_low: float
    pixel_high: float

    def __call__(self, values) -> np.ndarray:
        values = np.asarray(values, dtype=float)
        return self.pixel_low + (values - self.low) / (self.high - self.low) * (self.pixel_high - self.pixel_low)


def _number(value: float) -> str:
    return f"{value:.2f}".rstrip("0").rstrip(".")


def _tick_label(value: float) -> str:
    return f"{value:g}" if abs(value) < 1e6 else f"{value:.3g}"


def _text(x: float, y: float, text: str, *, size: float = 12, anchor: str = "start", weight: str = "normal",
          css_class: str = "", rotate: float | None = None, fill: str = INK) -> str:
    transform = f' transform="rotate({_number(rotate)} {_number(x)} {_number(y)})"' if rotate is not None else ""
    klass = f' class="{css_class}"' if css_class else ""
    return (f'<text{klass} x="{_number(x)}" y="{_number(y)}" font-family="{FONT}" font-size="{_number(size)}" '
            f'font-weight="{weight}" text-anchor="{anchor}" fill="{fill}"{transform}>{escape(text)}</text>')


def wrap(text: str, width: int) -> list[str]:
    """Greedy word wrap at ``width`` characters."""
    lines, line = [], ""
    for word in text.split():
        if line and len(line) + 1 + len(word) > width:
            lines.append(line)
            line = word
        else:
            line = f"{line} {word}" if line else word
    if line:
        lines.append(line)
    return lines


def _caution(text: str, top: float) -> str:
    lines = wrap(text, 118)
    out = [f'<g class="caution">', f'<rect x="8" y="{_number(top - 15)}" width="{WIDTH - 16}" '
           f'height="{_number(15 * len(lines) + 8)}" fill="#fff4dc" stroke="#5c3a00" stroke-width="1"/>']
    out += [_text(16, top + 15 * i, line, size=11, css_class="caution-text", fill="#5c3a00")
            for i, line in enumerate(lines)]
    return "".join(out) + "</g>"


def _frame(title: str, desc: str) -> list[str]:
    return [
        '<?xml version="1.0" encoding="UTF-8"?>',
        f'<svg xmlns="http://www.w3.org/2000/svg" version="1.1" width="{WIDTH}" height="{HEIGHT}" '
        f'viewBox="0 0 {WIDTH} {HEIGHT}" role="img" aria-labelledby="picture-title picture-desc">',
        f'<title id="picture-title">{escape(title)}</title><desc id="picture-desc">{escape(desc)}</desc>',
        f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>',
        _text(PLOT_LEFT, 26, title, size=15, weight="bold", css_class="picture-title"),
    ]


def _y_ticks(axis: Axis, step: float, css_class: str, x: float, side: str) -> list[str]:
    out = []
    value = axis.low
    while value <= axis.high + 1e-9 * max(1.0, axis.high):
        y = float(axis(value))
        inner = PLOT_LEFT if side == "left" else PLOT_RIGHT
        outer = inner - 5 if side == "left" else inner + 5
        out.append(f'<line class="{css_class}" data-value="{_tick_label(value)}" x1="{_number(outer)}" '
                   f'y1="{_number(y)}" x2="{_number(inner)}" y2="{_number(y)}" stroke="{INK}" stroke-width="1"/>')
        if side == "left":
            out.append(f'<line class="grid" x1="{_number(PLOT_LEFT)}" y1="{_number(y)}" x2="{_number(PLOT_RIGHT)}" '
                       f'y2="{_number(y)}" stroke="#000000" stroke-opacity="0.12" stroke-width="1"/>')
        out.append(_text(x, y + 4, _tick_label(value), size=11, anchor="end" if side == "left" else "start",
                         css_class=f"{css_class}-label"))
        value += step
    return out


def _x_ticks(axis: Axis, values: Sequence[float], labels: Sequence[str]) -> list[str]:
    out = []
    for value, label in zip(values, labels):
        x = float(axis(value))
        out.append(f'<line class="x-tick" data-value="{_tick_label(value)}" x1="{_number(x)}" '
                   f'y1="{_number(PLOT_BOTTOM)}" x2="{_number(x)}" y2="{_number(PLOT_BOTTOM + 5)}" '
                   f'stroke="{INK}" stroke-width="1"/>')
        out.append(_text(x, PLOT_BOTTOM + 18, label, size=11, anchor="middle", css_class="x-tick-label"))
    return out


def _plot_box() -> str:
    return (f'<rect class="plot-frame" x="{_number(PLOT_LEFT)}" y="{_number(PLOT_TOP)}" '
            f'width="{_number(PLOT_RIGHT - PLOT_LEFT)}" height="{_number(PLOT_BOTTOM - PLOT_TOP)}" '
            f'fill="none" stroke="{INK}" stroke-width="1"/>')


def uv_index_day(hours: np.ndarray, uv_index: np.ndarray, *, title: str, x_label: str, caution: str) -> str:
    """The UV Index over one day: ``hours`` since local midnight (N,), the UV Index (N,), the
    WHO exposure categories as coloured bands behind the curve."""
    hours = np.asarray(hours, dtype=float)
    uv_index = np.asarray(uv_index, dtype=float)
    # Whole UV Index steps of 2 up to at least 12, as the exposure categories are read.
    step = 2.0
    top = max(12.0, 2.0 * math.ceil(float(np.nanmax(uv_index)) / 2.0) if uv_index.size else 12.0)
    x = Axis(0.0, 24.0, PLOT_LEFT, PLOT_RIGHT)
    y = Axis(0.0, top, PLOT_BOTTOM, PLOT_TOP)
    peak = int(np.nanargmax(uv_index)) if uv_index.size else 0
    desc = (f"UV Index from 00:00 to 24:00 local time; highest {uv_index[peak]:.1f} at "
            f"{_clock(hours[peak])}. {caution}")
    out = _frame(title, desc)
    out.append('<g class="bands">')
    for name, low, high, colour in UV_BANDS:
        if low >= top:
            continue
        y_low, y_high = float(y(low)), float(y(min(high, top)))
        out.append(f'<rect class="band" data-category="{escape(name)}" x="{_number(PLOT_LEFT)}" '
                   f'y="{_number(y_high)}" width="{_number(PLOT_RIGHT - PLOT_LEFT)}" '
                   f'height="{_number(y_low - y_high)}" fill="{colour}" fill-opacity="0.28"/>')
        out.append(_text(PLOT_RIGHT + 6, (y_low + y_high) / 2 + 4, name, size=11, css_class="band-label"))
    out.append("</g>")
    out += _y_ticks(y, step, "y-tick", PLOT_LEFT - 8, "left")
    out += _x_ticks(x, [0, 3, 6, 9, 12, 15, 18, 21, 24], [f"{h:02d}:00" for h in range(0, 25, 3)])
    out.append(_plot_box())
    points = " ".join(f"{_number(px)},{_number(py)}" for px, py in zip(x(hours), y(uv_index)))
    out.append(f'<polyline class="series uv-index" points="{points}" fill="none" stroke="{INK}" '
               f'stroke-width="2.2" stroke-linejoin="round"/>')
    out.append(_text((PLOT_LEFT + PLOT_RIGHT) / 2, PLOT_BOTTOM + 38, x_label, size=12, anchor="middle",
                     css_class="axis-label x-label"))
    out.append(_text(22, (PLOT_TOP + PLOT_BOTTOM) / 2, "UV Index (WHO), horizontal surface", size=12,
                     anchor="middle", rotate=-90, css_class="axis-label y-label"))
    out.append(_caution(caution, PLOT_BOTTOM + 68))
    out.append("</svg>")
    return "".join(out)


def _clock(hours: float) -> str:
    minutes = int(round(hours * 60))
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def season(day_labels: Sequence[str], tick_days: Sequence[int], daily: np.ndarray, cumulative: np.ndarray, *,
           title: str, x_label: str, daily_label: str, cumulative_label: str, caution: str,
           tick_text: Sequence[str] | None = None) -> str:
    """A season: the daily dose as bars (left axis) and the running total as a line (right
    axis), both given in J m⁻² and drawn in kJ m⁻²; ``tick_days`` are the day indices
    labelled on the time axis (with ``tick_text``, else the day labels)."""
    daily_kj = np.asarray(daily, dtype=float) / 1000.0
    total_kj = np.asarray(cumulative, dtype=float) / 1000.0
    n = daily_kj.size
    top, step = nice_top(float(daily_kj.max()) if n else 0.0, 0.001)
    top2, step2 = nice_top(float(total_kj.max()) if n else 0.0, 0.001)
    x = Axis(0.0, float(n), PLOT_LEFT, PLOT_RIGHT)
    y = Axis(0.0, top, PLOT_BOTTOM, PLOT_TOP)
    y2 = Axis(0.0, top2, PLOT_BOTTOM, PLOT_TOP)
    desc = (f"{n} days from {day_labels[0]} to {day_labels[-1]}; season total "
            f"{total_kj[-1]:.1f} kJ m-2. {caution}" if n else caution)
    out = _frame(title, desc)
    out += _y_ticks(y, step, "y-tick", PLOT_LEFT - 8, "left")
    out += _y_ticks(y2, step2, "y2-tick", PLOT_RIGHT + 8, "right")
    out += _x_ticks(x, [d + 0.5 for d in tick_days], tick_text or [day_labels[d] for d in tick_days])
    width = (PLOT_RIGHT - PLOT_LEFT) / max(n, 1)
    out.append('<g class="series daily">')
    for index, (label, value) in enumerate(zip(day_labels, daily_kj)):
        top_px = float(y(value))
        out.append(f'<rect class="day" data-day="{escape(label)}" x="{_number(PLOT_LEFT + index * width + 0.1 * width)}" '
                   f'y="{_number(top_px)}" width="{_number(0.8 * width)}" height="{_number(PLOT_BOTTOM - top_px)}" '
                   f'fill="#6d9a3a"/>')
    out.append("</g>")
    out.append(_plot_box())
    centres = x(np.arange(n) + 0.5)
    points = " ".join(f"{_number(px)},{_number(py)}" for px, py in zip(centres, y2(total_kj)))
    out.append(f'<polyline class="series season-total" points="{points}" fill="none" stroke="{INK}" '
               f'stroke-width="2.2" stroke-dasharray="6 3"/>')
    out.append(_text((PLOT_LEFT + PLOT_RIGHT) / 2, PLOT_BOTTOM + 38, x_label, size=12, anchor="middle",
                     css_class="axis-label x-label"))
    out.append(_text(20, (PLOT_TOP + PLOT_BOTTOM) / 2, daily_label, size=12, anchor="middle", rotate=-90,
                     css_class="axis-label y-label"))
    out.append(_text(WIDTH - 12, (PLOT_TOP + PLOT_BOTTOM) / 2, cumulative_label, size=12, anchor="middle",
                     rotate=90, css_class="axis-label y2-label"))
    legend_y = PLOT_TOP - 12
    out.append(f'<g class="legend"><rect x="{_number(PLOT_LEFT)}" y="{_number(legend_y - 9)}" width="14" height="10" '
               f'fill="#6d9a3a"/>' + _text(PLOT_LEFT + 19, legend_y, "daily dose (bars, left axis)", size=11)
               + f'<line x1="{_number(PLOT_LEFT + 230)}" y1="{_number(legend_y - 4)}" x2="{_number(PLOT_LEFT + 254)}" '
               f'y2="{_number(legend_y - 4)}" stroke="{INK}" stroke-width="2.2" stroke-dasharray="6 3"/>'
               + _text(PLOT_LEFT + 259, legend_y, "season total (line, right axis)", size=11) + "</g>")
    out.append(_caution(caution, PLOT_BOTTOM + 68))
    out.append("</svg>")
    return "".join(out)
