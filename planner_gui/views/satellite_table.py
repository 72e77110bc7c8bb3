"""Satellites at the cursor: a sortable table (QAbstractTableModel + sort proxy)."""

from __future__ import annotations

from PySide6.QtCore import QItemSelectionModel, Qt
from PySide6.QtWidgets import QAbstractItemView, QHeaderView, QMenu, QTableView, QWidget

from ..models import (
    COLUMN_INDEX,
    COLUMNS,
    DEFAULT_HIDDEN,
    SAT_ID_ROLE,
    PlanModel,
    SatelliteSortProxy,
    SatelliteTableModel,
    format_value,
)
from ._common import ViewFrame, utc_text


class SatelliteTableView(ViewFrame):
    def __init__(self, model: PlanModel, parent: QWidget | None = None):
        super().__init__("Satellites at cursor", parent)
        self.setObjectName("satelliteTableView")
        self.model = model
        self.table_model = SatelliteTableModel(self)
        self.proxy = SatelliteSortProxy(self)
        self.proxy.setSourceModel(self.table_model)
        self.table = QTableView(self)
        self.table.setObjectName("satelliteTable")
        self.table.setModel(self.proxy)
        self.table.setSortingEnabled(True)
        self.table.sortByColumn(COLUMN_INDEX["elevation_deg"], Qt.SortOrder.DescendingOrder)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setAlternatingRowColors(True)
        self.table.setWordWrap(False)
        self.table.verticalHeader().setVisible(False)
        self.table.verticalHeader().setDefaultSectionSize(20)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        header.setStretchLastSection(True)
        header.setHighlightSections(False)
        header.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        header.customContextMenuRequested.connect(self._column_menu)
        header.setToolTip("Right-click to show or hide columns")
        for key in DEFAULT_HIDDEN:
            self.table.setColumnHidden(COLUMN_INDEX[key], True)
        self.outer.addWidget(self.table, 1)
        self._updating = False
        self._sized = False
        self.table.selectionModel().selectionChanged.connect(self._selection_from_table)
        self.info.setText("no plan yet")
        model.planChanged.connect(self._on_plan)
        model.cursorChanged.connect(self._on_cursor)
        model.selectionChanged.connect(self._on_selection)

    def _on_plan(self, _result) -> None:
        pass

    def _on_cursor(self, k: int) -> None:
        plan = self.model.plan
        if plan is None:
            return
        self._updating = True
        try:
            self.table_model.set_rows(self.model.cursor_rows())
        finally:
            self._updating = False
        if not self._sized and self.table_model.rowCount():
            self.fit_columns()
            self._sized = True
        self.info.setText(f"{self.table_model.rowCount()} above the mask at "
                          f"{utc_text(float(plan.times.unix_s[k]))} UTC; click a header to sort")
        self._on_selection(self.model.selected)

    def fit_columns(self) -> None:
        """Columns as wide as their values or their longest header line, not wider.

        Measured on the formatted values directly (QTableView.sizeHintForColumn asks the
        model for every cell of every column: tens of milliseconds).
        """
        fm_head = self.table.horizontalHeader().fontMetrics()
        fm = self.table.fontMetrics()
        rows = self.table_model.rows
        self._fitted = [0] * len(COLUMNS)
        for i, col in enumerate(COLUMNS):
            head = max(fm_head.horizontalAdvance(line) for line in col.title.split("\n"))
            texts = {format_value(col, r.get(col.key)) for r in rows}
            body = max((fm.horizontalAdvance(t) for t in texts), default=0)
            self._fitted[i] = max(body + 8, head) + 14
            self.table.setColumnWidth(i, self._fitted[i])

    def needed_width(self) -> int:
        """Width the table needs to show its visible columns without scrolling."""
        if not self._sized:
            return 0
        cols = sum(self._fitted[i] for i in range(len(COLUMNS)) if not self.table.isColumnHidden(i))
        return cols + self.table.verticalScrollBar().sizeHint().width() + 2 * self.table.frameWidth()

    def _column_menu(self, pos) -> None:
        menu = QMenu(self)
        for i, col in enumerate(COLUMNS):
            act = menu.addAction(col.title.replace("\n", " "))
            act.setCheckable(True)
            act.setChecked(not self.table.isColumnHidden(i))
            act.setEnabled(col.key != "id")
            act.toggled.connect(lambda on, i=i: self.table.setColumnHidden(i, not on))
        menu.exec(self.table.horizontalHeader().mapToGlobal(pos))

    def _on_selection(self, sat_id) -> None:
        self._updating = True
        try:
            sel = self.table.selectionModel()
            row = self.table_model.row_of(sat_id)
            if row < 0:
                sel.clearSelection()
                return
            index = self.proxy.mapFromSource(self.table_model.index(row, 0))
            if not sel.isRowSelected(index.row()):
                sel.select(index, QItemSelectionModel.SelectionFlag.ClearAndSelect
                           | QItemSelectionModel.SelectionFlag.Rows)
            self.table.scrollTo(index, QAbstractItemView.ScrollHint.EnsureVisible)
        finally:
            self._updating = False

    def _selection_from_table(self, *_args) -> None:
        if self._updating:
            return
        rows = self.table.selectionModel().selectedRows()
        if rows:
            self.model.select(rows[0].data(SAT_ID_ROLE))

    def select_row(self, view_row: int) -> None:
        """Select a row as a click would (tests)."""
        index = self.proxy.index(view_row, 0)
        self.table.selectionModel().select(
            index, QItemSelectionModel.SelectionFlag.ClearAndSelect | QItemSelectionModel.SelectionFlag.Rows)

    def displayed(self, view_row: int, key: str) -> str:
        return self.proxy.index(view_row, COLUMN_INDEX[key]).data()
