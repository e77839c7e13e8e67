"""Which column plays which role (price, sale date, living area...), editable.

Roles are suggested from the headers when a file is read; the user may change
any of them and apply. Applying reads the file again with the new map, so
price and date columns are cleaned the way their role asks.
"""

from __future__ import annotations

from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QPushButton,
    QScrollArea,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.roles import REQUIRED_ROLES, ROLES, RoleMap, suggest_roles
from appraise.engine.sales import ROW_COLUMN
from appraise.report.numbers import plain

from .session import Session

UNASSIGNED = "(not in this file)"


class RolesView(QWidget):
    """One drop-down per role listing the file's columns; Apply re-reads the file."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._session = session
        self.combos: dict[str, QComboBox] = {}
        form = QFormLayout()
        for role, description in ROLES.items():
            combo = QComboBox()
            combo.setObjectName(f"role_{role}")
            combo.setToolTip(description)
            combo.currentIndexChanged.connect(self._edited)
            self.combos[role] = combo
            label = description + (" *" if role in REQUIRED_ROLES else "")
            form.addRow(label, combo)
        inner = QWidget()
        inner.setLayout(form)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(inner)

        self.note = QLabel()
        self.note.setWordWrap(True)
        self.apply_button = QPushButton("&Apply roles")
        self.apply_button.clicked.connect(self.apply)
        self.suggest_button = QPushButton("S&uggest from headers")
        self.suggest_button.clicked.connect(self.suggest)
        buttons = QHBoxLayout()
        buttons.addWidget(self.suggest_button)
        buttons.addStretch(1)
        buttons.addWidget(self.apply_button)

        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(scroll, 1)
        lay.addWidget(self.note)
        lay.addLayout(buttons)

        session.salesChanged.connect(lambda _s: self.show_roles())
        self.show_roles()

    def _headers(self) -> list[str]:
        sales = self._session.sales
        return [] if sales is None else [c for c in sales.frame.columns if c != ROW_COLUMN]

    def show_roles(self, roles: RoleMap | None = None) -> None:
        """Fill the drop-downs from ``roles`` (default: the map the sales were read with)."""
        sales = self._session.sales
        headers = self._headers()
        if roles is None:
            roles = sales.roles if sales is not None else RoleMap()
        for role, combo in self.combos.items():
            combo.blockSignals(True)
            combo.clear()
            combo.addItem(UNASSIGNED, None)
            for h in headers:
                combo.addItem(self._label(h), h)
            col = roles.column(role)
            combo.setCurrentIndex(max(0, combo.findData(col)) if col else 0)
            combo.blockSignals(False)
        self.setEnabled(sales is not None)
        self._edited()

    def _label(self, header: str) -> str:
        """``Header  (e.g. 412,500)``: the column with a first value to recognise it by."""
        sales = self._session.sales
        if sales is None or sales.frame.empty:
            return header
        values = sales.frame[header].dropna()
        return f"{header}   (e.g. {plain(values.iloc[0])})" if len(values) else header

    def role_map(self) -> RoleMap:
        """The map the drop-downs show now."""
        return RoleMap(
            columns={r: c.currentData() for r, c in self.combos.items() if c.currentData()}
        )

    def suggest(self) -> None:
        self.show_roles(suggest_roles(self._headers()))

    def apply(self) -> None:
        self._session.set_roles(self.role_map())

    def _edited(self) -> None:
        sales = self._session.sales
        chosen = self.role_map()
        missing = [r for r in REQUIRED_ROLES if chosen.column(r) is None]
        used: dict[str, list[str]] = {}
        for r, c in chosen.columns.items():
            used.setdefault(c, []).append(r)
        twice = [f"'{c}' ({', '.join(rs)})" for c, rs in used.items() if len(rs) > 1]
        lines = []
        if missing:
            lines.append("Required: " + ", ".join(ROLES[r] for r in missing) + ".")
        if twice:
            lines.append("One column, several roles: " + "; ".join(twice) + ".")
        pending = sales is not None and dict(chosen.columns) != dict(sales.roles.columns)
        if pending and not lines:
            lines.append("Changed: Apply to read the file again with these roles.")
        self.note.setText(" ".join(lines))
        self.apply_button.setEnabled(pending and not missing and not twice)
