"""The sweep dialog: departures x search settings, a heat map of the 95th-percentile time
to first fix, and a click on a cell that applies its setting and departure to the plan.

The sweep runs on a background thread (:class:`SweepThread`), which drives the core's
process pool (``core.plan.sweep.run_sweep``); the dialog only shows progress and results.
Closing the dialog, or Stop, cancels the sweep at the next check of every worker.
"""

from __future__ import annotations

import math
import os
import threading

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QDateTime, QRectF, Qt, QThread, QTimeZone, Signal
from PySide6.QtGui import QBrush, QColor, QPen
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QDateTimeEdit,
    QDialog,
    QFormLayout,
    QGraphicsRectItem,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QProgressBar,
    QPushButton,
    QSpinBox,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.api import (
    SWEEP_KEYS,
    AcqplanError,
    Cancelled,
    Scenario,
    SweepResult,
    SweepSpec,
    departure_times,
    iso_z,
    run_sweep,
    short_key,
    sweep_cell_scenario,
    sweep_spec,
)

from .views._common import UtcAxis, configure_pyqtgraph, cosmetic_pen, utc_text

OPTION_VARY = "Vary"                 # how messages name the key table
OPTION_DEPARTURES = "Departures"
NO_FIX_COLOUR = "#B0B0B0"            # hatched grey under cells with no 95th percentile
BEST_COLOUR = "#000000"
APPLIED_COLOUR = "#D55E00"           # Okabe-Ito vermillion


class SweepThread(QThread):
    """Runs one sweep off the GUI thread; ``cancel()`` stops it at the workers' next check."""

    progressed = Signal(int, int)
    succeeded = Signal(object)        # SweepResult
    failed = Signal(str)              # one line
    stopped = Signal()

    def __init__(self, scenario: Scenario, spec: SweepSpec, workers: int, parent=None):
        super().__init__(parent)
        self.scenario, self.spec, self.workers = scenario, spec, workers
        self._stop = threading.Event()

    def cancel(self) -> None:
        self._stop.set()

    def run(self) -> None:
        try:
            result = run_sweep(self.scenario, self.spec, workers=self.workers,
                               progress=lambda d, n: self.progressed.emit(d, n),
                               cancel=self._stop.is_set)
        except Cancelled:
            self.stopped.emit()
        except AcqplanError as err:
            self.failed.emit(" ".join(str(err).split()))
        except Exception as err:  # a defect: one line, never a traceback on screen
            self.failed.emit(f"internal error ({type(err).__name__}: {err})")
        else:
            if self._stop.is_set():
                self.stopped.emit()
            else:
                self.succeeded.emit(result)


class SweepHeatMap(QWidget):
    """Settings (rows) x departures (columns), coloured by TTFF p95; click = choose."""

    cell_clicked = Signal(int, int)          # (departure index, setting index)

    def __init__(self, parent=None):
        super().__init__(parent)
        configure_pyqtgraph()
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.plot = pg.PlotWidget(axisItems={"bottom": UtcAxis("bottom")})
        self.plot.setMenuEnabled(False)
        self.plot.setMouseEnabled(x=False, y=False)
        self.plot.hideButtons()
        pi = self.plot.getPlotItem()
        pi.setLabel("bottom", "departure (UTC)")
        self.image = pg.ImageItem(axisOrder="row-major")
        self.no_fix = QGraphicsRectItem()
        self.no_fix.setBrush(QBrush(QColor(NO_FIX_COLOUR), Qt.BrushStyle.BDiagPattern))
        self.no_fix.setPen(QPen(Qt.PenStyle.NoPen))
        self.no_fix.setZValue(-1)
        pi.addItem(self.no_fix)
        pi.addItem(self.image)
        self.best = QGraphicsRectItem()
        self.best.setPen(cosmetic_pen(BEST_COLOUR, 2.0, Qt.PenStyle.DashLine))
        self.applied = QGraphicsRectItem()
        self.applied.setPen(cosmetic_pen(APPLIED_COLOUR, 3.0))
        for item in (self.best, self.applied):
            item.setZValue(5)
            item.hide()
            pi.addItem(item)
        cmap = pg.colormap.get("viridis")
        cmap.reverse()                       # short times bright, long times dark
        self.cmap = cmap
        self.bar = pg.ColorBarItem(colorMap=cmap, interactive=False,
                                   label="TTFF p95 (s, log scale)", width=14)
        self.bar.setImageItem(self.image, insert_in=pi)
        self.bar.axis.setLogMode(False, True)        # ticks at round times ...
        self.bar.axis.logTickStrings = lambda values, scale, spacing: [  # ... labelled in s
            f"{10.0 ** v:.0f}" for v in values]
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        lay.addWidget(self.plot)
        self._t0 = 0.0
        self._step = 1.0
        self._shape = (0, 0)

    def show_result(self, result: SweepResult) -> None:
        spec = result.spec
        grid = result.p95_grid_s()                       # (settings, departures)
        n_set, n_dep = grid.shape
        deps = np.asarray(spec.departures_unix_s)
        step = float(np.diff(deps).min()) if n_dep > 1 else max(spec.window_s / 4, 60.0)
        self._t0, self._step, self._shape = float(deps[0]), step, (n_set, n_dep)
        # colour by log10 of the time: a 10x longer time is the same step anywhere
        shown = np.where(np.isfinite(grid) & (grid > 0), np.log10(np.maximum(grid, 1e-3)), np.nan)
        finite = shown[np.isfinite(shown)]
        lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
        if hi - lo < 0.05:
            lo, hi = lo - 0.025, hi + 0.025
        self.image.setImage(shown, levels=(lo, hi), autoLevels=False)
        rect = QRectF(self._t0 - step / 2, -0.5, step * n_dep, n_set)
        self.image.setRect(rect)
        self.no_fix.setRect(rect)
        self.bar.setLevels((lo, hi))
        # rows labelled by their values only; the axis title names the keys in order
        ticks = [(i, " / ".join(_value_text(v) for v in spec.settings[i]) or "scenario")
                 for i in range(n_set)]
        pi = self.plot.getPlotItem()
        pi.getAxis("left").setTicks([ticks, []])
        pi.setLabel("left", " / ".join(short_key(k) for k in spec.keys) or "setting")
        pi.getViewBox().invertY(True)                # setting 0 on top, as in the list
        self.plot.setXRange(rect.left(), rect.right(), padding=0)
        self.plot.setYRange(rect.top(), rect.bottom(), padding=0)
        best = result.best
        self.best.setRect(QRectF(rect.left(), best.setting - 0.5, rect.width(), 1.0))
        self.best.show()
        self.applied.hide()

    def cell_rect(self, departure: int, setting: int) -> QRectF:
        return QRectF(self._t0 + (departure - 0.5) * self._step, setting - 0.5, self._step, 1.0)

    def mark_applied(self, departure: int, setting: int) -> None:
        self.applied.setRect(self.cell_rect(departure, setting))
        self.applied.show()

    def cell_at(self, x: float, y: float) -> tuple[int, int] | None:
        n_set, n_dep = self._shape
        d = int(math.floor((x - self._t0) / self._step + 0.5))
        s = int(math.floor(y + 0.5))
        if 0 <= d < n_dep and 0 <= s < n_set:
            return d, s
        return None

    def _clicked(self, event) -> None:
        if event.button() != Qt.MouseButton.LeftButton:
            return
        vb = self.plot.getPlotItem().getViewBox()
        if not vb.sceneBoundingRect().contains(event.scenePos()):
            return
        p = vb.mapSceneToView(event.scenePos())
        cell = self.cell_at(p.x(), p.y())
        if cell is not None:
            self.cell_clicked.emit(*cell)


class SweepDialog(QDialog):
    """Set up a sweep of the window's scenario, run it, pick a cell to apply."""

    apply_requested = Signal(object)          # Scenario with the cell's setting and departure
    sweep_finished = Signal(object)           # SweepResult (also for tests)

    def __init__(self, scenario: Scenario, parent=None, workers: int | None = None):
        super().__init__(parent)
        self.setWindowTitle("Sweep departures and search settings")
        self.scenario = scenario
        self.result: SweepResult | None = None
        self.thread: SweepThread | None = None
        self._build(workers or os.cpu_count() or 1)
        self.resize(1100, 640)

    # -- layout
    def _build(self, workers: int) -> None:
        sc = self.scenario
        form = QFormLayout()
        self.dep_start = _utc_edit(sc.time.start_unix_s)
        self.dep_end = _utc_edit(sc.time.start_unix_s + 6 * 3600.0)
        self.dep_step = QSpinBox()
        self.dep_step.setRange(1, 10_080)
        self.dep_step.setValue(30)
        self.dep_step.setSuffix(" min")
        form.addRow("First departure", self.dep_start)
        form.addRow("Last departure", self.dep_end)
        form.addRow("Every", self.dep_step)
        form.addRow("", QLabel(f"each plan: the scenario's {sc.time.duration_s / 60:g} min window"))
        self.vary = QTableWidget(0, 2)
        self.vary.setHorizontalHeaderLabels(["key", "values (comma-separated)"])
        self.vary.horizontalHeader().setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        self.vary.verticalHeader().hide()
        self.vary.setColumnWidth(0, 170)
        self.add_vary("search.coherent_ms", _pair(sc.search.coherent_ms))
        self.add_vary("search.noncoherent", _pair(sc.search.noncoherent))
        add = QPushButton("Add key")
        add.clicked.connect(lambda: self.add_vary("receiver.channels", str(sc.receiver.channels)))
        remove = QPushButton("Remove key")
        remove.clicked.connect(self._remove_vary)
        keys_row = QHBoxLayout()
        keys_row.addWidget(add)
        keys_row.addWidget(remove)
        keys_row.addStretch(1)
        self.workers = QSpinBox()
        self.workers.setRange(1, max(1, os.cpu_count() or 1) * 4)
        self.workers.setValue(workers)
        form2 = QFormLayout()
        form2.addRow("Worker processes", self.workers)
        self.run_button = QPushButton("Run sweep")
        self.run_button.setDefault(True)
        self.run_button.clicked.connect(self.start)
        self.stop_button = QPushButton("Stop")
        self.stop_button.setEnabled(False)
        self.stop_button.clicked.connect(self.stop)
        buttons = QHBoxLayout()
        buttons.addWidget(self.run_button)
        buttons.addWidget(self.stop_button)
        buttons.addStretch(1)
        self.progress = QProgressBar()
        self.progress.setRange(0, 1)
        self.progress.setValue(0)
        self.status = QLabel("Set the departures and the values to try, then run the sweep.")
        self.status.setWordWrap(True)
        self.status.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        left = QWidget()
        ll = QVBoxLayout(left)
        ll.addLayout(form)
        ll.addWidget(QLabel("Values to try (every combination is planned):"))
        ll.addWidget(self.vary, 1)
        ll.addLayout(keys_row)
        ll.addLayout(form2)
        ll.addLayout(buttons)
        ll.addWidget(self.progress)
        ll.addWidget(self.status)

        self.heat = SweepHeatMap()
        self.heat.cell_clicked.connect(self.apply_cell)
        self.ranking = QTableWidget(0, 4)
        self.ranking.setHorizontalHeaderLabels(["rank", "setting", "worst p95", "best departure"])
        self.ranking.horizontalHeader().setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        self.ranking.verticalHeader().hide()
        self.ranking.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.ranking.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.ranking.cellDoubleClicked.connect(self._apply_ranked)
        self.hint = QLabel("Click a cell to apply its setting and departure to the plan. "
                           "Dashed frame: the best setting; hatched grey: more than 5 % of "
                           "the runs find no fix in the window.")
        self.hint.setWordWrap(True)
        right = QWidget()
        rl = QVBoxLayout(right)
        rl.addWidget(self.heat, 3)
        rl.addWidget(self.hint)
        rl.addWidget(self.ranking, 1)
        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(left)
        split.addWidget(right)
        split.setStretchFactor(1, 1)
        split.setSizes([360, 740])
        outer = QVBoxLayout(self)
        outer.addWidget(split)

    def add_vary(self, dotted: str, values: str) -> None:
        row = self.vary.rowCount()
        self.vary.insertRow(row)
        box = QComboBox()
        for k in SWEEP_KEYS:
            box.addItem(short_key(k), k)
        box.setCurrentIndex(max(0, SWEEP_KEYS.index(dotted) if dotted in SWEEP_KEYS else 0))
        self.vary.setCellWidget(row, 0, box)
        self.vary.setCellWidget(row, 1, QLineEdit(values))

    def _remove_vary(self) -> None:
        row = self.vary.currentRow()
        self.vary.removeRow(row if row >= 0 else self.vary.rowCount() - 1)

    def vary_items(self) -> list[tuple[str, list[str]]]:
        out = []
        for row in range(self.vary.rowCount()):
            key = self.vary.cellWidget(row, 0).currentData()
            text = self.vary.cellWidget(row, 1).text()
            out.append((key, [v for v in text.split(",") if v.strip()]))
        return out

    # -- running
    def build_spec(self) -> SweepSpec:
        start = iso_z(self.dep_start.dateTime().toSecsSinceEpoch())
        end = iso_z(self.dep_end.dateTime().toSecsSinceEpoch())
        deps = departure_times(start, end, 60.0 * self.dep_step.value(), option=OPTION_DEPARTURES)
        return sweep_spec(self.scenario, self.vary_items(), deps, option=OPTION_VARY)

    def start(self) -> bool:
        if self.thread is not None:
            return False
        try:
            spec = self.build_spec()
        except AcqplanError as err:
            self.status.setText(" ".join(str(err).split()))
            return False
        self.progress.setRange(0, spec.n_combinations)
        self.progress.setValue(0)
        self.status.setText(f"planning {spec.n_combinations} combinations "
                            f"({len(spec.departures_unix_s)} departures x {len(spec.settings)} settings)…")
        self.thread = SweepThread(self.scenario, spec, self.workers.value(), self)
        self.thread.progressed.connect(self._progressed)
        self.thread.succeeded.connect(self._succeeded)
        self.thread.failed.connect(self._failed)
        self.thread.stopped.connect(self._stopped)
        self.thread.finished.connect(self._thread_done)
        self.run_button.setEnabled(False)
        self.stop_button.setEnabled(True)
        self.thread.start()
        return True

    def stop(self) -> None:
        if self.thread is not None:
            self.thread.cancel()
            self.status.setText("stopping…")

    def _progressed(self, done: int, total: int) -> None:
        self.progress.setValue(done)

    def _succeeded(self, result: SweepResult) -> None:
        self.result = result
        self.heat.show_result(result)
        self._fill_ranking(result)
        b = result.best
        self.status.setText(
            f"{result.spec.n_combinations} plans in {result.compute_s:.1f} s. Best: "
            f"{result.spec.setting_text(b.setting)} (worst p95 {_seconds(b.worst_p95_s)}); "
            f"best departure {utc_text(b.best_departure_unix_s, False)} UTC, worst "
            f"{utc_text(b.worst_departure_unix_s, False)} UTC.")
        self.sweep_finished.emit(result)

    def _failed(self, text: str) -> None:
        self.status.setText(text)

    def _stopped(self) -> None:
        self.status.setText("Sweep stopped; nothing kept.")

    def _thread_done(self) -> None:
        self.thread = None
        self.run_button.setEnabled(True)
        self.stop_button.setEnabled(False)

    def _fill_ranking(self, result: SweepResult) -> None:
        self.ranking.setRowCount(len(result.ranking))
        for i, r in enumerate(result.ranking):
            cells = [str(i + 1), result.spec.setting_text(r.setting), _seconds(r.worst_p95_s),
                     f"{utc_text(r.best_departure_unix_s, False)} UTC"]
            for c, text in enumerate(cells):
                item = QTableWidgetItem(text)
                item.setData(Qt.ItemDataRole.UserRole, (r.setting, r.best_departure_unix_s))
                self.ranking.setItem(i, c, item)
        self.ranking.resizeColumnsToContents()

    # -- applying a cell
    def apply_cell(self, departure: int, setting: int) -> Scenario | None:
        if self.result is None:
            return None
        spec = self.result.spec
        t = spec.departures_unix_s[departure]
        try:
            sc = sweep_cell_scenario(self.scenario, spec, setting, t)
        except AcqplanError as err:
            self.status.setText(" ".join(str(err).split()))
            return None
        self.heat.mark_applied(departure, setting)
        row = self.result.row(departure, setting)
        event = "" if row.worst_event == "start" else f" at the worst event {row.worst_event}"
        self.status.setText(f"Applied {spec.setting_text(setting)}, departure "
                            f"{utc_text(t, False)} UTC (p95 {_seconds(row.ttff_p95_s)}, median "
                            f"{_seconds(row.ttff_median_s)}{event}); the plan is being recomputed.")
        self.apply_requested.emit(sc)
        return sc

    def _apply_ranked(self, row: int, _col: int) -> None:
        item = self.ranking.item(row, 0)
        if item is None or self.result is None:
            return
        setting, t = item.data(Qt.ItemDataRole.UserRole)
        self.apply_cell(self.result.spec.departures_unix_s.index(t), setting)

    def closeEvent(self, event) -> None:
        if self.thread is not None:
            self.thread.cancel()
            self.thread.wait()
        super().closeEvent(event)


def open_sweep_dialog(window) -> SweepDialog | None:
    """The window's Plan > Sweep action: a dialog on the window's current scenario whose
    cell clicks put the setting and departure into the set-up form and re-plan."""
    sc = window.scenario
    if sc is None:
        window.show_problem("Open or set up a scenario first; the sweep varies it.", kind="note")
        return None
    dialog = SweepDialog(sc, window)

    def apply(new: Scenario) -> None:
        window.panel.set_scenario(new)
        window.scenario = new
        window._update_title()
        window.request_plan(new)

    dialog.apply_requested.connect(apply)
    dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
    dialog.show()
    return dialog


def _utc_edit(unix_s: float) -> QDateTimeEdit:
    e = QDateTimeEdit()
    e.setTimeZone(QTimeZone.utc())
    e.setDisplayFormat("yyyy-MM-dd HH:mm 'UTC'")
    e.setDateTime(QDateTime.fromSecsSinceEpoch(int(unix_s), QTimeZone.utc()))
    return e


def _pair(v: float) -> str:
    """The scenario's value and its double, as a starting list."""
    a = f"{v:g}"
    return f"{a}, {2 * v:g}"


def _seconds(v: float) -> str:
    return f"{v:.0f} s" if math.isfinite(v) else "no fix"


def _value_text(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    return f"{v:g}" if isinstance(v, float) else str(v)


__all__ = ["SweepDialog", "SweepHeatMap", "SweepThread", "open_sweep_dialog"]

