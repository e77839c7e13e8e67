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
def python_cell(v: object) -> object:
    """A cell as the Python object a person's formatter expects (what pandas'
    ``to_numpy(dtype=object)`` gives): numpy scalars become ``float``/``int``/``bool``,
    a ``datetime64`` a :class:`pandas.Timestamp` (``NaT`` stays missing)."""
    if isinstance(v, np.datetime64):
        return pd.Timestamp(v)
    if isinstance(v, np.timedelta64):
        return pd.Timedelta(v)
    if isinstance(v, np.generic):
        return v.item()
    return v


class SalesColumn:
    """One column of the sales table, kept as the file's typed array (no Python object
    per row): the used rows' cells, then the left-out rows' (the importer keeps only
    their sale id, so every other column is empty for them)."""

    def __init__(self, column: pd.Series, extra: np.ndarray) -> None:
        dtype = column.dtype
        if isinstance(dtype, np.dtype) and dtype.kind in "biufO":
            self.cells = column.to_numpy()  # no copy for a typed column
        else:  # datetimes, strings, nullable and categorical columns: pandas' own array
            self.cells = column.array
        self.dtype = dtype
        self.extra = extra
        self.n = len(self.cells)

    def __len__(self) -> int:
        return self.n + len(self.extra)

    def cell(self, i: int) -> object:
        """Row ``i``'s value (a Python object, None for a left-out row's empty cell)."""
        if i < self.n:
            return python_cell(self.cells[i])
        return self.extra[i - self.n]

    def factorized(self) -> tuple[np.ndarray, list]:
        """``codes`` (one per row, -1 where missing) into ``uniques`` (Python objects)."""
        if isinstance(self.dtype, np.dtype) and self.dtype.kind in "biuf":
            codes, uniques = arrow_factorize(self.cells)
        else:
            codes, uniques = pd.factorize(self.cells, use_na_sentinel=True)
        more_codes, more = pd.factorize(self.extra, use_na_sentinel=True)
        more_codes = np.where(more_codes < 0, -1, more_codes + len(uniques))
        values = [python_cell(u) for u in uniques] + list(more)
        return np.concatenate([codes, more_codes]).astype(np.int64, copy=False), values

    def search_texts(self) -> pa.Array | None:
        """A text column's lines for the search index, lower-cased by Arrow in one pass
        (what :func:`plain` shows: the text itself, a missing or empty cell as missing);
        None for other columns (formatted once per distinct value instead)."""
        if isinstance(self.dtype, np.dtype) or not pd.api.types.is_string_dtype(self.dtype):
            return None
        missing = plain(None).lower()
        cells = pa.array(self.cells, type=pa.string(), from_pandas=True)
        used = pc.utf8_lower(cells)
        # Arrow's lower case differs from Python's for a few letters (İ): any cell that
        # is not plain ASCII is lower-cased by Python, as the filter text is
        other = pc.invert(pc.fill_null(pc.string_is_ascii(cells), True))
        if pc.any(other).as_py():
            fixed = [t.lower() for t in pc.filter(cells, other).to_pylist()]
            used = pc.replace_with_mask(used, other, pa.array(fixed, type=pa.string()))
        used = pc.fill_null(pc.if_else(pc.equal(used, ""), missing, used), missing)
        extra = pa.array(
            [missing if v is None else plain(v).lower() for v in self.extra], type=pa.string()
        )
        return pa.concat_arrays([used, extra])

    def sort_keys(self) -> pd.Series:
        """What the column sorts by: numbers as numbers (a text column whose every cell
        reads as a number too), dates in time order, other text case-blind; missing
        cells as missing (sorted last by :func:`stable_sort`)."""
        kind = self.dtype.kind if isinstance(self.dtype, np.dtype) else "-"  # pandas' own
        extra_missing = all(v is None for v in self.extra)
        if kind in "biuf" and extra_missing:
            return pd.Series(
                np.concatenate([self.cells.astype(float), np.full(len(self.extra), np.nan)])
            )
        if pd.api.types.is_datetime64_any_dtype(self.dtype) and extra_missing:
            keys = pd.Series(self.cells)
            return pd.concat([keys, pd.Series([pd.NaT] * len(self.extra), dtype=keys.dtype)])
        used = pd.Series(self.cells)
        values = pd.concat([used.astype(object), pd.Series(self.extra, dtype=object)])
        values = values.reset_index(drop=True)
        present = int(used.notna().sum()) + int(pd.Series(self.extra, dtype=object).notna().sum())
        numeric = pd.to_numeric(values, errors="coerce")
        if int(numeric.notna().sum()) == present:
            return numeric
        if pd.api.types.is_string_dtype(self.dtype) and kind == "-":
            lower = used.str.lower().astype(object)
            lower = lower.where(used.notna(), None)
            rest = pd.Series(self.extra, dtype=object).map(_lower_key)
            return pd.concat([lower, rest]).reset_index(drop=True)
        return values.map(_lower_key)


_PY_SLICE = 50_000
"""Distinct cells made Python objects per call (each call holds the interpreter lock)."""


def arrow_factorize(values: np.ndarray) -> tuple[np.ndarray, list]:
    """:func:`pandas.factorize` of a number column (NaN as missing, -1), by Arrow's
    dictionary encoding: it leaves the interpreter lock free while it hashes, so the
    window's thread keeps turning while a pool thread indexes a million sales."""
    encoded = pc.dictionary_encode(pa.array(values, from_pandas=True))
    codes = encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int64)
    dictionary = encoded.dictionary
    uniques: list = []
    for lo in range(0, len(dictionary), _PY_SLICE):
        uniques.extend(dictionary.slice(lo, _PY_SLICE).to_pylist())
    return codes, uniques


def _lower_key(v: object) -> str | None:
    return None if v is None or v != v else str(v).lower()


def search_index(
    rows: np.ndarray, reason_codes: np.ndarray, reason_texts: list[str], columns: list
) -> pa.Array:
    """One lower-case line per table row, what the filter box searches: the file row,
    the reason and every cell as the table shows it (:func:`plain`), tab-separated.

    ``reason_codes`` (one per row, -1 for a used sale) index ``reason_texts``;
    ``columns`` are :class:`SalesColumn` objects (or anything with ``factorized()``).
    Each column is formatted once per distinct value and the lines are joined by Arrow,
    so a table of a million sales is indexed in seconds, not minutes.
    """
    parts = [pc.cast(pa.array(np.asarray(rows, dtype=np.int64)), pa.string())]

    def add(codes: np.ndarray, texts: list[str], missing: str) -> None:
        codes = np.where(codes < 0, len(texts), codes)
        parts.append(pa.array([*texts, missing], type=pa.string()).take(pa.array(codes)))

    if len(reason_codes):
        add(np.asarray(reason_codes), [t.lower() for t in reason_texts], "")
    for column in columns:
        texts = column.search_texts() if hasattr(column, "search_texts") else None
        if texts is not None:
            parts.append(texts)
            continue
        codes, uniques = column.factorized()
        add(codes, [plain(u).lower() for u in uniques], plain(None).lower())
    if len(parts) == 1:
        return parts[0]
    return pc.binary_join_element_wise(*parts, "\t")


class _ObjectColumn:
    """A column given as Python objects (for :func:`search_text`)."""

    def __init__(self, values: np.ndarray) -> None:
        self.values = np.asarray(values, dtype=object)

    def factorized(self) -> tuple[np.ndarray, list]:
        codes, uniques = pd.factorize(self.values, use_na_sentinel=True)
        return codes, list(uniques)


def match_mask(haystack: pa.Array, text: str) -> np.ndarray:
    """Which lines of a search index contain ``text`` (already lower-case)."""
    found = pc.match_substring(haystack, text)
    return found.to_numpy(zero_copy_only=False).astype(bool)


def search_text(rows: np.ndarray, reasons: list[str], values: list[np.ndarray]) -> pa.Array:
    """:func:`search_index` for a reason per row (text, "" when used) and columns of
    Python objects."""
    codes, texts = pd.factorize(np.asarray(reasons, dtype=object))
    return search_index(rows, codes, list(texts), [_ObjectColumn(v) for v in values])


class SalesTableModel(SortableTableModel, QAbstractTableModel):
    """All rows of the file: the used rows, then the rows the importer left out.

    Columns: file row, why it is left out (empty when used), then the file's columns.
    ``Qt.UserRole`` of any cell gives the file row.

    Lazy: the file's typed columns are kept as they are and a cell is formatted in
    ``data()`` only when Qt asks for it (the rows on screen); the reasons are a code per
    row into a short list of texts; sorting and filtering compute index arrays on whole
    columns. Loading a million sales makes no Python object per row.
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
        self._columns: list[SalesColumn] = []
        self._formats: list = []
        self._rows = np.zeros(0, dtype=np.int64)
        self._by_row = np.zeros(0, dtype=np.int64)  # positions in file-row order
        self._reason_codes = np.zeros(0, dtype=np.int32)
        self._reason_texts: list[str] = []
        self._base_order = np.zeros(0, dtype=np.int64)  # sorted, before the filter
        self._order = np.zeros(0, dtype=np.int64)
        self._haystack: pa.Array | None = None
        self._index_gen = 0
        self._index_task: Task | None = None
        self._index_pool = QThreadPool(self)
        self._index_pool.setMaxThreadCount(1)
        self._index_signals = TaskSignals(self)
        self._index_signals.finished.connect(self._index_ready)
        self.indexing = False
        self._mask: np.ndarray | None = None  # which rows the last search found
        self._mask_text: str | None = None  # ... and for which text
        self._search_gen = 0
        self._search_task: Task | None = None
        self._search_signals = TaskSignals(self)
        self._search_signals.finished.connect(self._search_ready)
        self.searching = False
        self._filter = ""
        self._sort: tuple[int, Qt.SortOrder] | None = None
        self.reload()

    # contents
    @staticmethod
    def _format_of(column: pd.Series, extra: np.ndarray):
        """The column's one cell format, decided without a Python loop over a typed column."""
        if pd.api.types.is_bool_dtype(column):
            return plain  # yes/no: no numbers to align
        if pd.api.types.is_numeric_dtype(column):
            return column_format(column.to_numpy())
        if pd.api.types.is_datetime64_any_dtype(column) or pd.api.types.is_string_dtype(column):
            return plain  # no numbers to align
        return column_format(np.concatenate([column.to_numpy(dtype=object), extra]))

    def reload(self) -> None:
        self.beginResetModel()
        sales = self._session.sales
        if sales is None:
            self._headers, self._columns, self._formats = [], [], []
            self._rows = np.zeros(0, dtype=np.int64)
        else:
            frame = sales.frame
            self._headers = [c for c in frame.columns if c != ROW_COLUMN]
            k = len(sales.excluded)
            id_col = sales.roles.column("sale_id")
            nothing = np.full(k, None, dtype=object)
            # the importer keeps no values of the rows it leaves out, but their id
            ids = np.array([e.sale_id for e in sales.excluded], dtype=object)
            self._columns = [
                SalesColumn(frame[c], ids if c == id_col else nothing) for c in self._headers
            ]
            self._rows = np.concatenate(
                [
                    frame[ROW_COLUMN].to_numpy(dtype=np.int64),
                    np.array([e.row for e in sales.excluded], dtype=np.int64),
                ]
            )
            # one format per column: 8,822 beside 13,981, not 8822
            self._formats = [
                self._format_of(frame[c], col.extra)
                for c, col in zip(self._headers, self._columns, strict=True)
            ]
        self._by_row = np.argsort(self._rows, kind="stable")
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
            self._apply_filter()
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
        n = len(self._rows)
        codes = np.full(n, -1, dtype=np.int32)
        texts: dict[str, int] = {}
        if why and n:
            ex_rows = np.fromiter(why.keys(), dtype=np.int64, count=len(why))
            ex_codes = np.fromiter(
                (
                    texts.setdefault(
                        f"{e.reason} ({SOURCE_LABELS.get(e.source, e.source)})", len(texts)
                    )
                    for e in why.values()
                ),
                dtype=np.int32,
                count=len(why),
            )
            in_order = self._rows[self._by_row]
            at = np.minimum(np.searchsorted(in_order, ex_rows), n - 1)
            found = in_order[at] == ex_rows
            codes[self._by_row[at[found]]] = ex_codes[found]
        self._reason_codes = codes
        self._reason_texts = list(texts)

    def reason_at(self, i: int) -> str:
        """Why the sale in storage position ``i`` is left out ("" when it is used)."""
        code = int(self._reason_codes[i])
        return self._reason_texts[code] if code >= 0 else ""

    # sorting and filtering, on whole columns
    def set_filter(self, text: str) -> None:
        text = text.strip().lower()
        if text == self._filter:
            return
        self.beginResetModel()
        self._filter = text
        self._apply_filter()
        self.endResetModel()

    def _apply_order(self) -> None:
        """The rows in the order asked for (by file row until a column is clicked), then
        filtered."""
        order = self._by_row
        if self._sort is not None and len(self._rows):
            column, direction = self._sort
            order = stable_sort(self._sort_keys(column), direction == Qt.SortOrder.DescendingOrder)
        self._base_order = order
        self._apply_filter()

    def _apply_filter(self) -> None:
        """Show the sorted rows the filter finds. A large table searches on the pool
        thread and meanwhile shows what the previous search found (every row while its
        index is built); the rows change when the search lands (``filterApplied``)."""
        if self._filter and self._mask_text != self._filter and len(self._rows):
            haystack = self._search_text()
            if haystack is not None and len(self._rows) < self.BACKGROUND_FROM:
                self._mask, self._mask_text = match_mask(haystack, self._filter), self._filter
            elif haystack is not None:
                self._start_search(haystack, self._filter)
        self._order = self._visible(self._base_order)

    def _visible(self, order: np.ndarray) -> np.ndarray:
        """``order`` without the rows the filter rules out. Until a new text's search
        lands, the last search's rows stand in when the new text narrows it (it can only
        find fewer); otherwise every row is shown meanwhile."""
        mask, found_for = self._mask, self._mask_text
        if not self._filter or mask is None or found_for is None or found_for not in self._filter:
            return order
        return order[mask[order]]

    def _start_search(self, haystack: pa.Array, text: str) -> None:
        if self._search_task is not None:
            self._index_pool.tryTake(self._search_task)  # an older search not started yet
        self._search_gen += 1
        self._search_task = Task(
            self._search_gen,
            lambda _report: (text, match_mask(haystack, text)),
            self._search_signals,
        )
        self.searching = True
        self._index_pool.start(self._search_task)

    def _search_ready(self, gen: int, found: object) -> None:
        if gen != self._search_gen:
            return
        self.searching = False
        self._search_task = None
        self.beginResetModel()
        self._mask_text, self._mask = found  # type: ignore[misc]
        self._order = self._visible(self._base_order)
        self.endResetModel()
        self.filterApplied.emit()

    def _sort_keys(self, column: int) -> pd.Series:
        if column == 0:
            return pd.Series(self._rows)
        if column == 1:
            # a reason's rank among the texts (as text sorts); a used sale has none
            texts = self._reason_texts
            rank = np.full(len(texts) + 1, np.nan)
            rank[sorted(range(len(texts)), key=texts.__getitem__)] = np.arange(len(texts))
            return pd.Series(rank[self._reason_codes])
        return self._columns[column - 2].sort_keys()

    def _search_text(self) -> pa.Array | None:
        """The search index; None while a large table's index is built on a pool thread."""
        if self._haystack is None and len(self._rows) < self.BACKGROUND_FROM:
            self._haystack = search_index(
                self._rows, self._reason_codes, self._reason_texts, self._columns
            )
        elif self._haystack is None and not self.indexing:
            self._start_index()
        return self._haystack

    def _forget_index(self) -> None:
        self._haystack = None
        self._index_gen += 1  # an index still being built for the old contents is dropped
        self.indexing = False
        self._mask = self._mask_text = None
        self._search_gen += 1  # and a search of it
        self.searching = False

    def _start_index(self) -> None:
        self._index_gen += 1
        gen = self._index_gen
        # the arrays are replaced, never changed in place, so the pool thread may read them
        rows, codes, texts = self._rows, self._reason_codes, list(self._reason_texts)
        columns = list(self._columns)
        self._index_task = Task(
            gen, lambda _report: search_index(rows, codes, texts, columns), self._index_signals
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
            self._apply_filter()
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
                return self.reason_at(i)
            v = self._columns[col - 2].cell(i)
            return self._formats[col - 2](v) if v is not None else ""
        if role == Qt.ItemDataRole.ForegroundRole and self._reason_codes[i] >= 0:
            return QBrush(GREY)
        if role == Qt.ItemDataRole.ToolTipRole and self._reason_codes[i] >= 0:
            return f"Left out: {self.reason_at(i)}"
        if role == Qt.ItemDataRole.UserRole:
            return int(self._rows[i])
        if role == Qt.ItemDataRole.TextAlignmentRole and col >= 2:
            v = self._columns[col - 2].cell(i)
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
        if self.model.searching and self.filter_edit.text().strip():
            self.count_label.setText(f"searching {total:,} rows…")
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
