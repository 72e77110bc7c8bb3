"""The planner window: the test set-up form, the linked views, the time cursor.

Layout: the form in a dock on the left; on the right the sky view beside a tab stack
(Doppler windows, bins at cursor, channel timeline, bin loss) over the satellite table;
the messages in a bottom dock; the plan-time cursor in a strip across the bottom.

Data flow: an edit in the form -> the core validates the form's dict (problems are
marked at their fields) -> a frozen Scenario goes to the worker with the previous plan's
prepared geometry -> the worker's result is applied to the PlanModel on this thread
(stale results dropped) -> every view redraws from the model.
"""

from __future__ import annotations

import html
import re
import threading
import time
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QAction, QCloseEvent, QDragEnterEvent, QDropEvent, QIcon, QKeySequence
from PySide6.QtWidgets import (
    QDockWidget,
    QFileDialog,
    QFrame,
    QHBoxLayout,
    QLabel,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QSizePolicy,
    QSlider,
    QSplitter,
    QStatusBar,
    QTabWidget,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from core.api import (
    AcqplanError,
    InputError,
    Scenario,
    ScenarioValidationError,
    clock_text,
    file_problem,
    load_scenario_for_editing,
    save_scenario,
    utc_stamp,
)

from .models import PlanModel
from .scenario_panel import ORBIT_FILE_FILTER, ScenarioPanel
from .settings import PlannerSettings
from .style import SAFETY_CAUTIONS, SIGN_CONVENTIONS
from .views import (
    ChannelView,
    DopplerView,
    LossCurveView,
    MessagesView,
    RouteView,
    SatelliteTableView,
    SearchGridView,
    SkyView,
)
from .views.record_overlay import RecordView
from .worker import PlanFailure, PlanResult, PlanWorker

SCENARIO_FILTER = "acqplan scenarios (*.toml);;All files (*)"
RESOURCES = Path(__file__).resolve().parent / "resources"
PROGRESS_DELAY_MS = 250

UNITS_TEXT = ("Frequencies and Doppler in Hz; times in UTC (local time from the scenario's "
              "zone is shown beside the cursor); angles in degrees; C/N0 in dB-Hz; losses "
              "are positive dB (a larger number is a weaker signal); oscillator offsets in ppb "
              "(parts per 10^9).")


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("acqplan")
    except Exception:  # not installed: running from a checkout
        return "0.1.0"


def error_text(err: BaseException) -> str:
    """One clear line (or a few for several scenario fields) for any error we expect."""
    if isinstance(err, AcqplanError):
        return str(err)
    if isinstance(err, OSError):
        name = getattr(err, "filename", None)
        where = f"{name}: " if name else ""
        return f"{where}{err.strerror or err}"
    return f"{type(err).__name__}: {err}"


def problems_of(err: BaseException) -> list[tuple[str | None, str]]:
    """(field, message) pairs of a scenario/input error, for marking the form."""
    if isinstance(err, ScenarioValidationError):
        return [(p.field, p.message) for p in err.problems]
    if isinstance(err, InputError) and err.field:
        return [(err.field, err.message)]
    return []


class MessageBar(QFrame):
    """A strip above the views that states the latest problem until it is solved or closed."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.setObjectName("messageBar")
        self.setFrameShape(QFrame.Shape.StyledPanel)
        lay = QHBoxLayout(self)
        lay.setContentsMargins(8, 4, 4, 4)
        self.icon = QLabel("⚠", self)
        self.icon.setStyleSheet("font-size: 14pt; color: #A33A00;")
        self.text = QLabel("", self)
        self.text.setObjectName("messageText")
        self.text.setWordWrap(True)
        self.text.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        close = QToolButton(self)
        close.setText("✕")
        close.setToolTip("Hide this message (it stays in the Messages panel)")
        close.clicked.connect(self.hide)
        lay.addWidget(self.icon)
        lay.addWidget(self.text, 1)
        lay.addWidget(close, 0, Qt.AlignmentFlag.AlignTop)
        self.kind = ""
        self.hide()

    def show_message(self, text: str, kind: str = "error") -> None:
        self.kind = kind
        colour = {"error": "#FBE3D6", "note": "#E1F0FA"}.get(kind, "#FFF5CC")
        self.setStyleSheet(f"#messageBar {{ background: {colour}; border: 1px solid #C9A38F; }}")
        self.icon.setText("⚠" if kind == "error" else "ℹ")
        self.text.setText(text)
        self.show()

    def clear(self, kind: str | None = None) -> None:
        if kind is None or self.kind == kind:
            self.text.clear()
            self.kind = ""
            self.hide()

    def message(self) -> str:
        return self.text.text() if self.isVisibleTo(self.parentWidget()) else ""


class CursorBar(QWidget):
    """The plan-time cursor: a slider across the test window with the UTC (and local) time."""

    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        super().__init__(parent)
        self.setObjectName("cursorBar")
        self.model = model
        lay = QHBoxLayout(self)
        lay.setContentsMargins(6, 2, 6, 2)
        title = QLabel("Plan time", self)
        title.setToolTip("Also: click an empty place of the timeline or the Doppler view")
        title.setVisible(False)             # the strip is narrow; the tooltips say it
        title.setStyleSheet("font-weight: bold;")
        self.back = QToolButton(self)
        self.back.setText("◀")
        self.back.setToolTip("One plan step earlier")
        self.back.setAutoRepeat(True)
        self.forward = QToolButton(self)
        self.forward.setText("▶")
        self.forward.setToolTip("One plan step later")
        self.forward.setAutoRepeat(True)
        self.slider = QSlider(Qt.Orientation.Horizontal, self)
        self.slider.setObjectName("timeCursor")
        self.slider.setToolTip("Plan time: every view shows this instant (arrow keys, "
                               "Page Up/Down, Home/End; or click an empty place of the "
                               "timeline or the Doppler view)")
        self.slider.setRange(0, 0)
        self.slider.setPageStep(10)
        self.label = QLabel("—", self)
        self.label.setObjectName("cursorTime")
        self.slider.setMinimumWidth(160)
        self.slider.setMaximumWidth(220)
        self.label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        lay.addWidget(title)
        lay.addWidget(self.back)
        lay.addWidget(self.slider, 1)
        lay.addWidget(self.forward)
        lay.addWidget(self.label)
        self.back.clicked.connect(lambda: self.slider.setValue(self.slider.value() - 1))
        self.forward.clicked.connect(lambda: self.slider.setValue(self.slider.value() + 1))
        # A drag emits a value per pixel: while dragging keep the last and apply it once
        # per event-loop turn, so the views redraw for the newest position only.
        self._cursor_pending: int | None = None
        self.slider.valueChanged.connect(self._queue_cursor)
        self.slider.sliderReleased.connect(self._apply_cursor)
        model.planChanged.connect(self._on_plan)
        model.cursorChanged.connect(self._on_cursor)

    def _queue_cursor(self, value: int) -> None:
        if not self.slider.isSliderDown():
            self._cursor_pending = None
            self.model.set_cursor(value)
            return
        first = self._cursor_pending is None
        self._cursor_pending = value
        if first:
            QTimer.singleShot(0, self._apply_cursor)

    def _apply_cursor(self) -> None:
        value, self._cursor_pending = self._cursor_pending, None
        if value is not None:
            self.model.set_cursor(value)

    def _on_plan(self, result: PlanResult) -> None:
        n = len(result.plan.times)
        self.slider.blockSignals(True)
        self.slider.setRange(0, n - 1)
        self.slider.setPageStep(max(1, n // 12))
        self.slider.blockSignals(False)

    def _on_cursor(self, k: int) -> None:
        plan = self.model.plan
        if plan is None:
            return
        self.slider.blockSignals(True)
        self.slider.setValue(k)
        self.slider.blockSignals(False)
        t = float(plan.times.unix_s[k])
        utc = datetime.fromtimestamp(t, UTC)
        text = f"{clock_text(t)} UTC"
        zone = plan.scenario.time.timezone
        if zone and zone != "UTC":
            try:
                local = utc.astimezone(plan.scenario.time.tzinfo)
                text += f" · {clock_text(t, plan.scenario.time.tzinfo)} {local.tzname()}"
            except Exception:  # an unknown zone was rejected by the core already
                pass
        elapsed = t - float(plan.times.unix_s[0])
        text += f" · +{elapsed / 60.0:.1f} min"
        self.label.setMinimumWidth(self.label.fontMetrics().horizontalAdvance(text) + 8)
        self.label.setToolTip(f"{utc_stamp(t)}; grid index {k + 1} of {len(plan.times)}; "
                              f"{elapsed:.0f} s after the start")
        self.label.setText(text)


class PlanStrip(QLabel):
    """The plan's key figures in one line on top: first fix, TTFF, satellites, channels."""

    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        super().__init__("no plan yet", parent)
        self.setObjectName("planStrip")
        self.model = model
        self.setTextFormat(Qt.TextFormat.RichText)
        self.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.setContentsMargins(6, 2, 6, 2)
        # The strip gives way to the cursor on narrow screens (its tooltip keeps the text).
        self.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        model.planChanged.connect(self._on_plan)
        model.ttffChanged.connect(self._on_plan)

    def _on_plan(self, result: PlanResult) -> None:
        plan = result.plan
        tl = plan.timeline
        parts = []
        if tl.first_fix_unix_s is None:
            parts.append("<b>no first fix in the window</b>")
        else:
            parts.append(f"<b>First fix {clock_text(tl.first_fix_unix_s)} UTC</b>")
            ttff = f"TTFF {tl.ttff_s:.0f} s"
            if plan.ttff is not None:
                ttff += f" (median {plan.ttff.median_s:.0f} s, 95 % {plan.ttff.p95_s:.0f} s)"
            elif not result.final:
                ttff += " (percentiles pending)"
            parts.append(ttff)
        n_up = int(plan.visible.any(axis=1).sum())
        parts.append(f"{n_up} in view, {plan.scenario.receiver.channels} channels")
        self.setText(" &nbsp;·&nbsp; ".join(parts))
        self.setToolTip(" · ".join(re.sub("<[^>]+>", "", p) for p in parts) + "\n\nExpected times from the mean search times; median and 95th "
                        "percentile from the seeded Monte Carlo")


class PlannerWindow(QMainWindow):
    """acqplan's main window."""

    planShown = Signal(object)      # PlanResult applied to the views
    problemShown = Signal(str)      # text of a problem put in the message bar
    exportFinished = Signal(str, str)   # path, problem ("" when written)

    def __init__(self, settings: PlannerSettings | None = None, interactive: bool = True,
                 restore_layout: bool = True):
        super().__init__()
        self.setObjectName("plannerWindow")
        self.interactive = interactive
        self.settings = settings if settings is not None else PlannerSettings()
        self.model = PlanModel(self)
        self.worker = PlanWorker(self)
        self.worker.planned.connect(self._on_planned)
        self.worker.failed.connect(self._on_failed)
        self.worker.cancelled.connect(self._on_cancelled)
        self.worker.progressed.connect(self._on_progress)
        self.exportFinished.connect(self._export_finished)
        self.current_path: Path | None = None
        self.scenario: Scenario | None = None        # last valid scenario of the form
        self._saved_dict: dict[str, Any] | None = None
        self._latest_serial = 0
        self._computing = False
        self._noted_pole: set[tuple[float, float]] = set()
        self._last_problem: str = ""
        self.apply_s = 0.0                   # GUI-thread time of the last plan's apply
        icon = RESOURCES / "acqplan.svg"
        if icon.is_file():
            self.setWindowIcon(QIcon(str(icon)))

        self._build_views()
        self._build_actions()
        self._build_status()
        self.setAcceptDrops(True)
        self.resize(1600, 1000)
        self._layout_restored = False
        if restore_layout:
            self._layout_restored = self._restore_layout()
        self._update_title()
        for caution in SAFETY_CAUTIONS:
            self.messages.add_message("note", "Safety: " + caution)

    def _drive_changed(self, drive) -> None:
        """The drive tab says how many test events the scenario's route holds."""
        n = 0 if drive is None else len(drive.events)
        self.tabs.setTabText(self.tabs.indexOf(self.route), f"Drive ({n} events)" if n else "Drive")

    # ------------------------------------------------------------------ construction
    def _build_views(self) -> None:
        self.panel = ScenarioPanel(self, folders=self.settings)
        self.panel.edited.connect(self._on_edited)
        self.setup_dock = QDockWidget("Test set-up", self)
        self.setup_dock.setObjectName("setupDock")
        self.setup_dock.setWidget(self.panel)
        self.setup_dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                                    | QDockWidget.DockWidgetFeature.DockWidgetFloatable
                                    | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, self.setup_dock)

        self.sky = SkyView(self.model)
        self.doppler = DopplerView(self.model)
        self.search_grid = SearchGridView(self.model)
        self.channels = ChannelView(self.model)
        self.loss = LossCurveView(self.model)
        self.loss.designEdited.connect(self._design_edited)
        self.table = SatelliteTableView(self.model)
        self.messages = MessagesView()
        self.messages.countChanged.connect(self._messages_counted)

        # acqplan's layout: the plan itself takes the width of the window. The channel
        # timeline (what each channel does when) sits over the Doppler windows (what each
        # search covers), both on the same time axis and always visible together; below
        # them the satellite table with the sky as a small secondary view beside it. The
        # test set-up form is a dock on the right, the key figures of the plan and the
        # plan-time cursor a strip on top. Further views (a route, recorded results) go
        # in as tabs of the middle stack or beside the sky, without moving the others.
        self.tabs = QTabWidget()
        self.tabs.setObjectName("viewTabs")
        self.tabs.setDocumentMode(True)
        self.tabs.addTab(self.doppler, "Doppler windows")
        self.tabs.addTab(self.search_grid, "Bins at cursor")
        self.tabs.addTab(self.loss, "Bin design")
        self.route = RouteView(self.model)
        self.tabs.addTab(self.route, "Drive")
        self.model.driveChanged.connect(self._drive_changed)
        self.record_view = RecordView(self.model)
        self.record_view.message.connect(self.messages.add_message)
        self.tabs.addTab(self.record_view, "Receiver record")
        self.side_tabs = QTabWidget()
        self.side_tabs.setObjectName("sideTabs")
        self.side_tabs.setDocumentMode(True)
        self.side_tabs.addTab(self.sky, "Sky")
        self.lower_tabs = QTabWidget()
        self.lower_tabs.setObjectName("lowerTabs")
        self.lower_tabs.setDocumentMode(True)
        self.lower_tabs.addTab(self.table, "Satellites at cursor")
        self.lower_tabs.addTab(self.messages, "Messages")
        self.lower_split = QSplitter(Qt.Orientation.Horizontal)
        self.lower_split.setObjectName("lowerSplit")
        self.lower_split.addWidget(self.lower_tabs)
        self.lower_split.addWidget(self.side_tabs)
        self.lower_split.setStretchFactor(0, 1)
        self.lower_split.setStretchFactor(1, 0)
        self.main_split = QSplitter(Qt.Orientation.Vertical)
        self.main_split.setObjectName("planSplit")
        self.main_split.addWidget(self.channels)
        self.main_split.addWidget(self.tabs)
        self.main_split.addWidget(self.lower_split)
        for i in range(3):
            self.main_split.setCollapsible(i, False)
        self.top_split = self.lower_split          # the name older code and tests know
        self.message_bar = MessageBar()
        self.cursor_bar = CursorBar(self.model)
        self.plan_strip = PlanStrip(self.model)
        strip = QWidget()
        strip.setObjectName("planStripRow")
        strip_lay = QHBoxLayout(strip)
        strip_lay.setContentsMargins(0, 0, 0, 0)
        strip_lay.setSpacing(4)
        strip_lay.addWidget(self.plan_strip, 1)
        strip_lay.addWidget(self.cursor_bar, 0)
        central = QWidget()
        lay = QVBoxLayout(central)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(2)
        lay.addWidget(self.message_bar)
        lay.addWidget(strip)
        lay.addWidget(self.main_split, 1)
        self.setCentralWidget(central)
        for split in (self.main_split, self.lower_split):
            split.splitterMoved.connect(lambda *_a: self._user_moved_splitter())
        self.resizeDocks([self.setup_dock], [320], Qt.Orientation.Horizontal)

    def _design_edited(self, dotted: str, value: float) -> None:
        """A coherent time or accepted loss set in the bin-design view goes into the form
        (which re-plans, and marks the scenario as changed)."""
        editor = self.panel.editors.get(dotted)
        spin = getattr(editor, "spin", None)
        if spin is not None:
            spin.setValue(value)

    def _action(self, text: str, slot, shortcut: QKeySequence | str | None = None,
                tip: str = "") -> QAction:
        act = QAction(text, self)
        if shortcut is not None:
            act.setShortcut(QKeySequence(shortcut))
        if tip:
            act.setStatusTip(tip)
            act.setToolTip(tip)
        act.triggered.connect(slot)
        return act

    def _build_actions(self) -> None:
        S = QKeySequence.StandardKey
        self.act_new = self._action("&New scenario", self.new_scenario, S.New, "Start an empty scenario")
        self.act_open = self._action("&Open scenario…", self.open_dialog, S.Open, "Open a scenario file (TOML)")
        self.act_save = self._action("&Save", self.save, S.Save, "Save the scenario")
        self.act_save_as = self._action("Save &as…", self.save_as, S.SaveAs, "Save the scenario under a new name")
        self.act_add_orbits = self._action("Add &orbit files…", self.add_orbit_files_dialog, "Ctrl+Shift+O",
                                           "Add almanac/TLE files to the scenario (or drop them on the window)")
        self.act_preview = self._action("Print pre&view…", self.print_preview, "Ctrl+P",
                                        "Preview the search-plan sheets")
        self.act_pdf = self._action("Export &PDF…", self.export_pdf, None, "Write the search-plan sheets as PDF")
        self.act_data = self._action("Export &data…", self.export_data, None,
                                     "Write the plan as JSON or the satellite summary as CSV")
        self.act_quit = self._action("&Quit", self.close, S.Quit)
        self.act_replan = self._action("&Re-plan now", self.replan, "F5", "Compute the plan again")
        self.act_cancel = self._action("&Cancel computation", self.cancel_compute, "Esc",
                                       "Stop the running computation; the plan on screen stays")
        self.act_cancel.setEnabled(False)
        self.act_sweep = self._action("S&weep departures and settings…", self.open_sweep, None,
                                      "Plan many departure times and search settings; pick one from a heat map")
        self.act_start = self._action("Zoom timeline to the &start", self._zoom_start, "Ctrl+1")
        self.act_about = self._action("&About acqplan", self.show_about)

        bar = self.menuBar()
        m = bar.addMenu("&File")
        m.addAction(self.act_new)
        m.addAction(self.act_open)
        self.recent_menu = m.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        m.addSeparator()
        m.addAction(self.act_save)
        m.addAction(self.act_save_as)
        m.addSeparator()
        m.addAction(self.act_add_orbits)
        m.addAction(self._action("Load receiver &record…", self.load_record_dialog, None,
                                 "Hold the plan against a receiver record (RINEX observation file or NMEA log)"))
        m.addSeparator()
        m.addAction(self.act_preview)
        m.addAction(self.act_pdf)
        m.addAction(self.act_data)
        m.addSeparator()
        m.addAction(self.act_quit)
        m = bar.addMenu("&Plan")
        m.addAction(self.act_replan)
        m.addAction(self.act_cancel)
        m.addAction(self.act_sweep)
        m = bar.addMenu("&View")
        m.addAction(self.setup_dock.toggleViewAction())
        m.addAction(self._action("Show &messages", self.show_messages, "Ctrl+M"))
        m.addAction(self.act_start)
        m = bar.addMenu("&Help")
        m.addAction(self.act_about)
        self._fill_recent()

    def _build_status(self) -> None:
        sb = QStatusBar(self)
        self.setStatusBar(sb)
        self.status_age = QLabel("orbit data: —")
        self.status_age.setObjectName("statusAge")
        self.status_warnings = QPushButton("0 warnings")
        self.status_warnings.setObjectName("statusWarnings")
        self.status_warnings.setFlat(True)
        self.status_warnings.setToolTip("Show the Messages panel")
        self.status_warnings.clicked.connect(self.show_messages)
        self.status_compute = QLabel("no plan yet")
        self.status_compute.setObjectName("statusCompute")
        self.progress = QProgressBar()
        self.progress.setObjectName("planProgress")
        self.progress.setRange(0, 100)
        self.progress.setMaximumWidth(220)
        self.progress.setTextVisible(True)
        self.progress.hide()
        self.cancel_button = QToolButton()
        self.cancel_button.setText("Cancel")
        self.cancel_button.setToolTip("Stop the running computation (Esc)")
        self.cancel_button.clicked.connect(self.cancel_compute)
        self.cancel_button.hide()
        sb.addWidget(self.status_age)
        sb.addWidget(self.status_warnings)
        sb.addPermanentWidget(self.progress)
        sb.addPermanentWidget(self.cancel_button)
        sb.addPermanentWidget(self.status_compute)
        self._progress_timer = QTimer(self)
        self._progress_timer.setSingleShot(True)
        self._progress_timer.timeout.connect(self._show_progress)

    # ------------------------------------------------------------------ settings
    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._layout_restored:
            QTimer.singleShot(0, self.fit_splitters)

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        if not self._layout_restored and self.isVisible():
            self.fit_splitters()

    def fit_splitters(self) -> None:
        # the set-up form: wide enough for its labels, a fifth of a large screen
        self.resizeDocks([self.setup_dock], [min(420, max(320, int(0.2 * self.width())))],
                         Qt.Orientation.Horizontal)
        """Default proportions: timeline 29 %, Doppler windows 33 %, table and sky 38 %;
        the sky about square and never more than a third of the width."""
        total_h = max(self.main_split.height(), 300)
        timeline_h = int(total_h * 0.29)
        doppler_h = int(total_h * 0.33)
        lower_h = total_h - timeline_h - doppler_h
        self.main_split.setSizes([timeline_h, doppler_h, lower_h])
        total_w = max(self.lower_split.width(), 300)
        sky_w = min(max(lower_h, 180), int(total_w * 0.3))
        need = self.table.needed_width() + 24 if self.table.needed_width() else 0
        if need and total_w - sky_w < need:        # the table's columns first, then the sky
            sky_w = max(min(sky_w, total_w - need), 160)
        self.lower_split.setSizes([total_w - sky_w, sky_w])

    def _restore_layout(self) -> bool:
        restored = False
        geo = self.settings.byte_array("geometry")
        if geo is not None:
            self.restoreGeometry(geo)
        state = self.settings.byte_array("windowState")
        if state is not None:
            self.restoreState(state)
        for key, split in (("planSplit", self.main_split), ("lowerSplit", self.lower_split)):
            value = self.settings.byte_array(key)
            if value is not None:
                restored = split.restoreState(value) or restored
        return restored

    def _user_moved_splitter(self) -> None:
        self._layout_restored = True          # the user's proportions from now on

    def save_layout(self) -> None:
        self.settings.set_byte_array("geometry", self.saveGeometry())
        self.settings.set_byte_array("windowState", self.saveState())
        self.settings.set_byte_array("planSplit", self.main_split.saveState())
        self.settings.set_byte_array("lowerSplit", self.lower_split.saveState())
        self.settings.sync()

    # ------------------------------------------------------------------ files
    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = self.settings.recent_files()
        for i, f in enumerate(files, start=1):
            act = self.recent_menu.addAction(f"&{i} {Path(f).name}")
            act.setToolTip(f)
            act.setStatusTip(f)
            act.triggered.connect(lambda _c=False, p=f: self.open_recent(p))
        if not files:
            none = self.recent_menu.addAction("(none)")
            none.setEnabled(False)
        else:
            self.recent_menu.addSeparator()
            self.recent_menu.addAction("Clear list", self.settings.clear_recent)

    def open_recent(self, path: str) -> bool:
        if not self._may_discard():
            return False
        if not Path(path).is_file():
            self.settings.remove_recent(path)
            self.show_problem(f"{path}: the recent file is gone (moved or deleted?); "
                              "it was taken off the list", kind="error")
            return False
        return self.open_scenario(path)

    def open_dialog(self) -> None:
        if not self._may_discard():
            return
        path, _ = QFileDialog.getOpenFileName(self, "Open scenario", self.settings.last_folder("scenarios"),
                                              SCENARIO_FILTER)
        if path:
            self.settings.set_last_folder("scenarios", path)
            self.open_scenario(path)

    def open_scenario(self, path: str | Path, template: bool = False) -> bool:
        """Load a scenario file and plan it; True when it was planned.

        A file that cannot be read or parsed leaves the window as it was. A file with bad
        values is shown in the form with every good value loaded and each bad field marked
        with its message (nothing is planned until they are fixed)."""
        p = Path(path)
        try:
            sc, problems = load_scenario_for_editing(p)
        except (AcqplanError, OSError) as err:
            self.show_problem(error_text(err), kind="error", details=self._problem_details(err))
            return False
        self.panel.set_scenario(sc)
        self.current_path = None if template else p      # a template: Save asks for a name
        self._saved_dict = self.panel.to_dict()
        if not template:
            self.settings.add_recent(p)
        self._update_title()
        if problems:
            err = ScenarioValidationError(problems, file=str(p))
            self.panel.show_problems(problems_of(err))
            self._form_invalid = True
            shown = ("the plan on screen is from the last valid inputs" if self.model.plan is not None
                     else "nothing is planned until they are fixed")
            self.show_problem(f"{error_text(err)} (marked in the set-up form; {shown})",
                              kind="input", details=self._problem_details(err))
            return False
        self.scenario = sc
        self.message_bar.clear()
        self.request_plan(sc)
        return True

    def open_demo(self) -> bool:
        """The invented demo scenario, opened as a template (Save asks for a file name)."""
        repo_demo = Path(__file__).resolve().parents[1] / "sample_almanacs" / "demo_scenario.toml"
        if repo_demo.is_file():
            path = repo_demo
        else:
            import tempfile

            from core.api import write_demo

            path = write_demo(Path(tempfile.mkdtemp(prefix="acqplan-demo-")))
        return self.open_scenario(path, template=True)

    def new_scenario(self) -> None:
        if not self._may_discard():
            return
        start = datetime.now(UTC).replace(minute=0, second=0, microsecond=0) + timedelta(hours=1)
        sc = Scenario.from_dict({"site": {"lat_deg": 0.0, "lon_deg": 0.0},
                                 "time": {"start": start, "end": start + timedelta(hours=2)}},
                                base_dir=Path.home())
        self.panel.set_scenario(sc)
        self.scenario = sc
        self.current_path = None
        self._saved_dict = self.panel.to_dict()
        self._update_title()
        self.show_problem("New scenario: add orbit files (File › Add orbit files… or drop them on "
                          "the window) and set the site and time. The plan on screen is the "
                          "previous one until then.", kind="note")

    def add_orbit_files_dialog(self) -> None:
        paths, _ = QFileDialog.getOpenFileNames(self, "Add orbit files", self.settings.last_folder("orbits"),
                                                ORBIT_FILE_FILTER)
        if paths:
            self.settings.set_last_folder("orbits", paths[0])
            self.add_orbit_files(paths)

    def add_orbit_files(self, paths: list[str | Path]) -> int:
        return self.panel.add_orbit_files(paths)

    def save(self) -> bool:
        if self.current_path is None:
            return self.save_as()
        return self._save_to(self.current_path)

    def save_as(self) -> bool:
        start = str(self.current_path) if self.current_path else str(
            Path(self.settings.last_folder("scenarios")) / "scenario.toml")
        path, _ = QFileDialog.getSaveFileName(self, "Save scenario as", start, SCENARIO_FILTER)
        if not path:
            return False
        if not path.lower().endswith(".toml"):
            path += ".toml"
        self.settings.set_last_folder("scenarios", path)
        return self._save_to(Path(path))

    def _save_to(self, path: Path) -> bool:
        sc = self._validated_form()
        if sc is None:
            self.show_problem("The scenario was not saved: fix the marked fields first.", kind="error")
            return False
        try:
            saved = save_scenario(sc, path)
        except (AcqplanError, OSError) as err:
            self.show_problem(error_text(err), kind="error")
            return False
        self.current_path = path
        self.scenario = saved
        self.panel.set_scenario(saved)
        self._saved_dict = self.panel.to_dict()
        self.settings.add_recent(path)
        self.statusBar().showMessage(f"saved {path}", 4000)
        self._update_title()
        return True

    @property
    def dirty(self) -> bool:
        if self.scenario is None and self._saved_dict is None:
            return False
        return self._saved_dict != self.panel.to_dict()

    def _update_title(self) -> None:
        name = self.scenario.name if self.scenario else "no scenario"
        where = str(self.current_path) if self.current_path else "not saved"
        self.setWindowTitle(f"{name} ({where})[*] — acqplan planner")
        self.setWindowModified(self.dirty)

    def ask_unsaved(self) -> str:
        """'save', 'discard' or 'cancel' (tests replace this method)."""
        box = QMessageBox(QMessageBox.Icon.Question, "Unsaved changes",
                          "The scenario has changes that are not saved.", parent=self)
        box.setInformativeText("Save them before closing?")
        box.setStandardButtons(QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard
                               | QMessageBox.StandardButton.Cancel)
        box.setDefaultButton(QMessageBox.StandardButton.Save)
        answer = box.exec()
        return {QMessageBox.StandardButton.Save: "save",
                QMessageBox.StandardButton.Discard: "discard"}.get(QMessageBox.StandardButton(answer), "cancel")

    def _may_discard(self) -> bool:
        if not self.dirty or not self.interactive:
            return True
        answer = self.ask_unsaved()
        if answer == "save":
            return self.save()
        return answer == "discard"

    def closeEvent(self, event: QCloseEvent) -> None:
        if not self._may_discard():
            event.ignore()
            return
        self.save_layout()
        self.worker.shutdown()
        for job in getattr(self, "_jobs", []):
            job.join()
        event.accept()

    # drag and drop: scenario files open, other files are added as orbit files
    def dragEnterEvent(self, event: QDragEnterEvent) -> None:
        if event.mimeData().hasUrls() and any(u.isLocalFile() for u in event.mimeData().urls()):
            event.acceptProposedAction()

    def dropEvent(self, event: QDropEvent) -> None:
        paths = [Path(u.toLocalFile()) for u in event.mimeData().urls() if u.isLocalFile()]
        self.drop_files(paths)
        event.acceptProposedAction()

    def drop_files(self, paths: list[Path]) -> None:
        scenarios = [p for p in paths if p.suffix.lower() == ".toml"]
        others = [p for p in paths if p.suffix.lower() != ".toml"]
        if scenarios:
            if self._may_discard():
                self.open_scenario(scenarios[0])
            return
        missing = [p for p in others if not p.is_file()]
        if missing:
            self.show_problem(f"{missing[0]}: not a readable file", kind="error")
        files = [p for p in others if p.is_file()]
        if files:
            self.add_orbit_files(files)

    # ------------------------------------------------------------------ planning
    def _validated_form(self) -> Scenario | None:
        d = self.panel.to_dict()
        try:
            sc = Scenario.from_dict(d, base_dir=self.panel.base_dir, path=self.current_path)
        except ScenarioValidationError as err:
            self.panel.show_problems(problems_of(err))
            return None
        except AcqplanError as err:
            self.panel.show_problems([(getattr(err, "field", None), str(err))])
            return None
        # The form holds no drive keys: they are the file's, and so are their lines.
        loaded = self.scenario
        if loaded is not None and loaded.path is not None and loaded.path == self.current_path:
            sc = replace(sc, locator=loaded.locator)
        return sc

    def _on_edited(self, _dotted: str) -> None:
        sc = self._validated_form()
        self._form_invalid = sc is None
        self._update_title_later()
        if sc is None:
            self.show_problem("Some inputs are not valid (marked in the set-up form); the plan "
                              "on screen is from the last valid inputs.", kind="input")
            return
        self.panel.show_problems([])
        self.message_bar.clear("input")
        self.scenario = sc
        self.panel.refresh_files()
        missing = sc.missing_orbit_files()
        if missing:
            why = [file_problem(m) or "not found" for m in missing]
            names = "; ".join(f"{m}: {w}" for m, w in zip(missing, why))
            hint = " (moved or deleted?)" if why[0] == "not found" else ""
            self.panel.show_problems([("orbits.files", names)])
            self.show_problem(f"{missing[0]}: orbit file {why[0]}{hint}; the plan "
                              "on screen is from the last valid inputs.", kind="error")
            return
        if self._computing and sc == getattr(self, "_requested", None):
            return          # the same inputs again (e.g. a combo box's activated + editingFinished)
        self.request_plan(sc)

    def _update_title_later(self) -> None:
        QTimer.singleShot(0, self._update_title)

    def request_plan(self, sc: Scenario) -> int:
        plan = self.model.plan
        prepared = getattr(plan, "prepared", None) if plan is not None else None
        serial = self.worker.submit(sc, prepared)
        self._requested = sc
        self._latest_serial = serial
        self._computing = True
        self.act_cancel.setEnabled(True)
        self.status_compute.setText("computing…")
        if not self._progress_timer.isActive() and not self.progress.isVisible():
            self._progress_timer.start(PROGRESS_DELAY_MS)
        return serial

    def replan(self) -> None:
        sc = self._validated_form()
        if sc is not None:
            self.request_plan(sc)

    def open_sweep(self):
        from .sweep_dialog import open_sweep_dialog

        return open_sweep_dialog(self)

    def cancel_compute(self) -> None:
        if self._computing:
            self.worker.cancel()

    def _show_progress(self) -> None:
        if self._computing:
            self.progress.show()
            self.cancel_button.show()

    def _hide_progress(self) -> None:
        self._progress_timer.stop()
        self.progress.hide()
        self.cancel_button.hide()
        self._computing = False
        self.act_cancel.setEnabled(False)

    def _on_progress(self, serial: int, fraction: float, text: str) -> None:
        if serial != self._latest_serial:
            return
        self.progress.setValue(int(round(100 * fraction)))
        self.progress.setFormat(f"{text} (%p%)")

    def _on_planned(self, result: PlanResult) -> None:
        if result.serial != self._latest_serial:
            return                                  # stale: a newer request exists
        t0 = time.perf_counter()
        self.model.set_result(result)
        plan = result.plan
        self.messages.set_plan_warnings(plan.warnings)
        # A result of an earlier, valid edit must not clear the marks of a newer invalid one.
        if not getattr(self, "_form_invalid", False):
            if self.message_bar.kind in ("error", "input"):
                self.message_bar.clear()
            self.panel.show_problems([])
        if result.final:
            self._hide_progress()
            self.route.mark_problem(None)
        else:
            # Tell the worker once this update is painted (posted paints run first).
            serial = result.serial
            QTimer.singleShot(0, lambda: self.worker.acknowledge(serial))
        self._note_pole(result.scenario)
        if not self._layout_restored and self.isVisible():
            self.fit_splitters()                # the table's columns are known now
        self.apply_s = time.perf_counter() - t0
        self._update_status(result)
        self.planShown.emit(result)

    def _on_failed(self, failure: PlanFailure) -> None:
        if failure.serial != self._latest_serial:
            return
        self._hide_progress()
        err = failure.error
        if failure.internal:
            text = (f"Internal fault while planning ({type(err).__name__}: {err}); the plan on screen "
                    "is the previous one. Details are in the Messages panel.")
            self.messages.add_message("fault", text, failure.details)
            self.message_bar.show_message(text, "error")
            self.problemShown.emit(text)
        else:
            marked = self.panel.show_problems(problems_of(err))
            if isinstance(err, InputError):
                self.route.mark_problem(err)
            if not marked and isinstance(err, InputError) and err.file and self.scenario is not None:
                if str(err.file) in {str(p) for p in self.scenario.resolved_orbit_files()}:
                    self.panel.show_problems([("orbits.files", err.message + f" ({err.file})")])
            self.show_problem(error_text(err) + "\nThe plan on screen is from the last valid inputs.",
                              kind="error")
        self.status_compute.setText("last computation failed")

    def _on_cancelled(self, serial: int) -> None:
        if serial != self._latest_serial:
            return
        self._hide_progress()
        if self.model.result is not None and not self.model.ttff_final:
            self.channels.info.setText("Monte Carlo TTFF cancelled: press F5 to plan again")
        self.status_compute.setText("computation cancelled; the plan on screen is the previous one")

    def _note_pole(self, sc: Scenario) -> None:
        lat, lon = sc.site.lat_deg, sc.site.lon_deg
        if abs(lat) >= 89.99 and (lat, lon) not in self._noted_pole:
            self._noted_pole.add((lat, lon))
            where = "North" if lat > 0 else "South"
            self.messages.add_message(
                "note", f"The site is at the {where} Pole: every direction there is "
                f"{'south' if lat > 0 else 'north'}, so the sky view's azimuths are measured from "
                f"the meridian of the given longitude ({lon:g}°).")
            self.show_problem(f"Site at the {where} Pole: azimuths refer to the {lon:g}° meridian "
                              "(see Messages).", kind="note")

    # ------------------------------------------------------------------ problems
    def _problem_details(self, err: BaseException) -> str:
        probs = problems_of(err)
        return "\n".join(f"{f or '-'}: {m}" for f, m in probs)

    def show_problem(self, text: str, kind: str = "error", details: str = "") -> None:
        """Put a problem in the message bar and the Messages panel."""
        self.message_bar.show_message(text, "note" if kind == "note" else ("input" if kind == "input" else "error"))
        if kind != "input" or text != self._last_problem:
            self.messages.add_message({"note": "note", "input": "input"}.get(kind, "error"), text, details)
        self._last_problem = text
        self.problemShown.emit(text)

    def report_fault(self, exc_type, exc, tb) -> None:
        """Called by the application's excepthook: report, keep running."""
        import traceback

        details = "".join(traceback.format_exception(exc_type, exc, tb))
        text = f"Internal fault ({exc_type.__name__}: {exc}); acqplan keeps running."
        self.messages.add_message("fault", text, details)
        self.message_bar.show_message(text + " Details are in the Messages panel.", "error")
        self.problemShown.emit(text)

    # ------------------------------------------------------------------ status
    def load_record_dialog(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Load receiver record", "",
                                              "Receiver records (*.??o *.??d *.obs *.rnx *.crx *.gz *.Z "
                                              "*.nmea *.txt *.log);;All files (*)")
        if path:
            self.record_view.load(path)
            self.tabs.setCurrentWidget(self.record_view)

    def show_messages(self) -> None:
        self.lower_tabs.setCurrentWidget(self.messages)

    def _update_status(self, result: PlanResult) -> None:
        plan = result.plan
        ages = [f.age_s for f in plan.orbit_files if f.age_s is not None]
        if ages:
            # round first, so that a broadcast file centred on the start reads 0.0, not -0.0
            lo, hi = (round(x / 86400.0, 1) + 0.0 for x in (min(ages), max(ages)))
            span = f"{lo:.1f} days" if abs(hi - lo) < 0.05 else f"{lo:.1f}–{hi:.1f} days"
            self.status_age.setText(f"orbit data {span} old at the start")
        else:
            self.status_age.setText("orbit data age unknown")
        tips = [f"{Path(f.path).name}: {f.format}, {f.n_satellites} satellites, epoch "
                f"{datetime.fromtimestamp(f.epoch_unix_s, UTC):%Y-%m-%d %H:%M} UTC"
                + ("" if f.age_s is None else f", {f.age_s / 86400.0:.2f} days before the start")
                for f in plan.orbit_files]
        self.status_age.setToolTip("\n".join(tips))
        reuse = "geometry reused" if plan.reused_geometry else f"propagation {plan.propagate_s:.2f} s"
        stage = "" if result.final else "; TTFF percentiles pending"
        self.status_compute.setText(f"computed in {result.elapsed_s:.2f} s ({reuse}{stage}), "
                                    f"drawn in {1000 * self.apply_s:.0f} ms")
        self._update_status_counts()

    def _messages_counted(self, n: int) -> None:
        i = self.lower_tabs.indexOf(self.messages) if hasattr(self, "lower_tabs") else -1
        if i >= 0:
            self.lower_tabs.setTabText(i, f"Messages ({n})")
        if hasattr(self, "status_warnings"):
            self._update_status_counts()

    def _update_status_counts(self) -> None:
        """The status bar and the Messages tab give the same count (notes not counted)."""
        n = self.messages.attention_count()
        self.status_warnings.setText(f"{n} warning{'s' if n != 1 else ''}")

    # ------------------------------------------------------------------ sheets and data
    def _zoom_start(self) -> None:
        self.channels.show_start()

    def _need_plan(self) -> bool:
        if self.model.plan is None:
            self.show_problem("There is no plan to print or export yet.", kind="error")
            return False
        return True

    def print_preview(self) -> None:
        if not self._need_plan():
            return
        try:
            from .sheets import show_print_preview

            show_print_preview(self.model.window_plan, self, drive=self.model.drive)
        except Exception as err:  # the sheet module is another part; report, keep running
            self.show_problem(f"Print preview failed: {error_text(err)}", kind="error")

    def export_pdf(self) -> None:
        if not self._need_plan():
            return
        start = str(Path(self.settings.last_folder("exports")) / "search-plan.pdf")
        path, chosen = QFileDialog.getSaveFileName(self, "Export search-plan sheets", start,
                                                   "PDF, A4 (*.pdf);;PDF, US Letter (*.pdf)")
        if not path:
            return
        if not path.lower().endswith(".pdf"):
            path += ".pdf"
        self.settings.set_last_folder("exports", path)
        paper = "letter" if "Letter" in chosen else "a4"
        self.write_pdf(Path(path), paper)

    def write_pdf(self, path: Path, paper: str = "a4") -> threading.Thread | None:
        """Render the sheets to ``path`` in a background thread (painting a PDF takes
        0.2-0.5 s); ``exportFinished`` reports the outcome. QPainter on a QPdfWriter is
        allowed outside the GUI thread."""
        plan, drive = self.model.window_plan, self.model.drive   # the whole drive, not one event
        if plan is None:
            return None

        def job() -> None:
            try:
                from .sheets import write_sheet_pdf

                write_sheet_pdf(plan, path, paper, drive=drive)
            except Exception as err:  # report in the window, keep running
                self.exportFinished.emit(str(path), f"PDF export failed ({path}): {error_text(err)}")
                return
            self.exportFinished.emit(str(path), "")

        thread = self._start_job(job, "acqplan-pdf")
        self.statusBar().showMessage(f"writing {path}…", 4000)
        return thread

    def _start_job(self, job, name: str) -> threading.Thread:
        """Run a file-writing job in a (non-daemon) thread that closing the window waits
        for, so a quit never kills an export half-way."""
        jobs = getattr(self, "_jobs", [])
        self._jobs = [t for t in jobs if t.is_alive()]
        thread = threading.Thread(target=job, name=name)
        self._jobs.append(thread)
        thread.start()
        return thread

    def export_data(self) -> None:
        if not self._need_plan():
            return
        start = str(Path(self.settings.last_folder("exports")) / "search-plan.json")
        path, chosen = QFileDialog.getSaveFileName(
            self, "Export plan data", start,
            "Plan as JSON (*.json);;Search summary per satellite, CSV (*.csv);;"
            "Doppler windows per satellite per step, CSV (*.csv)")
        if not path:
            return
        if "windows" in chosen:
            fmt, ext = "windows", "csv"
        elif "CSV" in chosen or path.lower().endswith(".csv"):
            fmt, ext = "csv", "csv"
        else:
            fmt, ext = "json", "json"
        if not path.lower().endswith("." + ext):
            path += "." + ext
        self.settings.set_last_folder("exports", path)
        self.write_data(Path(path), fmt)

    def write_data(self, path: Path, fmt: str) -> threading.Thread | None:
        """Write the plan as JSON (``fmt`` "json"), the search summary per satellite
        ("csv") or the windows per satellite per step ("windows") with core.files.plan_export,
        in a background thread (the JSON of a two-hour plan takes ~0.2 s to build);
        ``exportFinished`` reports the outcome."""
        plan = self.model.plan
        if plan is None:
            return None

        def job() -> None:
            from core.files.plan_export import (
                export_plan_json,
                export_search_csv,
                export_windows_csv,
            )

            writer = {"csv": export_search_csv, "windows": export_windows_csv}.get(fmt, export_plan_json)
            try:
                writer(plan, path)
            except Exception as err:  # report every failure in the window
                self.exportFinished.emit(str(path), f"Export failed: {error_text(err)}")
                return
            self.exportFinished.emit(str(path), "")

        thread = self._start_job(job, "acqplan-export")
        self.statusBar().showMessage(f"writing {path}…", 4000)
        return thread

    def _export_finished(self, path: str, problem: str) -> None:
        if problem:
            self.show_problem(problem, kind="error")
        else:
            self.statusBar().showMessage(f"wrote {path}", 4000)

    # ------------------------------------------------------------------ about
    def about_html(self) -> str:
        esc = html.escape
        conv = "".join(f"<li>{esc(c)}</li>" for c in SIGN_CONVENTIONS)
        safety = "".join(f"<li>{esc(c)}</li>" for c in SAFETY_CAUTIONS)
        return (f"<h3>acqplan {esc(_version())}</h3>"
                "<p>Plans GNSS acquisition searches from almanac and TLE files: Doppler "
                "windows, frequency bins, code-phase cells, detection and the channel "
                "timeline up to the first fix.</p>"
                f"<p><b>Units.</b> {esc(UNITS_TEXT)}</p>"
                f"<p><b>Sign conventions.</b></p><ul>{conv}</ul>"
                "<p><b>Bin loss.</b> A carrier offset f from the bin centre after a "
                "coherent time Tc loses −20 log10 |sinc(f·Tc)| dB (sinc(x) = sin(πx)/(πx)); "
                "the bin is the widest whose edge (f = half a bin) loses at most the "
                "accepted loss. Words: <i>first</i> window = before any acquisition; "
                "<i>narrowed</i> = after the first acquisition, once the oscillator error "
                "is measured.</p>"
                f"<p><b>Safety.</b></p><ul>{safety}</ul>"
                "<p>Plans are estimates from orbit predictions and models; check them "
                "against your receiver's behaviour.</p>")

    def show_about(self) -> None:
        QMessageBox.about(self, "About acqplan", self.about_html())

    # ------------------------------------------------------------------ misc
    def view_widgets(self) -> dict[str, QWidget]:
        """The views by file name (screenshots)."""
        return {"sky": self.sky, "doppler": self.doppler, "search_grid": self.search_grid,
                "channels": self.channels, "loss_curve": self.loss, "satellites": self.table,
                "messages": self.messages, "scenario": self.panel, "route": self.route}
