"""The receiver's record over the plan: measured Doppler points over the window bands, the
common frequency offset over time, and C/N0 against elevation.

:class:`RecordView` holds one record (loaded with :meth:`RecordView.load`); it compares
it with the plan on screen on a background thread (``core.api.compare_record``) and again
whenever the plan changes. Satellites whose measured Doppler left their window, and any
problem with the record, are sent as messages (:attr:`RecordView.message`) for the
Messages panel. No computation runs on the GUI thread.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QThread, Signal
from PySide6.QtWidgets import QGraphicsPathItem, QHBoxLayout, QPushButton, QWidget

from core.api import AcqplanError, cn0_at_elevation_dbhz, compare_record, load_record, record_bands

from ._common import UtcAxis, ViewFrame, band_path, brush, colour, configure_pyqtgraph, cosmetic_pen


def outside_messages(comparison) -> list[str]:
    """One line per satellite whose measured Doppler left its planned window."""
    out = []
    for s in comparison.outside():
        out.append(f"record: {s.sat_id} measured Doppler outside its planned window at "
                   f"{s.outside_samples} of {s.doppler_samples} samples (measured "
                   f"{s.measured_low_hz:.0f} to {s.measured_high_hz:.0f} Hz, window "
                   f"{s.window_low_hz:.0f} to {s.window_high_hz:.0f} Hz)")
    return out


class _CompareThread(QThread):
    """Reads the record once and compares it with a plan, off the GUI thread."""

    done = Signal(object, object)          # Comparison, plan
    failed = Signal(str)

    def __init__(self, path: str, plan, record=None, parent=None):
        super().__init__(parent)
        self.path, self.plan, self.record = path, plan, record

    def run(self) -> None:  # noqa: D401 - QThread entry point
        try:
            if self.record is None:
                self.record = load_record(self.path, bands=record_bands(self.plan.scenario.receiver.signals))
            self.done.emit(compare_record(self.plan, self.record), self.plan)
        except AcqplanError as err:
            self.failed.emit(str(err))
        except Exception as err:  # a defect: one line, never a traceback on screen
            self.failed.emit(f"internal error comparing the record ({type(err).__name__}: {err})")


class RecordView(ViewFrame):
    """Three plots of one record against the plan on screen."""

    message = Signal(str, str)             # kind ("note", "input", "plan"), text
    compared = Signal(object)              # Comparison

    def __init__(self, model, parent: QWidget | None = None):
        super().__init__("Receiver record", parent)
        configure_pyqtgraph()
        self.setObjectName("recordView")
        self.model = model
        self.path: str | None = None
        self._record = None
        self._bands: set[str] | None = None
        self._thread: _CompareThread | None = None
        self._pending = False
        self.comparison = None
        self.info.setText("no record loaded: File > Load receiver record… (RINEX observation "
                          "file or NMEA log)")
        self.clear_button = QPushButton("Remove record", self)
        self.clear_button.setEnabled(False)
        self.clear_button.clicked.connect(self.clear)
        self.add_header_widget(self.clear_button)
        row = QHBoxLayout()
        self.doppler_plot = pg.PlotWidget(axisItems={"bottom": UtcAxis()})
        self.doppler_plot.setLabel("left", "Doppler (Hz)")
        self.doppler_plot.setTitle("measured Doppler over the planned windows", size="9pt")
        self.offset_plot = pg.PlotWidget(axisItems={"bottom": UtcAxis()})
        self.offset_plot.setLabel("left", "oscillator (ppb)")
        self.offset_plot.setTitle("oscillator (common offset)", size="9pt")
        self.cn0_plot = pg.PlotWidget()
        self.cn0_plot.setLabel("left", "C/N0 (dB-Hz)")
        self.cn0_plot.setLabel("bottom", "elevation (deg)")
        self.cn0_plot.setTitle("C/N0 against elevation", size="9pt")
        for p in (self.doppler_plot, self.offset_plot, self.cn0_plot):
            p.showGrid(x=True, y=True, alpha=0.25)
            p.setMenuEnabled(False)
        row.addWidget(self.doppler_plot, 3)
        row.addWidget(self.offset_plot, 2)
        row.addWidget(self.cn0_plot, 2)
        self.outer.addLayout(row, 1)
        model.planChanged.connect(lambda _r: self._recompare())
        model.ttffChanged.connect(lambda _r: self._recompare())   # the final stage is a new plan

    # -- loading and comparing ------------------------------------------------------------
    def load(self, path: str) -> None:
        """Compare a record file with the plan on screen (again with every new plan)."""
        self.path, self._record = str(path), None
        self.clear_button.setEnabled(True)
        self.info.setText(f"reading {self.path} …")
        self._recompare()

    def clear(self) -> None:
        if self.model.plan is not None and hasattr(self.model.plan, "record_comparison"):
            del self.model.plan.record_comparison
        self.path, self._record, self.comparison = None, None, None
        self.clear_button.setEnabled(False)
        self.info.setText("no record loaded")
        for p in (self.doppler_plot, self.offset_plot, self.cn0_plot):
            p.clear()

    def _recompare(self) -> None:
        plan = self.model.plan
        if self.path is None or plan is None:
            return
        if self._thread is not None and self._thread.isRunning():
            self._pending = True                  # once the running one ends
            return
        bands = record_bands(plan.scenario.receiver.signals)
        if bands != self._bands:                  # other signals: read the file again
            self._record, self._bands = None, bands
        self._thread = _CompareThread(self.path, plan, self._record, self)
        self._thread.done.connect(self._on_done)
        self._thread.failed.connect(self._on_failed)
        self._thread.finished.connect(self._on_finished)
        self._thread.start()

    def _on_finished(self) -> None:
        if self._thread is not None:
            self._record = self._thread.record
        if self._pending:
            self._pending = False
            self._recompare()

    def _on_failed(self, text: str) -> None:
        self.info.setText(f"record not compared: {text}")
        self.message.emit("input", text)

    def _on_done(self, comparison, plan) -> None:
        if plan is not self.model.plan:
            return                                # a newer plan is on its way
        plan.record_comparison = comparison       # the sheets print it (planner_gui.sheet_record)
        self.show_comparison(comparison)
        self.message.emit("note", f"record {self.path}: {comparison.verdict}")
        for text in outside_messages(comparison):
            self.message.emit("plan", text)
        self.compared.emit(comparison)

    # -- drawing --------------------------------------------------------------------------
    def show_comparison(self, c) -> None:
        self.comparison = c
        self.info.setText(c.verdict)
        a = c.arrays
        systems = [sid[0] for sid in a.ids]
        self.doppler_plot.clear()
        keep = np.isfinite(a.window_low_hz) & np.isfinite(a.window_high_hz)
        t = a.sample_unix_s
        for system in sorted(set(systems)):
            rows = [i for i, s in enumerate(systems) if s == system]
            for i in rows:                        # one band per satellite (its own times)
                path = band_path(t[i], a.window_low_hz[i:i + 1], a.window_high_hz[i:i + 1],
                                 keep[i:i + 1])
                item = QGraphicsPathItem(path)
                item.setBrush(brush(colour(system), 45))
                item.setPen(cosmetic_pen(colour(system, 120), 0.8))
                self.doppler_plot.addItem(item)
            m = a.measured_hz[rows]
            ok = np.isfinite(m) & keep[rows]
            inside = ok & (m >= a.window_low_hz[rows]) & (m <= a.window_high_hz[rows])
            self.doppler_plot.plot(t[rows][inside], m[inside], pen=None, symbol="o", symbolSize=3,
                                   symbolPen=None, symbolBrush=brush(colour(system)))
            out = ok & ~inside
            if out.any():
                self.doppler_plot.plot(t[rows][out], m[out], pen=None, symbol="x", symbolSize=9,
                                       symbolPen=cosmetic_pen("#C0392B", 2.0), name="outside")
        self.offset_plot.clear()
        if c.common_offset:
            tt = np.array([o.time_unix_s for o in c.common_offset])
            osc = -np.array([o.ppb for o in c.common_offset])
            e0, de = c.planned_offset_ppb, c.planned_uncertainty_ppb
            band = pg.LinearRegionItem((e0 - de, e0 + de), orientation="horizontal", movable=False,
                                       brush=brush("#2B6C8F", 30))
            self.offset_plot.addItem(band)
            self.offset_plot.plot(tt, osc, pen=cosmetic_pen("#1F3A5F", 1.5), symbol="o", symbolSize=3,
                                  symbolBrush=brush("#1F3A5F"), symbolPen=None)
        self.cn0_plot.clear()
        el, cn0 = a.elevation_deg, a.cn0_dbhz
        for system in sorted(set(systems)):
            rows = [i for i, s in enumerate(systems) if s == system]
            ok = np.isfinite(el[rows]) & np.isfinite(cn0[rows])
            self.cn0_plot.plot(el[rows][ok], cn0[rows][ok], pen=None, symbol="o", symbolSize=3,
                               symbolPen=None, symbolBrush=brush(colour(system), 160))
        plan = self.model.plan
        if plan is not None:
            sc = plan.scenario
            mask = sc.mask.elevation_deg
            x = np.linspace(mask, 90.0, 60)
            extra = sc.signal.extra_loss_db
            planned = np.asarray(cn0_at_elevation_dbhz(x, sc.signal.cn0_zenith_dbhz,
                                                       sc.signal.cn0_at_mask_dbhz, mask)) - extra
            self.cn0_plot.plot(x, planned, pen=cosmetic_pen("#555555", 1.5, Qt.PenStyle.DashLine))
            if c.cn0_fit is not None:
                fitted = np.asarray(cn0_at_elevation_dbhz(
                    x, max(c.cn0_fit.zenith_dbhz, c.cn0_fit.mask_dbhz), c.cn0_fit.mask_dbhz, mask)) - extra
                self.cn0_plot.plot(x, fitted, pen=cosmetic_pen("#C0392B", 1.5))
        self.doppler_plot.enableAutoRange()
