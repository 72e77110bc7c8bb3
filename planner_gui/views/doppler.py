"""Doppler view: nominal apparent Doppler of every satellite against UTC time, and the
search window of the selected satellite (first window, and the narrower one that
applies once the first satellite is acquired and the oscillator error is known).

Doppler is positive while the satellite approaches. Hover shows time, Doppler and window
edges of the satellite nearest the pointer; a click selects it.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QPainterPath
from PySide6.QtWidgets import QCheckBox, QGraphicsPathItem, QLabel, QWidget

from core.api import hz_range_text, hz_text

from ..models import PlanModel
from ..style import LINE_GLYPHS, MARKER_GLYPHS, OKABE_ITO, SYSTEM_STYLES, style_for
from ._common import (
    UtcAxis,
    ViewFrame,
    band_path,
    brush,
    configure_pyqtgraph,
    cosmetic_pen,
    grid_key,
    pen,
    small_font,
    system_curves,
    utc_text,
)

MARK_EVERY_S = 1200.0    # a constellation marker on each line every 20 minutes


class DopplerView(ViewFrame):
    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Doppler windows", parent)
        self.setObjectName("dopplerView")
        self.model = model
        self.all_windows = QCheckBox("every window", self)
        self.all_windows.setToolTip("Shade the first search window of every satellite, "
                                    "not only the selected one's")
        self.all_windows.toggled.connect(self._draw_all_windows)
        self.legend = QLabel("", self)
        self.legend.setObjectName("dopplerLegend")
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.add_header_widget(self.legend)
        self.add_header_widget(self.all_windows)
        self.plot = pg.PlotWidget(self, axisItems={"bottom": UtcAxis("bottom")})
        self.plot.setObjectName("dopplerPlot")
        self.outer.addWidget(self.plot, 1)
        self.readout = QLabel("", self)
        self.readout.setObjectName("dopplerReadout")
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.readout.setWordWrap(True)
        self.outer.addWidget(self.readout)
        pi = self.plot.getPlotItem()
        pi.setMenuEnabled(False)
        pi.showGrid(x=True, y=True, alpha=0.25)
        pi.setLabel("bottom", "time (UTC)")
        pi.setLabel("left", "Doppler (Hz)")
        pi.getAxis("left").enableAutoSIPrefix(False)        # hertz, like every table
        self._pi = pi

        self.all_bands: dict[str, QGraphicsPathItem] = {}
        for system in SYSTEM_STYLES:
            item = QGraphicsPathItem()
            item.setBrush(brush(SYSTEM_STYLES[system].colour, 40))
            item.setPen(cosmetic_pen("#00000000", 0))
            item.setZValue(-5)
            pi.addItem(item)
            self.all_bands[system] = item
        self.first_band = QGraphicsPathItem()
        self.first_band.setZValue(-2)
        pi.addItem(self.first_band)
        self.after_band = QGraphicsPathItem()
        self.after_band.setZValue(-1)
        pi.addItem(self.after_band)
        self.lines = system_curves(pi, 1.3, 200, patterned=True)
        # The constellation's marker every few minutes along each line: a cue besides
        # colour and line pattern that survives greyscale and colour-blind viewing.
        self.line_marks = pg.ScatterPlotItem(size=6, pxMode=True)
        self.line_marks.setZValue(2)
        pi.addItem(self.line_marks)
        self.selected_line = pg.PlotDataItem([], [], pen=cosmetic_pen("#000000", 2.6), connect="finite")
        self.selected_line.setZValue(3)
        pi.addItem(self.selected_line)
        self.selected_label = pg.TextItem("", color="#000000", anchor=(0.0, 1.0),
                                          fill=(255, 255, 255, 230), border=cosmetic_pen("#000000", 1.0))
        self.selected_label.setFont(small_font(9, bold=True))
        self.selected_label.setZValue(9)
        self.selected_label.hide()
        pi.addItem(self.selected_label)
        self.cursor_line = pg.InfiniteLine(angle=90, movable=False, pen=cosmetic_pen("#444444", 1.2, Qt.PenStyle.DashLine))
        pi.addItem(self.cursor_line)
        self.first_acq_line = pg.InfiniteLine(
            angle=90, movable=False, pen=cosmetic_pen(OKABE_ITO["reddish_purple"], 1.5, Qt.PenStyle.DashDotLine))
        pi.addItem(self.first_acq_line)
        self.first_acq_label = pg.TextItem("", color="#7A3D63", anchor=(0.0, 0.0), fill=(255, 255, 255, 210))
        self.first_acq_label.setFont(small_font(8))
        self.first_acq_label.setZValue(8)
        pi.addItem(self.first_acq_label)
        pi.getViewBox().sigRangeChanged.connect(self._place_label)
        pi.getViewBox().sigResized.connect(self._place_label)
        self.hover_dot = pg.ScatterPlotItem(size=9, symbol="o", pen=cosmetic_pen("#000000", 1.5), brush=None)
        self.hover_dot.setZValue(6)
        pi.addItem(self.hover_dot)

        for item in (self.cursor_line, self.first_acq_line, self.first_acq_label):
            item.hide()
        pi.setYRange(-5000.0, 5000.0, padding=0)
        self.info.setText("no plan yet")
        self.plot.scene().sigMouseMoved.connect(self._mouse_moved)
        self.plot.scene().sigMouseClicked.connect(self._mouse_clicked)
        self._systems: list[str] = []
        self._fitted_grid = None        # (first, last, count) of the grid last fitted to
        model.planChanged.connect(self._on_plan)
        model.cursorChanged.connect(self._on_cursor)
        model.selectionChanged.connect(self._on_selection)

    # -- model -> view
    def _on_plan(self, result) -> None:
        plan = result.plan
        t = plan.times.unix_s
        w = plan.windows_first
        self._systems = [sp.system for sp in plan.satellites]
        tt = np.broadcast_to(t, w.nominal_hz.shape)
        for system, item in self.lines.items():
            rows = [s for s, sy in enumerate(self._systems) if sy == system]
            if rows:
                vis = plan.visible[rows]
                xx = np.where(vis, tt[rows], np.nan)
                yy = np.where(vis, w.nominal_hz[rows], np.nan)
                pad = np.full((len(rows), 1), np.nan)
                item.setData(np.hstack((xx, pad)).ravel(), np.hstack((yy, pad)).ravel(), connect="finite")
            else:
                item.setData([], [])
        self._draw_marks(plan)
        present = [sy for sy in SYSTEM_STYLES if sy in set(self._systems)]
        self.legend.setText("&nbsp;&nbsp;".join(
            f'<span style="color:{style_for(sy).colour};">'
            f"{MARKER_GLYPHS.get(style_for(sy).marker, '●')}&nbsp;{LINE_GLYPHS[style_for(sy).line]}"
            f"</span>&nbsp;{style_for(sy).label}" for sy in present))
        acq = plan.timeline.acquisition_unix_s
        if acq:
            t1 = min(acq.values())
            self.first_acq_line.setValue(t1)
            self.first_acq_label.setText(f"first acquisition {plan.first_acquired} {utc_text(t1)} UTC: "
                                         "windows narrow")
            self.first_acq_line.show()
            self.first_acq_label.show()
        else:
            self.first_acq_line.hide()
            self.first_acq_label.hide()
        self._draw_all_windows()
        self._place_label()
        grid = grid_key(plan)
        if plan.reused_geometry and grid == self._fitted_grid:
            return                       # a search-only change: keep the user's zoom
        self._fitted_grid = grid
        lo = np.nanmin(np.where(plan.visible, w.low_hz, np.nan)) if plan.visible.any() else -5000.0
        hi = np.nanmax(np.where(plan.visible, w.high_hz, np.nan)) if plan.visible.any() else 5000.0
        self._pi.setXRange(float(t[0]), float(t[-1]), padding=0.01)
        self._pi.setYRange(float(lo), float(hi), padding=0.04)
        self._pi.setLimits(xMin=float(t[0]) - 0.05 * (t[-1] - t[0]), xMax=float(t[-1]) + 0.05 * (t[-1] - t[0]))

    def _draw_marks(self, plan) -> None:
        """The constellation's marker on each nominal line every MARK_EVERY_S seconds."""
        t = plan.times.unix_s
        step = max(1, int(round(MARK_EVERY_S / max(plan.scenario.time.step_s, 1e-9))))
        spots = []
        nominal = plan.windows_first.nominal_hz
        for s, system in enumerate(self._systems):
            st = style_for(system)
            ks = np.flatnonzero(plan.visible[s])
            ks = ks[(ks + 3 * s) % step == 0]          # staggered, so marks do not stack
            for k in ks:
                spots.append({"pos": (float(t[k]), float(nominal[s, k])), "symbol": st.marker,
                              "brush": brush(st.colour), "pen": cosmetic_pen("#222222", 0.6)})
        self.line_marks.setData(spots)

    def _place_selected_label(self) -> None:
        plan = self.model.plan
        sat = self.model.selected
        if plan is None or sat is None:
            self.selected_label.hide()
            return
        s = plan.ids.index(sat)
        (x0, x1), _ = self._pi.getViewBox().viewRange()
        t = plan.times.unix_s
        ks = np.flatnonzero(plan.visible[s] & (t >= x0) & (t <= x1))
        if ks.size == 0:
            self.selected_label.hide()
            return
        k = self.model.cursor if self.model.cursor in set(ks.tolist()) else int(ks[ks.size // 2])
        self.selected_label.setText(sat)
        self.selected_label.setPos(float(t[k]), float(plan.windows_first.nominal_hz[s, k]))
        self.selected_label.show()

    def _place_label(self, *_args) -> None:
        self._place_selected_label()
        (x0, x1), (y0, y1) = self._pi.getViewBox().viewRange()
        px = self._pi.getViewBox().viewPixelSize()[0] or 0.0
        t1 = self.first_acq_line.value()
        self.first_acq_label.setPos(max(t1, x0) + 4 * px, y1)

    def _draw_all_windows(self, *_args) -> None:
        plan = self.model.plan
        show = self.all_windows.isChecked() and plan is not None
        for system, item in self.all_bands.items():
            if not show:
                item.setPath(QPainterPath())
                continue
            rows = [s for s, sy in enumerate(self._systems) if sy == system]
            if not rows:
                item.setPath(QPainterPath())
                continue
            w = plan.windows_first
            item.setPath(band_path(plan.times.unix_s, w.low_hz[rows], w.high_hz[rows], plan.visible[rows]))

    def _on_cursor(self, k: int) -> None:
        plan = self.model.plan
        if plan is None:
            return
        self.cursor_line.setValue(float(plan.times.unix_s[k]))
        self.cursor_line.show()
        self._cursor_readout()
        self._place_selected_label()

    def _cursor_readout(self) -> None:
        """Without hover: the selected satellite at the cursor."""
        plan = self.model.plan
        sat = self.model.selected
        if plan is None:
            return
        k = self.model.cursor
        if sat is not None and plan.visible[plan.ids.index(sat), k]:
            self.readout.setText("at the cursor: " + self.readout_text(plan.ids.index(sat), k))
        else:
            self.readout.setText("point at a line for its time, Doppler and window edges; click to select")

    def _on_selection(self, sat_id) -> None:
        plan = self.model.plan
        if plan is None or sat_id is None:
            self.first_band.setPath(QPainterPath())
            self.after_band.setPath(QPainterPath())
            self.selected_line.setData([], [])
            self.info.setText("+ approaching; click a line to select")
            self._cursor_readout()
            self._place_selected_label()
            return
        s = plan.ids.index(sat_id)
        system = self._systems[s]
        t = plan.times.unix_s
        vis = plan.visible[s:s + 1]
        wf, wa = plan.windows_first, plan.windows_after
        self.first_band.setBrush(brush(SYSTEM_STYLES[system].colour, 55))
        self.first_band.setPen(pen(system, 1.0, 200, Qt.PenStyle.DashLine))
        self.first_band.setPath(band_path(t, wf.low_hz[s:s + 1], wf.high_hz[s:s + 1], vis))
        acq = plan.timeline.acquisition_unix_s
        if acq:
            after = vis & (t >= min(acq.values()))[None, :]
            self.after_band.setBrush(brush(SYSTEM_STYLES[system].colour, 140))
            self.after_band.setPen(pen(system, 1.2, 255))
            self.after_band.setPath(band_path(t, wa.low_hz[s:s + 1], wa.high_hz[s:s + 1], after))
        else:
            self.after_band.setPath(QPainterPath())
        self.selected_line.setPen(cosmetic_pen("#000000", 2.6))
        self.selected_line.setData(t, np.where(vis[0], wf.nominal_hz[s], np.nan), connect="finite")
        self.info.setText(f"{sat_id}: light band first, dark band narrowed; + approaching")
        self._cursor_readout()
        self._place_selected_label()

    # -- pointer
    def _nearest(self, pos) -> tuple[int, int] | None:
        plan = self.model.plan
        if plan is None or not self.plot.sceneBoundingRect().contains(pos):
            return None
        vb = self._pi.getViewBox()
        if not vb.sceneBoundingRect().contains(pos):
            return None
        p = vb.mapSceneToView(pos)
        t = plan.times.unix_s
        k = int(np.clip(np.searchsorted(t, p.x()), 0, len(t) - 1))
        if k > 0 and abs(t[k - 1] - p.x()) < abs(t[k] - p.x()):
            k -= 1
        vis = plan.visible[:, k]
        if not vis.any():
            return None
        nominal = plan.windows_first.nominal_hz[:, k]
        dist = np.where(vis, np.abs(nominal - p.y()), np.inf)
        s = int(np.argmin(dist))
        # Only within 12 px of the line.
        px = vb.viewPixelSize()[1]
        if not math.isfinite(dist[s]) or dist[s] > 12 * px:
            return None
        return s, k

    def _mouse_moved(self, pos) -> None:
        hit = self._nearest(pos)
        plan = self.model.plan
        if hit is None or plan is None:
            self.hover_dot.setData([])
            return
        s, k = hit
        self.readout.setText(self.readout_text(s, k))
        self.hover_dot.setData([float(plan.times.unix_s[k])], [float(plan.windows_first.nominal_hz[s, k])])

    def readout_text(self, s: int, k: int) -> str:
        plan = self.model.plan
        wf, wa = plan.windows_first, plan.windows_after
        t = float(plan.times.unix_s[k])
        acq = plan.timeline.acquisition_unix_s
        narrowed = bool(acq) and t >= min(acq.values())
        text = (f"{plan.ids[s]}  {utc_text(t)} UTC   Doppler {hz_text(wf.nominal_hz[s, k], signed=True)} Hz"
                f"   first window {hz_range_text(wf.low_hz[s, k], wf.high_hz[s, k])}")
        if narrowed:
            text += f"   narrowed {hz_range_text(wa.low_hz[s, k], wa.high_hz[s, k])}"
        return text

    def _mouse_clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton:
            return
        hit = self._nearest(ev.scenePos())
        if hit is not None:
            self.model.select(self.model.plan.ids[hit[0]])
            return
        vb = self._pi.getViewBox()
        if self.model.plan is not None and vb.sceneBoundingRect().contains(ev.scenePos()):
            # an empty place: the plan-time cursor goes there
            self.model.set_cursor(self.model.plan.index_at(vb.mapSceneToView(ev.scenePos()).x()))

    def view_point(self, s: int, k: int) -> QPointF:
        """Scene position of satellite s's nominal line at grid index k (for tests)."""
        plan = self.model.plan
        vb = self._pi.getViewBox()
        return vb.mapViewToScene(QPointF(float(plan.times.unix_s[k]),
                                         float(plan.windows_first.nominal_hz[s, k])))
