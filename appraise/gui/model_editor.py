"""The model editor: what to fit, one feature expression per row, checked as you type.

Every keystroke re-checks the row against the columns, roles and derived
variables (:func:`appraise.engine.expressions.check_expression`) and shows what is
wrong beside it. Only when every row is valid does the editor hand a new
:class:`~appraise.engine.modelspec.ModelSpec` to the session, which refits after a
short pause; an invalid row never throws away what the user typed, and the last
valid model keeps its results on screen.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from types import MappingProxyType

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QKeySequence, QShortcut
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QScrollArea,
    QSpinBox,
    QStyle,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.errors import AppraiseError
from appraise.engine.expressions import check_expression, quote_name
from appraise.engine.modelspec import COV_TYPES, RESPONSES, ModelSpec
from appraise.engine.roles import ROLES
from appraise.engine.sales import ROW_COLUMN
from appraise.engine.spread import SPREAD_METHOD_TEXT
from appraise.report.levels_text import level_lines

from .feature_picker import FeaturePicker, picker_entries
from .session import Session

COV_LABELS = {
    "classical": "classical (constant error spread)",
    "HC0": "HC0 (robust, White's original)",
    "HC1": "HC1 (robust to uneven spread)",
    "HC2": "HC2 (robust, leverage-corrected)",
    "HC3": "HC3 (robust, small samples)",
}
RESPONSE_LABELS = {"linear": "price (linear)", "log": "log price (effects in %)"}
OK_COLOUR = "#2e7d32"
ERROR_COLOUR = "#c62828"


# --- the expressions the helper buttons write ------------------------------------------
def poly_expression(names: list[str], degree: int) -> str:
    """``poly(a, b, degree=m)``: every product of the inputs up to total degree ``m``."""
    return f"poly({', '.join(quote_name(n) for n in names)}, degree={int(degree)})"


def interaction_expression(a: str, b: str) -> str:
    """``a * b``: one column, the product (the effect of ``a`` changes with ``b``)."""
    return f"{quote_name(a)} * {quote_name(b)}"


def ratio_expression(a: str, b: str) -> str:
    """``a / b``, e.g. lot area per living area."""
    return f"{quote_name(a)} / {quote_name(b)}"


def indicator_expression(category: str, reference: str | None) -> str:
    """``onehot(region, ref='Old Mill')``: a 0/1 column per level except the reference."""
    if reference is None:
        return f"onehot({quote_name(category)})"
    ref = reference.replace("\\", "\\\\").replace("'", "\\'")
    return f"onehot({quote_name(category)}, ref='{ref}')"


# --- one editable row ------------------------------------------------------------
class ExpressionRow(QWidget):
    """An expression (optionally with a name, for derived variables), its check, a remove button."""

    edited = Signal()
    removeRequested = Signal(object)

    def __init__(self, expression: str = "", name: str | None = None) -> None:
        super().__init__()
        lay = QHBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.name_edit: QLineEdit | None = None
        if name is not None:
            self.name_edit = QLineEdit(name)
            self.name_edit.setPlaceholderText("name")
            self.name_edit.setMaximumWidth(140)
            self.name_edit.textChanged.connect(lambda _t: self.edited.emit())
            lay.addWidget(self.name_edit)
            lay.addWidget(QLabel("="))
        self.edit = QLineEdit(expression)
        self.edit.setPlaceholderText("expression, e.g. log(living_area)")
        self.edit.textChanged.connect(lambda _t: self.edited.emit())
        self.status = QLabel()
        self.status.setWordWrap(True)
        self.status.setMinimumWidth(160)
        self.status.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.remove = QToolButton()
        self.remove.setIcon(self.style().standardIcon(QStyle.StandardPixmap.SP_DialogCloseButton))
        self.remove.setToolTip("Remove this row")
        self.remove.setAutoRaise(True)
        self.remove.clicked.connect(lambda: self.removeRequested.emit(self))
        lay.addWidget(self.edit, 3)
        lay.addWidget(self.status, 2)
        lay.addWidget(self.remove)
        self.error: str | None = None

    @property
    def expression(self) -> str:
        return self.edit.text().strip()

    @property
    def name(self) -> str:
        return self.name_edit.text().strip() if self.name_edit is not None else ""

    def is_blank(self) -> bool:
        """Nothing typed yet (a new row): neither checked nor part of the model."""
        return not self.expression and not self.name

    def show_blank(self) -> None:
        self.error = None
        self.status.setText("<span style='color:#555555'>type a feature</span>")
        self.status.setToolTip("")

    def show_check(self, error: str | None) -> None:
        self.error = error
        if error is None:
            self.status.setText(f"<span style='color:{OK_COLOUR}'>✓</span>")
            self.status.setToolTip("")
        else:
            self.status.setText(f"<span style='color:{ERROR_COLOUR}'>{_escape(error)}</span>")
            self.status.setToolTip(error)


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


class _RowList(QWidget):
    """A vertical list of :class:`ExpressionRow` that can grow and shrink."""

    changed = Signal()

    def __init__(self, named: bool) -> None:
        super().__init__()
        self._named = named
        self.rows: list[ExpressionRow] = []
        self._lay = QVBoxLayout(self)
        self._lay.setContentsMargins(0, 0, 0, 0)
        self._lay.setSpacing(2)

    def set_items(self, items: list[tuple[str, str]]) -> None:
        for row in self.rows:
            row.deleteLater()
        self.rows = []
        for name, expr in items:
            self.add(expr, name, emit=False)

    def add(self, expression: str, name: str = "", *, emit: bool = True) -> ExpressionRow:
        row = ExpressionRow(expression, name if self._named else None)
        row.edited.connect(self.changed)
        row.removeRequested.connect(self.remove)
        self.rows.append(row)
        self._lay.addWidget(row)
        if emit:
            self.changed.emit()
        return row

    def remove(self, row: ExpressionRow) -> None:
        if row in self.rows:
            self.rows.remove(row)
            self._lay.removeWidget(row)
            row.deleteLater()
            self.changed.emit()


# --- helper dialogs ------------------------------------------------------------------
class _PickDialog(QDialog):
    """A small form of drop-downs (and optionally a degree) for one helper."""

    def __init__(
        self,
        parent: QWidget,
        title: str,
        fields: list[tuple[str, list[str]]],
        degree: bool = False,
        defaults: list[str] | None = None,
    ) -> None:
        super().__init__(parent)
        self.setWindowTitle(title)
        form = QFormLayout(self)
        self.combos: list[QComboBox] = []
        for k, (label, choices) in enumerate(fields):
            c = QComboBox()
            c.addItems(choices)
            if defaults and k < len(defaults) and defaults[k] in choices:
                c.setCurrentIndex(choices.index(defaults[k]))
            form.addRow(label, c)
            self.combos.append(c)
        self.degree: QSpinBox | None = None
        if degree:
            self.degree = QSpinBox()
            self.degree.setRange(2, 4)
            form.addRow("&Degree", self.degree)
        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel
        )
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)

    def values(self) -> list[str]:
        return [c.currentText() for c in self.combos]


# --- the editor --------------------------------------------------------------------------
class ModelEditor(QWidget):
    """Price column, response, interval level, standard errors, features, derived variables."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._session = session
        self._filling = False
        self._pushed: ModelSpec | None = None

        self.target = QComboBox()
        self.target.setEditable(True)
        self.target.setToolTip("The column (or role) holding the sale price")
        self.response = QComboBox()
        for r in RESPONSES:
            self.response.addItem(RESPONSE_LABELS[r], r)
        self.level = QDoubleSpinBox()
        self.level.setRange(50.0, 99.9)
        self.level.setDecimals(1)
        self.level.setSingleStep(5.0)
        self.level.setSuffix(" %")
        self.level.setValue(90.0)
        self.level.setToolTip("Level of the prediction interval for the subject")
        self.cov_type = QComboBox()
        for c in COV_TYPES:
            self.cov_type.addItem(COV_LABELS[c], c)
        self.spread = QComboBox()
        for method, text in SPREAD_METHOD_TEXT.items():
            self.spread.addItem(text.split(":")[0].capitalize(), method)
            self.spread.setItemData(self.spread.count() - 1, text, Qt.ItemDataRole.ToolTipRole)
        self.spread.setToolTip(
            "How wide a single sale's interval is: one error variance for every sale, or a "
            "variance that follows the predicted price (see Checks: coverage by segment)"
        )

        self.title = QLineEdit()
        self.title.setObjectName("modelTitle")
        self.title.setPlaceholderText("A name for this model, shown in the worksheet")
        self.title.textChanged.connect(lambda _t: self._edited())

        head = QFormLayout()
        head.addRow("Tit&le", self.title)
        head.addRow("&Price column", self.target)
        head.addRow("&Response", self.response)
        head.addRow("&Interval level", self.level)
        head.addRow("Standard &errors", self.cov_type)
        head.addRow("Interval &spread", self.spread)

        self.features = _RowList(named=False)
        self.new_feature = QLineEdit()
        self.new_feature.setPlaceholderText("Type a feature and press Enter, e.g. log(lot_area)")
        self.new_feature.returnPressed.connect(self._add_typed_feature)
        self.add_button = QPushButton("&Add")
        self.add_button.clicked.connect(self._add_typed_feature)
        self.names_button = QPushButton("Na&mes… (F2)")
        self.names_button.setToolTip("Every role name and header you can type, with its kind")
        self.names_button.clicked.connect(self.open_picker)
        self.picker: FeaturePicker | None = None
        picker_key = QShortcut(QKeySequence("F2"), self)
        picker_key.setContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        picker_key.activated.connect(self.open_picker)
        add_row = QHBoxLayout()
        add_row.addWidget(self.new_feature, 1)
        add_row.addWidget(self.names_button)
        add_row.addWidget(self.add_button)

        helpers = QHBoxLayout()
        for text, slot in (
            ("P&olynomial…", self.insert_polynomial),
            ("I&nteraction…", self.insert_interaction),
            ("Ra&tio…", self.insert_ratio),
            ("Re&gion indicators…", self.insert_indicators),
            ("S&uggest…", self.open_suggest),
        ):
            b = QPushButton(text)
            b.clicked.connect(slot)
            helpers.addWidget(b)
        helpers.addStretch(1)

        self.derived = _RowList(named=True)
        add_derived = QPushButton("Add &derived variable")
        add_derived.clicked.connect(lambda: self.derived.add("", "").edit.setFocus())

        self.summary = QLabel()
        self.summary.setWordWrap(True)
        self.fit_status = QLabel()
        self.levels_label = QLabel()  # sales per level of each onehot term, after a fit
        self.levels_label.setWordWrap(True)
        self.levels_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.fit_status.setWordWrap(True)
        self.fit_status.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        body = QWidget()
        lay = QVBoxLayout(body)
        lay.addLayout(head)
        lay.addWidget(_heading("Features (one per row)"))
        lay.addWidget(self.features)
        lay.addLayout(add_row)
        lay.addLayout(helpers)
        lay.addWidget(_heading("Derived variables (usable by name in features)"))
        lay.addWidget(self.derived)
        lay.addWidget(add_derived, 0, Qt.AlignmentFlag.AlignLeft)
        lay.addWidget(self.summary)
        lay.addWidget(self.fit_status)
        lay.addWidget(self.levels_label)
        lay.addStretch(1)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(body)
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        outer.addWidget(scroll)

        self.features.changed.connect(self._edited)
        self.derived.changed.connect(self._edited)
        self.target.currentTextChanged.connect(lambda _t: self._edited())
        self.response.currentIndexChanged.connect(lambda _i: self._edited())
        self.level.valueChanged.connect(lambda _v: self._edited())
        self.cov_type.currentIndexChanged.connect(lambda _i: self._edited())
        self.spread.currentIndexChanged.connect(lambda _i: self._edited())

        session.modelChanged.connect(self._model_changed)
        session.salesChanged.connect(lambda _s: self._sales_changed())
        session.fitStarted.connect(lambda: self._show_fit_state(None))
        session.fitFinished.connect(lambda _f: self._show_fit_state(None))
        session.fitFinished.connect(self._show_levels)
        session.fitFailed.connect(self._show_fit_state)
        self._sales_changed()
        if session.spec is not None:
            self._model_changed(session.spec)

    # --- names the user may write ---------------------------------------------------
    def _columns(self) -> list[str]:
        sales = self._session.sales
        return [] if sales is None else [c for c in sales.frame.columns if c != ROW_COLUMN]

    def available_names(self) -> list[str]:
        """Mapped role names, then derived names, then headers, as written in expressions."""
        sales = self._session.sales
        roles = [r for r in ROLES if sales is not None and sales.roles.column(r)]
        derived = [r.name for r in self.derived.rows if r.name]
        return list(dict.fromkeys(roles + derived + self._columns()))

    def _sales_changed(self) -> None:
        current = self.target.currentText()
        sales = self._session.sales
        self._filling = True
        self.target.clear()
        options = ["price"] if sales is not None and sales.roles.column("price") else []
        self.target.addItems(options + self._columns())
        self.target.setEditText(current or (options[0] if options else ""))
        self._filling = False
        self.setEnabled(sales is not None)
        self._check_all()

    # --- filling from a spec ------------------------------------------------------------
    def _model_changed(self, spec: ModelSpec) -> None:
        if spec == self._pushed:
            return
        self._filling = True
        self.target.setEditText(spec.target)
        self.title.setText(spec.title)
        self.response.setCurrentIndex(max(0, self.response.findData(spec.response)))
        self.level.setValue(round(spec.level * 100.0, 1))
        self.cov_type.setCurrentIndex(max(0, self.cov_type.findData(spec.cov_type)))
        self.spread.setCurrentIndex(max(0, self.spread.findData(spec.spread)))
        self.features.set_items([("", f) for f in spec.features])
        self.derived.set_items(list(spec.derived.items()))
        self._filling = False
        self._pushed = spec
        self._check_all()

    # --- checking and handing over -------------------------------------------------------
    def _edited(self) -> None:
        if self._filling:
            return
        spec = self._check_all()
        if spec is not None and spec != self._session.spec:
            self._pushed = spec
            self._session.set_model(spec)

    def _check_all(self) -> ModelSpec | None:
        """Check every row, show the verdicts, and return the spec if all is valid."""
        sales = self._session.sales
        columns = self._columns()
        roles = sales.roles if sales is not None else None
        derived = {r.name: r.expression for r in self.derived.rows if r.name and r.expression}
        bad = 0
        seen: set[str] = set()
        for row in self.derived.rows:
            if row.is_blank():  # a new row: nothing to check until something is typed
                row.show_blank()
                continue
            error = None
            if not row.name.isidentifier():
                error = "the name must be a plain word (letters, digits, _)"
            elif row.name in seen:
                error = f"'{row.name}' is defined twice"
            elif row.name in columns:
                error = f"'{row.name}' is already a column"
            elif not row.expression:
                error = "empty"
            seen.add(row.name)
            if error is None:
                error = _check(row.expression, columns, derived, roles)
            row.show_check(error)
            bad += error is not None
        features = []
        for row in self.features.rows:
            if row.is_blank():
                row.show_blank()
                continue
            error = (
                "empty" if not row.expression else _check(row.expression, columns, derived, roles)
            )
            if error is None and row.expression in features:
                error = "this feature is already in the model"
            row.show_check(error)
            bad += error is not None
            features.append(row.expression)
        target = self.target.currentText().strip()
        problems = []
        if bad:
            problems.append(f"{bad} row(s) need attention")
        if not features:
            problems.append("add at least one feature")
        if not target:
            problems.append("choose the price column")
        if problems:
            self.summary.setText(
                "Not fitted yet: " + "; ".join(problems) + ". The results shown are from the "
                "last valid model."
            )
            return None
        self.summary.setText("")
        base = self._session.spec or ModelSpec(target=target, features=tuple(features))
        return replace(
            base,
            title=self.title.text().strip(),
            target=target,
            features=tuple(features),
            response=self.response.currentData(),
            level=round(self.level.value() / 100.0, 4),
            cov_type=self.cov_type.currentData(),
            spread=self.spread.currentData(),
            spread_terms=base.spread_terms if self.spread.currentData() == "modelled" else (),
            derived=MappingProxyType(dict(derived)),
        )

    def _show_levels(self, fit) -> None:
        """Sales per level beside the terms; a thin level in the warning colour."""
        lines = level_lines(fit) if fit is not None else []
        from appraise.engine.suggest.guards import protected_columns  # added by hand: warn

        warned = protected_columns(fit.design.inputs, fit.frame) if fit is not None else ()
        self.levels_label.setText(
            "<br>".join(
                [f"<span style='color:{ERROR_COLOUR}'>{_escape(w)}</span>" for w in warned]
                + [
                    f"<span style='color:{ERROR_COLOUR}'>{_escape(x.text)}</span>"
                    if x.thin
                    else _escape(x.text)
                    for x in lines
                ]
            )
        )

    def _show_fit_state(self, message: str | None) -> None:
        if message is None:
            self.fit_status.setText("")
        else:
            self.fit_status.setText(
                f"<span style='color:{ERROR_COLOUR}'>The model could not be fitted: "
                f"{_escape(message)}</span><br>Your edits are kept; change a row to try again."
            )

    # --- adding features ------------------------------------------------------------------
    def add_feature(self, expression: str) -> None:
        """Append a feature row (checked and, if the whole model is valid, fitted)."""
        self.features.add(expression.strip())

    def _add_typed_feature(self) -> None:
        text = self.new_feature.text().strip()
        if text:
            self.add_feature(text)
            self.new_feature.clear()

    def _ask(
        self,
        title: str,
        fields: list[tuple[str, list[str]]],
        degree: bool = False,
        build: Callable[[list[str], int], str] | None = None,
        defaults: list[str] | None = None,
    ) -> None:
        if not all(choices for _l, choices in fields):
            self.summary.setText(f"{title}: load sales with at least one number column first.")
            return
        dlg = _PickDialog(self, title, fields, degree, defaults)
        if dlg.exec() == QDialog.DialogCode.Accepted and build is not None:
            d = dlg.degree.value() if dlg.degree is not None else 0
            self.add_feature(build(dlg.values(), d))

    def numeric_names(self) -> list[str]:
        """Names of number columns as typed (role names first), never the price itself."""
        sales = self._session.sales
        if sales is None:
            return []
        price_col = sales.roles.column("price")
        target = self.target.currentText().strip()
        out = []
        for e in picker_entries(sales, self._derived_now()):
            if e.kind not in ("number", "binary"):
                continue
            header = e.detail if e.source == "role" else e.text.strip("`")
            if e.text in ("price", target) or (e.source != "derived" and header == price_col):
                continue
            out.append(e.text.strip("`") if e.source == "header" else e.text)
        return list(dict.fromkeys(out))

    def _derived_now(self) -> dict[str, str]:
        return {r.name: r.expression for r in self.derived.rows if r.name and r.expression}

    def _defaults(self, names: list[str], *preferred: str) -> list[str]:
        """The preferred names found in ``names`` (in order), then the first other ones."""
        picked = [p for p in preferred if p in names]
        picked += [n for n in names if n not in picked]
        return picked

    def insert_polynomial(self) -> None:
        names = self.numeric_names()
        self._ask(
            "Polynomial",
            [("&Variable", names)],
            degree=True,
            build=lambda v, d: poly_expression([v[0]], d),
            defaults=self._defaults(names, "age", "living_area")[:1],
        )

    def insert_interaction(self) -> None:
        names = self.numeric_names()
        self._ask(
            "Interaction",
            [("&First", names), ("&Second", names)],
            build=lambda v, _d: interaction_expression(v[0], v[1]),
            defaults=self._defaults(names, "living_area", "dist_km", "lot_area", "age")[:2],
        )

    def insert_ratio(self) -> None:
        names = self.numeric_names()
        self._ask(
            "Ratio",
            [("&Numerator", names), ("&Denominator", names)],
            build=lambda v, _d: ratio_expression(v[0], v[1]),
            defaults=self._defaults(names, "lot_area", "living_area")[:2],
        )

    # --- the picker -------------------------------------------------------------------------
    def open_picker(self) -> FeaturePicker:
        """Show the names that can be typed; the one chosen goes into the new-feature line."""
        if self.picker is None:
            self.picker = FeaturePicker(self)
            self.picker.chosen.connect(self.insert_name)
        self.picker.set_entries(picker_entries(self._session.sales, self._derived_now()))
        self.picker.show()
        self.picker.raise_()
        self.picker.filter.setFocus()
        return self.picker

    def insert_name(self, text: str) -> None:
        """Insert ``text`` at the cursor of the new-feature line (what the picker does)."""
        self.new_feature.insert(text)
        self.new_feature.setFocus()

    def insert_indicators(self) -> None:
        sales = self._session.sales
        if sales is None:
            return
        col = sales.roles.column("region")
        category = "region" if col else None
        if col is None:  # no region role: offer the text columns
            text_cols = [
                c
                for c in self._columns()
                if sales.frame[c].dtype.kind in "OUT"
                or str(sales.frame[c].dtype) in ("str", "string")
            ]
            if not text_cols:
                self.summary.setText("Region indicators: no text column to make indicators of.")
                return
            category = text_cols[0]
            col = category
        levels = list(sales.levels_by_count(col))
        self._ask(
            "Region indicators",
            [("&Reference level (the others are compared with it)", levels)],
            build=lambda v, _d: indicator_expression(category, v[0]),
        )

    def open_suggest(self) -> None:
        """The model assistant: ranked single changes with measured gains, the whole search."""
        from .suggest_dialog import SuggestDialog

        dialog = getattr(self, "suggest_dialog", None)
        if dialog is None:
            dialog = self.suggest_dialog = SuggestDialog(self._session, self)  # measures
        else:
            dialog.measure()
        dialog.show()
        dialog.raise_()


def _check(expr: str, columns, derived, roles) -> str | None:
    try:
        check_expression(expr, columns, derived=derived, roles=roles)
    except AppraiseError as exc:
        return exc.message
    return None


def _heading(text: str) -> QLabel:
    label = QLabel(f"<b>{_escape(text)}</b>")
    return label
