"""The window's state, apart from any view: the current plan, the cursor, the selection.

:class:`PlanModel` holds the plan on screen (a :class:`~planner_gui.worker.PlanResult`),
the plan-time cursor (a grid index) and the selected satellite, and emits a signal when
one changes. Views subscribe to it and write user actions back through its setters;
a setter that receives the current value emits nothing, so a view updating itself from
a signal can never start a loop.

:func:`rows_at_index` gives the per-satellite values at one grid index (plain Python, the
same numbers the satellite table and the search-grid view show); the table model and its
sort proxy sit on top of it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from PySide6.QtCore import (
    QAbstractTableModel,
    QModelIndex,
    QObject,
    QPersistentModelIndex,
    QSortFilterProxyModel,
    Qt,
    Signal,
)
from PySide6.QtGui import QBrush, QColor

from core.api import STATE_MEANING, Plan, clock_text, hz_text, state_word

from .qt_compat import guard_singleton_refcounts
from .style import style_for
from .worker import PlanResult

# --- a guard against a reference leak of the Qt binding -----------------------------------

guard_singleton_refcounts()

SORT_ROLE = Qt.ItemDataRole.UserRole + 1
SAT_ID_ROLE = Qt.ItemDataRole.UserRole + 2


class PlanModel(QObject):
    """Current plan + cursor index + selected satellite id."""

    planChanged = Signal(object)          # PlanResult
    ttffChanged = Signal(object)          # PlanResult: same plan, Monte Carlo TTFF added
    cursorChanged = Signal(int)           # grid index
    selectionChanged = Signal(object)     # sat id (str) or None
    driveChanged = Signal(object)         # DrivePlan or None: the route and its events

    def __init__(self, parent: QObject | None = None):
        super().__init__(parent)
        self._result: PlanResult | None = None
        self._cursor = 0
        self._selected: str | None = None
        self._generation = 0
        self._rows_key: tuple[int, int] | None = None
        self._rows: list[dict[str, Any]] = []
        self._base: PlanResult | None = None      # the window's own plan (with its drive)
        self._event_id: str | None = None          # the event whose plan is shown, or None

    # -- read
    @property
    def result(self) -> PlanResult | None:
        return self._result

    @property
    def plan(self) -> Plan | None:
        return None if self._result is None else self._result.plan

    @property
    def drive(self):
        """The drive plan (route, events) of the current scenario, or None."""
        return None if self._base is None else getattr(self._base, "drive", None)

    @property
    def window_plan(self) -> Plan | None:
        """The plan of the whole window (what the sheets print), whichever event is shown."""
        return None if self._base is None else self._base.plan

    @property
    def event_id(self) -> str | None:
        """The test event whose own plan every view shows (None: the window's plan)."""
        return self._event_id

    @property
    def ttff_final(self) -> bool:
        return self._result is not None and self._result.final

    @property
    def cursor(self) -> int:
        return self._cursor

    @property
    def cursor_unix_s(self) -> float | None:
        plan = self.plan
        return None if plan is None else float(plan.times.unix_s[self._cursor])

    @property
    def selected(self) -> str | None:
        return self._selected

    def cursor_rows(self) -> list[dict[str, Any]]:
        """rows_at_index(plan, cursor), computed once per plan and cursor."""
        plan = self.plan
        if plan is None:
            return []
        key = (self._generation, self._cursor)
        if key != self._rows_key:
            self._rows = rows_at_index(plan, self._cursor)
            self._rows_key = key
        return self._rows

    # -- write
    def set_result(self, result: PlanResult) -> None:
        """Show a new plan; the cursor keeps its UTC instant, the selection its satellite.
        With a drive, the event shown before stays shown (its new plan) if it still exists."""
        old_drive = self.drive
        if (getattr(result, "drive", None) is None and not result.final
                and old_drive is not None):
            # The quick stage of a re-plan has no drive yet (it follows with the final
            # stage): keep the drive and the event shown until then.
            result = replace(result, drive=old_drive)
        self._base = result
        if self.drive is not old_drive:
            self.driveChanged.emit(self.drive)
        event = self._find_event(self._event_id)
        if event is None:
            self._event_id = None
        else:
            result = replace(result, plan=event.plan)
        self._show(result)

    def show_event(self, event_id: str | None) -> None:
        """Show one test event's own plan in every view (None: the window's plan)."""
        if self._base is None or event_id == self._event_id:
            return
        event = self._find_event(event_id)
        self._event_id = None if event is None else event_id
        shown = self._base if event is None else replace(self._base, plan=event.plan, final=True)
        self._show(shown)

    def _find_event(self, event_id: str | None):
        drive = self.drive
        if drive is None or event_id is None:
            return None
        return next((e for e in drive.events if e.event.id == event_id), None)

    def _show(self, result: PlanResult) -> None:
        old = self._result
        if (old is not None and old.serial == result.serial
                and result.plan.timeline is old.plan.timeline
                and result.plan.windows_first is old.plan.windows_first):
            # The second stage of one request: only the TTFF statistics are new, so the
            # views that show them update and the rest keep what they drew.
            self._result = result
            self.ttffChanged.emit(result)
            return
        old_t = self.cursor_unix_s
        self._result = result
        self._generation += 1
        plan = result.plan
        if old_t is None:
            k = 0
        else:
            k = plan.index_at(old_t)
            if abs(float(plan.times.unix_s[k]) - old_t) > 0.5 * plan.scenario.time.step_s and k > 0:
                k = int(np.argmin(np.abs(plan.times.unix_s - old_t)))
        self._cursor = int(np.clip(k, 0, len(plan.times) - 1))
        if self._selected is not None and self._selected not in plan.ids:
            self._selected = None
        self.planChanged.emit(result)
        self.cursorChanged.emit(self._cursor)
        self.selectionChanged.emit(self._selected)

    def set_cursor(self, k: int) -> None:
        plan = self.plan
        if plan is None:
            return
        k = int(np.clip(int(k), 0, len(plan.times) - 1))
        if k != self._cursor:
            self._cursor = k
            self.cursorChanged.emit(k)

    def select(self, sat_id: str | None) -> None:
        plan = self.plan
        if sat_id is not None and (plan is None or sat_id not in plan.ids):
            sat_id = None
        if sat_id != self._selected:
            self._selected = sat_id
            self.selectionChanged.emit(sat_id)


# --- values at the cursor ----------------------------------------------------------------

@dataclass(frozen=True)
class Column:
    key: str
    title: str
    tip: str
    decimals: int | None = None       # None: text


COLUMNS: tuple[Column, ...] = (
    Column("id", "ID", "satellite ID (RINEX system letter + number)"),
    Column("signal", "Signal", "acquisition signal of this satellite"),
    Column("elevation_deg", "Elev.\n(°)", "elevation above the horizon at the cursor", 1),
    Column("azimuth_deg", "Azim.\n(°)", "azimuth from north through east at the cursor", 1),
    Column("nominal_hz", "Doppler\n(Hz)", "nominal Doppler at the nominal site and time "
           "(positive while approaching), oscillator offset included", 0),
    Column("low_hz", "Low\n(Hz)", "lower edge of the Doppler search window", 0),
    Column("high_hz", "High\n(Hz)", "upper edge of the Doppler search window", 0),
    Column("bins", "Bins", "frequency bins tiling the window", 0),
    Column("bin_width_hz", "Bin\n(Hz)", "width of one frequency bin", 1),
    Column("code_cells", "Code\ncells", "code-phase cells searched per bin", 0),
    Column("cn0_dbhz", "C/N0\n(dB-Hz)", "expected carrier-to-noise density at this elevation", 1),
    Column("pd", "Pd", "detection probability per dwell at the signal's cell (0 to 1)", 3),
    Column("expected_search_s", "Search\n(s)", "expected (mean) serial search time", 1),
    Column("channel", "Ch.", "receiver channel working on this satellite at the cursor "
           "(blank: waiting)", 0),
    Column("acquired", "Acquired\n(UTC)", "planned acquisition time (expected search "
           "times); blank: not acquired in the window"),
    Column("state", "Window", "'first': " + STATE_MEANING["first"] + "; 'narrowed': "
           + STATE_MEANING["narrowed"]),
)
# Shown when the window opens; the others are one right-click on the header away.
DEFAULT_HIDDEN = frozenset({"azimuth_deg", "bin_width_hz", "code_cells"})
COLUMN_INDEX = {c.key: i for i, c in enumerate(COLUMNS)}


def channel_at(plan: Plan, t_unix_s: float) -> dict[str, tuple[int, str]]:
    """Satellite id -> (channel, 'search'|'track') of the timeline segments running at t."""
    out: dict[str, tuple[int, str]] = {}
    for seg in plan.timeline.segments:
        if seg.start_unix_s <= t_unix_s < seg.end_unix_s:
            out[seg.sat_id] = (seg.channel, seg.kind)
    return out


def rows_at_index(plan: Plan, k: int) -> list[dict[str, Any]]:
    """One dict per satellite above the mask at grid index k, keys as in COLUMNS.

    Window, bins and bin width come from :meth:`Plan.search_grid_at`; the other values
    are the plan's arrays at (satellite, k) in the same first/narrowed state.
    """
    t = float(plan.times.unix_s[k])
    index = {sid: s for s, sid in enumerate(plan.ids)}
    on_channel = channel_at(plan, t)
    acquired = plan.timeline.acquisition_unix_s
    rows = []
    for g in plan.search_grid_at(k):
        s = index[g["id"]]
        after = g["state"] == "after"
        chan = on_channel.get(g["id"])
        rows.append({
            "id": g["id"], "signal": g["signal"], "system": plan.satellites[s].system,
            "elevation_deg": float(plan.prediction.elevation_deg[s, k]),
            "azimuth_deg": float(plan.prediction.azimuth_deg[s, k]),
            "nominal_hz": g["nominal_hz"], "low_hz": g["low_hz"], "high_hz": g["high_hz"],
            "bins": int(len(g["bin_centres_hz"])), "bin_width_hz": g["bin_width_hz"],
            "bin_centres_hz": g["bin_centres_hz"],
            "code_cells": int((plan.code_cells_after if after else plan.code_cells_first)[s, k]),
            "cn0_dbhz": float(plan.cn0_dbhz[s, k]),
            "pd": float((plan.pd_after if after else plan.pd_first)[s, k]),
            "expected_search_s": float((plan.expected_search_after_s if after
                                        else plan.expected_search_first_s)[s, k]),
            "channel": None if chan is None else chan[0],
            "channel_kind": None if chan is None else chan[1],
            "acquired": (None if g["id"] not in acquired
                         else clock_text(acquired[g["id"]])),
            "state": state_word(g["state"]),
        })
    return rows


def format_value(column: Column, value: Any) -> str:
    if value is None:
        return ""
    if column.decimals is None:
        return str(value)
    v = float(value)
    if not math.isfinite(v):
        return "∞" if v > 0 else ("−∞" if v < 0 else "—")
    if column.decimals == 0:
        return hz_text(v)                 # whole numbers: the rounding of every face
    text = f"{v:.{column.decimals}f}"
    return text.replace("-", "−")


class SatelliteTableModel(QAbstractTableModel):
    """The satellites in view at the cursor: one row each, COLUMNS as columns."""

    def __init__(self, parent: QObject | None = None):
        super().__init__(parent)
        self._rows: list[dict[str, Any]] = []

    def set_rows(self, rows: list[dict[str, Any]]) -> None:
        self.beginResetModel()
        self._rows = rows
        self.endResetModel()

    @property
    def rows(self) -> list[dict[str, Any]]:
        return self._rows

    def row_of(self, sat_id: str | None) -> int:
        for i, r in enumerate(self._rows):
            if r["id"] == sat_id:
                return i
        return -1

    # Qt interface
    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = QModelIndex()) -> int:
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = QModelIndex()) -> int:
        return 0 if parent.isValid() else len(COLUMNS)

    def data(self, index: QModelIndex | QPersistentModelIndex,
             role: int = Qt.ItemDataRole.DisplayRole) -> Any:
        if not index.isValid():
            return None
        row = self._rows[index.row()]
        col = COLUMNS[index.column()]
        value = row.get(col.key)
        if role == Qt.ItemDataRole.DisplayRole:
            return format_value(col, value)
        if role == SORT_ROLE:
            if col.decimals is None:
                return "" if value is None else str(value)
            if value is None:
                return math.inf
            return float(value)
        if role == SAT_ID_ROLE:
            return row["id"]
        if role == Qt.ItemDataRole.TextAlignmentRole:
            if col.decimals is not None:
                return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            return int(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
        if role == Qt.ItemDataRole.ForegroundRole and col.key == "id":
            return QBrush(QColor(style_for(row["system"]).colour).darker(120))
        if role == Qt.ItemDataRole.ToolTipRole:
            return col.tip
        return None

    def headerData(self, section: int, orientation: Qt.Orientation,
                   role: int = Qt.ItemDataRole.DisplayRole) -> Any:
        if orientation == Qt.Orientation.Horizontal:
            if role == Qt.ItemDataRole.DisplayRole:
                return COLUMNS[section].title
            if role == Qt.ItemDataRole.ToolTipRole:
                return COLUMNS[section].tip
        return None


class SatelliteSortProxy(QSortFilterProxyModel):
    """Sorts on the numeric value (SORT_ROLE), not the display text."""

    def __init__(self, parent: QObject | None = None):
        super().__init__(parent)
        self.setSortRole(SORT_ROLE)
        self.setDynamicSortFilter(True)
