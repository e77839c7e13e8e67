"""The sales as read: a sortable, filterable table, and the log of every sale left out.

Sorting and filtering are done on numpy/pandas columns inside the model (one
``argsort``, one vectorised ``str.contains``), not row by row through Qt, so a table
of 50,000 sales sorts and filters at once. Sales that are not used are drawn grey
with the reason beside them.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
from PySide6.QtCore import (
    QAbstractTableModel,
    QItemSelectionModel,
    QModelIndex,
    QPersistentModelIndex,
    QPoint,
    Qt,
    QThreadPool,
    QTimer,
    Signal,
)
from PySide6.QtGui import QAction, QBrush, QColor, QKeySequence, QShortcut
from PySide6.QtWidgets import (
    QAbstractItemView,
    QFileDialog,
    QHBoxLayout,
    QHeaderView,
    QInputDialog,
    QLabel,
    QLineEdit,
    QMenu,
    QMessageBox,
    QPushButton,
    QTableView,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.errors import AppraiseError
from appraise.engine.sales import ROW_COLUMN, Exclusion
from appraise.report.numbers import column_format, plain
from appraise.report.tables import write_exclusion_log

from .session import Session
from .table_sorting import SortableTableModel, stable_sort
from .workers import Task, TaskSignals

GREY = QColor(128, 128, 128)
_ROOT = QModelIndex()
SOURCE_LABELS = {"import": "import", "model": "model", "user": "you"}

COMMON_REASONS: tuple[str, ...] = (
    "not arm's length (sale between relatives or related parties)",
    "forced or distressed sale (foreclosure, bank-owned, auction)",
    "duplicate record of another sale",
    "recording error (price or area checked and wrong)",
    "property changed materially after the sale",
    "not comparable (use or type differs from the subject)",
)
"""Offered in the reason box; any other text may be typed."""


def ask_exclusion_reason(parent: QWidget, label: str, current: str = "") -> str | None:
    """Ask why a sale should be left out; None when the user cancels or gives no reason."""
    items = list(COMMON_REASONS)
    if current and current not in items:
        items.insert(0, current)
    if not current:
        items.insert(0, "")  # nothing chosen for the user: the reason is theirs to give
    text, ok = QInputDialog.getItem(
        parent,
        "Exclude sale",
        f"Why leave {label} out of the model?",
        items,
        items.index(current) if current in items else 0,
        True,
    )
    text = text.strip()
    return text if ok and text else None


def sale_label(session: Session, row: int) -> str:
    """``sale AV-0042 (row 43)``, or ``the sale at row 43`` when there is no id."""
    sid = session.sale_id(row)
    return f"sale {sid} (row {row})" if sid else f"the sale at row {row}"


def exclude_with_reason(parent: QWidget, session: Session, row: int, suggested: str = "") -> bool:
    """Ask for a reason and exclude the sale at ``row``; True when it was excluded.

    The reason offered first is the one already given for the sale, else ``suggested``.
    """
    current = next((e.reason for e in session.user_exclusions if e.row == row), suggested)
    reason = ask_exclusion_reason(parent, sale_label(session, row), current)
    if reason is None:
        return False
    session.exclude_sale(row, reason)
    return True


# --- the sales table -------------------------------------------------------------
def search_text(rows: np.ndarray, reasons: list[str], values: list[np.ndarray]) -> pa.Array:
    """One lower-case line per table row, what the filter box searches: the file row,
    the reason and every cell as the table shows it (:func:`plain`), tab-separated.

    Each column is formatted once per distinct value and the lines are joined by Arrow,
    so a table of a million sales is indexed in seconds, not minutes.
    """
    parts = [pa.array(rows.astype(str).astype(object), type=pa.string())]
    columns = [(np.asarray(reasons, dtype=object), str)] if len(reasons) else []
    for column, show in columns + [(v, plain) for v in values]:
        cells = np.asarray(column, dtype=object)
        codes, uniques = pd.factorize(cells, use_na_sentinel=True)
        texts = [show(u).lower() for u in uniques] + [plain(None).lower()]
        codes = np.where(codes < 0, len(uniques), codes)
        parts.append(pa.array(texts, type=pa.string()).take(pa.array(codes)))
    if len(parts) == 1:
        return parts[0]
    return pc.binary_join_element_wise(*parts, "\t")


class SalesTableModel(SortableTableModel, QAbstractTableModel):
    """All rows of the file: the used rows, then the rows the importer left out.

    Columns: file row, why it is left out (empty when used), then the file's columns.
    ``Qt.UserRole`` of any cell gives the file row.
    """

    FIXED = ("Row", "Left out because")

    BACKGROUND_FROM = 100_000
    """Tables with at least this many rows build their search index on a pool thread, as
    soon as they are loaded, so that no keystroke waits for it."""

    filterApplied = Signal()  # a filter typed while the index was being built now applies

    def __init__(self, session: Session) -> None:
        super().__init__()
        self._session = session
        self._headers: list[str] = []
        self._values: list[np.ndarray] = []
        self._rows = np.zeros(0, dtype=int)
        self._reasons: list[str] = []
        self._order = np.zeros(0, dtype=int)
        self._all_order = np.zeros(0, dtype=int)
        self._haystack: pa.Array | None = None
        self._index_gen = 0
        self._index_task: Task | None = None
        self._index_pool = QThreadPool(self)
        self._index_pool.setMaxThreadCount(1)
        self._index_signals = TaskSignals(self)
        self._index_signals.finished.connect(self._index_ready)
        self.indexing = False
        self._filter = ""
        self._sort: tuple[int, Qt.SortOrder] | None = None
        self.reload()

    # contents
    @staticmethod
    def _format_of(column: pd.Series, values: np.ndarray):
        """The column's one cell format, decided without a Python loop over a typed column."""
        if pd.api.types.is_bool_dtype(column):
            return column_format(values)
        if pd.api.types.is_numeric_dtype(column):
            return column_format(column.to_numpy())
        if pd.api.types.is_datetime64_any_dtype(column) or pd.api.types.is_string_dtype(column):
            return plain  # no numbers to align
        return column_format(values)

    def reload(self) -> None:
        self.beginResetModel()
        sales = self._session.sales
        if sales is None:
            self._headers, self._values = [], []
            self._formats = []
            self._rows = np.zeros(0, dtype=int)
        else:
            frame = sales.frame
            self._headers = [c for c in frame.columns if c != ROW_COLUMN]
            k = len(sales.excluded)
            id_col = sales.roles.column("sale_id")
            self._values = [
                np.concatenate(
                    [
                        frame[c].to_numpy(dtype=object),
                        # the importer keeps no values of the rows it leaves out, but their id
                        np.array([e.sale_id for e in sales.excluded], dtype=object)
                        if c == id_col
                        else np.full(k, None, dtype=object),
                    ]
                )
                for c in self._headers
            ]
            self._rows = np.concatenate(
                [frame[ROW_COLUMN].to_numpy(dtype=int), [e.row for e in sales.excluded]]
            ).astype(int)
            # one format per column: 8,822 beside 13,981, not 8822
            self._formats = [
                self._format_of(frame[c], v)
                for c, v in zip(self._headers, self._values, strict=True)
            ]
        self._forget_index()
        self._refresh_reasons()
        if len(self._rows) >= self.BACKGROUND_FROM:
            self._start_index()
        self._apply_order()
        self.endResetModel()

    def refresh_reasons(self) -> None:
        """Exclusions changed: recompute the reason column and repaint."""
        self._refresh_reasons()
        if self._filter:  # the reason text is searchable
            self.beginResetModel()
            self._forget_index()
            self._apply_order()
            self.endResetModel()
        elif len(self._order):
            self.dataChanged.emit(
                self.index(0, 0), self.index(len(self._order) - 1, self.columnCount() - 1)
            )

    def _refresh_reasons(self) -> None:
        why: dict[int, Exclusion] = {}
        sales = self._session.sales
        if sales is not None:
            why.update((e.row, e) for e in sales.excluded)
        fit = self._session.fit
        if fit is not None and self._session.fit_current:
            why.update((e.row, e) for e in fit.excluded)
        why.update((e.row, e) for e in self._session.user_exclusions)
        self._reasons = [
            f"{e.reason} ({SOURCE_LABELS.get(e.source, e.source)})"
            if (e := why.get(int(r)))
            else ""
            for r in self._rows
        ]

    # sorting and filtering, on whole columns
    def set_filter(self, text: str) -> None:
        text = text.strip().lower()
        if text == self._filter:
            return
        self.beginResetModel()
        self._filter = text
        self._apply_order()
        self.endResetModel()

    def _apply_order(self) -> None:
        n = len(self._rows)
        order = np.argsort(self._rows, kind="stable")
        if self._sort is not None and n:
            column, direction = self._sort
            keys = self._sort_keys(column)
            order = stable_sort(keys, direction == Qt.SortOrder.DescendingOrder)
        haystack = self._search_text() if self._filter and n else None
        if haystack is not None:  # (while the index is built, every row stays shown)
            found = pc.match_substring(haystack, self._filter)
            mask = found.to_numpy(zero_copy_only=False).astype(bool)
            order = order[mask[order]]
        self._order = order

    def _sort_keys(self, column: int) -> pd.Series:
        if column == 0:
            return pd.Series(self._rows)
        if column == 1:
            return pd.Series(self._reasons, dtype=object).replace("", None)
        values = pd.Series(self._values[column - 2])
        numeric = pd.to_numeric(values, errors="coerce")
        if numeric.notna().sum() == values.notna().sum():
            return numeric
        return values.map(lambda v: None if v is None or v != v else str(v).lower())

    def _search_text(self) -> pa.Array | None:
        """The search index; None while a large table's index is built on a pool thread."""
        if self._haystack is None and len(self._rows) < self.BACKGROUND_FROM:
            self._haystack = search_text(self._rows, self._reasons, self._values)
        elif self._haystack is None and not self.indexing:
            self._start_index()
        return self._haystack

    def _forget_index(self) -> None:
        self._haystack = None
        self._index_gen += 1  # an index still being built for the old contents is dropped
        self.indexing = False

    def _start_index(self) -> None:
        self._index_gen += 1
        gen = self._index_gen
        rows, reasons, values = self._rows.copy(), list(self._reasons), list(self._values)
        self._index_task = Task(
            gen, lambda _report: search_text(rows, reasons, values), self._index_signals
        )
        self.indexing = True
        self._index_pool.start(self._index_task)

    def _index_ready(self, gen: int, haystack: object) -> None:
        if gen != self._index_gen:
            return
        self._haystack = haystack  # type: ignore[assignment]
        self.indexing = False
        if self._filter:
            self.beginResetModel()
            self._apply_order()
            self.endResetModel()
            self.filterApplied.emit()

    def wait_for_index(self, timeout_ms: int = 60_000) -> None:
        """Block until a pool thread building the index is done (closing, tests)."""
        self._index_pool.waitForDone(timeout_ms)

    # Qt interface
    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:
        return 0 if parent.isValid() else len(self._order)

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:
        return 0 if parent.isValid() or self._session.sales is None else 2 + len(self._headers)

    def headerData(self, section: int, orientation: Qt.Orientation, role: int = 0):
        if role != Qt.ItemDataRole.DisplayRole or orientation != Qt.Orientation.Horizontal:
            return None
        return self.FIXED[section] if section < 2 else self._headers[section - 2]

    def data(self, index: QModelIndex | QPersistentModelIndex, role: int = 0):
        if not index.isValid():
            return None
        i = int(self._order[index.row()])
        col = index.column()
        if role == Qt.ItemDataRole.DisplayRole:
            if col == 0:
                return str(self._rows[i])
            if col == 1:
                return self._reasons[i]
            v = self._values[col - 2][i]
            return self._formats[col - 2](v) if v is not None else ""
        if role == Qt.ItemDataRole.ForegroundRole and self._reasons[i]:
            return QBrush(GREY)
        if role == Qt.ItemDataRole.ToolTipRole and self._reasons[i]:
            return f"Left out: {self._reasons[i]}"
        if role == Qt.ItemDataRole.UserRole:
            return int(self._rows[i])
        if role == Qt.ItemDataRole.TextAlignmentRole and col != 1 and col >= 2:
            v = self._values[col - 2][i]
            if isinstance(v, int | float | np.number):
                return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        return None

    def position_of(self, row: int) -> int | None:
        """Where file row ``row`` is shown, or None when filtered out or unknown."""
        hit = np.flatnonzero(self._rows[self._order] == row)
        return int(hit[0]) if hit.size else None

    def row_at(self, position: int) -> int:
        return int(self._rows[self._order[position]])


class SalesView(QWidget):
    """The sales table with a filter box; selecting a row selects the sale everywhere."""

    excludeRequested = Signal(int)

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._session = session
        self.model = SalesTableModel(session)

        self.filter_edit = QLineEdit()
        self.filter_edit.setPlaceholderText("Filter sales (any column, or a reason)…")
        self.filter_edit.setClearButtonEnabled(True)
        self.count_label = QLabel()
        self._filter_timer = QTimer(self)
        self._filter_timer.setSingleShot(True)
        self._filter_timer.setInterval(150)
        self._filter_timer.timeout.connect(self._apply_filter)
        self.filter_edit.textChanged.connect(lambda _t: self._filter_timer.start())
        self.model.filterApplied.connect(self._filter_landed)

        self.table = QTableView()
        self.table.setModel(self.model)
        self.table.setSortingEnabled(True)
        self.table.sortByColumn(0, Qt.SortOrder.AscendingOrder)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().setVisible(False)
        self.table.verticalHeader().setDefaultSectionSize(self.table.fontMetrics().height() + 6)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        header.setResizeContentsPrecision(50)  # widths from the first rows, not all 50,000
        self.table.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        self.table.customContextMenuRequested.connect(self._context_menu)
        self.table.selectionModel().currentRowChanged.connect(self._current_changed)
        self.table.setWordWrap(False)
        delete = QShortcut(QKeySequence(QKeySequence.StandardKey.Delete), self.table)
        delete.setContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        delete.activated.connect(self._exclude_current)

        top = QHBoxLayout()
        top.addWidget(self.filter_edit, 1)
        top.addWidget(self.count_label)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addLayout(top)
        lay.addWidget(self.table)

        session.salesChanged.connect(self._sales_changed)
        session.exclusionsChanged.connect(self.model.refresh_reasons)
        session.fitFinished.connect(lambda _f: self._reasons_changed())
        session.fitFailed.connect(lambda _m: self._reasons_changed())
        session.selectionChanged.connect(self._show_selection)
        self._update_count()

    def focus_filter(self) -> None:
        self.filter_edit.setFocus(Qt.FocusReason.ShortcutFocusReason)
        self.filter_edit.selectAll()

    def _apply_filter(self) -> None:
        self.model.set_filter(self.filter_edit.text())
        self._update_count()
        self._show_selection(self._session.selection)

    def _filter_landed(self) -> None:
        self._update_count()
        self._show_selection(self._session.selection)

    def _sales_changed(self, _sales) -> None:
        self.model.reload()
        self.table.resizeColumnsToContents()
        self._update_count()
        self._show_selection(self._session.selection)

    def _reasons_changed(self) -> None:
        self.model.refresh_reasons()
        self._update_count()

    def _update_count(self) -> None:
        sales = self._session.sales
        if sales is None:
            self.count_label.setText("no sales loaded")
            return
        total = sales.source.rows_in_file
        shown = self.model.rowCount()
        if self.model.indexing and self.filter_edit.text().strip():
            self.count_label.setText(f"indexing {total:,} rows for the filter…")
            return
        self.count_label.setText(
            f"{shown:,} of {total:,} shown" if shown != total else f"{total:,} rows"
        )

    def _current_changed(self, current: QModelIndex, _previous: QModelIndex) -> None:
        if current.isValid():
            self._session.select_sale(self.model.row_at(current.row()))

    def _show_selection(self, row: int | None) -> None:
        sel = self.table.selectionModel()
        pos = None if row is None else self.model.position_of(row)
        if pos is None:
            sel.clearSelection()
            return
        index = self.model.index(pos, 0)
        if sel.currentIndex().row() != pos:
            sel.setCurrentIndex(
                index,
                QItemSelectionModel.SelectionFlag.ClearAndSelect
                | QItemSelectionModel.SelectionFlag.Rows,
            )
        self.table.scrollTo(index)

    def _exclude_current(self) -> None:
        row = self._session.selection
        if row is not None:
            self.excludeRequested.emit(row)

    def _context_menu(self, pos: QPoint) -> None:
        index = self.table.indexAt(pos)
        if not index.isValid():
            return
        row = self.model.row_at(index.row())
        self._session.select_sale(row)
        menu = QMenu(self)
        used = self._session.sale_record(row) is not None
        excl = QAction("E&xclude this sale…", menu)
        excl.setEnabled(used)
        excl.triggered.connect(lambda: self.excludeRequested.emit(row))
        back = QAction("&Use this sale again", menu)
        back.setEnabled(self._session.can_include(row))
        back.triggered.connect(lambda: self._session.include_sale(row))
        menu.addAction(excl)
        menu.addAction(back)
        menu.exec(self.table.viewport().mapToGlobal(pos))


# --- the exclusion log -------------------------------------------------------------
class ExclusionLogModel(QAbstractTableModel):
    """Every sale left out, by whom and why: the importer, the model, or the user."""

    HEADERS = ("Row", "Sale", "Left out by", "Column", "Reason")

    def __init__(self, session: Session) -> None:
        super().__init__()
        self._session = session
        self.entries: list[Exclusion] = []

    def reload(self) -> None:
        self.beginResetModel()
        s = self._session
        entries: dict[int, Exclusion] = {}
        if s.sales is not None:
            entries.update((e.row, e) for e in s.sales.excluded)
        if s.fit_current:
            entries.update((e.row, e) for e in s.fit.excluded)
        entries.update((e.row, e) for e in s.user_exclusions)
        self.entries = sorted(entries.values(), key=lambda e: e.row)
        self.endResetModel()

    def rowCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:
        return 0 if parent.isValid() else len(self.entries)

    def columnCount(self, parent: QModelIndex | QPersistentModelIndex = _ROOT) -> int:
        return 0 if parent.isValid() else len(self.HEADERS)

    def headerData(self, section: int, orientation: Qt.Orientation, role: int = 0):
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self.HEADERS[section]
        return None

    def data(self, index: QModelIndex | QPersistentModelIndex, role: int = 0):
        if not index.isValid():
            return None
        e = self.entries[index.row()]
        if role == Qt.ItemDataRole.DisplayRole:
            return (
                str(e.row),
                e.sale_id or "",
                SOURCE_LABELS.get(e.source, e.source),
                e.column or "",
                e.reason,
            )[index.column()]
        if role == Qt.ItemDataRole.UserRole:
            return e.row
        if role == Qt.ItemDataRole.ToolTipRole:
            return e.reason
        return None


class ExclusionLogView(QWidget):
    """The exclusion log, with buttons to use a sale again and to export the log."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._session = session
        self.model = ExclusionLogModel(session)
        self.table = QTableView()
        self.table.setModel(self.model)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().setVisible(False)
        self.table.horizontalHeader().setStretchLastSection(True)
        self.table.selectionModel().currentRowChanged.connect(self._current_changed)
        self.summary = QLabel()
        self.summary.setWordWrap(True)
        self.use_again = QPushButton("&Use selected sale again")
        self.use_again.setEnabled(False)
        self.use_again.clicked.connect(self._use_again)
        self.export_button = QPushButton("E&xport log…")
        self.export_button.setToolTip("Write the exclusion log as CSV or XLSX (spreadsheet-safe)")
        self.export_button.clicked.connect(self._ask_export)

        bottom = QHBoxLayout()
        bottom.addWidget(self.summary, 1)
        bottom.addWidget(self.export_button)
        bottom.addWidget(self.use_again)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.table)
        lay.addLayout(bottom)

        for sig in (session.salesChanged, session.fitFinished, session.fitFailed):
            sig.connect(lambda *_: self.refresh())
        session.exclusionsChanged.connect(self.refresh)
        session.modelChanged.connect(lambda _s: self._update_button())
        session.selectionChanged.connect(lambda _r: self._update_button())
        self.refresh()

    def refresh(self) -> None:
        self.model.reload()
        counts: dict[str, int] = {}
        for e in self.model.entries:
            label = SOURCE_LABELS.get(e.source, e.source)
            counts[label] = counts.get(label, 0) + 1
        if counts:
            parts = ", ".join(f"{n} by {who}" for who, n in counts.items())
            self.summary.setText(f"{len(self.model.entries)} sales left out: {parts}")
        else:
            self.summary.setText("No sale is left out.")
        self._update_button()

    def export(self, path: str | Path) -> Path:
        """Write the log as shown (import, model and user exclusions) to ``path``."""
        return write_exclusion_log(self.model.entries, path)

    def _ask_export(self) -> None:
        path, _f = QFileDialog.getSaveFileName(
            self,
            "Export the exclusion log",
            "exclusions.csv",
            "CSV (*.csv);;Excel workbook (*.xlsx)",
        )
        if not path:
            return
        try:
            self.export(path)
        except AppraiseError as exc:
            QMessageBox.warning(self, "Could not export", str(exc))

    def _current_changed(self, current: QModelIndex, _previous: QModelIndex) -> None:
        if current.isValid():
            row = self.model.entries[current.row()].row
            if self._session.sale_record(row) is not None:
                self._session.select_sale(row)
        self._update_button()

    def _selected_row(self) -> int | None:
        current = self.table.selectionModel().currentIndex()
        return self.model.entries[current.row()].row if current.isValid() else None

    def _update_button(self) -> None:
        row = self._selected_row()
        self.use_again.setEnabled(row is not None and self._session.can_include(row))

    def _use_again(self) -> None:
        row = self._selected_row()
        if row is not None:
            self._session.include_sale(row)
