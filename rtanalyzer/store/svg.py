"""Small, dependency-free SVG plots for reports: spectra (with overlays) and a figure over time.

The plots are drawn as plain SVG text so a report needs nothing but a browser: no plotting
library, no scripts, no external files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from html import escape
from typing import Sequence

import numpy as np

WIDTH, HEIGHT = 860, 300
LEFT, RIGHT, TOP, BOTTOM = 58, 18, 26, 42
COLOURS = ("#1d4e89", "#c25100", "#2e7d32", "#7b1fa2", "#6d4c41")
# Display points across the plot: about one per pixel column.
DISPLAY_POINTS = 800


@dataclass(frozen=True)
class Trace:
    frequencies_hz: np.ndarray
    levels_db: np.ndarray
    label: str


def nice_step(span: float, target_ticks: int = 8) -> float:
    """A 1-2-5 step giving about ``target_ticks`` ticks over ``span``."""
    if not span > 0:
        return 1.0
    raw = span / target_ticks
    power = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * power >= raw:
            return m * power
    return 10.0 * power


def _ticks(low: float, high: float, step: float) -> list[float]:
    first = math.ceil(low / step - 1e-9) * step
    out = []
    v = first
    while v <= high + 1e-9 * max(1.0, abs(high)):
        out.append(round(v, 10))
        v += step
    return out


def _fmt(v: float) -> str:
    return f"{v:.1f}"


def _pool(f: np.ndarray, y: np.ndarray, points: int) -> tuple[np.ndarray, np.ndarray]:
    """Max of runs of samples, so the display keeps every peak."""
    if f.size <= points:
        return f, y
    run = -(-f.size // points)
    n = f.size // run * run
    fy = y[:n].reshape(-1, run)
    ff = f[:n].reshape(-1, run)
    idx = fy.argmax(axis=1)
    rows = np.arange(fy.shape[0])
    return ff[rows, idx], fy[rows, idx]


def spectrum_svg(
    traces: Sequence[Trace],
    f_range: tuple[float, float],
    markers: Sequence[tuple[float, str]] = (),
    title: str = "",
    y_label: str = "dBFS in the analysis bandwidth",
) -> str:
    """Spectra as lines over ``f_range`` (Hz), with labelled vertical markers at components."""
    f0, f1 = f_range
    if not f1 > f0:
        f1 = f0 + 1.0
    shown = []
    for t in traces:
        f = np.asarray(t.frequencies_hz, dtype=float)
        y = np.asarray(t.levels_db, dtype=float)
        keep = (f >= f0) & (f <= f1)
        shown.append(_pool(f[keep], y[keep], DISPLAY_POINTS))
    levels = np.concatenate([y for _, y in shown if y.size]) if any(y.size for _, y in shown) else np.array([-100.0, 0.0])
    top = math.ceil((float(levels.max()) + 3.0) / 10.0) * 10.0
    bottom = max(math.floor(float(np.percentile(levels, 1)) / 10.0) * 10.0 - 10.0, top - 160.0)
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM

    def x(v: float) -> float:
        return LEFT + (v - f0) / (f1 - f0) * plot_w

    def y_of(v: float) -> float:
        return TOP + (top - min(max(v, bottom), top)) / (top - bottom) * plot_h

    parts = [_open(title)]
    parts += _grid(f0, f1, bottom, top, x, y_of, "Hz", y_label)
    for i, (f, y) in enumerate(shown):
        if not f.size:
            continue
        path = " ".join(f"{_fmt(x(a))},{_fmt(y_of(b))}" for a, b in zip(f, y))
        parts.append(f'<polyline fill="none" stroke="{COLOURS[i % len(COLOURS)]}" stroke-width="1.2" points="{path}"/>')
    for f, label in markers:
        if f0 <= f <= f1:
            parts.append(
                f'<line x1="{_fmt(x(f))}" y1="{TOP}" x2="{_fmt(x(f))}" y2="{TOP + plot_h}" stroke="#888" '
                'stroke-dasharray="3,3" stroke-width="0.8"/>'
                f'<text x="{_fmt(x(f) + 2)}" y="{TOP + 10}" font-size="10" fill="#555">{escape(label)}</text>'
            )
    parts += _legend([t.label for t in traces])
    parts.append("</svg>")
    return "\n".join(parts)


def timeline_svg(
    points: Sequence[tuple[str, float | None, bool]],
    title: str,
    unit: str,
) -> str:
    """A figure over successive snapshots: (label, value or None, is only a bound). Bounds are hollow."""
    values = [v for _, v, _ in points if v is not None]
    if not values:
        values = [0.0]
    top = math.ceil((max(values) + 1.0) / 5.0) * 5.0
    bottom = math.floor((min(values) - 1.0) / 5.0) * 5.0
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    n = len(points)

    def x(i: float) -> float:
        return LEFT + (i + 0.5) / max(n, 1) * plot_w

    def y_of(v: float) -> float:
        return TOP + (top - v) / (top - bottom) * plot_h

    parts = [_open(title)]
    step = nice_step(top - bottom, 6)
    for v in _ticks(bottom, top, step):
        parts.append(f'<line x1="{LEFT}" y1="{_fmt(y_of(v))}" x2="{LEFT + plot_w}" y2="{_fmt(y_of(v))}" stroke="#e3e3e3"/>')
        parts.append(f'<text x="{LEFT - 6}" y="{_fmt(y_of(v) + 3)}" font-size="10" text-anchor="end">{v:g}</text>')
    parts.append(f'<rect x="{LEFT}" y="{TOP}" width="{plot_w}" height="{plot_h}" fill="none" stroke="#999"/>')
    parts.append(
        f'<text x="14" y="{TOP + plot_h / 2}" font-size="11" transform="rotate(-90 14 {TOP + plot_h / 2})" '
        f'text-anchor="middle">{escape(unit)}</text>'
    )
    label_every = max(1, math.ceil(n / 24))
    line, dots = [], []
    for i, (label, v, bound) in enumerate(points):
        if i % label_every == 0:
            parts.append(f'<text x="{_fmt(x(i))}" y="{TOP + plot_h + 14}" font-size="10" text-anchor="middle">{escape(label)}</text>')
        if v is None:
            continue
        line.append(f"{_fmt(x(i))},{_fmt(y_of(v))}")
        fill = "#fff" if bound else COLOURS[0]
        dots.append(f'<circle cx="{_fmt(x(i))}" cy="{_fmt(y_of(v))}" r="3.5" fill="{fill}" stroke="{COLOURS[0]}"/>')
    if len(line) > 1:
        parts.append(f'<polyline fill="none" stroke="{COLOURS[0]}" stroke-width="1" points="{" ".join(line)}"/>')
    parts += dots
    parts.append(f'<text x="{LEFT + plot_w / 2}" y="{HEIGHT - 6}" font-size="11" text-anchor="middle">snapshot</text>')
    parts.append("</svg>")
    return "\n".join(parts)


def _open(title: str) -> str:
    head = (
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH} {HEIGHT}" width="{WIDTH}" height="{HEIGHT}" '
        f'font-family="sans-serif" role="img" aria-label="{escape(title)}">'
        f'<rect width="{WIDTH}" height="{HEIGHT}" fill="#fff"/>'
    )
    if title:
        head += f'<text x="{LEFT}" y="16" font-size="12" font-weight="bold">{escape(title)}</text>'
    return head


def _grid(f0, f1, bottom, top, x, y_of, x_unit: str, y_label: str) -> list[str]:
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    parts = []
    for v in _ticks(f0, f1, nice_step(f1 - f0)):
        parts.append(f'<line x1="{_fmt(x(v))}" y1="{TOP}" x2="{_fmt(x(v))}" y2="{TOP + plot_h}" stroke="#e3e3e3"/>')
        parts.append(f'<text x="{_fmt(x(v))}" y="{TOP + plot_h + 14}" font-size="10" text-anchor="middle">{v:g}</text>')
    for v in _ticks(bottom, top, 20.0 if top - bottom > 80 else 10.0):
        parts.append(f'<line x1="{LEFT}" y1="{_fmt(y_of(v))}" x2="{LEFT + plot_w}" y2="{_fmt(y_of(v))}" stroke="#e3e3e3"/>')
        parts.append(f'<text x="{LEFT - 6}" y="{_fmt(y_of(v) + 3)}" font-size="10" text-anchor="end">{v:g}</text>')
    parts.append(f'<rect x="{LEFT}" y="{TOP}" width="{plot_w}" height="{plot_h}" fill="none" stroke="#999"/>')
    parts.append(f'<text x="{LEFT + plot_w / 2}" y="{HEIGHT - 6}" font-size="11" text-anchor="middle">{escape(x_unit)}</text>')
    parts.append(
        f'<text x="14" y="{TOP + plot_h / 2}" font-size="11" transform="rotate(-90 14 {TOP + plot_h / 2})" '
        f'text-anchor="middle">{escape(y_label)}</text>'
    )
    return parts


def _legend(labels: Sequence[str]) -> list[str]:
    parts = []
    x0 = WIDTH - RIGHT - 8
    for i, label in enumerate(reversed(labels)):
        index = len(labels) - 1 - i
        y = 16
        width = 7 * len(label) + 24
        x0 -= width
        parts.append(
            f'<line x1="{x0}" y1="{y - 4}" x2="{x0 + 16}" y2="{y - 4}" stroke="{COLOURS[index % len(COLOURS)]}" stroke-width="2"/>'
            f'<text x="{x0 + 20}" y="{y}" font-size="11">{escape(label)}</text>'
        )
    return parts
