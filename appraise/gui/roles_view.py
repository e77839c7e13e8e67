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

from appraise.engine.roles import REQUIRED_ROLES, ROLES, RoleGuess, RoleMap, guess_roles
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
        self.confidence: dict[str, QLabel] = {}
        self._guesses: dict[str, RoleGuess] = {}
        form = QFormLayout()
        for role, description in ROLES.items():
            combo = QComboBox()
            combo.setObjectName(f"role_{role}")
            combo.setToolTip(f"{description}. In a feature, type {role}.")
            combo.currentIndexChanged.connect(self._edited)
            combo.setMinimumContentsLength(12)
            combo.setSizeAdjustPolicy(
                QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon
            )
            self.combos[role] = combo
            sure = QLabel()
            sure.setObjectName(f"role_confidence_{role}")
            self.confidence[role] = sure
            cell = QHBoxLayout()
            cell.setContentsMargins(0, 0, 0, 0)
            cell.addWidget(combo, 1)
            cell.addWidget(sure)
            label = QLabel(
                f"{description}{' *' if role in REQUIRED_ROLES else ''}<br>"
                f"<span style='color:#555555'><code>{role}</code></span>"
            )
            label.setToolTip(f"The name to type in a feature: {role}")
            form.addRow(label, cell)
        inner = QWidget()
        inner.setLayout(form)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(inner)

        self.note = QLabel()
        self.note.setWordWrap(True)
        self.apply_button = QPushButton("&Apply roles")
        self.apply_button.clicked.connect(self.apply)
        self.suggest_button = QPushButton("S&uggest from headers and values")
        self.suggest_button.setToolTip(
            "Guess each role from the headers and what the columns hold; Apply to confirm"
        )
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

    def show_roles(
        self, roles: RoleMap | None = None, guesses: tuple[RoleGuess, ...] | None = None
    ) -> None:
        """Fill the drop-downs from ``roles`` (default: the map the sales were read with);
        ``guesses`` give the confidence shown beside each (default: the import's guesses)."""
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
        if guesses is not None:
            self._guesses = {g.role: g for g in guesses}
        elif sales is not None:
            self._guesses = {g.role: g for g in sales.role_guesses}
        else:
            self._guesses = {}
        self.setEnabled(sales is not None)
        self._edited()

    def _show_confidence(self) -> None:
        """Beside each role: how sure the guess for the column shown is (and why, on hover)."""
        for role, label in self.confidence.items():
            guess = self._guesses.get(role)
            if guess is not None and self.combos[role].currentData() == guess.column:
                colour = {"high": "#2e7d32", "medium": "#8a6d00", "low": "#c62828"}[
                    guess.confidence
                ]
                label.setText(f"<span style='color:{colour}'>{guess.confidence}</span>")
                label.setToolTip(f"Guessed: {guess.reason}. Apply to confirm, or choose another.")
            else:
                label.setText("")
                label.setToolTip("")

    def _label(self, header: str) -> str:
        """``Header  (e.g. 412,500)``: the column with values to recognise it by, as the
        file writes them (a yes/no flag shows ``Yes / No``, not the 1 it is read as)."""
        sales = self._session.sales
        if sales is None:
            return header
        written = sales.examples.get(header, ())
        if written and len(written) <= 2:
            return f"{header}   ({' / '.join(written)})"
        if written:
            return f"{header}   (e.g. {written[0]})"
        if header not in sales.frame.columns:
            return header
        column = sales.frame[header]
        first = column.first_valid_index()  # not dropna(): no copy of a county's column
        return header if first is None else f"{header}   (e.g. {plain(column.loc[first])})"

    def role_map(self) -> RoleMap:
        """The map the drop-downs show now."""
        return RoleMap(
            columns={r: c.currentData() for r, c in self.combos.items() if c.currentData()}
        )

    def _values_as_written(self, header: str) -> list:
        """The column's values to guess from: a flag read as 1/0 by the file's own words."""
        sales = self._session.sales
        column = sales.frame[header].dropna()
        written = sales.examples.get(header, ())
        numeric = column.dtype.kind in "fiu"
        if written and numeric and set(column.unique()) <= {0, 1}:
            return list(written)
        return column.head(2000).tolist()

    def suggest(self) -> None:
        """Guess the roles from the headers and the columns' values; Apply confirms."""
        sales = self._session.sales
        headers = self._headers()
        values = None
        if sales is not None:
            values = {h: self._values_as_written(h) for h in headers}
        guesses = guess_roles(headers, values)
        self.show_roles(RoleMap({g.role: g.column for g in guesses}), guesses)

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
        unsure = [
            r
            for r, g in self._guesses.items()
            if g.confidence != "high" and chosen.column(r) == g.column
        ]
        if unsure and not missing and not twice:
            lines.append(
                "Guessed from the file: check "
                + ", ".join(unsure)
                + " (hover over the mark for why); choose another column and Apply if wrong."
            )
        self.note.setText(" ".join(lines))
        self._show_confidence()
        self.apply_button.setEnabled(pending and not missing and not twice)
