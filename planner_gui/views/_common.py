"""Shared pieces of the plot views: the UTC time axis, pens, band paths, the view frame."""

from __future__ import annotations

import math
from datetime import UTC, datetime

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor, QFont, QPainterPath, QPen
from PySide6.QtWidgets import QGraphicsItem, QHBoxLayout, QLabel, QVBoxLayout, QWidget

from core.api import clock_text

from ..style import SYSTEM_STYLES, style_for

_CONFIGURED = False

# Nice tick steps of a time axis, seconds.
_TIME_STEPS_S = (1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 10800,
                 21600, 43200, 86400)


def configure_pyqtgraph() -> None:
    """White background, black text, antialiasing: legible on screen and in screenshots."""
    global _CONFIGURED
    if not _CONFIGURED:
        pg.setConfigOptions(antialias=True, background="w", foreground="k")
        _CONFIGURED = True


def utc_text(unix_s: float, seconds: bool = True) -> str:
    """Clock text of a planned instant: the one rounding of core.ground.display."""
    if not math.isfinite(unix_s):
        return "—"
    if not seconds:          # axis ticks: minutes, truncated like a clock face
        return datetime.fromtimestamp(unix_s, UTC).strftime("%H:%M")
    return clock_text(unix_s)


def grid_key(plan) -> tuple[float, float, int]:
    """What tells one plan grid from another (first and last time, count): the views keep
    the user's zoom over search-only changes on the same grid and fit anew on another
    (a drive event's plan reuses its geometry but starts at the event)."""
    t = plan.times.unix_s
    return (float(t[0]), float(t[-1]), int(t.size))


def colour(system: str, alpha: int = 255) -> QColor:
    c = QColor(style_for(system).colour)
    c.setAlpha(alpha)
    return c


def pen(system: str, width: float = 1.0, alpha: int = 255,
        style: Qt.PenStyle = Qt.PenStyle.SolidLine) -> QPen:
    p = QPen(colour(system, alpha))
    p.setWidthF(width)
    p.setStyle(style)
    p.setCosmetic(True)
    return p


PEN_STYLES = {"solid": Qt.PenStyle.SolidLine, "dash": Qt.PenStyle.DashLine,
              "dot": Qt.PenStyle.DotLine, "dashdot": Qt.PenStyle.DashDotLine}


def system_curves(plot_item, width: float, alpha: int, z: float = 1.0,
                  patterned: bool = False) -> dict[str, pg.PlotDataItem]:
    """One empty curve per constellation, added to ``plot_item``; ``patterned`` draws each
    in its constellation's line pattern. The curves change only with the plan, so their
    pixels are cached: a cursor or marker moving over them does not redraw every curve."""
    curves: dict[str, pg.PlotDataItem] = {}
    for system in SYSTEM_STYLES:
        style = PEN_STYLES[SYSTEM_STYLES[system].line] if patterned else Qt.PenStyle.SolidLine
        item = pg.PlotDataItem([], [], pen=pen(system, width, alpha, style), connect="finite")
        item.setZValue(z)
        item.curve.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)
        plot_item.addItem(item)
        curves[system] = item
    return curves


def cosmetic_pen(c: str | QColor, width: float = 1.0,
                 style: Qt.PenStyle = Qt.PenStyle.SolidLine) -> QPen:
    p = QPen(QColor(c))
    p.setWidthF(width)
    p.setStyle(style)
    p.setCosmetic(True)
    return p


def brush(c: str | QColor, alpha: int = 255, style: Qt.BrushStyle = Qt.BrushStyle.SolidPattern) -> QBrush:
    q = QColor(c)
    q.setAlpha(alpha)
    return QBrush(q, style)


def small_font(points: float = 8.0, bold: bool = False) -> QFont:
    f = QFont()
    f.setPointSizeF(points)
    f.setBold(bold)
    return f


class UtcAxis(pg.AxisItem):
    """Bottom axis of POSIX seconds, ticks on round UTC times, labelled HH:MM or HH:MM:SS."""

    def __init__(self, orientation: str = "bottom", **kwargs):
        super().__init__(orientation, **kwargs)
        self.enableAutoSIPrefix(False)

    def tickValues(self, minVal: float, maxVal: float, size: float):
        span = maxVal - minVal
        if not (math.isfinite(span) and span > 0 and size > 0):
            return []
        target = span / max(size / 90.0, 1.0)          # one label every ~90 px
        major = next((s for s in _TIME_STEPS_S if s >= target), _TIME_STEPS_S[-1])
        minor_candidates = [s for s in _TIME_STEPS_S if s < major and major % s == 0]
        minor = minor_candidates[-1] if minor_candidates else major
        first = math.ceil(minVal / major) * major
        majors = list(np.arange(first, maxVal + 1e-9, major))
        first_m = math.ceil(minVal / minor) * minor
        minors = [v for v in np.arange(first_m, maxVal + 1e-9, minor) if v % major]
        return [(major, majors), (minor, minors)]

    def tickStrings(self, values, scale, spacing):
        seconds = spacing < 60
        return [utc_text(v, seconds) for v in values]


def band_path(t: np.ndarray, low: np.ndarray, high: np.ndarray, keep: np.ndarray) -> QPainterPath:
    """Closed polygons around [low, high] over each run of ``keep`` (rows are satellites).

    Arrays (S, T); ``t`` (T,). Built with one vectorised call (pg.arrayToQPath).
    """
    xs, ys, conn = [], [], []
    for s in range(keep.shape[0]):
        k = keep[s]
        if not k.any():
            continue
        edges = np.flatnonzero(np.diff(np.concatenate(([0], k.astype(np.int8), [0]))))
        for a, b in zip(edges[0::2], edges[1::2]):
            if b - a < 1:
                continue
            if b - a == 1:                      # a single sample: a thin sliver
                a_t = np.array([t[a] - 1.0, t[a] + 1.0])
                lo = np.repeat(low[s, a], 2)
                hi = np.repeat(high[s, a], 2)
            else:
                a_t, lo, hi = t[a:b], low[s, a:b], high[s, a:b]
            x = np.concatenate((a_t, a_t[::-1], a_t[:1]))
            y = np.concatenate((lo, hi[::-1], lo[:1]))
            c = np.ones(x.size, dtype=bool)
            c[-1] = False
            xs.append(x)
            ys.append(y)
            conn.append(c)
    if not xs:
        return QPainterPath()
    x = np.concatenate(xs)
    y = np.concatenate(ys)
    c = np.concatenate(conn)
    path = pg.arrayToQPath(x, y, connect=c)
    path.setFillRule(Qt.FillRule.WindingFill)
    return path


def joined_rows(x: np.ndarray, y: np.ndarray, keep: np.ndarray, rows: np.ndarray | list[int]
                ) -> tuple[np.ndarray, np.ndarray]:
    """Rows of (S, T) arrays joined into one line with NaN breaks where ``keep`` is False
    and between rows (for one PlotDataItem with connect='finite')."""
    rows = list(rows)
    if not rows:
        return np.array([]), np.array([])
    xx = np.where(keep[rows], x[rows], np.nan)
    yy = np.where(keep[rows], y[rows], np.nan)
    pad = np.full((len(rows), 1), np.nan)
    return np.hstack((xx, pad)).ravel(), np.hstack((yy, pad)).ravel()


class ViewFrame(QWidget):
    """A view: a one-line header (title + read-out), the plot, optional controls."""

    def __init__(self, title: str, parent: QWidget | None = None):
        super().__init__(parent)
        self.outer = QVBoxLayout(self)
        self.outer.setContentsMargins(2, 2, 2, 2)
        self.outer.setSpacing(2)
        self.header = QHBoxLayout()
        self.header.setContentsMargins(4, 0, 4, 0)
        self.title = QLabel(title, self)
        self.title.setStyleSheet("font-weight: bold;")
        self.info = QLabel("", self)
        self.info.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.info.setWordWrap(True)
        self.header.addWidget(self.title)
        self.header.addSpacing(8)
        self.header.addWidget(self.info, 1)
        self.outer.addLayout(self.header)

    def add_header_widget(self, w: QWidget) -> None:
        self.header.addWidget(w)
