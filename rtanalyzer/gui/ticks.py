"""Axis ticks for the plots: 1-2-5 steps on linear axes, decades with 2 and 5 on log frequency.

Pure functions of the visible range, returning tick values and their labels (kHz as "2k", a
real minus sign); :mod:`rtanalyzer.gui.plots` draws them.
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

TickFunction = Callable[[float, float], tuple[np.ndarray, np.ndarray, list[str]]]

MINUS = "\u2212"


def _step(span: float, target: int) -> float:
    raw = span / max(target, 1)
    power = 10.0 ** math.floor(math.log10(raw)) if raw > 0 else 1.0
    for m in (1.0, 2.0, 2.5, 5.0, 10.0):
        if raw <= m * power:
            return m * power
    return 10.0 * power


def linear_ticks(lo: float, hi: float, target: int = 8) -> tuple[np.ndarray, np.ndarray]:
    """Major ticks at a 1-2-2.5-5 step with about ``target`` of them, and 4 minors between."""
    lo, hi = min(lo, hi), max(lo, hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi - lo <= 0:
        return np.array([]), np.array([])
    step = _step(hi - lo, target)
    first = math.ceil(lo / step) * step
    major = np.arange(first, hi + step * 1e-9, step)
    minor_step = step / 5.0
    minor = np.arange(math.ceil(lo / minor_step) * minor_step, hi + minor_step * 1e-9, minor_step)
    minor = minor[np.min(np.abs(minor[:, None] - major[None, :]), axis=1) > minor_step * 1e-6] if major.size else minor
    return major, minor


def log_ticks(lo_log: float, hi_log: float) -> tuple[np.ndarray, np.ndarray]:
    """Ticks of a log10 axis, in log10 units: 1, 2, 5 per decade (1 only when zoomed far out)."""
    lo_log, hi_log = min(lo_log, hi_log), max(lo_log, hi_log)
    if not (math.isfinite(lo_log) and math.isfinite(hi_log)) or hi_log - lo_log <= 0:
        return np.array([]), np.array([])
    decades = range(math.floor(lo_log) - 1, math.ceil(hi_log) + 1)
    dense = hi_log - lo_log < 3.5
    mantissas = (1, 2, 5) if dense else (1,)
    major = [math.log10(m) + d for d in decades for m in mantissas]
    minor = [math.log10(m) + d for d in decades for m in range(2, 10) if m not in mantissas]
    major = np.array([v for v in major if lo_log <= v <= hi_log])
    minor = np.array([v for v in minor if lo_log <= v <= hi_log])
    return major, minor


def format_hz(f: float) -> str:
    """'500', '1k', '2.5k', '24k': compact, unit on the axis title."""
    if abs(f) >= 1000:
        text = f"{f / 1000:.3g}k"
    else:
        text = f"{f:.4g}"
    return text.replace("-", MINUS)


def step_decimals(step: float) -> int:
    """Decimals a tick step needs to be printed exactly: 0.25 needs two, 2.5 one, 50 none."""
    decimals = 0
    while decimals < 6 and abs(round(step, decimals) - step) > 1e-9 * max(abs(step), 1e-12):
        decimals += 1
    return decimals


def format_number(v: float, step: float) -> str:
    """A tick value with as many decimals as its step needs (32.5 on a 2.5 step, not 32)."""
    text = f"{v:.{step_decimals(step) if step > 0 else 0}f}"
    if text.startswith("-") and float(text) == 0:
        text = text[1:]
    return text.replace("-", MINUS)


def frequency_ticks(log: bool) -> TickFunction:
    def ticks(lo: float, hi: float):
        if log:
            major, minor = log_ticks(lo, hi)
            if len(major) < 2:  # zoomed in within a decade: linear steps, placed on the log axis
                lin_major, lin_minor = linear_ticks(10.0 ** min(lo, hi), 10.0 ** max(lo, hi), 5)
                lin_major, lin_minor = lin_major[lin_major > 0], lin_minor[lin_minor > 0]
                return np.log10(lin_major), np.log10(lin_minor), [format_hz(v) for v in lin_major]
            return major, minor, [format_hz(10.0 ** v) for v in major]
        major, minor = linear_ticks(lo, hi)
        return major, minor, [format_hz(v) for v in major]

    return ticks


def value_ticks(target: int = 6) -> TickFunction:
    def ticks(lo: float, hi: float):
        major, minor = linear_ticks(lo, hi, target)
        step = major[1] - major[0] if len(major) > 1 else 1.0
        return major, minor, [format_number(v, step) for v in major]

    return ticks
