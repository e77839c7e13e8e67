"""The feature picker: every name a feature may use, with its kind, ready to insert.

Lists the role names mapped in this file (``living_area``, ``region``...), the derived
variables of the model, and the file's headers, each written the way an expression
needs it (backquoted when it holds spaces or symbols), with what it holds (number, date,
text, 0/1) and a value to recognise it by. Choosing one inserts it into the model
editor, so nobody has to guess a name.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import pandas as pd
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QAbstractItemView,
    QDialog,
    QDialogButtonBox,
    QHeaderView,
    QLabel,
    QLineEdit,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.expressions import quote_name
from appraise.engine.roles import ROLE_KINDS, ROLES
from appraise.engine.sales import ROW_COLUMN, SalesTable
from appraise.report.numbers import plain

KIND_LABELS = {
    "number": "number",
    "date": "date",
    "text": "text",
    "flag": "yes/no",
    "binary": "0/1",
}


@dataclass(frozen=True)
class PickerEntry:
    """One name: what to type, what kind of value it is, where it comes from, an example."""

    text: str
    kind: str
    source: str  # "role", "derived" or "header"
    detail: str  # the header a role maps to, a derived variable's expression, or ""
    example: str


def column_kind(column: pd.Series) -> str:
    """'number', '0/1' (a number column holding only 0 and 1), 'date' or 'text'."""
    if pd.api.types.is_datetime64_any_dtype(column):
        return "date"
    if pd.api.types.is_bool_dtype(column):
        return "flag"
    if pd.api.types.is_numeric_dtype(column):
        values = set(pd.unique(column.dropna()))
        return "binary" if values and values <= {0, 1} else "number"
    return "text"


def _example(column: pd.Series) -> str:
    values = column.dropna()
    if not len(values):
        return ""
    v = values.iloc[0]
    if isinstance(v, pd.Timestamp):
        return v.date().isoformat()
    return plain(v)


def picker_entries(
    sales: SalesTable | None, derived: Mapping[str, str] | None = None
) -> list[PickerEntry]:
    """Role names mapped in ``sales``, then derived names, then headers (as typed)."""
    if sales is None:
        return []
    frame = sales.frame
    out: list[PickerEntry] = []
    for role in ROLES:
        header = sales.roles.column(role)
        if header is None or header not in frame.columns:
            continue
        kind = ROLE_KINDS.get(role, "number")
        if kind == "number":
            kind = column_kind(frame[header])
        out.append(PickerEntry(role, kind, "role", header, _example(frame[header])))
    for name, expr in (derived or {}).items():
        if name and expr:
            out.append(PickerEntry(name, "number", "derived", expr, ""))
    for header in frame.columns:
        if header == ROW_COLUMN:
            continue
        col = frame[header]
        role = sales.roles.role_of(header)
        out.append(
            PickerEntry(
                quote_name(str(header)),
                column_kind(col),
                "header",
                f"role {role}" if role else "",
                _example(col),
            )
        )
    return out


class FeaturePicker(QDialog):
    """A filterable table of :func:`picker_entries`; Enter or a double-click inserts."""

    chosen = Signal(str)
    HEADERS = ("Type this", "Holds", "From", "Example")

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Names you can use in a feature")
        self.setObjectName("featurePicker")
        self.setModal(False)
        self.entries: list[PickerEntry] = []
        self.filter = QLineEdit()
        self.filter.setPlaceholderText("Filter names (e.g. area, bath, date)")
        self.filter.setClearButtonEnabled(True)
        self.filter.textChanged.connect(self._apply_filter)
        self.filter.returnPressed.connect(self.insert_current)
        self.table = QTableWidget(0, len(self.HEADERS))
        self.table.setHorizontalHeaderLabels(list(self.HEADERS))
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().hide()
        self.table.setWordWrap(False)
        for col in (0, 1, 2):
            self.table.horizontalHeader().setSectionResizeMode(
                col, QHeaderView.ResizeMode.ResizeToContents
            )
        self.table.horizontalHeader().setStretchLastSection(True)
        self.table.itemActivated.connect(lambda _i: self.insert_current())
        note = QLabel(
            "Role names work whatever the file calls the column. Headers with spaces or "
            "symbols are shown in backquotes, as a feature needs them. F1: how to write features."
        )
        note.setWordWrap(True)
        buttons = QDialogButtonBox()
        self.insert_button = buttons.addButton("&Insert", QDialogButtonBox.ButtonRole.AcceptRole)
        buttons.addButton(QDialogButtonBox.StandardButton.Close)
        self.insert_button.clicked.connect(self.insert_current)
        buttons.rejected.connect(self.close)
        lay = QVBoxLayout(self)
        lay.addWidget(self.filter)
        lay.addWidget(self.table, 1)
        lay.addWidget(note)
        lay.addWidget(buttons)
        self.resize(720, 460)

    def set_entries(self, entries: list[PickerEntry]) -> None:
        self.entries = list(entries)
        self.table.setRowCount(len(self.entries))
        for i, e in enumerate(self.entries):
            source = {"role": "role", "derived": "derived variable", "header": "column"}[e.source]
            if e.detail:
                source += f" ({e.detail})"
            cells = (e.text, KIND_LABELS.get(e.kind, e.kind), source, e.example)
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if j == 0:
                    item.setData(Qt.ItemDataRole.UserRole, e.text)
                self.table.setItem(i, j, item)
        self._apply_filter(self.filter.text())

    def _apply_filter(self, text: str) -> None:
        needle = text.strip().casefold()
        first = None
        for i, e in enumerate(self.entries):
            hay = f"{e.text} {e.detail} {e.kind}".casefold()
            hidden = bool(needle) and needle not in hay
            self.table.setRowHidden(i, hidden)
            if not hidden and first is None:
                first = i
        if first is not None:
            self.table.selectRow(first)

    def visible_names(self) -> list[str]:
        return [e.text for i, e in enumerate(self.entries) if not self.table.isRowHidden(i)]

    def insert_current(self) -> None:
        row = self.table.currentRow()
        if row < 0 or self.table.isRowHidden(row):
            names = self.visible_names()
            if not names:
                return
            self.chosen.emit(names[0])
            return
        self.chosen.emit(self.entries[row].text)
