"""The "Test set-up" form: one editor per scenario key, grouped as the scenario file is.

Editors are built from :data:`core.plan.spec.KEY_RULES` (kind, unit, range, doc): every
label names its unit, every numeric widget is limited to the key's allowed range and
every tooltip repeats the key's documentation. The panel knows nothing of plans: it turns
a :class:`~core.plan.spec.Scenario` into widget values (:meth:`ScenarioPanel.set_scenario`,
signals blocked so nothing echoes back), emits :attr:`ScenarioPanel.edited` when the user
changes a value, returns the nested file-layout dict (:meth:`ScenarioPanel.to_dict`) for
the core to validate, and marks the fields the core rejected
(:meth:`ScenarioPanel.show_problems`) with the core's own message under the field.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from PySide6.QtCore import QDateTime, QRegularExpression, Qt, QTimeZone, Signal
from PySide6.QtGui import QDoubleValidator, QRegularExpressionValidator
from PySide6.QtWidgets import (
    QAbstractItemView,
    QAbstractSpinBox,
    QCheckBox,
    QComboBox,
    QDateTimeEdit,
    QDoubleSpinBox,
    QFileDialog,
    QFormLayout,
    QFrame,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QListWidget,
    QListWidgetItem,
    QPushButton,
    QScrollArea,
    QSizePolicy,
    QSpinBox,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from core.api import SIGNALS, zone_names
from core.plan.spec import (
    FORMAT_VERSION,
    KEY_RULES,
    RULES_BY_DOTTED,
    KeyRule,
    Scenario,
)

# Group titles, in the order of the scenario file's sections.
GROUPS: tuple[tuple[str, str], ...] = (
    ("", "Scenario"),
    ("orbits", "Orbit data"),
    ("site", "Site"),
    ("time", "Time"),
    ("receiver", "Receiver"),
    ("search", "Search"),
    ("signal", "Signal level"),
    ("mask", "Elevation mask"),
)

# label (with its unit), decimals, single step. Units follow KEY_RULES.unit.
FIELDS: dict[str, tuple[str, int, float]] = {
    "name": ("Name", 0, 1),
    "format_version": ("Scenario file layout", 0, 1),
    "orbits.files": ("Orbit files (YUMA, SEM, TLE, RINEX nav)", 0, 1),
    "orbits.mapping": ("GLONASS slot/channel file", 0, 1),
    "orbits.skip_bad_records": ("Bad orbit records", 0, 1),
    "orbits.allow_old_data": ("Old orbit data", 0, 1),
    "site.lat_deg": ("Latitude (°, north +)", 6, 0.01),
    "site.lon_deg": ("Longitude (°, east +)", 6, 0.01),
    "site.height_m": ("Ellipsoid height (m)", 1, 10),
    "site.horizontal_uncertainty_km": ("Horizontal uncert. (km)", 3, 1),
    "site.vertical_uncertainty_m": ("Vertical uncert. (m)", 1, 50),
    "time.start": ("Start (UTC)", 0, 1),
    "time.end": ("End (UTC)", 0, 1),
    "time.step_s": ("Plan step (s)", 1, 10),
    "time.uncertainty_s": ("Clock uncert. (± s)", 3, 1),
    "time.timezone": ("Local time zone", 0, 1),
    "receiver.signals": ("Signals searched", 0, 1),
    "receiver.channels": ("Channels", 0, 1),
    "receiver.oscillator_offset_ppb": ("Oscillator offset (ppb)", 1, 10),
    "receiver.oscillator_uncertainty_ppb": ("Oscillator uncert. (± ppb)", 1, 50),
    "receiver.max_horizontal_speed_m_s": ("Horizontal speed (m/s)", 1, 1),
    "receiver.max_vertical_speed_m_s": ("Vertical speed (m/s)", 1, 1),
    "receiver.correlators_per_channel": ("Correlators per channel", 0, 1),
    "receiver.parallel_code_search": ("Parallel code search", 0, 1),
    "search.coherent_ms": ("Coherent time (ms)", 0, 1),
    "search.noncoherent": ("Non-coherent sums", 0, 1),
    "search.max_frequency_loss_db": ("Accepted bin loss (dB)", 2, 0.1),
    "search.code_step_chips": ("Code step (chips)", 3, 0.05),
    "search.false_alarm_per_cell": ("False-alarm rate per cell", 0, 1),
    "search.false_alarm_penalty_s": ("False-alarm penalty (s)", 3, 0.1),
    "search.fine_time_uncertainty_us": ("Fine time uncert. (µs)", 1, 10),
    "search.first_fix_satellites": ("Satellites for a fix", 0, 1),
    "search.ephemeris_wait_s": ("Ephemeris wait (s)", 1, 5),
    "search.orbit_margin_hz": ("Orbit margin (Hz at L1)", 1, 10),
    "search.priority": ("Search order", 0, 1),
    "search.monte_carlo_runs": ("Monte Carlo runs", 0, 100),
    "search.seed": ("Random seed", 0, 1),
    "signal.cn0_zenith_dbhz": ("C/N0 at zenith (dB-Hz)", 1, 1),
    "signal.cn0_at_mask_dbhz": ("C/N0 at mask (dB-Hz)", 1, 1),
    "signal.extra_loss_db": ("Extra loss (dB)", 1, 1),
    "mask.elevation_deg": ("Elevation mask (°)", 1, 1),
}

# What a tick box means, in the trade's words.
BOOL_TEXT = {"receiver.parallel_code_search": "whole code per dwell",
             "orbits.skip_bad_records": "drop them with a warning",
             "orbits.allow_old_data": "use data over 120 days old"}

# Analyst settings: in a collapsed "Advanced" group at the end of the form.
ADVANCED = ("format_version", "search.monte_carlo_runs", "search.seed",
            "orbits.skip_bad_records", "orbits.allow_old_data")

PRIORITY_TEXT = {"elevation": "highest elevation first", "rising": "rising satellites first"}
ORBIT_FILE_FILTER = ("Orbit files (*.txt *.alm *.al3 *.yuma *.sem *.tle *.3le *.agl *.nav "
                     "*.rnx *.*n *.*g *.*q *.*p *.sp3 *.gz *.Z);;All files (*)")
MAPPING_FILE_FILTER = "Mapping files (*.txt *.csv);;All files (*)"

_PROBLEM_STYLE = "border: 2px solid #D55E00; border-radius: 3px;"


def _tip(rule: KeyRule) -> str:
    parts = [rule.doc[:1].upper() + rule.doc[1:] + "." if rule.doc else ""]
    if rule.lo is not None and rule.hi is not None:
        unit = f" {rule.unit}" if rule.unit else ""
        parts.append(f"Allowed: {rule.lo:g} to {rule.hi:g}{unit}.")
    if not rule.required and rule.default is not None and rule.kind not in ("paths", "signals"):
        parts.append(f"Default: {rule.default}.")
    parts.append(f"Scenario key: {rule.dotted}")
    return "\n".join(p for p in parts if p)


class FieldEditor(QWidget):
    """One key's input widget plus the line that shows the core's message about it."""

    changed = Signal(str)

    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(parent)
        self.rule = rule
        self.dotted = rule.dotted
        self._box = QVBoxLayout(self)
        self._box.setContentsMargins(0, 0, 0, 0)
        self._box.setSpacing(1)
        # Placed by the panel as a row of its own under the field (full form width).
        self.problem_label = QLabel(parent)
        self.problem_label.setObjectName("problemLabel")
        self.problem_label.setWordWrap(True)
        self.problem_label.setStyleSheet("color: #A33A00; font-size: 8pt;")
        self.problem_label.hide()
        self._problem: str | None = None
        self.input: QWidget | None = None

    def _finish(self, widget: QWidget, row: QWidget | None = None) -> None:
        self.input = widget
        widget.setToolTip(_tip(self.rule))
        self._box.addWidget(row or widget)

    def _emit(self, *_args: Any) -> None:
        self.changed.emit(self.dotted)

    def value(self) -> Any:
        raise NotImplementedError

    def set_value(self, value: Any) -> None:
        raise NotImplementedError

    def set_problem(self, message: str | None) -> None:
        target = self.input
        self._problem = message or None
        if message:
            self.problem_label.setText(message)
            self.problem_label.show()
            if target is not None:
                target.setStyleSheet(f"{type(target).__name__} {{ {_PROBLEM_STYLE} }}")
        else:
            self.problem_label.clear()
            self.problem_label.hide()
            if target is not None:
                target.setStyleSheet("")

    @property
    def problem(self) -> str | None:
        return self._problem


class NumberEditor(FieldEditor):
    """A number within the key's range; optional keys have an "on" box (off = not set)."""

    def __init__(self, rule: KeyRule, decimals: int, step: float, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.integer = rule.kind == "integer"
        spin: QSpinBox | QDoubleSpinBox
        if self.integer:
            spin = QSpinBox(self)
            spin.setRange(int(rule.lo), int(rule.hi))
            spin.setSingleStep(int(step))
        else:
            spin = QDoubleSpinBox(self)
            spin.setDecimals(decimals)
            spin.setRange(float(rule.lo), float(rule.hi))
            spin.setSingleStep(step)
        self._decimals = decimals
        spin.setKeyboardTracking(False)        # valueChanged on Enter / focus out / arrows
        spin.setAccelerated(True)
        spin.setCorrectionMode(QAbstractSpinBox.CorrectionMode.CorrectToNearestValue)
        spin.setMinimumWidth(84)
        self.spin = spin
        self.optional = rule.default is None
        self.enable: QCheckBox | None = None
        if self.optional:
            row = QWidget(self)
            lay = QHBoxLayout(row)
            lay.setContentsMargins(0, 0, 0, 0)
            self.enable = QCheckBox("use", row)
            self.enable.setToolTip("Unchecked: the key is left out of the scenario "
                                   "(the planner's own rule applies)")
            lay.addWidget(self.enable)
            lay.addWidget(spin, 1)
            self.enable.toggled.connect(self._toggled)
            spin.setEnabled(False)
            self._finish(spin, row)
        else:
            self._finish(spin)
        spin.valueChanged.connect(self._emit)

    def _toggled(self, on: bool) -> None:
        self.spin.setEnabled(on)
        self._emit()

    def value(self) -> Any:
        if self.enable is not None and not self.enable.isChecked():
            return None
        v = self.spin.value()
        if self.integer:
            return int(v)
        return float(v)

    def set_value(self, value: Any) -> None:
        if self.enable is not None:
            self.enable.setChecked(value is not None)
            self.spin.setEnabled(value is not None)
        if value is not None:
            if not self.integer:
                # Show every decimal the file gives (up to 6), so nothing is rounded away.
                text = f"{float(value):.6f}".rstrip("0")
                needed = len(text.split(".")[1]) if "." in text else 0
                self.spin.setDecimals(max(self._decimals, min(needed, 6)))
            self.spin.setValue(int(value) if self.integer else float(value))


class ScientificEditor(FieldEditor):
    """A small probability typed as 1e-4: a validated line edit in scientific notation."""

    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.edit = QLineEdit(self)
        validator = QDoubleValidator(float(rule.lo), float(rule.hi), 15, self.edit)
        validator.setNotation(QDoubleValidator.Notation.ScientificNotation)
        self.edit.setValidator(validator)
        self.edit.setPlaceholderText(f"{rule.lo:g} … {rule.hi:g}")
        self.edit.editingFinished.connect(self._emit)
        self._finish(self.edit)

    def value(self) -> Any:
        try:
            return float(self.edit.text())
        except ValueError:
            return self.edit.text()

    def set_value(self, value: Any) -> None:
        self.edit.setText(f"{float(value):.6g}")


class BigIntegerEditor(FieldEditor):
    """An integer beyond a spin box's 32-bit range (the random seed)."""

    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.edit = QLineEdit(self)
        self.edit.setValidator(QRegularExpressionValidator(QRegularExpression(r"\d{1,19}"), self.edit))
        self.edit.editingFinished.connect(self._emit)
        self._finish(self.edit)

    def value(self) -> Any:
        text = self.edit.text().strip()
        return int(text) if text.isdigit() else text

    def set_value(self, value: Any) -> None:
        self.edit.setText(str(int(value)))


class BoolEditor(FieldEditor):
    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.box = QCheckBox(BOOL_TEXT.get(rule.dotted, "on"), self)
        self.box.toggled.connect(self._emit)
        self._finish(self.box)

    def value(self) -> Any:
        return bool(self.box.isChecked())

    def set_value(self, value: Any) -> None:
        self.box.setChecked(bool(value))


class TextEditor(FieldEditor):
    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.edit = QLineEdit(self)
        self.edit.editingFinished.connect(self._emit)
        self._finish(self.edit)

    def value(self) -> Any:
        return self.edit.text()

    def set_value(self, value: Any) -> None:
        self.edit.setText(str(value))
        self.edit.setCursorPosition(0)


class ChoiceEditor(FieldEditor):
    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.combo = QComboBox(self)
        self.combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.combo.setMinimumContentsLength(10)
        for c in rule.choices:
            self.combo.addItem(PRIORITY_TEXT.get(c, c), c)
        self.combo.currentIndexChanged.connect(self._emit)
        self._finish(self.combo)

    def value(self) -> Any:
        return self.combo.currentData()

    def set_value(self, value: Any) -> None:
        i = self.combo.findData(value)
        self.combo.setCurrentIndex(max(i, 0))


class ZoneEditor(FieldEditor):
    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.combo = QComboBox(self)
        self.combo.setEditable(True)
        self.combo.setInsertPolicy(QComboBox.InsertPolicy.NoInsert)
        self.combo.addItems(zone_names())
        self.combo.setMaxVisibleItems(20)
        self.combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.combo.setMinimumContentsLength(12)
        self.combo.activated.connect(self._emit)
        self.combo.lineEdit().editingFinished.connect(self._emit)
        self._finish(self.combo)

    def value(self) -> Any:
        return self.combo.currentText().strip()

    def set_value(self, value: Any) -> None:
        i = self.combo.findText(str(value))
        if i >= 0:
            self.combo.setCurrentIndex(i)
        else:
            self.combo.setEditText(str(value))


class TimeEditor(FieldEditor):
    """A UTC instant to the second."""

    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.edit = QDateTimeEdit(self)
        self.edit.setTimeZone(QTimeZone.utc())
        self.edit.setDisplayFormat("yyyy-MM-dd HH:mm:ss")
        self.edit.setCalendarPopup(True)
        self.edit.setKeyboardTracking(False)
        self.edit.dateTimeChanged.connect(self._emit)
        self._finish(self.edit)

    def value(self) -> Any:
        secs = self.edit.dateTime().toSecsSinceEpoch()
        return datetime.fromtimestamp(secs, UTC).strftime("%Y-%m-%dT%H:%M:%SZ")

    def set_value(self, value: Any) -> None:
        if isinstance(value, str):
            from core.api import parse_iso_utc

            value = parse_iso_utc(value)
        if isinstance(value, datetime):
            secs = value.timestamp()
        else:
            secs = float(value)
        self.edit.setDateTime(QDateTime.fromSecsSinceEpoch(int(math.floor(secs)), QTimeZone.utc()))


class MappingEditor(FieldEditor):
    """Optional file name (GLONASS mapping), relative to the scenario's folder."""

    def __init__(self, rule: KeyRule, panel: ScenarioPanel, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.panel = panel
        row = QWidget(self)
        lay = QHBoxLayout(row)
        lay.setContentsMargins(0, 0, 0, 0)
        self.edit = QLineEdit(row)
        self.edit.setPlaceholderText("none")
        self.edit.editingFinished.connect(self._emit)
        choose = QToolButton(row)
        choose.setText("…")
        choose.setToolTip("Pick the mapping file (catalogue number, satellite ID, channel k)")
        clear = QToolButton(row)
        clear.setText("✕")
        clear.setToolTip("No mapping file")
        choose.clicked.connect(self._choose)
        clear.clicked.connect(self._clear)
        lay.addWidget(self.edit, 1)
        lay.addWidget(choose)
        lay.addWidget(clear)
        self._finish(self.edit, row)

    def _choose(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "GLONASS mapping file",
                                              self.panel.dialog_folder("orbits"), MAPPING_FILE_FILTER)
        if path:
            self.panel.remember_folder("orbits", path)
            self.edit.setText(path)
            self._emit()

    def _clear(self) -> None:
        if self.edit.text():
            self.edit.clear()
            self._emit()

    def value(self) -> Any:
        text = self.edit.text().strip()
        return text or None

    def set_value(self, value: Any) -> None:
        self.edit.setText("" if value is None else str(value))
        self.edit.setCursorPosition(0)
        self.edit.setToolTip(_tip(self.rule) + ("" if value is None else f"\n{self.panel.resolve(str(value))}"))


class OrbitFilesEditor(FieldEditor):
    """The list of orbit files; missing files are flagged in the list."""

    def __init__(self, rule: KeyRule, panel: ScenarioPanel, parent: QWidget | None = None):
        super().__init__(rule, parent)
        self.panel = panel
        box = QWidget(self)
        lay = QVBoxLayout(box)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(2)
        self.list = QListWidget(box)
        self.list.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.list.setMinimumHeight(64)
        self.list.setMaximumHeight(96)
        self.list.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        buttons = QHBoxLayout()
        add = QPushButton("Add…", box)
        add.setToolTip("Add almanac, TLE or navigation files (or drop them on the window)")
        remove = QPushButton("Remove", box)
        remove.setToolTip("Remove the selected files from the scenario")
        add.clicked.connect(self._add)
        remove.clicked.connect(self._remove)
        buttons.addWidget(add)
        buttons.addWidget(remove)
        buttons.addStretch(1)
        lay.addWidget(self.list)
        lay.addLayout(buttons)
        self._names: list[str] = []
        self._finish(self.list, box)

    def _add(self) -> None:
        paths, _ = QFileDialog.getOpenFileNames(self, "Add orbit files",
                                                self.panel.dialog_folder("orbits"), ORBIT_FILE_FILTER)
        if paths:
            self.panel.remember_folder("orbits", paths[0])
            self.add_files(paths)

    def add_files(self, paths: Iterable[str | Path]) -> int:
        added = 0
        have = {str(self.panel.resolve(n)) for n in self._names}
        for p in paths:
            text = str(Path(p).resolve())
            if text not in have:
                self._names.append(text)
                have.add(text)
                added += 1
        if added:
            self._refresh()
            self._emit()
        return added

    def _remove(self) -> None:
        rows = sorted({i.row() for i in self.list.selectedIndexes()}, reverse=True)
        for r in rows:
            del self._names[r]
        if rows:
            self._refresh()
            self._emit()

    def _refresh(self) -> None:
        self.list.clear()
        for name in self._names:
            resolved = self.panel.resolve(name)
            item = QListWidgetItem(Path(name).name)
            tip = str(resolved)
            if not resolved.is_file():
                item.setText(f"{Path(name).name}  (missing)")
                item.setForeground(Qt.GlobalColor.darkRed)
                tip += "\nnot found: moved or deleted?"
            item.setToolTip(tip)
            self.list.addItem(item)

    def value(self) -> Any:
        return list(self._names)

    def set_value(self, value: Any) -> None:
        self._names = [str(v) for v in (value or ())]
        self._refresh()


class SignalsEditor(FieldEditor):
    """One check box per known signal; the order of checking is kept (first per system wins)."""

    def __init__(self, rule: KeyRule, parent: QWidget | None = None):
        super().__init__(rule, parent)
        box = QFrame(self)
        grid = QGridLayout(box)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.setHorizontalSpacing(8)
        grid.setVerticalSpacing(0)
        self.boxes: dict[str, QCheckBox] = {}
        for i, (sid, sig) in enumerate(SIGNALS.items()):
            cb = QCheckBox(sid, box)
            cb.setToolTip(f"{sig.description}: {sig.carrier_hz / 1e6:.3f} MHz, code period "
                          f"{sig.code_period_s * 1e3:g} ms; {sig.symbol_note}")
            cb.toggled.connect(lambda on, s=sid: self._toggled(s, on))
            grid.addWidget(cb, i // 2, i % 2)
            self.boxes[sid] = cb
        self._order: list[str] = []
        self._finish(box)
        box.setToolTip(_tip(rule) + "\nOne signal per system is planned: the first one checked.")

    def _toggled(self, sid: str, on: bool) -> None:
        if on and sid not in self._order:
            self._order.append(sid)
        elif not on and sid in self._order:
            self._order.remove(sid)
        self._emit()

    def value(self) -> Any:
        return list(self._order)

    def set_value(self, value: Any) -> None:
        self._order = [str(v) for v in (value or ()) if str(v) in self.boxes]
        for sid, cb in self.boxes.items():
            cb.blockSignals(True)
            cb.setChecked(sid in self._order)
            cb.blockSignals(False)


class PerSignalEditor(FieldEditor):
    """[search.per_signal.<ID>]: a coherent time and sum count of a signal's own."""

    def __init__(self, parent: QWidget | None = None):
        rule = KeyRule("search", "per_signal", "table", None,
                       doc="integration of a signal's own, replacing the two values above")
        super().__init__(rule, parent)
        box = QFrame(self)
        grid = QGridLayout(box)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.setVerticalSpacing(1)
        grid.addWidget(QLabel("own"), 0, 0)
        grid.addWidget(QLabel("coherent (ms)"), 0, 1)
        grid.addWidget(QLabel("sums (count)"), 0, 2)
        coh_rule = RULES_BY_DOTTED["search.coherent_ms"]
        nc_rule = RULES_BY_DOTTED["search.noncoherent"]
        self.rows: dict[str, tuple[QCheckBox, QDoubleSpinBox, QSpinBox, list[QWidget]]] = {}
        for i, sid in enumerate(SIGNALS, start=1):
            cb = QCheckBox(sid, box)
            coh = QDoubleSpinBox(box)
            coh.setDecimals(0)
            coh.setRange(coh_rule.lo, coh_rule.hi)
            coh.setKeyboardTracking(False)
            coh.setToolTip(_tip(coh_rule).replace("search.coherent_ms", f"search.per_signal.{sid}.coherent_ms"))
            nc = QSpinBox(box)
            nc.setRange(int(nc_rule.lo), int(nc_rule.hi))
            nc.setKeyboardTracking(False)
            nc.setToolTip(_tip(nc_rule).replace("search.noncoherent", f"search.per_signal.{sid}.noncoherent"))
            for w in (coh, nc):
                w.setEnabled(False)
            cb.toggled.connect(lambda on, c=coh, n=nc: (c.setEnabled(on), n.setEnabled(on), self._emit()))
            coh.valueChanged.connect(self._emit)
            nc.valueChanged.connect(self._emit)
            grid.addWidget(cb, i, 0)
            grid.addWidget(coh, i, 1)
            grid.addWidget(nc, i, 2)
            self.rows[sid] = (cb, coh, nc, [cb, coh, nc])
        self._finish(box)
        box.setToolTip("A signal's own coherent time and non-coherent sums, e.g. 1 ms for "
                       "BeiDou B1I (1 ms secondary-code chips)")

    def show_signals(self, signals: Iterable[str]) -> None:
        keep = set(signals)
        for sid, (cb, _c, _n, widgets) in self.rows.items():
            visible = sid in keep or cb.isChecked()
            for w in widgets:
                w.setVisible(visible)

    def value(self) -> Any:
        out = {}
        for sid, (cb, coh, nc, _w) in self.rows.items():
            if cb.isChecked():
                out[sid] = {"coherent_ms": float(coh.value()), "noncoherent": int(nc.value())}
        return out or None

    def set_value(self, value: Any, defaults: tuple[float, int] = (1.0, 5)) -> None:
        value = value or {}
        for sid, (cb, coh, nc, _w) in self.rows.items():
            over = value.get(sid)
            for w in (cb, coh, nc):
                w.blockSignals(True)
            cb.setChecked(over is not None)
            coh.setEnabled(over is not None)
            nc.setEnabled(over is not None)
            coh.setValue(float((over or {}).get("coherent_ms", defaults[0])))
            nc.setValue(int((over or {}).get("noncoherent", defaults[1])))
            for w in (cb, coh, nc):
                w.blockSignals(False)


class ScenarioPanel(QScrollArea):
    """The whole form, in a scroll area (it sits in the window's left dock)."""

    edited = Signal(str)      # dotted key of the edited field

    def __init__(self, parent: QWidget | None = None, folders: Any = None):
        super().__init__(parent)
        self.setObjectName("scenarioPanel")
        self.setWidgetResizable(True)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self._folders = folders            # PlannerSettings or None
        self.base_dir = Path.cwd()
        body = QWidget(self)
        outer = QVBoxLayout(body)
        outer.setContentsMargins(4, 4, 4, 4)
        outer.setSpacing(6)
        self.general_problem = QLabel(body)
        self.general_problem.setObjectName("generalProblem")
        self.general_problem.setWordWrap(True)
        self.general_problem.setStyleSheet("color: #A33A00;")
        self.general_problem.hide()
        outer.addWidget(self.general_problem)
        self.editors: dict[str, FieldEditor] = {}
        self.groups: dict[str, QGroupBox] = {}
        self.advanced = QGroupBox("Advanced", body)
        self.advanced.setObjectName("group_advanced")
        self.advanced.setCheckable(True)
        self.advanced.setChecked(False)
        self.advanced.setToolTip("Analyst settings: file layout, Monte Carlo runs, random seed")
        adv_outer = QVBoxLayout(self.advanced)
        adv_outer.setContentsMargins(0, 0, 0, 0)
        self.advanced_body = QWidget(self.advanced)
        adv_form = QFormLayout(self.advanced_body)
        adv_form.setContentsMargins(6, 4, 6, 4)
        adv_form.setVerticalSpacing(3)
        adv_outer.addWidget(self.advanced_body)
        self.advanced_body.setVisible(False)
        self.advanced.toggled.connect(self.advanced_body.setVisible)
        for section, title in GROUPS:
            group = QGroupBox(title, body)
            group.setObjectName(f"group_{section or 'scenario'}")
            form = QFormLayout(group)
            form.setRowWrapPolicy(QFormLayout.RowWrapPolicy.DontWrapRows)
            form.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
            form.setLabelAlignment(Qt.AlignmentFlag.AlignLeft)
            form.setContentsMargins(6, 4, 6, 4)
            form.setVerticalSpacing(3)
            group_form = form
            for rule in (r for r in KEY_RULES if r.section == section):
                label_text, decimals, step = FIELDS[rule.dotted]
                form = adv_form if rule.dotted in ADVANCED else group_form
                if rule.dotted == "format_version":
                    info = QLabel(f"{FORMAT_VERSION} (written by acqplan)", group)
                    info.setToolTip(_tip(rule))
                    form.addRow(label_text, info)
                    continue
                editor = self._make_editor(rule, decimals, step, group)
                editor.changed.connect(self._on_changed)
                label = QLabel(label_text, group)
                label.setToolTip(_tip(rule))
                label.setBuddy(editor.input)
                if rule.kind in ("paths", "signals"):
                    form.addRow(label)
                    form.addRow(editor)
                else:
                    form.addRow(label, editor)
                form.addRow(editor.problem_label)
                self.editors[rule.dotted] = editor
            form = group_form
            if section == "search":
                self.per_signal = PerSignalEditor(group)
                self.per_signal.changed.connect(self._on_changed)
                form.addRow(QLabel("Per-signal integration", group))
                form.addRow(self.per_signal)
                form.addRow(self.per_signal.problem_label)
                self.editors["search.per_signal"] = self.per_signal
            self.groups[section] = group
            outer.addWidget(group)
        outer.addWidget(self.advanced)
        outer.addStretch(1)
        self.setWidget(body)
        self.setMinimumWidth(300)

    # -- construction
    def _make_editor(self, rule: KeyRule, decimals: int, step: float, parent: QWidget) -> FieldEditor:
        if rule.dotted == "search.false_alarm_per_cell":
            return ScientificEditor(rule, parent)
        if rule.dotted == "search.seed":
            return BigIntegerEditor(rule, parent)
        kind = rule.kind
        if kind in ("number", "integer"):
            return NumberEditor(rule, decimals, step, parent)
        if kind == "bool":
            return BoolEditor(rule, parent)
        if kind == "text":
            return TextEditor(rule, parent)
        if kind == "choice":
            return ChoiceEditor(rule, parent)
        if kind == "zone":
            return ZoneEditor(rule, parent)
        if kind == "time":
            return TimeEditor(rule, parent)
        if kind == "path":
            return MappingEditor(rule, self, parent)
        if kind == "paths":
            return OrbitFilesEditor(rule, self, parent)
        if kind == "signals":
            return SignalsEditor(rule, parent)
        raise ValueError(f"no editor for kind {kind!r}")

    # -- folders for file dialogs
    def dialog_folder(self, kind: str) -> str:
        if self._folders is not None:
            return self._folders.last_folder(kind)
        return str(self.base_dir)

    def remember_folder(self, kind: str, path: str) -> None:
        if self._folders is not None:
            self._folders.set_last_folder(kind, path)

    def resolve(self, name: str) -> Path:
        p = Path(name).expanduser()
        return p if p.is_absolute() else (self.base_dir / p)

    # -- values
    def _on_changed(self, dotted: str) -> None:
        if dotted == "receiver.signals":
            self.per_signal.show_signals(self.editors["receiver.signals"].value())
        self.edited.emit(dotted)

    def set_scenario(self, sc: Scenario) -> None:
        """Show a scenario (no edited signal is emitted)."""
        self.base_dir = Path(sc.base_dir)
        d = sc.to_dict()
        self.setUpdatesEnabled(False)
        try:
            for dotted, editor in self.editors.items():
                if dotted == "search.per_signal":
                    continue
                section, _, key = dotted.rpartition(".")
                table = d if not section else d.get(section, {})
                editor.blockSignals(True)
                for child in editor.findChildren(QWidget):
                    child.blockSignals(True)
                try:
                    editor.set_value(table.get(key, None))
                finally:
                    for child in editor.findChildren(QWidget):
                        child.blockSignals(False)
                    editor.blockSignals(False)
            self.per_signal.blockSignals(True)
            self.per_signal.set_value(d.get("search", {}).get("per_signal"),
                                      (sc.search.coherent_ms, sc.search.noncoherent))
            self.per_signal.blockSignals(False)
            self.per_signal.show_signals(sc.receiver.signals)
        finally:
            self.setUpdatesEnabled(True)
        self.show_problems([])

    def to_dict(self) -> dict[str, Any]:
        """The form's values as a nested dict in the scenario file's layout."""
        d: dict[str, Any] = {"format_version": FORMAT_VERSION}
        for dotted, editor in self.editors.items():
            section, _, key = dotted.rpartition(".")
            value = editor.value()
            if value is None:
                continue
            if section:
                d.setdefault(section, {})[key] = value
            else:
                d[key] = value
        for section, _title in GROUPS:
            if section:
                d.setdefault(section, {})
        return d

    def add_orbit_files(self, paths: Iterable[str | Path]) -> int:
        editor = self.editors["orbits.files"]
        assert isinstance(editor, OrbitFilesEditor)
        return editor.add_files(paths)

    def refresh_files(self) -> None:
        editor = self.editors["orbits.files"]
        assert isinstance(editor, OrbitFilesEditor)
        editor._refresh()

    # -- problems
    def show_problems(self, problems: Iterable[tuple[str | None, str]]) -> list[str]:
        """Mark the fields named in (field, message) pairs; returns the fields marked.

        Problems without a known field are shown above the groups.
        """
        by_field: dict[str, list[str]] = {}
        general: list[str] = []
        for field, message in problems:
            target = self._editor_key(field)
            if target is None:
                general.append(message if not field else f"{field}: {message}")
            else:
                by_field.setdefault(target, []).append(message)
        for dotted, editor in self.editors.items():
            msgs = by_field.get(dotted)
            editor.set_problem("\n".join(msgs) if msgs else None)
        if general:
            self.general_problem.setText("\n".join(general))
            self.general_problem.show()
        else:
            self.general_problem.clear()
            self.general_problem.hide()
        for dotted in by_field:
            self.ensureWidgetVisible(self.editors[dotted])
            break
        return list(by_field)

    def _editor_key(self, field: str | None) -> str | None:
        if not field:
            return None
        if field in self.editors:
            return field
        if field.startswith("search.per_signal"):
            return "search.per_signal"
        section = field.split(".")[0]
        for dotted in self.editors:
            if dotted.startswith(section + ".") and field.startswith(dotted):
                return dotted
        return None

    def problem_of(self, dotted: str) -> str | None:
        editor = self.editors.get(dotted)
        return None if editor is None else editor.problem


__all__ = ["FIELDS", "GROUPS", "FieldEditor", "ScenarioPanel"]
