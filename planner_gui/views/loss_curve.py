"""Bin loss: the coherent-integration loss against frequency offset for one signal's
coherent time, with the offsets of 1, 2 and 3 dB and the chosen bin's edges.

Loss is a positive number of dB, -20 log10 |sinc(offset x Tc)| (core.search.bins). The curve
and marks come from core.search.bins.loss_curve, computed with the plan in the worker; the bin
width from the plan's bin design (core.search.bins.design_bins for the accepted loss).
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QWidget

from ..models import PlanModel
from ..style import OKABE_ITO
from ._common import ViewFrame, brush, configure_pyqtgraph, cosmetic_pen, small_font

FOLLOW = "__follow__"
MARK_COLOURS = {1.0: OKABE_ITO["bluish_green"], 2.0: OKABE_ITO["orange"], 3.0: OKABE_ITO["vermillion"]}


class LossCurveView(ViewFrame):
    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Bin loss", parent)
        self.setObjectName("lossCurveView")
        self.model = model
        self.signal_box = QComboBox(self)
        self.signal_box.setToolTip("Signal whose coherent time is shown; 'selected satellite' "
                                   "follows the selection")
        self.signal_box.currentIndexChanged.connect(self._redraw)
        self.add_header_widget(self.signal_box)
        self.plot = pg.PlotWidget(self)
        self.plot.setObjectName("lossPlot")
        self.outer.addWidget(self.plot, 1)
        pi = self.plot.getPlotItem()
        pi.setMenuEnabled(False)
        pi.hideButtons()
        pi.showGrid(x=True, y=True, alpha=0.25)
        pi.setLabel("bottom", "frequency offset from the bin centre", units="Hz")
        pi.setLabel("left", "loss (dB)")
        pi.getAxis("left").enableAutoSIPrefix(False)
        pi.getViewBox().setMouseEnabled(False, False)
        self._pi = pi
        self.bin_region = pg.LinearRegionItem(values=(0, 0), orientation="vertical", movable=False,
                                              brush=brush(OKABE_ITO["sky_blue"], 45),
                                              pen=cosmetic_pen(OKABE_ITO["blue"], 2.0))
        self.bin_region.setZValue(-10)
        pi.addItem(self.bin_region)
        self.curve = pg.PlotDataItem([], [], pen=cosmetic_pen("#000000", 2.0))
        pi.addItem(self.curve)
        self.accepted = pg.InfiniteLine(angle=0, movable=False,
                                        pen=cosmetic_pen(OKABE_ITO["blue"], 1.2, Qt.PenStyle.DashLine),
                                        label="", labelOpts={"position": 0.5, "color": OKABE_ITO["blue"],
                                                             "anchors": [(0.5, 1.0), (0.5, 1.0)],
                                                             "fill": (255, 255, 255, 200)})
        pi.addItem(self.accepted)
        self.marks = pg.ScatterPlotItem(size=10)
        self.marks.setZValue(5)
        pi.addItem(self.marks)
        self.mark_labels: dict[float, pg.TextItem] = {}
        for level, c in MARK_COLOURS.items():
            t = pg.TextItem("", color=c, anchor=(-0.06, 0.5), fill=(255, 255, 255, 200))
            t.setFont(small_font(8))
            pi.addItem(t)
            self.mark_labels[level] = t
        self.edge_label = pg.TextItem("", color=OKABE_ITO["blue"], anchor=(0.5, 0.0), fill=(255, 255, 255, 210))
        self.edge_label.setFont(small_font(8, bold=True))
        pi.addItem(self.edge_label)
        self._signals: list[str] = []
        self.shown_signal: str | None = None
        self.info.setText("no plan yet")
        model.planChanged.connect(self._on_plan)
        model.selectionChanged.connect(self._redraw)

    def _on_plan(self, result) -> None:
        sigs = sorted(result.plan.bin_design)
        if sigs != self._signals:
            current = self.signal_box.currentData()
            self.signal_box.blockSignals(True)
            self.signal_box.clear()
            self.signal_box.addItem("selected satellite", FOLLOW)
            for s in sigs:
                self.signal_box.addItem(s, s)
            i = self.signal_box.findData(current)
            self.signal_box.setCurrentIndex(max(i, 0))
            self.signal_box.blockSignals(False)
            self._signals = sigs
        self._redraw()

    def _signal(self) -> str | None:
        result = self.model.result
        if result is None or not result.plan.bin_design:
            return None
        choice = self.signal_box.currentData()
        if choice and choice != FOLLOW and choice in result.plan.bin_design:
            return choice
        sat = self.model.selected
        if sat is not None:
            sp = result.plan.satellites[result.plan.ids.index(sat)]
            if sp.signal_id in result.plan.bin_design:
                return sp.signal_id
        return result.plan.satellites[0].signal_id if result.plan.satellites[0].signal_id in \
            result.plan.bin_design else sorted(result.plan.bin_design)[0]

    def _redraw(self, *_args) -> None:
        result = self.model.result
        sid = self._signal()
        self.shown_signal = sid
        if result is None or sid is None:
            return
        curve = result.loss_curves.get(sid)
        design = result.plan.bin_design[sid]
        if curve is None:
            return
        x = np.asarray(curve["offset_hz"])
        y = np.asarray(curve["loss_db"])
        y_top = float(min(np.nanmax(y[np.isfinite(y)]), 12.0))
        self.curve.setData(x, np.clip(y, 0, 40))
        hw = design.half_width_hz
        self.bin_region.setRegion((-hw, hw))
        self.accepted.setValue(design.max_loss_db)
        self.accepted.label.setFormat(f"accepted loss {design.max_loss_db:.2f} dB")
        xs, ys, brushes = [], [], []
        for level, off in curve["marks"].items():
            c = MARK_COLOURS.get(float(level), "#000000")
            for sign in (-1.0, 1.0):
                xs.append(sign * off)
                ys.append(float(level))
                brushes.append(brush(c))
            lab = self.mark_labels.get(float(level))
            if lab is not None:
                lab.setText(f"{level:g} dB at ±{off:.1f} Hz")
                lab.setPos(off, float(level))
        self.marks.setData(xs, ys, brush=brushes, pen=cosmetic_pen("#000000", 0.8), symbol="o")
        self.edge_label.setText(f"bin {design.bin_width_hz:.1f} Hz wide: edges ±{hw:.1f} Hz")
        self.edge_label.setPos(0.0, y_top * 0.98)
        self._pi.setXRange(float(x[0]), float(x[-1]), padding=0.02)
        self._pi.setYRange(0.0, y_top, padding=0.02)
        self.info.setText(f"{sid}: coherent {design.coherent_ms:g} ms; loss = −20 log10|sinc(f·Tc)|; edge "
                          f"{design.worst_loss_db:.2f} dB, mean loss over the bin "
                          f"{design.average_loss_db:.2f} dB")

    def bin_edges_hz(self) -> tuple[float, float]:
        lo, hi = self.bin_region.getRegion()
        return float(lo), float(hi)
