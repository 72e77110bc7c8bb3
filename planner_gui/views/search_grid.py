"""Bins at the cursor: one row per satellite above the mask, its frequency bins drawn
across apparent Doppler, with the bin count and width written at the row's end.

Values come from :meth:`core.plan.pipeline.Plan.search_grid_at` (through the model's cached
cursor rows). Rows scroll with the wheel or the scroll bar when they do not all fit.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QCheckBox, QHBoxLayout, QScrollBar, QWidget

from ..models import PlanModel
from ..style import style_for
from ._common import ViewFrame, brush, configure_pyqtgraph, cosmetic_pen, utc_text

ROW_PX = 17          # smallest row height before the rows scroll


class _RowsViewBox(pg.ViewBox):
    """Wheel scrolls the rows; Ctrl+wheel zooms the frequency axis."""

    def __init__(self, owner: SearchGridView):
        super().__init__()
        self._owner = owner

    def wheelEvent(self, ev, axis=None):
        if ev.modifiers() & Qt.KeyboardModifier.ControlModifier:
            super().wheelEvent(ev, axis=0)
        else:
            delta = ev.delta() if hasattr(ev, "delta") else ev.angleDelta().y()
            self._owner.scroll_rows(-1 if delta > 0 else 1)
            ev.accept()


class SearchGridView(ViewFrame):
    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Bins at cursor", parent)
        self.setObjectName("searchGridView")
        self.model = model
        self.relative = QCheckBox("centred on each nominal", self)
        self.relative.setChecked(True)
        self.relative.setToolTip("Checked: each row's frequencies are offsets from its own nominal "
                                 "Doppler (bins readable side by side). Unchecked: apparent Doppler.")
        self.relative.toggled.connect(self._relative_toggled)
        self.add_header_widget(self.relative)
        body = QWidget(self)
        lay = QHBoxLayout(body)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        self.vb = _RowsViewBox(self)
        self.plot = pg.PlotWidget(body, viewBox=self.vb)
        self.plot.setObjectName("searchGridPlot")
        self.scroll = QScrollBar(Qt.Orientation.Vertical, body)
        self.scroll.valueChanged.connect(self._apply_scroll)
        lay.addWidget(self.plot, 1)
        lay.addWidget(self.scroll)
        self.outer.addWidget(body, 1)
        pi = self.plot.getPlotItem()
        pi.setMenuEnabled(False)
        pi.hideButtons()
        pi.showAxis("right")
        pi.showGrid(x=True, y=False, alpha=0.25)
        pi.getAxis("left").setWidth(40)
        pi.getAxis("right").setWidth(124)
        pi.getAxis("left").setStyle(tickLength=0)
        pi.getAxis("right").setStyle(tickLength=0)
        self.vb.setMouseEnabled(x=True, y=False)
        self.vb.invertY(True)
        self._pi = pi

        self.highlight = pg.BarGraphItem(x0=[0], width=[0], y=[0], height=[1.0],
                                         brush=brush("#F0E442", 90), pen=cosmetic_pen("#00000000", 0))
        self.highlight.setZValue(-10)
        pi.addItem(self.highlight)
        self.bins = pg.BarGraphItem(x0=[], width=[], y=[], height=0.62, brush=brush("#999999"),
                                    pen=cosmetic_pen("#FFFFFF", 0.6))
        pi.addItem(self.bins)
        self.windows = pg.BarGraphItem(x0=[], width=[], y=[], height=0.86, brush=None,
                                       pen=cosmetic_pen("#333333", 1.0, Qt.PenStyle.DotLine))
        self.windows.setZValue(2)
        pi.addItem(self.windows)
        self.nominal = pg.ScatterPlotItem(symbol="|", size=16, pen=cosmetic_pen("#000000", 2.0), brush=None)
        self.nominal.setZValue(3)
        pi.addItem(self.nominal)
        self.zero = pg.InfiniteLine(pos=0.0, angle=90, movable=False,
                                    pen=cosmetic_pen("#999999", 1.0, Qt.PenStyle.DashLine))
        pi.addItem(self.zero)
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        self.vb.sigResized.connect(self._resized)
        self._set_x_label()

        self._rows: list[dict] = []
        self._first_row = 0
        self._pens: dict[str, tuple] = {}
        self.info.setText("no plan yet")
        model.planChanged.connect(self._on_plan)
        model.cursorChanged.connect(self._on_cursor)
        model.selectionChanged.connect(self._on_selection)

    # -- model -> view
    def _on_plan(self, result) -> None:
        if not result.plan.reused_geometry:
            self._x_fitted = False

    def _set_x_label(self) -> None:
        if self.relative.isChecked():
            self._pi.setLabel("bottom", "offset from the row's nominal Doppler", units="Hz")
        else:
            self._pi.setLabel("bottom", "apparent Doppler", units="Hz")

    def _relative_toggled(self, _on: bool) -> None:
        self._set_x_label()
        self._x_fitted = False
        self._on_cursor(self.model.cursor)

    def _style(self, system: str):
        st = self._pens.get(system)
        if st is None:
            c = style_for(system).colour
            st = (brush(c, 200), brush(c, 110))
            self._pens[system] = st
        return st

    def _on_cursor(self, k: int) -> None:
        plan = self.model.plan
        if plan is None:
            return
        rows = self.model.cursor_rows()
        self._rows = rows
        x0, width, y, brushes = [], [], [], []
        wl, ww, wy = [], [], []
        total = 0
        rel = self.relative.isChecked()
        for i, r in enumerate(rows):
            shift = r["nominal_hz"] if rel else 0.0
            c = r["bin_centres_hz"] - shift
            wd = r["bin_width_hz"]
            n = len(c)
            total += n
            dark, light = self._style(r["system"])
            x0.append(c - wd / 2.0)
            width.append(np.full(n, wd))
            y.append(np.full(n, float(i)))
            brushes.extend([dark if j % 2 == 0 else light for j in range(n)])
            wl.append(r["low_hz"] - shift)
            ww.append(r["high_hz"] - r["low_hz"])
            wy.append(float(i))
        if rows:
            self.bins.setOpts(x0=np.concatenate(x0), width=np.concatenate(width), y=np.concatenate(y),
                              height=0.62, brushes=brushes)
            self.windows.setOpts(x0=np.array(wl), width=np.array(ww), y=np.array(wy), height=0.86)
            self.nominal.setData([0.0 if rel else r["nominal_hz"] for r in rows],
                                 [float(i) for i in range(len(rows))])
        else:
            self.bins.setOpts(x0=np.array([]), width=np.array([]), y=np.array([]), brushes=None,
                              brush=brush("#999999"))
            self.windows.setOpts(x0=np.array([]), width=np.array([]), y=np.array([]))
            self.nominal.setData([])
        left = [(float(i), r["id"]) for i, r in enumerate(rows)]
        right = [(float(i), f"{r['bins']} × {r['bin_width_hz']:.1f} Hz") for i, r in enumerate(rows)]
        self._pi.getAxis("left").setTicks([left, []])
        self._pi.getAxis("right").setTicks([right, []])
        t = float(plan.times.unix_s[k])
        state = "narrowed windows" if rows and rows[0]["state"] == "narrowed" else "first windows"
        self.info.setText(f"{utc_text(t)} UTC: {len(rows)} satellites, {total} bins ({state}); "
                          "dotted box: window, black tick: nominal Doppler")
        if rows and not getattr(self, "_x_fitted", False):
            if rel:
                lo = min(float(r["bin_centres_hz"][0] - r["bin_width_hz"] / 2 - r["nominal_hz"]) for r in rows)
                hi = max(float(r["bin_centres_hz"][-1] + r["bin_width_hz"] / 2 - r["nominal_hz"]) for r in rows)
                lo, hi = min(lo, -hi), max(hi, -lo)
            else:
                lo = min(r["low_hz"] for r in rows)
                hi = max(r["high_hz"] for r in rows)
            self._x_fitted = True
            self._span = (lo, hi)
            self.vb.setXRange(lo, hi, padding=0.03)
        self._update_scroll()
        self._on_selection(self.model.selected)

    def _on_selection(self, sat_id) -> None:
        idx = next((i for i, r in enumerate(self._rows) if r["id"] == sat_id), None)
        if idx is None:
            self.highlight.setOpts(x0=[0], width=[0], y=[0], height=[1.0])
            self.highlight.hide()
            return
        self.highlight.setOpts(x0=[-1e7], width=[2e7], y=[float(idx)], height=[1.0])
        self.highlight.show()
        if not (self._first_row <= idx < self._first_row + self.visible_rows()):
            self.scroll.setValue(max(0, idx - self.visible_rows() // 2))

    # -- rows and scrolling
    def visible_rows(self) -> int:
        h = self.vb.height()
        if not h or h <= 0:
            h = max(self.plot.height() - 60, ROW_PX)
        return max(3, int(h // ROW_PX))

    def _resized(self, *_args) -> None:
        if self._rows:
            self._update_scroll()

    def _update_scroll(self) -> None:
        n = len(self._rows)
        page = self.visible_rows()
        self.scroll.blockSignals(True)
        self.scroll.setRange(0, max(0, n - page))
        self.scroll.setPageStep(page)
        self._first_row = min(self._first_row, max(0, n - page))
        self.scroll.setValue(self._first_row)
        self.scroll.setVisible(n > page)
        self.scroll.blockSignals(False)
        self._apply_scroll(self._first_row)

    def _apply_scroll(self, value: int) -> None:
        self._first_row = int(value)
        page = self.visible_rows()
        n = len(self._rows)
        shown = min(page, max(n, 1))
        self.vb.setYRange(self._first_row - 0.6, self._first_row + shown - 0.4, padding=0)

    def scroll_rows(self, step: int) -> None:
        self.scroll.setValue(int(np.clip(self._first_row + step, 0, self.scroll.maximum())))

    # -- view -> model
    def _clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton or not self._rows:
            return
        if not self.vb.sceneBoundingRect().contains(ev.scenePos()):
            return
        p = self.vb.mapSceneToView(ev.scenePos())
        i = int(round(p.y()))
        if 0 <= i < len(self._rows) and math.isfinite(p.y()):
            self.model.select(self._rows[i]["id"])

    # -- for tests
    def bin_counts(self) -> dict[str, int]:
        return {r["id"]: r["bins"] for r in self._rows}

    def drawn_bins(self) -> int:
        x0 = self.bins.opts.get("x0")
        return 0 if x0 is None else int(np.asarray(x0).size)
