"""The model assistant in the window: ranked single changes, each applied with one click,
and the whole search with progress and cancel.

Everything is computed off the UI thread by a :class:`~appraise.gui.workers.Task` on the
dialog's own pool; the dialog only shows what comes back. A change is applied by handing the
changed model to :meth:`Session.set_model`, the path every model edit takes, so the
window's Undo takes it back like any other edit. After each new fit the ranking is
measured again.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass

from PySide6.QtCore import Qt, QThreadPool
from PySide6.QtGui import QPalette
from PySide6.QtWidgets import (
    QAbstractItemView,
    QDialog,
    QDialogButtonBox,
    QFormLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPlainTextEdit,
    QProgressBar,
    QPushButton,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.errors import Cancelled
from appraise.engine.fitting import FitResult
from appraise.engine.suggest.search import (
    Move,
    Problem,
    SearchSettings,
    Suggestion,
    build_problem,
    chance_multiple,
    rank_moves,
    spec_after,
    suggest,
)
from appraise.report.cautions import FAIR_LENDING_CAUTION, SUGGESTION_CAUTION
from appraise.report.numbers import fixed
from appraise.report.suggest_text import error_text, format_suggestion, signed_error

from .session import Session
from .workers import Task, TaskSignals

COLUMNS = ("Change", "CV error after", "Gain", "SE", "Gain / SE", "Why")
MAX_ROWS = 200


@dataclass(frozen=True)
class Ranking:
    """What the ranking job hands back: the fit it was measured on and the moves."""

    fit: FitResult
    problem: Problem
    moves: tuple[Move, ...]
    threshold: float


def rank_job(fit: FitResult, settings: SearchSettings):
    """The ranking as a pool job (no Qt): every single change of ``fit``'s model, scored."""

    def job(report) -> Ranking:
        problem = build_problem(fit)
        moves = rank_moves(problem, settings)
        keys = {m.key or m.added for m in moves if not m.simplifies}
        return Ranking(fit, problem, moves, chance_multiple(len(keys)) * settings.se_multiple)

    return job


def search_job(fit: FitResult, settings: SearchSettings, stop: threading.Event):
    """The whole search as a pool job; progress goes out as ("progress", (fraction, text))."""

    def job(report) -> Suggestion:
        def progress(fraction: float, message: str) -> None:
            if stop.is_set():
                raise Cancelled()
            report("progress", (fraction, message))

        return suggest(fit, settings, progress=progress)

    return job


class SuggestDialog(QDialog):
    """Ranked changes of the current model and the whole search (see the module text)."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Suggest changes to the model")
        self.setObjectName("suggestDialog")
        self._session = session
        self._generation = 0
        self._tasks: list[Task] = []
        # the dialog's own pool, made before the signals: when the dialog goes, the pool is
        # taken down first and waits for a running job, whose reports still have a receiver
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(2)
        self._signals = TaskSignals(self)
        self._signals.finished.connect(self._finished)
        self._signals.failed.connect(self._failed)
        self._signals.stage.connect(self._stage)
        self._stop = threading.Event()
        self.ranking: Ranking | None = None
        self.result: Suggestion | None = None
        self._searching = False
        self._rank_generation = -1
        self._search_generation = -1

        self.folds = QSpinBox()
        self.folds.setRange(0, 50)
        self.folds.setValue(10)
        self.folds.setSpecialValueText("leave-one-out")
        self.folds.setToolTip("Folds of the cross-validation (0: leave-one-out)")
        self.max_lines = QSpinBox()
        self.max_lines.setRange(1, 60)
        self.max_lines.setValue(14)
        self.seed = QSpinBox()
        self.seed.setRange(0, 1_000_000)
        form = QFormLayout()
        form.addRow("&Folds", self.folds)
        form.addRow("&Most lines", self.max_lines)
        form.addRow("S&eed", self.seed)
        for w in (self.folds, self.max_lines, self.seed):
            w.valueChanged.connect(lambda _v: self.measure())

        self.status = QLabel()
        self.status.setWordWrap(True)
        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setObjectName("suggestTable")
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.table.horizontalHeader().setSectionResizeMode(
            len(COLUMNS) - 1, QHeaderView.ResizeMode.Stretch
        )
        self.table.cellDoubleClicked.connect(lambda r, _c: self.apply_row(r))
        self.table.itemSelectionChanged.connect(self._update_buttons)

        self.apply_button = QPushButton("&Apply this change")
        self.apply_button.clicked.connect(lambda: self.apply_row(self.table.currentRow()))
        self.search_button = QPushButton("&Run the whole search")
        self.search_button.clicked.connect(self.run_search)
        self.cancel_button = QPushButton("&Cancel search")
        self.cancel_button.clicked.connect(self.cancel_search)
        self.apply_search_button = QPushButton("Use the &proposed model")
        self.apply_search_button.clicked.connect(self.apply_search)
        self.progress = QProgressBar()
        self.progress.setRange(0, 100)
        self.report = QPlainTextEdit()
        self.report.setObjectName("suggestReport")
        self.report.setReadOnly(True)
        self.report.setPlaceholderText("The whole search's steps, final model and honest estimate")
        caution = QLabel(f"{SUGGESTION_CAUTION} {FAIR_LENDING_CAUTION}")
        caution.setWordWrap(True)

        buttons = QHBoxLayout()
        for b in (self.apply_button, self.search_button, self.cancel_button):
            buttons.addWidget(b)
        buttons.addWidget(self.progress, 1)
        buttons.addWidget(self.apply_search_button)
        close = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        close.rejected.connect(self.reject)

        lay = QVBoxLayout(self)
        lay.addLayout(form)
        lay.addWidget(self.status)
        lay.addWidget(self.table, 2)
        lay.addLayout(buttons)
        lay.addWidget(self.report, 1)
        lay.addWidget(caution)
        lay.addWidget(close)
        self.resize(900, 640)

        session.fitFinished.connect(self._new_fit)
        session.fitFailed.connect(lambda _m: self._show_status("The model does not fit: fix it."))
        self.measure()

    # --- settings and jobs ------------------------------------------------------------
    def settings(self) -> SearchSettings:
        return SearchSettings(
            folds=self.folds.value(), seed=self.seed.value(), max_lines=self.max_lines.value()
        )

    def _start(self, job) -> int:
        self._generation += 1
        task = Task(self._generation, job, self._signals)
        self._tasks = [t for t in self._tasks if t.generation >= self._generation - 1] + [task]
        self._pool.start(task)
        return self._generation

    def measure(self) -> None:
        """Rank every single change of the current model (on a pool thread)."""
        fit = self._session.fit
        self.ranking = None
        self.table.setRowCount(0)
        if fit is None or not self._session.fit_current:
            self._show_status("Waiting for a fit of the current model.")
            self._update_buttons()
            return
        self._show_status("Measuring every single change…")
        self._rank_generation = self._start(rank_job(fit, self.settings()))
        self._update_buttons()

    def _new_fit(self, _fit) -> None:
        if self.isVisible() and not self._searching:
            self.measure()

    def run_search(self) -> None:
        fit = self._session.fit
        if fit is None:
            return
        self._stop = threading.Event()
        self._searching = True
        self.result = None
        self.progress.setValue(0)
        self.report.setPlainText("")
        self._search_generation = self._start(search_job(fit, self.settings(), self._stop))
        self._update_buttons()

    def cancel_search(self) -> None:
        self._stop.set()

    # --- results ------------------------------------------------------------------------
    def _stage(self, generation: int, stage: str, payload) -> None:
        if stage == "progress" and generation == self._search_generation:
            fraction, message = payload
            self.progress.setValue(int(round(100 * fraction)))
            self.progress.setFormat(f"%p%  {message}")

    def _finished(self, generation: int, result) -> None:
        if isinstance(result, Ranking) and generation == self._rank_generation:
            if result.fit is self._session.fit:
                self._show_ranking(result)
        elif generation == self._search_generation:
            self._searching = False
            if result is None:  # cancelled
                self.progress.setValue(0)
                self.report.setPlainText("The search was cancelled; nothing was changed.")
            else:
                self.result = result
                self.progress.setValue(100)
                self.report.setPlainText(format_suggestion(result))
        self._update_buttons()

    def _failed(self, generation: int, message: str) -> None:
        if generation == self._search_generation:
            self._searching = False
            self.report.setPlainText(f"The search stopped: {message}")
        else:
            self._show_status(f"Could not measure the changes: {message}")
        self._update_buttons()

    def _show_ranking(self, ranking: Ranking) -> None:
        self.ranking = ranking
        r = ranking.fit.spec.response
        moves = ranking.moves[:MAX_ROWS]
        self.table.setRowCount(len(moves))
        for i, m in enumerate(moves):
            cells = (
                m.text(),
                error_text(m.rmse_after, r),
                signed_error(m.rmse_gain, r),
                error_text(m.rmse_se, r),
                fixed(m.gain_in_se, 1),
                m.why or ("a simpler model" if m.change == "drop" else ""),
            )
            faint = not self._measurable(m)
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if faint:  # below the search's threshold: shown, but greyed
                    item.setForeground(self.palette().color(QPalette.ColorRole.PlaceholderText))
                    item.setToolTip("Gains less than the search's threshold")
                if j in (1, 2, 3, 4):
                    item.setTextAlignment(
                        Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
                    )
                self.table.setItem(i, j, item)
        measurable = sum(1 for m in moves if self._measurable(m))
        self._show_status(
            f"{len(ranking.moves)} single changes of the current model, best first "
            f"(CV RMSE now {error_text(moves[0].rmse_before, r) if moves else '-'}); "
            f"{measurable} gain more than the search's threshold "
            f"({fixed(ranking.threshold, 1)} SE for an addition). Double-click or Apply to "
            "make one; Undo takes it back."
        )
        if moves:
            self.table.selectRow(0)

    def _measurable(self, m: Move) -> bool:
        if self.ranking is None:
            return False
        if m.simplifies:
            return m.gain > -m.se
        return m.gain > self.ranking.threshold * m.se

    def _show_status(self, text: str) -> None:
        self.status.setText(text)

    def _update_buttons(self) -> None:
        ready = self.ranking is not None and self.table.currentRow() >= 0
        self.apply_button.setEnabled(ready and not self._searching)
        self.search_button.setEnabled(self._session.fit is not None and not self._searching)
        self.cancel_button.setEnabled(self._searching)
        self.apply_search_button.setEnabled(self.result is not None and not self._searching)

    # --- applying ------------------------------------------------------------------------
    def apply_row(self, row: int) -> None:
        """Make the change on ``row`` through the session (one step of Undo)."""
        ranking = self.ranking
        if ranking is None or not 0 <= row < min(len(ranking.moves), MAX_ROWS):
            return
        spec = spec_after(ranking.fit.spec, ranking.problem, ranking.moves[row])
        self.ranking = None
        self.table.setRowCount(0)
        self._show_status("Applied; refitting…")
        self._session.set_model(spec)
        self._update_buttons()

    def apply_search(self) -> None:
        """Use the whole search's proposed model (one step of Undo)."""
        if self.result is None:
            return
        spec = self.result.proposed
        self.result = None
        self._session.set_model(spec)
        self._update_buttons()

    def done(self, code: int) -> None:  # closing stops a running search
        self._stop.set()
        super().done(code)

    def wait(self, timeout_ms: int = 10_000) -> bool:
        """Stop a running search and wait for the dialog's jobs to end."""
        self._stop.set()
        return self._pool.waitForDone(timeout_ms)
