"""Messages: every warning of the plan on screen, input problems, notes and faults."""

from __future__ import annotations

import time

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QColor
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHBoxLayout,
    QHeaderView,
    QPushButton,
    QTableWidget,
    QTableWidgetItem,
    QWidget,
)

from ._common import ViewFrame

KINDS = {
    "plan": ("plan warning", "#8A5A00"),
    "input": ("input problem", "#A33A00"),
    "note": ("note", "#2B6C8F"),
    "error": ("error", "#A31F1F"),
    "fault": ("internal fault", "#7A1F1F"),
}
KIND_ROLE = Qt.ItemDataRole.UserRole + 1
# Messages kept besides the plan warnings (input problems, notes, errors, faults).
MAX_KEPT = 500


class MessagesView(ViewFrame):
    """A list of messages; plan warnings are replaced with each plan, others are kept."""

    countChanged = Signal(int)

    def __init__(self, parent: QWidget | None = None):
        super().__init__("Messages", parent)
        self.setObjectName("messagesView")
        self.info.setText("plan warnings are replaced by each new plan; the others are kept "
                          "until cleared")
        self.list = QTableWidget(0, 3, self)
        self.list.setObjectName("messagesList")
        self.list.setHorizontalHeaderLabels(["Kind", "Time", "Message"])
        self.list.setWordWrap(True)
        self.list.setAlternatingRowColors(True)
        self.list.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.list.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.list.verticalHeader().setVisible(False)
        # Rows are sized once when added (ResizeToContents would re-measure every row on
        # every change).
        self.list.verticalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        header = self.list.horizontalHeader()
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(1, QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(2, QHeaderView.ResizeMode.Stretch)
        self.list.verticalHeader().setDefaultSectionSize(self.list.fontMetrics().height() + 8)
        # Wrapped rows are measured again when the message column changes width (a row
        # measured while the panel was still narrow would otherwise stay tall).
        self._refit = QTimer(self)
        self._refit.setSingleShot(True)
        self._refit.setInterval(0)
        self._refit.timeout.connect(self.fit_rows)
        header.sectionResized.connect(lambda i, _o, _n: i == 2 and self._refit.start())
        self.outer.addWidget(self.list, 1)
        row = QHBoxLayout()
        clear = QPushButton("Clear kept messages", self)
        clear.setToolTip("Remove input problems, notes and faults (plan warnings stay)")
        clear.clicked.connect(self.clear_kept)
        row.addStretch(1)
        row.addWidget(clear)
        self.outer.addLayout(row)

    def _add(self, kind: str, text: str, details: str = "") -> int:
        label, colour = KINDS.get(kind, (kind, "#000000"))
        r = self.list.rowCount()
        self.list.insertRow(r)
        items = [QTableWidgetItem(label), QTableWidgetItem(time.strftime("%H:%M:%S")),
                 QTableWidgetItem(text)]
        items[0].setForeground(QColor(colour))
        items[0].setData(KIND_ROLE, kind)
        items[2].setToolTip(details or text)
        for c, item in enumerate(items):
            self.list.setItem(r, c, item)
        if self.list.isVisible():
            self.list.resizeRowToContents(r)
        return r

    def fit_rows(self) -> None:
        """Every row as tall as its wrapped message, not taller."""
        if self.list.isVisible():
            self.list.resizeRowsToContents()

    def showEvent(self, event) -> None:
        super().showEvent(event)
        self._refit.start()

    def attention_count(self) -> int:
        """Messages that ask for attention: everything but notes (the one count shown)."""
        return sum(1 for r in range(self.list.rowCount()) if self._kind(r) != "note")

    def _kind(self, row: int) -> str:
        return self.list.item(row, 0).data(KIND_ROLE)

    def set_plan_warnings(self, warnings: list[str]) -> None:
        self.list.setUpdatesEnabled(False)
        try:
            for r in range(self.list.rowCount() - 1, -1, -1):
                if self._kind(r) == "plan":
                    self.list.removeRow(r)
            for w in warnings:
                self._add("plan", w)
        finally:
            self.list.setUpdatesEnabled(True)
        self._changed()

    def add_message(self, kind: str, text: str, details: str = "") -> None:
        if kind == "note" and text in self.messages("note"):
            return                      # a note is shown once
        # Keep at most MAX_KEPT messages besides the plan warnings: the oldest go first.
        kept = [r for r in range(self.list.rowCount()) if self._kind(r) != "plan"]
        for r in reversed(kept[:max(0, len(kept) - MAX_KEPT + 1)]):
            self.list.removeRow(r)
        r = self._add(kind, text, details)
        self.list.scrollToItem(self.list.item(r, 2))
        self._changed()

    def clear_kept(self) -> None:
        for r in range(self.list.rowCount() - 1, -1, -1):
            if self._kind(r) != "plan":
                self.list.removeRow(r)
        self._changed()

    def messages(self, kind: str | None = None) -> list[str]:
        return [self.list.item(r, 2).text() for r in range(self.list.rowCount())
                if kind is None or self._kind(r) == kind]

    def _changed(self) -> None:
        self.countChanged.emit(self.attention_count())
