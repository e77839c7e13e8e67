"""Work that must not run on the UI thread: reading a sales file, fitting, valuing.

The jobs themselves are plain functions of frozen inputs (:func:`run_fit_job`,
:func:`run_load_job`); they know nothing of Qt and can be called directly. A
:class:`Task` runs one of them on a :class:`~PySide6.QtCore.QThreadPool` thread and
reports through a :class:`TaskSignals` object that lives on the UI thread, so the
session receives every result there (queued connection). Each task carries the
generation number it was started for; the session drops any report whose generation
is no longer current, which is how a stale fit or a cancelled load is discarded.
"""

from __future__ import annotations

import datetime as dt
import logging
import threading
import traceback
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from PySide6.QtCore import QObject, QRunnable, Signal

from appraise import pipeline
from appraise.engine.diagnostics import DiagnosticSettings
from appraise.engine.errors import AppraiseError, Cancelled, DataError
from appraise.engine.fitting import FitResult
from appraise.engine.modelspec import ModelSpec
from appraise.engine.plausibility import effective_date_of, rules_at
from appraise.engine.roles import RoleMap
from appraise.engine.sales import Exclusion, SalesTable
from appraise.engine.settings import ImportSettings
from appraise.engine.subject import read_subject_attributes
from appraise.engine.valuation import Valuation

log = logging.getLogger(__name__)

Report = pipeline.Report


# --- the jobs (no Qt) ----------------------------------------------------------
@dataclass(frozen=True)
class FitJob:
    """Everything one refit needs, frozen at the moment it was asked for.

    ``reuse`` is a fit already made from the same sales, spec and exclusions: the
    job then only values the subject (a subject edit does not refit), and checks the
    fit again only when ``recheck`` is set (the check settings changed).
    """

    sales: SalesTable
    spec: ModelSpec
    user_exclusions: tuple[Exclusion, ...] = ()
    subject: Mapping[str, Any] = field(default_factory=dict)
    import_settings: ImportSettings = ImportSettings()
    reuse: FitResult | None = None
    diagnostic_settings: DiagnosticSettings = DiagnosticSettings()
    recheck: bool = False


def run_fit_job(job: FitJob, report: Report) -> None:
    """The pipeline's :func:`~appraise.pipeline.analyse` for one refit.

    Reports, in this order: ``("fit", FitResult)`` (new fits only);
    ``("valuation", Valuation | None)`` or ``("valuation_error", message)``;
    ``("diagnostics", Diagnostics)`` (new fits, or a reused one with ``recheck``).
    A failing fit raises; the task turns that into a ``failed`` report.
    """
    checks = job.reuse is None or job.recheck

    def reported(stage: str, payload: object) -> None:
        if stage == "fit":  # here, not on the window's thread: a million-sale median
            for g in payload.design.groups:  # type: ignore[attr-defined]
                if g.kind == "poly" and g.columns:
                    payload.design_median(g.columns[0])  # type: ignore[attr-defined]
        report(stage, payload)

    pipeline.analyse(
        job.sales,
        job.spec,
        subject=dict(job.subject),
        import_settings=job.import_settings,
        user_exclusions=job.user_exclusions,
        diagnostics=job.diagnostic_settings if checks else None,
        reuse=job.reuse,
        report=reported,
        strict_subject=False,
    )


def value_job_subject(
    fit: FitResult, subject: Mapping[str, Any], settings: ImportSettings
) -> Valuation | None:
    """The subject's valuation under ``fit``; None while no attribute is filled in."""
    return pipeline.value(fit, subject, settings)


@dataclass(frozen=True)
class LoadJob:
    """Read a sales file, and optionally a model file and a subject file beside it."""

    path: Path
    settings: ImportSettings = ImportSettings()
    roles: RoleMap | None = None
    model_path: Path | None = None
    subject_path: Path | None = None
    cancel: threading.Event = field(default_factory=threading.Event, compare=False)
    """Set (from any thread) to stop the read at its next progress step."""
    subject: Mapping[str, Any] | None = None
    """The subject now in the window (its effective date dates the plausibility rules
    unless a subject file comes with the sales)."""
    model_date: object = None
    """The effective date of the model now in the window (likewise)."""
    expect_sha256: str | None = None
    """The file must still be the one read before (a re-read, not a new valuation)."""


@dataclass(frozen=True)
class LoadOutcome:
    sales: SalesTable
    spec: ModelSpec | None = None
    subject: dict | None = None
    reference_date: dt.date | None = None  # sale dates were judged against it (None: today)


def run_load_job(job: LoadJob, report: Report) -> LoadOutcome:
    """Read the files of ``job``; companion files that fail raise like the sales file."""

    def progress(fraction: float, message: str) -> None:
        if job.cancel.is_set():
            raise Cancelled(f"reading {job.path.name} was cancelled")
        report("progress", (fraction, message))

    spec = pipeline.read_model(job.model_path) if job.model_path is not None else None
    subject = (
        read_subject_attributes(job.subject_path, job.settings)
        if job.subject_path is not None
        else None
    )
    when = effective_date_of(
        subject if subject is not None else job.subject,
        spec.effective_date if spec is not None else job.model_date,
    )
    rules = rules_at(when)  # sales after the date of value (plus the margin) are implausible
    sales = pipeline.load(job.path, job.settings, job.roles, progress=progress, rules=rules)
    if job.expect_sha256 is not None and sales.source.sha256 != job.expect_sha256:
        raise DataError(
            "the file has changed since it was read (its SHA-256 differs); open it again "
            "to start a new valuation with it",
            file=str(job.path),
        )
    sales.medians  # noqa: B018 - computed here, on the pool thread, not by the subject form
    return LoadOutcome(sales, spec, subject, rules.reference_date)


# --- running a job on a pool thread ----------------------------------------------
class TaskSignals(QObject):
    """Reports of a :class:`Task`, each tagged with the task's generation.

    Created on the UI thread; signals emitted from the pool thread are queued to it.
    """

    started = Signal(int)
    stage = Signal(int, str, object)
    finished = Signal(int, object)
    failed = Signal(int, str)


class Task(QRunnable):
    """Run ``job(report)`` on a pool thread; never touches a widget.

    A user error (:class:`AppraiseError`) becomes a one-line ``failed`` message; any
    other exception too, prefixed with its type, and its traceback goes to the log.
    """

    def __init__(
        self, generation: int, job: Callable[[Report], object], signals: TaskSignals
    ) -> None:
        super().__init__()
        self.setAutoDelete(False)  # the session keeps the Python object alive
        self.generation = generation
        self._job = job
        self.signals = signals

    def run(self) -> None:  # runs on the pool thread
        gen = self.generation
        self.signals.started.emit(gen)
        try:
            result = self._job(lambda stage, payload: self.signals.stage.emit(gen, stage, payload))
        except Cancelled:
            self.signals.finished.emit(gen, None)  # the session has moved on; dropped there
        except AppraiseError as exc:
            self.signals.failed.emit(gen, str(exc))
        except Exception as exc:  # noqa: BLE001 - a worker must report, never die silently
            log.error("background task failed:\n%s", traceback.format_exc())
            self.signals.failed.emit(gen, f"unexpected {type(exc).__name__}: {exc}")
        else:
            self.signals.finished.emit(gen, result)
