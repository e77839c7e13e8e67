"""The sales-comparison grid computed off the UI thread.

:class:`GridRunner` runs :func:`appraise.pipeline.grid` on a pool of its own, one job at a
time; a newer request overtakes one that has not started. The session owns one runner, so
the Comparables tab and the worksheet show the same grid.
"""

from __future__ import annotations

from PySide6.QtCore import QObject, QThreadPool, Signal

from appraise import pipeline
from appraise.engine.comparables import ComparablesChoice
from appraise.engine.grid import GridLimits
from appraise.report.cautions import ONE_LINE_CAUTION

from .workers import Task, TaskSignals


def run_grid_job(fit, subject: dict, choice: ComparablesChoice, import_settings) -> tuple:
    """The pool-thread job: ``(fit, Grid, candidates frame)`` for ``choice``."""
    grid, table = pipeline.grid(
        fit,
        subject,
        effective_date=choice.effective_date or None,
        import_settings=import_settings,
        selection=choice.filters,
        pinned=choice.pinned,
        comps=choice.chosen,
        weights=choice.weights,
        limits=GridLimits(choice.net_limit, choice.gross_limit),
        comments=dict(choice.comments),
        caution=ONE_LINE_CAUTION,
    )
    return fit, grid, table


class GridRunner(QObject):
    """Runs grid jobs one after another on its own pool; a newer request overtakes."""

    done = Signal(object)  # (fit, Grid, candidates frame)
    failed = Signal(str)

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(1)
        self._signals = TaskSignals(self)
        self._signals.finished.connect(self._finished)
        self._signals.failed.connect(self._failed)
        self._generation = 0
        self._tasks: dict[int, Task] = {}

    @property
    def pending(self) -> int:
        """Jobs started and not yet reported back."""
        return len(self._tasks)

    def _drop_waiting(self) -> None:
        for gen, task in list(self._tasks.items()):
            if self._pool.tryTake(task):
                del self._tasks[gen]

    def start(self, job) -> None:
        self._generation += 1
        self._drop_waiting()
        task = Task(self._generation, lambda report: job(), self._signals)
        self._tasks[self._generation] = task
        self._pool.start(task)

    def cancel(self) -> None:
        """Drop every job waiting; a running one's result is ignored."""
        self._generation += 1
        self._drop_waiting()

    def _finished(self, gen: int, result: object) -> None:
        self._tasks.pop(gen, None)
        if gen == self._generation and result is not None:
            self.done.emit(result)

    def _failed(self, gen: int, message: str) -> None:
        self._tasks.pop(gen, None)
        if gen == self._generation:
            self.failed.emit(message)

    def wait(self, ms: int = 10_000) -> None:
        self._pool.waitForDone(ms)
        self._tasks.clear()
