"""The fitted model: coefficient table and fit statistics, or why there is no fit."""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtGui import QStandardItem, QStandardItemModel
from PySide6.QtWidgets import (
    QAbstractItemView,
    QGridLayout,
    QHeaderView,
    QLabel,
    QTableView,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.fitting import COEF_CI_LEVEL, FitResult
from appraise.report.effects import coefficient_effects
from appraise.report.labels import term_label
from appraise.report.numbers import fixed, number, percent, pvalue, unscientific
from appraise.report.text import coefficient_count

from .session import Session

ERROR_STYLE = "color: #c62828;"
BUSY_STYLE = "color: #555555; font-style: italic;"

STAT_LABELS: tuple[tuple[str, str], ...] = (
    ("n", "Sales used"),
    ("p", "Coefficients"),
    ("r2", "R²"),
    ("adj_r2", "Adjusted R²"),
    ("sigma", "Residual std. error"),
    ("aic", "AIC"),
    ("bic", "BIC"),
    ("cov_type", "Standard errors"),
)


def effect_text(fit: FitResult) -> list[str]:
    """The plain effect of each coefficient, in the order of ``fit.terms``
    (``+0.40% per month``, ``+$123 per sq ft``, ``+10.6% vs average``): the worksheet's
    column (``appraise.report.effects``)."""
    return [e.text for e in coefficient_effects(fit)]


class ResultsView(QWidget):
    """Coefficients (estimate, standard error, t, p, confidence interval) and fit statistics."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._session = session
        self.state = QLabel("No model fitted yet.")
        self.state.setWordWrap(True)
        self.state.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        self.stats: dict[str, QLabel] = {}
        grid = QGridLayout()
        for i, (key, label) in enumerate(STAT_LABELS):
            value = QLabel("—")
            value.setObjectName(f"stat_{key}")
            value.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            self.stats[key] = value
            grid.addWidget(QLabel(label + ":"), i // 4, 2 * (i % 4))
            grid.addWidget(value, i // 4, 2 * (i % 4) + 1)

        self.model = QStandardItemModel(0, 0, self)
        self.table = QTableView()
        self.table.setModel(self.model)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.verticalHeader().setVisible(False)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.warnings = QLabel()
        self.warnings.setWordWrap(True)

        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.state)
        lay.addLayout(grid)
        lay.addWidget(self.table, 1)
        lay.addWidget(self.warnings)

        session.fitStarted.connect(self._fitting)
        session.fitFinished.connect(self.show_fit)
        session.fitFailed.connect(self._failed)
        session.salesChanged.connect(lambda s: s is None and self.show_fit(None))
        if session.fit is not None:
            self.show_fit(session.fit)

    def _fitting(self) -> None:
        self.state.setStyleSheet(BUSY_STYLE)
        self.state.setText("Fitting…")

    def _failed(self, message: str) -> None:
        self.show_fit(None)
        self.state.setStyleSheet(ERROR_STYLE)
        self.state.setText(f"The model could not be fitted: {message}")

    def show_fit(self, fit: FitResult | None) -> None:
        self.model.clear()
        if fit is None:
            self.state.setStyleSheet("")
            self.state.setText("No model fitted yet.")
            for v in self.stats.values():
                v.setText("—")
            self.warnings.setText("")
            return
        self.state.setStyleSheet("")
        scale = "log price" if fit.response == "log" else "price"
        self.state.setText(f"Fitted: {scale}, {coefficient_count(fit)}.")
        values = {
            "n": f"{fit.n:,}",
            "p": str(fit.p),
            "r2": fixed(fit.r2, 4),
            "adj_r2": fixed(fit.adj_r2, 4),
            "sigma": number(fit.sigma, 5),
            "aic": fixed(fit.aic, 1),
            "bic": fixed(fit.bic, 1),
            "cov_type": fit.cov_type,
        }
        for key, text in values.items():
            self.stats[key].setText(text)

        ci = percent(COEF_CI_LEVEL)
        headers = ["Term", "Estimate", "Std. error", "t", "p", f"{ci} low", f"{ci} high"]
        headers.append("Effect on price")
        self.model.setHorizontalHeaderLabels(headers)
        for t, effect in zip(fit.terms, effect_text(fit), strict=True):
            cells = [
                term_label(t.name),
                number(t.coef, 4),
                number(t.se, 3),
                fixed(t.t, 2),
                pvalue(t.p),
                number(t.ci_low, 4),
                number(t.ci_high, 4),
                effect if t.note is None else str(t.note),
            ]
            items = []
            for j, text in enumerate(cells):
                item = QStandardItem(text)
                if 0 < j < len(cells) - 1:  # numbers right, the term and its effect left
                    item.setTextAlignment(
                        Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
                    )
                items.append(item)
            self.model.appendRow(items)
        self.warnings.setText("\n".join(f"⚠ {unscientific(w)}" for w in fit.warnings))
