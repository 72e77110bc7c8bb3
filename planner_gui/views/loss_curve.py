"""Bin design: the coherent-integration loss against frequency offset for one signal's
coherent time, with the offsets of 1, 2 and 3 dB and the chosen bin's edges, and the
place where the engineer sets the coherent time and the accepted loss (type them, drag
the accepted-loss line or a bin edge). The bin width, the bins per satellite and the
total cells at the cursor follow at once (previewed here with core.search.bins, then
computed by the plan that the change starts).

Loss is a positive number of dB, -20 log10 |sinc(offset x Tc)| (core.search.bins). The curve
and marks come from core.search.bins.loss_curve, computed with the plan in the worker; the bin
width from the plan's bin design (core.search.bins.design_bins for the accepted loss).
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QComboBox, QDoubleSpinBox, QHBoxLayout, QLabel, QWidget

from core.api import KEY_RULES, bin_count, design_bins

from ..models import PlanModel
from ..style import OKABE_ITO
from ._common import ViewFrame, brush, configure_pyqtgraph, cosmetic_pen, small_font

FOLLOW = "__follow__"
MARK_COLOURS = {1.0: OKABE_ITO["bluish_green"], 2.0: OKABE_ITO["orange"], 3.0: OKABE_ITO["vermillion"]}


def _rule(dotted: str):
    return next(r for r in KEY_RULES if r.dotted == dotted)


def sinc_loss_db(offset_hz: float, coherent_s: float) -> float:
    """-20 log10 |sinc(offset x Tc)|, positive dB (numpy's normalised sinc)."""
    v = abs(float(np.sinc(offset_hz * coherent_s)))
    return float("inf") if v == 0.0 else -20.0 * float(np.log10(v))


class LossCurveView(ViewFrame):
    # (scenario key, value): the engineer set a design value here
    designEdited = Signal(str, float)

    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        configure_pyqtgraph()
        super().__init__("Bin design", parent)
        self.setObjectName("lossCurveView")
        self.model = model
        self.signal_box = QComboBox(self)
        self.signal_box.setToolTip("Signal whose coherent time is shown; 'selected satellite' "
                                   "follows the selection")
        self.signal_box.currentIndexChanged.connect(self._redraw)
        self.add_header_widget(self.signal_box)
        controls = QHBoxLayout()
        controls.setContentsMargins(4, 0, 4, 0)
        coh, loss = _rule("search.coherent_ms"), _rule("search.max_frequency_loss_db")
        self.coherent_spin = QDoubleSpinBox(self)
        self.coherent_spin.setObjectName("designCoherent")
        self.coherent_spin.setDecimals(0)
        self.coherent_spin.setRange(coh.lo, coh.hi)
        self.coherent_spin.setSuffix(" ms")
        self.coherent_spin.setToolTip(f"Coherent time of the [search] section ({coh.lo:g} to "
                                      f"{coh.hi:g} ms); a per-signal value overrides it")
        self.loss_spin = QDoubleSpinBox(self)
        self.loss_spin.setObjectName("designLoss")
        self.loss_spin.setDecimals(2)
        self.loss_spin.setSingleStep(0.1)
        self.loss_spin.setRange(loss.lo, loss.hi)
        self.loss_spin.setSuffix(" dB")
        self.loss_spin.setToolTip(f"Accepted loss at the bin edge ({loss.lo:g} to {loss.hi:g} dB); "
                                  "or drag the dashed line or a bin edge")
        self.figures = QLabel("", self)
        self.figures.setObjectName("designFigures")
        self.figures.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        controls.addWidget(QLabel("Coherent time", self))
        controls.addWidget(self.coherent_spin)
        controls.addSpacing(10)
        controls.addWidget(QLabel("Accepted loss", self))
        controls.addWidget(self.loss_spin)
        controls.addSpacing(12)
        controls.addWidget(self.figures, 1)
        self.outer.addLayout(controls)
        self.coherent_spin.editingFinished.connect(
            lambda: self._edited("search.coherent_ms", self.coherent_spin.value()))
        self.loss_spin.editingFinished.connect(
            lambda: self._edited("search.max_frequency_loss_db", self.loss_spin.value()))
        self.coherent_spin.valueChanged.connect(lambda _v: self._preview())
        self.loss_spin.valueChanged.connect(lambda _v: self._preview())
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
        self.bin_region = pg.LinearRegionItem(values=(0, 0), orientation="vertical", movable=True,
                                              brush=brush(OKABE_ITO["sky_blue"], 45),
                                              pen=cosmetic_pen(OKABE_ITO["blue"], 2.0))
        self.bin_region.setZValue(-10)
        pi.addItem(self.bin_region)
        self.curve = pg.PlotDataItem([], [], pen=cosmetic_pen("#000000", 2.0))
        pi.addItem(self.curve)
        self.bin_region.setToolTip("Drag a bin edge: the accepted loss becomes the loss there")
        self.bin_region.sigRegionChanged.connect(self._edge_dragged)
        self.bin_region.sigRegionChangeFinished.connect(self._edge_dropped)
        self.accepted = pg.InfiniteLine(angle=0, movable=True,
                                        pen=cosmetic_pen(OKABE_ITO["blue"], 1.2, Qt.PenStyle.DashLine),
                                        label="", labelOpts={"position": 0.5, "color": OKABE_ITO["blue"],
                                                             "anchors": [(0.5, 1.0), (0.5, 1.0)],
                                                             "fill": (255, 255, 255, 200)})
        pi.addItem(self.accepted)
        self.accepted.setToolTip("Drag: the accepted loss at the bin edge")
        self.accepted.sigDragged.connect(self._line_dragged)
        self.accepted.sigPositionChangeFinished.connect(
            lambda _l: self._edited("search.max_frequency_loss_db", self.loss_spin.value()))
        self._setting = False
        self._half_hz = 0.0
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
        self._half_hz = hw
        self._setting = True
        try:
            self.bin_region.setRegion((-hw, hw))
        finally:
            self._setting = False
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
        self.info.setText(f"{sid}: edge loss {design.worst_loss_db:.2f} dB, mean over the bin "
                          f"{design.average_loss_db:.2f} dB")
        self._set_controls(result.plan.scenario.search.coherent_ms, design.max_loss_db)
        self._show_figures(design.coherent_ms, design.max_loss_db)

    # -- design controls
    def _set_controls(self, coherent_ms: float, loss_db: float) -> None:
        self._setting = True
        try:
            self.coherent_spin.setValue(coherent_ms)
            self.loss_spin.setValue(loss_db)
        finally:
            self._setting = False

    def _edited(self, dotted: str, value: float) -> None:
        if self._setting or self.model.plan is None:
            return
        sc = self.model.plan.scenario.search
        now = sc.coherent_ms if dotted == "search.coherent_ms" else sc.max_frequency_loss_db
        if abs(float(now) - float(value)) > 1e-9:
            self.designEdited.emit(dotted, float(value))

    def _line_dragged(self, line) -> None:
        lo, hi = _rule("search.max_frequency_loss_db").lo, _rule("search.max_frequency_loss_db").hi
        v = float(np.clip(line.value(), lo, hi))
        self.loss_spin.setValue(round(v, 2))

    def _edge_dragged(self, region) -> None:
        if self._setting or self.shown_signal is None or self.model.plan is None:
            return
        a, b = region.getRegion()
        prev = self._half_hz
        half = abs(a) if abs(abs(a) - prev) > abs(abs(b) - prev) else abs(b)   # the moved edge
        tc = self._coherent_s()
        loss = sinc_loss_db(half, tc)
        rule = _rule("search.max_frequency_loss_db")
        self.loss_spin.setValue(round(float(np.clip(loss, rule.lo, rule.hi)), 2))

    def _edge_dropped(self, _region) -> None:
        self._edited("search.max_frequency_loss_db", self.loss_spin.value())

    def _coherent_s(self) -> float:
        plan = self.model.plan
        if plan is not None and self.shown_signal in plan.bin_design:
            per = plan.bin_design[self.shown_signal].coherent_ms
            if per != plan.scenario.search.coherent_ms:      # a per-signal override
                return per / 1000.0
        return self.coherent_spin.value() / 1000.0

    def _preview(self) -> None:
        if self._setting or self.model.plan is None:
            return
        self._show_figures(self._coherent_s() * 1000.0, self.loss_spin.value())
        design = design_bins(self._coherent_s(), self.loss_spin.value())
        self._setting = True
        try:
            self._half_hz = design.half_width_hz
            self.bin_region.setRegion((-design.half_width_hz, design.half_width_hz))
            self.accepted.setValue(design.max_loss_db)
            self.accepted.label.setFormat(f"accepted loss {design.max_loss_db:.2f} dB")
        finally:
            self._setting = False

    def _show_figures(self, coherent_ms: float, loss_db: float) -> None:
        """Bin width, bins per satellite and total cells at the cursor for the shown
        signal, from the windows of the satellites in view (the plan's code cells)."""
        sid = self.shown_signal
        if sid is None:
            return
        width = design_bins(coherent_ms / 1000.0, loss_db).bin_width_hz
        rows = [r for r in self.model.cursor_rows() if r["signal"] == sid]
        if not rows:
            self.figures.setText(f"bin {width:.1f} Hz · no {sid} satellite in view at the cursor")
            return
        bins = [int(bin_count(r["low_hz"], r["high_hz"], width)) for r in rows]
        cells = sum(b * int(r["code_cells"]) for b, r in zip(bins, rows))
        span = f"{min(bins)}" if min(bins) == max(bins) else f"{min(bins)}–{max(bins)}"
        self.figures.setText(f"<b>bin {width:.1f} Hz</b> · {span} bins per satellite · "
                             f"{sum(bins)} bins, {cells:,} cells for {len(rows)} {sid} "
                             "satellites at the cursor".replace(",", " "))
        self.figures.setToolTip("Cells = frequency bins × code-phase cells, summed over the "
                                "satellites in view at the cursor")

    def bin_edges_hz(self) -> tuple[float, float]:
        lo, hi = self.bin_region.getRegion()
        return float(lo), float(hi)
