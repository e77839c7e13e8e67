"""The subject property: its attributes, its estimated value and interval, and warnings.

The form shows one field per input the model reads (named by role where the column
has one, as in a subject file), plus the effective date when the model has a time
term and any other attribute the subject already carries. Edits go to the session,
which values the subject again on a worker.
"""

from __future__ import annotations

import re
from typing import Any

import pandas as pd
from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QFrame,
    QLabel,
    QLineEdit,
    QPushButton,
    QScrollArea,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.errors import AppraiseError
from appraise.engine.expressions import expression_inputs
from appraise.engine.sales import ROW_COLUMN, SalesTable
from appraise.engine.valuation import Valuation
from appraise.pipeline import ASSUMED_KEY
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.labels import field_label
from appraise.report.numbers import fixed, money, percent, plain

from .session import Session

EFFECTIVE_DATE = "effective_date"
ALWAYS_SHOWN = ("address",)
ERROR_STYLE = "color: #c62828;"


def subject_fields(session: Session) -> list[str]:
    """The attribute names the form shows, in order.

    ``address``; then each column the model reads, by its role name when it has one
    (the sale-date column becomes ``effective_date``: the subject has not sold);
    then any other attribute the subject already has.
    """
    sales, spec = session.sales, session.spec
    fields: list[str] = list(ALWAYS_SHOWN)
    if sales is not None and spec is not None:
        columns = [c for c in sales.frame.columns if c != ROW_COLUMN]
        by_header = {h: r for r, h in sales.roles.columns.items()}
        for feature in spec.features:
            try:
                inputs = expression_inputs(
                    feature, columns, derived=spec.derived, roles=sales.roles
                )
            except AppraiseError:
                continue  # the editor shows what is wrong with it
            for header in inputs:
                if pd.api.types.is_datetime64_any_dtype(sales.frame[header]):
                    fields.append(EFFECTIVE_DATE)
                else:
                    fields.append(by_header.get(header, header))
    # the sale date is asked as the effective date (the subject has not sold)
    sale_date = {"sale_date"} | ({sales.roles.column("sale_date")} if sales is not None else set())
    fields += [
        k
        for k in session.subject
        if k != ASSUMED_KEY and k not in sale_date  # a mark, not an attribute; the date
    ]
    return list(dict.fromkeys(fields))


def _as_text(value: Any) -> str:
    """A subject value as typed: whole numbers without decimals, others exactly (repr)."""
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, int | float) and not isinstance(value, bool):
        return repr(value)
    return str(value)


def _header_of(sales: SalesTable, name: str) -> str | None:
    if name in sales.frame.columns:
        return name
    col = sales.roles.column(name)
    return col if col in sales.frame.columns else None


class SubjectView(QWidget):
    """A form of the subject's attributes above its value and the warnings that go with it."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._session = session
        self._currency = "$"
        self._fields: list[str] = []
        self.editors: dict[str, QLineEdit | QComboBox] = {}
        self._filling = False

        self.form = QFormLayout()
        form_box = QWidget()
        form_box.setLayout(self.form)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(form_box)
        scroll.setFrameShape(QFrame.Shape.NoFrame)

        self.estimate = QLabel("—")
        self.estimate.setObjectName("estimate")
        font = self.estimate.font()
        font.setPointSizeF(font.pointSizeF() * 1.8)
        font.setBold(True)
        self.estimate.setFont(font)
        self.estimate.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.interval = QLabel()
        self.details = QLabel()
        for label in (self.interval, self.details):
            label.setWordWrap(True)
            label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.warnings = QLabel()
        self.warnings.setWordWrap(True)
        self.stale = QLabel()
        self.stale.setObjectName("subjectStale")
        self.stale.setStyleSheet("color: #8a6d00;")
        self.fill_button = QPushButton("Fill the rest with the sales' &medians")
        self.fill_button.setObjectName("fillMedians")
        self.fill_button.setToolTip(
            "Set every empty number field to the median of the sales; the value then "
            "warns that these figures are assumed"
        )
        self.fill_button.clicked.connect(self.fill_medians)
        self.caution = QLabel(ONE_LINE_CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("color: #555555; font-size: small;")

        lay = QVBoxLayout(self)
        lay.addWidget(QLabel("<b>Subject property</b>"))
        lay.addWidget(scroll, 1)
        lay.addWidget(self.fill_button)
        lay.addWidget(QLabel("<b>Estimated value</b>"))
        lay.addWidget(self.stale)
        lay.addWidget(self.estimate)
        lay.addWidget(self.interval)
        lay.addWidget(self.details)
        lay.addWidget(self.warnings)
        lay.addWidget(self.caution)

        for sig in (session.salesChanged, session.modelChanged, session.fitFinished):
            sig.connect(lambda *_: self.rebuild())
        session.subjectChanged.connect(lambda _s: self.rebuild())
        session.valuationChanged.connect(self.show_valuation)
        session.valuationFailed.connect(self._valuation_failed)
        session.fitFailed.connect(lambda _m: self._no_fit())
        # an edit waits a moment before the refit: the value shown is out of date meanwhile
        for sig in (session.modelChanged, session.subjectChanged, session.salesChanged):
            sig.connect(lambda *_: self._mark_stale())
        session.exclusionsChanged.connect(self._mark_stale)
        session.fitStarted.connect(self._mark_stale)
        self.rebuild()
        self.show_valuation(session.valuation)

    def set_currency(self, symbol: str) -> None:
        self._currency = symbol
        self.show_valuation(self._session.valuation)

    # --- the form ------------------------------------------------------------------
    def rebuild(self) -> None:
        """Lay out the fields the model needs (kept if unchanged) and show the subject's values."""
        fields = subject_fields(self._session)
        if fields != self._fields:
            while self.form.rowCount():
                self.form.removeRow(0)
            self.editors = {name: self._make_editor(name) for name in fields}
            for name, editor in self.editors.items():
                sales = self._session.sales
                unit = sales.area_unit if sales is not None else None
                self.form.addRow(field_label(name, unit), editor)
            self._fields = fields
        self._fill()

    def _make_editor(self, name: str) -> QLineEdit | QComboBox:
        sales = self._session.sales
        header = _header_of(sales, name) if sales is not None else None
        column = sales.frame[header] if header is not None else None
        if (
            column is not None
            and not pd.api.types.is_numeric_dtype(column)
            and not (pd.api.types.is_datetime64_any_dtype(column))
        ):
            combo = QComboBox()
            combo.setEditable(True)
            combo.addItems(list(sales.levels_by_count(header)))
            combo.setCurrentIndex(-1)
            combo.currentTextChanged.connect(lambda _t: self._edited())
            combo.setObjectName(f"subject_{name}")
            return combo
        edit = QLineEdit()
        edit.setObjectName(f"subject_{name}")
        if header is not None and header in sales.medians:
            edit.setPlaceholderText(f"sales median {plain(sales.medians[header])}")
        elif name == EFFECTIVE_DATE:
            edit.setPlaceholderText("YYYY-MM-DD, the date of value")
        edit.textChanged.connect(lambda _t: self._edited())
        return edit

    def _fill(self) -> None:
        subject = self._session.subject
        self._filling = True
        for name, editor in self.editors.items():
            text = _as_text(subject.get(name))
            if isinstance(editor, QComboBox):
                if editor.currentText() != text:
                    editor.setEditText(text)
            elif editor.text() != text:
                editor.setText(text)
        self._filling = False

    def values(self) -> dict[str, Any]:
        """The subject as the form shows it; values the user did not touch keep their type."""
        old = self._session.subject
        out: dict[str, Any] = dict(old)
        for name, editor in self.editors.items():
            text = (
                editor.currentText() if isinstance(editor, QComboBox) else editor.text()
            ).strip()
            if text == _as_text(old.get(name)):
                continue
            if text:
                out[name] = text
            else:
                out.pop(name, None)
            self._drop_assumed(out, name)  # typed by the user: no longer assumed
        return out

    def _drop_assumed(self, subject: dict[str, Any], name: str) -> None:
        assumed = [a.strip() for a in str(subject.get(ASSUMED_KEY) or "").split(",") if a.strip()]
        kept = [a for a in assumed if a != field_label(name)]
        if kept:
            subject[ASSUMED_KEY] = ", ".join(kept)
        else:
            subject.pop(ASSUMED_KEY, None)

    def median_hints(self) -> dict[str, float]:
        """The empty number fields and the sales' median each would take."""
        sales = self._session.sales
        subject = self._session.subject
        out: dict[str, float] = {}
        if sales is None:
            return out
        for name, editor in self.editors.items():
            if not isinstance(editor, QLineEdit) or editor.text().strip() or subject.get(name):
                continue
            header = _header_of(sales, name)
            if header is None:
                continue
            if header in sales.medians:
                out[name] = sales.medians[header]
        return out

    def fill_medians(self) -> dict[str, float]:
        """Fill every empty number field with the sales' median, marked as assumed."""
        hints = self.median_hints()
        if not hints:
            return hints
        subject = self.values()
        for name, median in hints.items():
            subject[name] = int(median) if float(median).is_integer() else round(median, 6)
        already = [a.strip() for a in str(subject.get(ASSUMED_KEY) or "").split(",") if a.strip()]
        labels = already + [field_label(n) for n in hints if field_label(n) not in already]
        subject[ASSUMED_KEY] = ", ".join(labels)
        self._session.set_subject(subject)
        return hints

    def labelled(self, message: str) -> str:
        """``message`` with the file's headers and role names replaced by the field labels
        the form shows ("Bedrooms", not "beds" or "Beds")."""
        sales = self._session.sales
        if sales is None:
            return message
        pairs: list[tuple[str, str]] = []
        for name in self._fields:
            label = field_label(name)
            header = _header_of(sales, name)
            for word in {header, name} - {None, label}:
                pairs.append((word, label))
        for word, label in sorted(pairs, key=lambda p: -len(p[0])):
            message = message.replace(f"'{word}'", label)
            message = _replace_word(message, word, label)
        return message

    def _edited(self) -> None:
        if not self._filling:
            self._session.set_subject(self.values())
        self.fill_button.setEnabled(bool(self.median_hints()))

    def _mark_stale(self) -> None:
        """Say the value shown no longer matches the inputs until the refit reports.

        Marked at once, and looked at again once the change has been handed over (the
        session starts its refit after telling the views), hence the zero-delay timer.
        """
        if self._session.valuation is not None:
            self.stale.setText("Out of date: recalculating…")
            self.estimate.setStyleSheet("color: #888888;")
        QTimer.singleShot(0, self, self._show_stale)

    def _show_stale(self) -> None:
        s = self._session
        if s.valuation is not None and not s.results_current:
            self.stale.setText("Out of date: recalculating…")
            self.estimate.setStyleSheet("color: #888888;")
        elif s.results_current or s.valuation is None:
            self.stale.setText("")
            self.estimate.setStyleSheet("")

    # --- the value ----------------------------------------------------------------------
    def show_valuation(self, val: Valuation | None) -> None:
        if val is None:
            if self._session.valuation_error is None:
                self.estimate.setText("—")
                self.estimate.setStyleSheet("")
                self.interval.setText(
                    "Fill in the subject's attributes to value it."
                    if self._session.fit is not None
                    else "No fitted model yet."
                )
                self.details.setText("")
                self.warnings.setText("")
            return
        c = self._currency
        self.stale.setText("")
        self.estimate.setStyleSheet("")
        self.estimate.setText(money(val.estimate, c))
        level = percent(val.level, 1 if round(val.level * 100) != val.level * 100 else 0)
        self.interval.setText(
            f"{level} prediction interval for this property's price: "
            f"{money(val.low, c)} – {money(val.high, c)}"
        )
        lines = [
            f"{level} interval for the {'median' if val.response == 'log' else 'mean'} price of "
            f"similar properties: {money(val.mean_low, c)} – {money(val.mean_high, c)}"
        ]
        if val.median is not None:
            lines.append(
                f"Median estimate {money(val.median, c)}; the value above is the mean "
                "(smearing-corrected)."
            )
        lines.append(
            f"Leverage {fixed(val.leverage, 3)} (largest among the sales "
            f"{fixed(val.max_sample_leverage, 3)})"
        )
        self.details.setText("\n".join(lines))
        self.warnings.setStyleSheet("")
        self.warnings.setText("\n".join(f"⚠ {self.labelled(w)}" for w in val.warnings))

    def _valuation_failed(self, message: str) -> None:
        self.estimate.setText("—")
        self.interval.setText("")
        self.details.setText("")
        self.warnings.setStyleSheet(ERROR_STYLE)
        self.stale.setText("")
        self.warnings.setText(f"The subject cannot be valued: {self.labelled(message)}")

    def _no_fit(self) -> None:
        self.estimate.setText("—")
        self.interval.setText("No value: the model could not be fitted (see the model panel).")
        self.details.setText("")
        self.warnings.setText("")


def _replace_word(text: str, word: str, label: str) -> str:
    """Replace ``word`` where it stands alone (not inside another word)."""
    return re.sub(rf"(?<![\w`]){re.escape(word)}(?![\w`])", label, text)
