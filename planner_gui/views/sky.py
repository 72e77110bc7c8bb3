"""Sky view: the satellites' tracks above the elevation mask over the test window.

Polar projection seen from above the site: zenith in the centre, the horizon on the
outer ring, north up and east to the right; radius = 90° - elevation. Each constellation
has its own Okabe-Ito colour and marker shape (planner_gui.style). The marker of each
satellite sits at its position at the cursor time; the shaded ring is below the mask.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QPainterPath, QTransform
from PySide6.QtWidgets import QGraphicsPathItem, QLabel, QWidget

from ..models import PlanModel
from ..style import MARKER_GLYPHS, style_for
from ._common import (
    ViewFrame,
    brush,
    colour,
    configure_pyqtgraph,
    cosmetic_pen,
    pen,
    small_font,
    system_curves,
    utc_text,
)

LEGEND_GLYPHS = MARKER_GLYPHS          # text glyphs of the marker shapes


def sky_xy(az_deg: np.ndarray, el_deg: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Plot coordinates: north up, east right, radius 90 - elevation (degrees)."""
    r = 90.0 - np.asarray(el_deg, dtype=float)
    a = np.radians(np.asarray(az_deg, dtype=float))
    return r * np.sin(a), r * np.cos(a)


def _circle(radius: float, n: int = 181) -> tuple[np.ndarray, np.ndarray]:
    a = np.linspace(0.0, 2.0 * np.pi, n)
    return radius * np.sin(a), radius * np.cos(a)


@lru_cache(maxsize=72)
def _arrow_at(step: int) -> QPainterPath:
    path = QPainterPath()
    path.moveTo(0.5, 0.0)
    path.lineTo(-0.4, 0.32)
    path.lineTo(-0.2, 0.0)
    path.lineTo(-0.4, -0.32)
    path.closeSubpath()
    # symbols are drawn in screen pixels, y down: an angle counted anticlockwise in the
    # plot turns clockwise on the path
    return QTransform().rotate(-5.0 * step).map(path)


def arrow_symbol(angle_deg: float) -> QPainterPath:
    """An arrowhead pointing along ``angle_deg`` (plot coordinates, x right, y up),
    quantised to 5°."""
    return _arrow_at(int(round(angle_deg / 5.0)) % 72)


class SkyView(ViewFrame):
    """Polar sky plot linked to the PlanModel."""

    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Sky", parent)
        self.setObjectName("skyView")
        self.model = model
        self.plot = pg.PlotWidget(self)
        self.plot.setObjectName("skyPlot")
        self.outer.addWidget(self.plot, 1)
        pi = self.plot.getPlotItem()
        pi.hideAxis("left")
        pi.hideAxis("bottom")
        pi.setMenuEnabled(False)
        pi.hideButtons()
        vb = pi.getViewBox()
        vb.setAspectLocked(True)
        vb.setMouseEnabled(False, False)
        vb.setRange(xRange=(-102, 102), yRange=(-102, 102), padding=0)
        self.vb = vb

        # Below-mask ring, drawn under everything.
        self.mask_item = QGraphicsPathItem()
        self.mask_item.setBrush(brush("#BBBBBB", 110))
        self.mask_item.setPen(cosmetic_pen("#888888", 1.0, Qt.PenStyle.DashLine))
        self.mask_item.setZValue(-20)
        pi.addItem(self.mask_item)
        self.mask_label = pg.TextItem("", color="#555555", anchor=(0.5, 0.0))
        self.mask_label.setFont(small_font(7.5))
        pi.addItem(self.mask_label)

        # Elevation rings and azimuth spokes.
        grid_pen = cosmetic_pen("#C8C8C8", 1.0)
        for el in (0, 30, 60):
            x, y = _circle(90.0 - el)
            pi.addItem(pg.PlotDataItem(x, y, pen=cosmetic_pen("#888888", 1.2) if el == 0 else grid_pen))
            if el:
                t = pg.TextItem(f"{el}°", color="#777777", anchor=(0.0, 1.0))
                t.setFont(small_font(7.5))
                t.setPos(2.0, 90.0 - el)
                pi.addItem(t)
        for az in range(0, 360, 30):
            x, y = sky_xy(np.array([az, az]), np.array([0.0, 90.0]))
            pi.addItem(pg.PlotDataItem(x, y, pen=grid_pen))
        for text, az in (("N", 0), ("E", 90), ("S", 180), ("W", 270)):
            x, y = sky_xy(np.array([az]), np.array([-8.0]))
            t = pg.TextItem(text, color="#333333", anchor=(0.5, 0.5))
            t.setFont(small_font(9, bold=True))
            t.setPos(float(x[0]), float(y[0]))
            pi.addItem(t)

        # One track item per constellation, the selected track, cursor markers, labels.
        self.tracks = system_curves(pi, 1.3, 200)
        self.selected_track = pg.PlotDataItem([], [], pen=cosmetic_pen("#000000", 3.0), connect="finite")
        self.selected_track.setZValue(2)
        pi.addItem(self.selected_track)
        # Direction of travel: one arrowhead on each track, halfway along its pass.
        self.arrows = pg.ScatterPlotItem(size=10, pen=cosmetic_pen("#333333", 0.8))
        self.arrows.setZValue(3)
        pi.addItem(self.arrows)
        self.markers = pg.ScatterPlotItem(size=12, hoverable=True, tip=self._tip,
                                          hoverPen=cosmetic_pen("#000000", 2.0))
        self.markers.setZValue(5)
        self.markers.sigClicked.connect(self._clicked)
        pi.addItem(self.markers)
        self.ring = pg.ScatterPlotItem(size=22, symbol="o", pen=cosmetic_pen("#000000", 2.2),
                                       brush=None)
        self.ring.setZValue(6)
        pi.addItem(self.ring)
        self._labels: list[pg.TextItem] = []
        self._label_font = small_font(7.5)
        self._pi = pi
        self._grow_labels(48)           # made now, so the first plan does not wait for them

        # Legend under the plot: colour AND shape of every constellation in the plan.
        self.legend = QLabel("", self)
        self.legend.setObjectName("skyLegend")
        self.legend.setWordWrap(True)
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.outer.addWidget(self.legend)

        self._xy: tuple[np.ndarray, np.ndarray] | None = None
        self._ids: list[str] = []
        self._systems: list[str] = []
        self.info.setText("no plan yet")
        model.planChanged.connect(self._on_plan)
        model.cursorChanged.connect(self._on_cursor)
        model.selectionChanged.connect(self._on_selection)

    # -- model -> view
    def _draw_arrows(self, x: np.ndarray, y: np.ndarray, vis: np.ndarray) -> None:
        spots = []
        for s in range(vis.shape[0]):
            edges = np.flatnonzero(np.diff(np.concatenate(([0], vis[s].astype(np.int8), [0]))))
            for a, b in zip(edges[0::2], edges[1::2]):
                if b - a < 3:
                    continue
                k = (a + b) // 2
                dx, dy = float(x[s, k + 1] - x[s, k - 1]), float(y[s, k + 1] - y[s, k - 1])
                if dx == 0.0 and dy == 0.0:
                    continue
                st = style_for(self._systems[s])
                spots.append({"pos": (float(x[s, k]), float(y[s, k])),
                              "symbol": arrow_symbol(math.degrees(math.atan2(dy, dx))),
                              "brush": brush(st.colour)})
        self.arrows.setData(spots)

    def _on_plan(self, result) -> None:
        plan = result.plan
        pred = plan.prediction
        x, y = sky_xy(pred.azimuth_deg, pred.elevation_deg)
        self._xy = (x, y)
        self._ids = plan.ids
        self._systems = [sp.system for sp in plan.satellites]
        vis = plan.visible
        self._draw_arrows(x, y, vis)
        present = []
        for system, item in self.tracks.items():
            rows = [s for s, sy in enumerate(self._systems) if sy == system]
            if rows and vis[rows].any():
                xx = np.where(vis[rows], x[rows], np.nan)
                yy = np.where(vis[rows], y[rows], np.nan)
                pad = np.full((len(rows), 1), np.nan)
                item.setData(np.hstack((xx, pad)).ravel(), np.hstack((yy, pad)).ravel(), connect="finite")
                present.append(system)
            else:
                item.setData([], [])
        mask = plan.scenario.mask.elevation_deg
        path = QPainterPath()
        path.addEllipse(QPointF(0, 0), 90.0, 90.0)
        r_mask = 90.0 - mask
        if r_mask < 90.0:
            inner = QPainterPath()
            inner.addEllipse(QPointF(0, 0), r_mask, r_mask)
            path = path.subtracted(inner)
            self.mask_item.setPath(path)
            self.mask_label.setText("")
        else:
            self.mask_item.setPath(QPainterPath())
            self.mask_label.setText("")
        parts, tips = [], []
        for system in present:
            st = style_for(system)
            n = sum(1 for s, sy in enumerate(self._systems) if sy == system and vis[s].any())
            glyph = LEGEND_GLYPHS.get(st.marker, "●")
            parts.append(f'<span style="color:{st.colour};">{glyph}</span>&nbsp;{st.label}')
            tips.append(f"{st.label}: {st.marker_name}, {n} satellites above the mask in the window")
        if mask > -5.0:
            parts.append(f'<span style="color:#777777;">◯</span>&nbsp;grey: below {mask:g}°')
        self.legend.setText("&nbsp;&nbsp; ".join(parts))
        self.legend.setToolTip("\n".join(tips))

    def _on_cursor(self, k: int) -> None:
        plan = self.model.plan
        if plan is None or self._xy is None:
            return
        x, y = self._xy
        vis = plan.visible[:, k]
        rows = np.flatnonzero(vis)
        spots = []
        for s in rows:
            st = style_for(self._systems[s])
            spots.append({"pos": (float(x[s, k]), float(y[s, k])), "symbol": st.marker,
                          "brush": brush(st.colour), "pen": cosmetic_pen("#222222", 0.8),
                          "data": self._ids[s]})
        self.markers.setData(spots)
        self._grow_labels(len(rows))
        self._place_labels(rows, x[:, k], y[:, k])
        self.info.setText(f"{len(rows)} in view · {utc_text(float(plan.times.unix_s[k]))} UTC")
        self.info.setToolTip(f"{len(rows)} satellites above the elevation mask at the cursor; "
                             "north up, east right; elevation rings every 30°")
        self._update_ring()

    # Label places tried in turn around a marker: (anchor, offset in marker radii).
    _LABEL_PLACES = (((-0.15, 0.5), (1.0, 0.0)), ((1.15, 0.5), (-1.0, 0.0)),
                     ((0.5, 1.1), (0.0, 1.0)), ((0.5, -0.1), (0.0, -1.0)))

    def _place_labels(self, rows, xs, ys) -> None:
        """Put each ID beside its marker, on the first side where it overlaps neither an
        earlier label nor a marker (the selected satellite first, then the higher ones).
        A label with no free side is left out (the marker's tooltip names it), so labels
        never overlap; the selected satellite is always labelled."""
        from PySide6.QtGui import QFontMetricsF

        px_w, px_h = 0.45, 0.45
        try:
            size = self._pi.getViewBox().viewPixelSize()
            if size[0] > 0 and size[1] > 0:
                px_w, px_h = float(size[0]), float(size[1])
        except Exception:  # no geometry yet (first plan before the widget is shown)
            pass
        fm = QFontMetricsF(self._label_font)
        h = fm.height() * px_h
        r_mark = 6.5 * px_w                      # half the 12 px marker plus a gap
        taken: list[tuple[float, float, float, float]] = [
            (float(xs[s]) - r_mark, float(ys[s]) - r_mark, float(xs[s]) + r_mark, float(ys[s]) + r_mark)
            for s in rows]

        def free(box, own):
            return all(not (box[0] < b[2] and b[0] < box[2] and box[1] < b[3] and b[1] < box[3])
                       for i, b in enumerate(taken) if i != own)

        # Nearest the zenith (highest) first: the plot radius is the zenith distance.
        chosen = self.model.selected
        order = sorted(range(len(rows)), key=lambda i: (self._ids[rows[i]] != chosen,
                                                        float(np.hypot(xs[rows[i]], ys[rows[i]]))))
        for t in self._labels[len(rows):]:
            t.setVisible(False)
        for i in order:
            s = rows[i]
            t = self._labels[i]
            text = self._ids[s]
            w = fm.horizontalAdvance(text) * px_w
            cx, cy = float(xs[s]), float(ys[s])
            choice = None
            for anchor, (ox, oy) in self._LABEL_PLACES:
                px, py = cx + ox * r_mark, cy + oy * r_mark
                x0 = px - anchor[0] * w
                y1 = py + anchor[1] * h            # anchor y counts downwards from the top
                box = (x0, y1 - h, x0 + w, y1)
                if free(box, own=i):
                    choice = (anchor, px, py, box)
                    break
            if choice is None and text != chosen:
                t.setVisible(False)
                continue
            if choice is None:
                anchor, (ox, oy) = self._LABEL_PLACES[0]
                px, py = cx + ox * r_mark, cy
                choice = (anchor, px, py, (px, py - h / 2, px + w, py + h / 2))
            anchor, px, py, box = choice
            taken.append(box)
            t.setText(text)
            t.setAnchor(anchor)
            t.setPos(px, py)
            t.setVisible(True)

    def _grow_labels(self, n: int) -> None:
        while len(self._labels) < n:
            t = pg.TextItem("", color="#222222", anchor=(-0.15, 0.5))
            t.setFont(self._label_font)
            t.setZValue(7)
            t.setVisible(False)
            self._pi.addItem(t)
            self._labels.append(t)

    def _on_selection(self, sat_id) -> None:
        plan = self.model.plan
        if plan is None or self._xy is None or sat_id is None:
            self.selected_track.setData([], [])
            self.ring.setData([])
            return
        s = plan.ids.index(sat_id)
        x, y = self._xy
        vis = plan.visible[s]
        self.selected_track.setPen(pen(self._systems[s], 3.2))
        self.selected_track.setData(np.where(vis, x[s], np.nan), np.where(vis, y[s], np.nan),
                                    connect="finite")
        self._update_ring()
        k = self.model.cursor
        rows = np.flatnonzero(plan.visible[:, k])
        self._place_labels(rows, x[:, k], y[:, k])       # the selected one labelled first

    def _update_ring(self) -> None:
        plan = self.model.plan
        sat = self.model.selected
        if plan is None or sat is None or self._xy is None:
            self.ring.setData([])
            return
        s = plan.ids.index(sat)
        k = self.model.cursor
        if plan.visible[s, k]:
            x, y = self._xy
            self.ring.setData([float(x[s, k])], [float(y[s, k])])
        else:
            self.ring.setData([])

    # -- view -> model
    def _clicked(self, _item, points, _ev) -> None:
        if len(points):
            self.model.select(points[0].data())

    def _tip(self, x: float, y: float, data) -> str:
        plan = self.model.plan
        if plan is None or data is None:
            return ""
        s = plan.ids.index(data)
        k = self.model.cursor
        return (f"{data} ({plan.satellites[s].signal_id})\n"
                f"elevation {plan.prediction.elevation_deg[s, k]:.1f}°, "
                f"azimuth {plan.prediction.azimuth_deg[s, k]:.1f}°")

    def marker_ids(self) -> list[str]:
        return [p.data() for p in self.markers.points()]

    def selected_colour(self) -> str:
        return self.selected_track.opts["pen"].color().name()

    def colour_of(self, system: str):
        return colour(system)
