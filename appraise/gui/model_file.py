"""The model file from the window: open, save, save as (TOML), and compare with another.

Opening a model file hands its spec to the session (so it is one undoable step);
saving writes the spec the session holds, atomically. Comparing fits the other model
to the same sales and exclusions on a pool thread and shows what ``appraise compare``
prints: both models ranked by leave-one-out error, with the accuracy figures beside.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from PySide6.QtCore import QObject, Qt, QThreadPool
from PySide6.QtGui import QAction
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QLabel,
    QMessageBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from appraise import pipeline
from appraise.engine.diagnostics import Comparison, compare_models
from appraise.engine.errors import AppraiseError
from appraise.engine.modelspec import ModelSpec, load_model
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.numbers import fixed, integer, money, percent

from .session import Session
from .workers import Task, TaskSignals

MODEL_FILTER = "Model files (*.toml)"
CURRENT_LABEL = "this model"


def write_model_file(spec: ModelSpec, path: str | Path) -> Path:
    """Write ``spec`` as TOML to ``path`` atomically (a temporary file, then a rename)."""
    p = Path(path)
    text = spec.to_toml()
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".tmp", dir=p.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return p


def comparison_rows(c: Comparison, currency: str = "$") -> list[list[str]]:
    """The comparison as the table the dialog shows, best model first."""
    rows = []
    for r in c.rows:
        rows.append(
            [
                integer(r.rank),
                r.label,
                "log price" if r.response == "log" else "price",
                integer(r.n),
                integer(r.p),
                money(r.loo_rmse, currency),
                money(r.kfold_rmse, currency),
                fixed(r.adj_r2, 4),
                fixed(r.aic_price, 1),
                fixed(r.cod, 2),
                f"{percent(r.coverage, 1)} of {percent(r.level, 0)}",
            ]
        )
    return rows


COMPARISON_HEADERS = (
    "Rank",
    "Model",
    "Response",
    "Sales",
    "Terms",
    "Leave-one-out error (RMSE)",
    "k-fold error (RMSE)",
    "Adjusted R²",
    "AIC on the price scale",
    "COD",
    "Intervals that covered the price",
)


class ComparisonDialog(QDialog):
    """The ranking of the current model and another, with the comparison's warnings."""

    def __init__(self, comparison: Comparison, currency: str, parent: QWidget | None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Compare models")
        self.setObjectName("compareDialog")
        self.comparison = comparison
        rows = comparison_rows(comparison, currency)
        self.table = QTableWidget(len(rows), len(COMPARISON_HEADERS))
        self.table.setHorizontalHeaderLabels(list(COMPARISON_HEADERS))
        self.table.verticalHeader().hide()
        for i, row in enumerate(rows):
            for j, text in enumerate(row):
                item = QTableWidgetItem(text)
                item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
                if j not in (1, 2):
                    item.setTextAlignment(
                        Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
                    )
                self.table.setItem(i, j, item)
        self.table.resizeColumnsToContents()
        lay = QVBoxLayout(self)
        lay.addWidget(
            QLabel(
                "Ranked by leave-one-out error in price units (each sale valued by the model "
                "fitted without it). AIC on the price scale compares a log-price model with a "
                "price model fairly."
            )
        )
        lay.addWidget(self.table, 1)
        self.notes = QLabel("\n".join(f"⚠ {w}" for w in comparison.warnings))
        self.notes.setWordWrap(True)
        lay.addWidget(self.notes)
        caution = QLabel(ONE_LINE_CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #555555;")
        lay.addWidget(caution)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.close)
        lay.addWidget(buttons)
        self.resize(980, 300)


class ModelFileCommands(QObject):
    """The Model menu's file commands; ``path`` is the model file last opened or saved."""

    def __init__(self, session: Session, window: QWidget, currency: str = "$") -> None:
        super().__init__(window)
        self.session = session
        self.window = window
        self.currency = currency
        self.path: Path | None = None
        self.dialog: ComparisonDialog | None = None
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(1)
        self._signals = TaskSignals(self)
        self._signals.finished.connect(self._compared)
        self._signals.failed.connect(self._compare_failed)
        self._tasks: dict[int, Task] = {}
        self._generation = 0

        def make(text: str, tip: str) -> QAction:
            a = QAction(text, window)
            a.setStatusTip(tip)
            a.setToolTip(tip)
            return a

        self.open = make("&Open model file…", "Replace the model with one read from a TOML file")
        self.save = make("&Save model file", "Write the model to its TOML file")
        self.save_as = make("Save model file &as…", "Write the model to a new TOML file")
        self.compare = make(
            "&Compare with another model…",
            "Fit another model file to the same sales and rank both by out-of-sample error",
        )
        self.open.triggered.connect(lambda: self.choose_and_open())
        self.save.triggered.connect(lambda: self.save_model())
        self.save_as.triggered.connect(lambda: self.save_model_as())
        self.compare.triggered.connect(lambda: self.choose_and_compare())
        session.salesChanged.connect(self._enable)
        session.modelChanged.connect(self._enable)
        session.fitFinished.connect(self._enable)
        session.loadFinished.connect(self._forget_on_new_file)
        self._enable()

    def _enable(self, *_args: object) -> None:
        has_sales = self.session.sales is not None
        has_model = has_sales and self.session.spec is not None
        self.open.setEnabled(has_sales)
        self.save.setEnabled(has_model)
        self.save_as.setEnabled(has_model)
        self.compare.setEnabled(has_model and self.session.fit is not None)

    def _forget_on_new_file(self, _label: str) -> None:
        if self.path is not None and self.session.sales_path is not None:
            if self.path.parent != self.session.sales_path.parent:
                self.path = None

    def _folder(self) -> str:
        if self.path is not None:
            return str(self.path.parent)
        sp = self.session.sales_path
        return str(sp.parent) if sp is not None else ""

    # --- open and save -------------------------------------------------------------------
    def choose_and_open(self) -> bool:
        path, _f = QFileDialog.getOpenFileName(
            self.window, "Open a model file", self._folder(), MODEL_FILTER
        )
        return bool(path) and self.open_model(path)

    def open_model(self, path: str | Path) -> bool:
        """Read the model file and make it the session's model (undoable)."""
        try:
            spec = load_model(path)
        except AppraiseError as exc:
            self._error("Could not read the model file", str(exc))
            return False
        self.session.set_model(spec)
        self.path = Path(path)
        return True

    def save_model(self) -> bool:
        if self.path is None:
            return self.save_model_as()
        return self.save_to(self.path)

    def save_model_as(self) -> bool:
        stem = self.session.sales_path.stem if self.session.sales_path else "model"
        start = str(Path(self._folder() or ".") / f"{stem}_model.toml")
        path, _f = QFileDialog.getSaveFileName(
            self.window, "Save the model file", start, MODEL_FILTER
        )
        if not path:
            return False
        if not path.lower().endswith(".toml"):
            path += ".toml"
        return self.save_to(Path(path))

    def save_to(self, path: Path) -> bool:
        spec = self.session.spec
        if spec is None:
            return False
        try:
            write_model_file(spec, path)
        except OSError as exc:
            self._error("Could not save the model file", f"{path}: {exc.strerror or exc}")
            return False
        self.path = Path(path)
        return True

    # --- compare ---------------------------------------------------------------------------
    def choose_and_compare(self) -> None:
        path, _f = QFileDialog.getOpenFileName(
            self.window, "Compare with a model file", self._folder(), MODEL_FILTER
        )
        if path:
            self.compare_with(path)

    def compare_with(self, path: str | Path) -> None:
        """Fit the model in ``path`` to the same sales on a pool thread, then show both."""
        s = self.session
        fit = s.fit
        if fit is None or s.sales is None:
            return
        try:
            other_spec = load_model(path)
        except AppraiseError as exc:
            self._error("Could not read the model file", str(exc))
            return
        sales, exclusions, settings = s.sales, s.user_exclusions, s.diagnostic_settings
        other_label = Path(path).name
        if other_label == CURRENT_LABEL:
            other_label = f"{other_label} (file)"

        def job(_report) -> Comparison:
            other = pipeline.fit(sales, other_spec, exclusions)
            return compare_models([fit, other], [CURRENT_LABEL, other_label], settings)

        self._generation += 1
        task = Task(self._generation, job, self._signals)
        self._tasks[self._generation] = task
        self._pool.start(task)

    def _compared(self, gen: int, comparison: object) -> None:
        self._tasks.pop(gen, None)
        if gen != self._generation or not isinstance(comparison, Comparison):
            return
        if self.dialog is not None:
            self.dialog.close()
            self.dialog.deleteLater()
        self.dialog = ComparisonDialog(comparison, self.currency, self.window)
        self.dialog.show()

    def _compare_failed(self, gen: int, message: str) -> None:
        self._tasks.pop(gen, None)
        if gen == self._generation:
            self._error("Could not compare the models", message)

    def wait(self, timeout_ms: int = 10_000) -> None:
        """Wait for a comparison on its way (the window does so when it closes)."""
        self._pool.waitForDone(timeout_ms)

    def _error(self, title: str, message: str) -> None:
        box = QMessageBox(
            QMessageBox.Icon.Warning, title, message, QMessageBox.StandardButton.Ok, self.window
        )
        box.setObjectName("errorBox")
        box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        box.open()
