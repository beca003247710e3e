"""Plain line plots of the History window, painted with QPainter (no OpenGL needed).

:class:`LinePlot` draws lines and dots on round-number ticks with a legend, marks points that
are only bounds hollow with "≥", and can put x on a log scale; :func:`time_axis` makes its x
axis read local time. The trend, the overlaid spectra and the band curves all use it.
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Callable

import numpy as np
from PyQt6.QtCore import QPointF, QRectF, Qt
from PyQt6.QtGui import QColor, QFont, QPainter, QPen, QPolygonF
from PyQt6.QtWidgets import QWidget

from rtanalyzer.gui import style



def nice_ticks(lo: float, hi: float, count: int = 6) -> list[float]:
    """Round numbers covering [lo, hi], about ``count`` of them."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / max(count, 1)
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 2.5, 5, 10) if m * power >= raw)
    first = math.ceil(lo / step) * step
    return [first + i * step for i in range(int((hi - first) / step + 1e-9) + 1)]


def log_ticks(lo: float, hi: float) -> list[float]:
    """1-2-5 steps of each decade within [lo, hi] (positive); round linear ones when fewer than two fit."""
    if not (lo > 0 and hi > lo):
        return nice_ticks(lo, hi)
    out = [m * 10.0 ** k for k in range(math.floor(math.log10(lo)), math.ceil(math.log10(hi)) + 1) for m in (1, 2, 5)]
    out = [v for v in out if lo <= v <= hi]
    return out if len(out) >= 2 else nice_ticks(lo, hi, 4)


class LinePlot(QWidget):
    """Lines (and dots) on a light plot with round-number ticks and a legend, drawn with QPainter.

    ``series`` holds (label, colour, xs, ys, dots, bound) and is what tests read back; ``bound``
    marks the points that are only bounds (drawn hollow, with a "≥" note). ``log_x`` puts the x
    axis on a log scale (positive xs only). ``x_limits`` (low, high), when set, shows only that
    part of x (the y axis then fits what is shown).
    """

    def __init__(self, x_title: str = "", y_title: str = "", parent=None, log_x: bool = False) -> None:
        super().__init__(parent)
        self.x_title, self.y_title = x_title, y_title
        self.series: list[tuple[str, str, np.ndarray, np.ndarray, bool, np.ndarray]] = []
        self.log_x = log_x
        self.x_format: Callable[[float], str] = lambda v: f"{v:g}"
        self.x_ticks: Callable[[float, float], list[float]] = log_ticks if log_x else nice_ticks
        self.empty_text = "nothing to show"
        self.bound_text = "≥ at least (under the noise)"
        self.headroom = 0.08  # of the y span, above the data (more keeps the legend off it)
        # line width of each series in turn (the last repeats): a wide first line under a thin
        # second one shows both where two nearly equal traces overlap
        self.line_widths: tuple[float, ...] = (1.6,)
        self.x_span = (0.0, 1.0)
        self.x_limits: tuple[float, float] | None = None
        self.setMinimumHeight(220)

    def set_series(self, series, x_title: str | None = None, y_title: str | None = None) -> None:
        """``series``: (label, colour, xs, ys, dots) or (label, colour, xs, ys, dots, bound)."""
        self.series = []
        for label, colour, xs, ys, dots, *bound in series:
            xs, ys = np.asarray(xs, float), np.asarray(ys, float)
            mask = np.asarray(bound[0], bool) if bound else np.zeros(ys.shape, bool)
            self.series.append((label, colour, xs, ys, dots, mask))
        if x_title is not None:
            self.x_title = x_title
        if y_title is not None:
            self.y_title = y_title
        self.update()

    def _tx(self, xs):
        """x in plot units: log10 of it on a log axis."""
        return np.log10(xs) if self.log_x else xs

    def _shown(self, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
        ok = np.isfinite(ys) & np.isfinite(xs)
        if self.x_limits is not None:
            ok &= (xs >= self.x_limits[0]) & (xs <= self.x_limits[1])
        return ok & (xs > 0) if self.log_x else ok

    def _bounds(self) -> tuple[float, float, float, float] | None:
        """x0, x1 (plot units), y0, y1 of what is drawn."""
        oks = [self._shown(s[2], s[3]) for s in self.series]
        xs = [self._tx(s[2][ok]) for s, ok in zip(self.series, oks)]
        ys = [s[3][ok] for s, ok in zip(self.series, oks)]
        xs, ys = [x for x in xs if x.size], [y for y in ys if y.size]
        if not xs:
            return None
        x0, x1 = min(float(x.min()) for x in xs), max(float(x.max()) for x in xs)
        y0, y1 = min(float(y.min()) for y in ys), max(float(y.max()) for y in ys)
        if x1 <= x0:
            x0, x1 = x0 - 1.0, x1 + 1.0
        if any(s[4] for s in self.series):  # dots: keep the first and last off the frame
            # (and a bound's "≥", written right of its marker, inside it)
            margin = (x1 - x0) * (0.08 if any(s[5].any() for s in self.series) else 0.04)
            x0, x1 = x0 - margin, x1 + margin
        pad = max((y1 - y0) * 0.08, 1.0)
        return x0, x1, y0 - pad, y1 + max((y1 - y0) * self.headroom, 1.0)

    def paintEvent(self, event) -> None:  # noqa: N802 - Qt
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.fillRect(self.rect(), QColor(style.PANEL))
        font = QFont(self.font())
        font.setPointSizeF(style.SMALL_PT)
        p.setFont(font)
        metrics = p.fontMetrics()
        left, top, right, bottom = 64, 14, 16, 44
        area = QRectF(left, top, max(self.width() - left - right, 10), max(self.height() - top - bottom, 10))
        p.fillRect(area, QColor(style.PLOT))
        bounds = self._bounds()
        if bounds is None:
            p.setPen(QColor(style.INK_SOFT))
            p.drawText(area, Qt.AlignmentFlag.AlignCenter, self.empty_text)
            p.end()
            return
        x0, x1, y0, y1 = bounds
        self.x_span = (10.0 ** x0, 10.0 ** x1) if self.log_x else (x0, x1)

        def px(x, y):
            x = self._tx(x)
            return (area.left() + (x - x0) / (x1 - x0) * area.width(),
                    area.bottom() - (y - y0) / (y1 - y0) * area.height())

        grid, ink, soft = QPen(QColor(style.GRID)), QPen(QColor(style.INK)), QColor(style.INK_SOFT)
        for v in nice_ticks(y0, y1):
            _, y = px(x0, v)
            p.setPen(grid)
            p.drawLine(QPointF(area.left(), y), QPointF(area.right(), y))
            p.setPen(ink)
            p.drawText(QRectF(0, y - 9, left - 6, 18), Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter, f"{v:g}")
        for v in self.x_ticks(*self.x_span):
            x, _ = px(v, y0)
            p.setPen(grid)
            p.drawLine(QPointF(x, area.top()), QPointF(x, area.bottom()))
            p.setPen(ink)
            p.drawText(QRectF(x - 60, area.bottom() + 3, 120, 16), Qt.AlignmentFlag.AlignHCenter, self.x_format(v))
        p.setPen(QPen(QColor(style.RULE)))
        p.drawRect(area)
        p.setPen(soft)
        p.drawText(QRectF(area.left(), area.bottom() + 20, area.width(), 18), Qt.AlignmentFlag.AlignHCenter, self.x_title)
        p.save()
        p.translate(12, area.center().y())
        p.rotate(-90)
        p.drawText(QRectF(-area.height() / 2, -8, area.height(), 18), Qt.AlignmentFlag.AlignHCenter, self.y_title)
        p.restore()
        p.setClipRect(area)
        any_bound = False
        for n, (label, colour, xs, ys, dots, bound) in enumerate(self.series):
            pen = QPen(QColor(colour))
            pen.setWidthF(self.line_widths[min(n, len(self.line_widths) - 1)])
            p.setPen(pen)
            ok = self._shown(xs, ys)
            points = [QPointF(*px(x, y)) for x, y in zip(xs[ok], ys[ok])]
            if len(points) > 1:
                p.drawPolyline(QPolygonF(points))
            for q, is_bound in zip(points, bound[ok]):
                if is_bound:  # only a bound: hollow, with "≥" above
                    any_bound = True
                    p.setBrush(QColor(style.PLOT))
                    p.drawEllipse(q, 4.5, 4.5)
                    p.drawText(QRectF(q.x() + 7, q.y() - metrics.height() - 2, 20, metrics.height()),
                               Qt.AlignmentFlag.AlignLeft, "≥")
                elif dots:
                    p.setBrush(QColor(colour))
                    p.drawEllipse(q, 3.5, 3.5)
                p.setBrush(Qt.BrushStyle.NoBrush)
        p.setClipping(False)
        # legend, top right
        y = area.top() + 6
        for label, colour, *_ in self.series:
            if not label:
                continue
            w = metrics.horizontalAdvance(label)
            x = area.right() - w - 34
            p.fillRect(QRectF(x - 6, y - 2, w + 36, metrics.height() + 4), QColor(style.PANEL))
            pen = QPen(QColor(colour))
            pen.setWidthF(3.0)
            p.setPen(pen)
            p.drawLine(QPointF(x, y + metrics.height() / 2), QPointF(x + 20, y + metrics.height() / 2))
            p.setPen(ink)
            p.drawText(QPointF(x + 26, y + metrics.ascent()), label)
            y += metrics.height() + 6
        if any_bound and self.bound_text:  # the hollow marker's meaning, as a last legend row
            w = metrics.horizontalAdvance(self.bound_text)
            x = area.right() - w - 34
            p.fillRect(QRectF(x - 6, y - 2, w + 36, metrics.height() + 4), QColor(style.PANEL))
            p.setPen(ink)
            p.drawEllipse(QPointF(x + 10, y + metrics.height() / 2), 4.5, 4.5)
            p.drawText(QPointF(x + 26, y + metrics.ascent()), self.bound_text)
        p.end()


TIME_STEPS_S = (1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 10800, 21600, 43200,
                86400, 2 * 86400, 7 * 86400, 14 * 86400, 28 * 86400, 91 * 86400, 364 * 86400)


def time_axis(plot: LinePlot) -> None:
    """Make ``plot``'s x axis read local time, as finely as its span needs."""

    def fmt(v: float) -> str:
        x0, x1 = plot.x_span
        span = x1 - x0
        pattern = "%H:%M:%S" if span < 3600 else "%H:%M" if span < 86400 else "%d %b" if span < 30 * 86400 else "%Y-%m-%d"
        return datetime.fromtimestamp(v).strftime(pattern)

    def ticks(lo: float, hi: float) -> list[float]:
        # Steps a clock reads roundly, at multiples counted in local time.
        step = next((t for t in TIME_STEPS_S if t >= (hi - lo) / 6), TIME_STEPS_S[-1])
        offset = datetime.fromtimestamp(lo).astimezone().utcoffset().total_seconds()
        first = math.ceil((lo + offset) / step) * step - offset
        return [first + i * step for i in range(int((hi - first) / step) + 1)]

    plot.x_format = fmt
    plot.x_ticks = ticks

