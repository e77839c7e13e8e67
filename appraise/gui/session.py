"""The state of one valuation in the desktop app, and the only place that changes it.

Views take the :class:`Session` in their constructor, read its properties and
subscribe to its signals; the session never knows a view exists. Everything slow
(reading files, fitting, valuing, diagnostics) runs on a worker thread
(:mod:`appraise.gui.workers`). Each request carries a generation number; a result
whose generation is no longer current is dropped, so a stale fit never overwrites a
newer one and a cancelled load never lands.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Mapping
from dataclasses import replace
from pathlib import Path
from typing import Any

import pandas as pd
from PySide6.QtCore import QObject, QThreadPool, QTimer, Signal

from appraise.engine.diagnostics import Diagnostics, DiagnosticSettings
from appraise.engine.fitting import FitResult
from appraise.engine.importing import FORMATS
from appraise.engine.modelspec import ModelSpec
from appraise.engine.plausibility import effective_date_of, rules_at
from appraise.engine.roles import RoleMap
from appraise.engine.sales import ROW_COLUMN, Exclusion, SalesTable
from appraise.engine.settings import ImportSettings
from appraise.engine.valuation import Valuation
from appraise.engine.workfile import (
    WorkfileState,
    check_reproduced,
    import_settings_from_dict,
    load_workfile,
    make_state,
    path_to_confirm,
    restore,
    save_workfile,
)
from appraise.resources import sample_dir

from ..engine.comparables import ComparablesChoice
from .grid_runner import GridRunner, run_grid_job
from .workers import FitJob, LoadJob, LoadOutcome, Task, TaskSignals, run_fit_job, run_load_job

log = logging.getLogger(__name__)

SALES_SUFFIXES: tuple[str, ...] = tuple(FORMATS)
"""Every suffix the importer reads (one list: the engine's), for the open dialog and drops."""
WORKFILE_SUFFIX = ".appraise.json"
"""Workfiles are JSON; the double suffix tells them apart from other JSON at a glance."""
CHECK_SETTINGS_KEY = "checks"
"""Key of the model-check settings (trim, folds, seed, thresholds) in a workfile's settings."""

REFIT_DELAY_MS = 300
"""Edits within this many milliseconds of each other lead to one refit."""


def is_workfile(path: str | Path) -> bool:
    """Whether ``path`` names a workfile (by its name; the content is checked on reading)."""
    name = Path(path).name.lower()
    return name.endswith(WORKFILE_SUFFIX) or (
        name.endswith(".json") and not name.endswith("subject.json")
    )


def is_sales_file(path: str | Path) -> bool:
    return Path(path).suffix.lower() in SALES_SUFFIXES


def companion_files(sales_path: str | Path) -> tuple[Path | None, Path | None]:
    """A model file and a subject file lying beside a sales file, if any.

    For ``town_sales.csv`` the model is looked for as ``town_sales_model.toml``, then
    ``town_model.toml``; the subject as ``town_sales_subject.json``, ``town_subject.json``,
    then ``subject.json``.
    """
    p = Path(sales_path)
    stems = [p.stem]
    if p.stem.endswith("_sales") and len(p.stem) > len("_sales"):
        stems.append(p.stem[: -len("_sales")])

    def first(names: list[str]) -> Path | None:
        return next((p.parent / n for n in names if (p.parent / n).is_file()), None)

    model = first([f"{s}_model.toml" for s in stems])
    subject = first([f"{s}_subject.json" for s in stems] + ["subject.json"])
    return model, subject


def sample_sales_path() -> Path:
    """The shipped sample sales (an invented town); raises if not in a source checkout."""
    return sample_dir() / "ashcombe_sales.csv"


def starter_spec(sales: SalesTable) -> ModelSpec | None:
    """A first model for freshly loaded sales: price on living area, when both are mapped."""
    roles = sales.roles
    cols = sales.frame.columns
    if roles.column("price") not in cols:
        return None
    for role in ("living_area", "lot_area", "bedrooms"):
        if roles.column(role) in cols:
            return ModelSpec(target="price", features=(role,))
    return None


class Session(QObject):
    """One valuation: the sales, the model, the subject, and their results.

    Signals
    -------
    salesChanged(SalesTable | None)
        After a load, a role change or an import-settings change.
    modelChanged(ModelSpec), subjectChanged(dict)
    fitStarted(), fitFinished(FitResult), fitFailed(str)
        A failed fit keeps the user's model; ``fit`` becomes None.
    valuationChanged(Valuation | None), valuationFailed(str)
    diagnosticsChanged(Diagnostics | None)
    exclusionsChanged(), selectionChanged(int | None)
    loadStarted(str), loadFinished(str), loadFailed(str), loadCancelled()
    workfileChanged(str | None)
        The workfile the session was opened from or saved to.
    notice(str)
        A one-line remark for the status bar (for example a reproduction check).
    """

    salesChanged = Signal(object)
    modelChanged = Signal(object)
    subjectChanged = Signal(object)
    fitStarted = Signal()
    fitFinished = Signal(object)
    fitFailed = Signal(str)
    valuationChanged = Signal(object)
    valuationFailed = Signal(str)
    diagnosticsChanged = Signal(object)
    exclusionsChanged = Signal()
    selectionChanged = Signal(object)
    loadStarted = Signal(str)
    loadFinished = Signal(str)
    loadFailed = Signal(str)
    loadCancelled = Signal()
    loadProgress = Signal(int, str)  # percent done, what is being done
    workfileChanged = Signal(object)
    notice = Signal(str)
    comparablesChanged = Signal(object)  # ComparablesChoice: the sales-comparison choices
    gridChanged = Signal(object)  # Grid of the current fit and choices, or None
    gridFailed = Signal(str)  # why there is no grid (no effective date, too few sales...)

    def __init__(
        self,
        parent: QObject | None = None,
        *,
        import_settings: ImportSettings | None = None,
        refit_delay_ms: int = REFIT_DELAY_MS,
    ) -> None:
        super().__init__(parent)
        self._sales: SalesTable | None = None
        self._sales_path: Path | None = None
        self._rules_date: object = None  # the date the sales' dates were judged against
        self.confirm_sales_path: Callable[[Path], bool] | None = None
        """Asks the user whether a workfile's recorded sales path that is not a plain sales
        file may be read (set by the window; None: never read such a path)."""
        self._import_settings = import_settings or ImportSettings()
        self._spec: ModelSpec | None = None
        self._subject: dict = {}
        self._user_exclusions: tuple[Exclusion, ...] = ()
        self._fit: FitResult | None = None
        self._fit_inputs: tuple | None = None
        self._fit_error: str | None = None
        self._valuation: Valuation | None = None
        self._valuation_error: str | None = None
        self._diagnostics: Diagnostics | None = None
        self._diagnostic_settings = DiagnosticSettings()
        self._selection: int | None = None
        self._workfile_path: Path | None = None
        self._workfile_state: WorkfileState | None = None
        self._check_against: WorkfileState | None = None
        self._comparables = ComparablesChoice()
        self._grid: tuple | None = None  # (fit, Grid, candidates frame)
        self._grid_error: str | None = None
        self._grid_runner = GridRunner(self)
        self._grid_runner.done.connect(self._on_grid)
        self._grid_runner.failed.connect(self._on_grid_failed)
        self.valuationChanged.connect(lambda *_: self.refresh_grid())
        self.comparablesChanged.connect(lambda *_: self.refresh_grid())

        self._pool = QThreadPool(self)
        self._pool.setMaxThreadCount(2)  # a stale fit may finish while the new one runs
        self._generation = 0
        self._fitting = False  # a fit is on its way
        self._busy = False  # a fit or a revaluation is on its way
        self._fit_tasks: dict[int, Task] = {}
        self._fit_signals = TaskSignals(self)
        self._fit_signals.stage.connect(self._on_fit_stage)
        self._fit_signals.finished.connect(self._on_fit_done)
        self._fit_signals.failed.connect(self._on_fit_failed)

        self._load_generation = 0
        self._loading: str | None = None
        self._load_tasks: dict[int, Task] = {}
        self._load_kind: dict[int, str] = {}
        self._load_signals = TaskSignals(self)
        self._load_signals.finished.connect(self._on_load_done)
        self._load_signals.failed.connect(self._on_load_failed)
        self._load_signals.stage.connect(self._on_load_stage)
        self._load_cancel: dict[int, Callable[[], None]] = {}

        self._refit_timer = QTimer(self)
        self._refit_timer.setSingleShot(True)
        self._refit_timer.setInterval(refit_delay_ms)
        self._refit_timer.timeout.connect(self.refit_now)

    # --- read-only state ----------------------------------------------------------
    @property
    def comparables(self) -> ComparablesChoice:
        """The sales-comparison choices (effective date, filters, pins, weights), kept in the workfile."""
        return self._comparables

    def set_comparables(self, choice: ComparablesChoice) -> None:
        if choice != self._comparables:
            self._comparables = choice
            self.comparablesChanged.emit(choice)

    @property
    def sales(self) -> SalesTable | None:
        return self._sales

    @property
    def sales_path(self) -> Path | None:
        return self._sales_path

    @property
    def spec(self) -> ModelSpec | None:
        return self._spec

    @property
    def fit(self) -> FitResult | None:
        return self._fit

    @property
    def fit_error(self) -> str | None:
        """The message of the last failed fit, None after a successful one."""
        return self._fit_error

    @property
    def valuation(self) -> Valuation | None:
        return self._valuation

    @property
    def valuation_error(self) -> str | None:
        return self._valuation_error

    @property
    def diagnostics(self) -> Diagnostics | None:
        return self._diagnostics

    @property
    def diagnostic_settings(self) -> DiagnosticSettings:
        """How each fit is checked (thresholds, folds and seed, ratio-study trim)."""
        return self._diagnostic_settings

    @property
    def subject(self) -> dict:
        return dict(self._subject)

    @property
    def user_exclusions(self) -> tuple[Exclusion, ...]:
        return self._user_exclusions

    @property
    def import_settings(self) -> ImportSettings:
        return self._import_settings

    @property
    def workfile_path(self) -> Path | None:
        return self._workfile_path

    @property
    def selection(self) -> int | None:
        return self._selection

    @property
    def is_fitting(self) -> bool:
        """A refit is waiting for its delay or running, and its fit has not come back yet."""
        return self._fitting or self._refit_timer.isActive()

    @property
    def is_busy(self) -> bool:
        """Any refit or revaluation is waiting or running (results may still change)."""
        return self._busy or self._refit_timer.isActive()

    @property
    def is_loading(self) -> bool:
        return self._loading is not None

    @property
    def pending_tasks(self) -> int:
        """Worker tasks started and not yet reported back (stale ones included)."""
        return len(self._fit_tasks) + len(self._load_tasks) + self._grid_runner.pending

    @property
    def fit_current(self) -> bool:
        """The fit was made from the sales, model and exclusions as they are now."""
        return self._fit is not None and self._fit_inputs == self._inputs()

    @property
    def results_current(self) -> bool:
        """The fit (and valuation) were computed from the state as it is now."""
        return self.fit_current and not self.is_busy

    @property
    def grid(self):
        """The sales-comparison grid of the current fit, or None (not yet, or it failed)."""
        if self._grid is None or self._grid[0] is not self._fit:
            return None
        return self._grid[1]

    @property
    def grid_candidates(self):
        """The ranked candidates beside :attr:`grid` (a frame), or None."""
        return None if self.grid is None else self._grid[2]

    @property
    def grid_error(self) -> str | None:
        return self._grid_error

    def refresh_grid(self) -> None:
        """Rebuild the grid off the UI thread for the current fit, subject and choices."""
        fit = self._fit
        if fit is None or self._valuation is None:
            self._grid_runner.cancel()
            if self._grid is not None:
                self._grid = None
                self.gridChanged.emit(None)
            return
        subject, choice, settings = dict(self._subject), self._comparables, self._import_settings
        self._grid_runner.start(lambda: run_grid_job(fit, subject, choice, settings))

    def _on_grid(self, result: tuple) -> None:
        if result[0] is not self._fit:
            return  # a grid of an older fit
        self._grid, self._grid_error = result, None
        self.gridChanged.emit(result[1])

    def _on_grid_failed(self, message: str) -> None:
        self._grid, self._grid_error = None, message
        self.gridFailed.emit(message)
        self.gridChanged.emit(None)

    def exclusion_for(self, row: int) -> Exclusion | None:
        """Why file row ``row`` is left out (import, model or user), or None if it is used."""
        for e in self._user_exclusions:
            if e.row == row:
                return e
        if self.fit_current:
            for e in self._fit.excluded:
                if e.row == row:
                    return e
        if self._sales is not None:
            for e in self._sales.excluded:
                if e.row == row:
                    return e
        return None

    def sale_record(self, row: int) -> dict[str, Any] | None:
        """The values of the sale at file row ``row`` (for a hover or a tooltip)."""
        if self._sales is None:
            return None
        frame = self._sales.frame
        hit = frame.index[frame[ROW_COLUMN] == row]
        if len(hit) == 0:
            return None
        rec = frame.loc[hit[0]].to_dict()
        return {k: v for k, v in rec.items() if k != ROW_COLUMN} | {"row": row}

    # --- loading --------------------------------------------------------------------
    def load_sales(
        self,
        path: str | Path,
        *,
        roles: RoleMap | None = None,
        model_path: str | Path | None = None,
        subject_path: str | Path | None = None,
        expect_sha256: str | None = None,
    ) -> None:
        """Read a sales file on a worker (and a model and subject file with it, if given).

        A different file than the current one starts a new valuation: user exclusions,
        selection and workfile are cleared. The same file again (a role or settings
        change) keeps them. Sale dates are judged against the effective date (the
        subject's, else the model's; a subject or model file read with the sales wins).
        ``expect_sha256``: refuse the file if it is no longer the one read before.
        """
        job = LoadJob(
            Path(path),
            self._import_settings,
            roles,
            None if model_path is None else Path(model_path),
            None if subject_path is None else Path(subject_path),
            subject=dict(self._subject),
            model_date=None if self._spec is None else self._spec.effective_date,
            expect_sha256=expect_sha256,
        )
        self._start_load(
            "sales", str(path), lambda report: run_load_job(job, report), cancel=job.cancel.set
        )

    def load_with_companions(self, path: str | Path) -> None:
        """Read a sales file together with the model and subject files found beside it."""
        model, subject = companion_files(path)
        self.load_sales(path, model_path=model, subject_path=subject)

    def open_workfile(self, path: str | Path) -> None:
        """Read a workfile and everything it names on a worker, then refit and value.

        When the refit is done the numbers are compared with the ones the workfile
        stored; any difference is announced through :attr:`notice`.
        """
        p = Path(path)

        def job(report) -> tuple[WorkfileState, object, Path | None]:
            state = load_workfile(p)
            ask = path_to_confirm(state)
            if ask is not None:  # the user is asked on the UI thread first
                return state, None, ask
            return state, restore(state), None

        self._start_load("workfile", str(p), job)

    def _restore_confirmed(self, label: str, state: WorkfileState, ask: Path) -> None:
        """Ask about a recorded sales path that is not a plain sales file, then restore."""
        yes = self.confirm_sales_path is not None and bool(self.confirm_sales_path(ask))

        def job(report) -> tuple[WorkfileState, object, None]:
            return state, restore(state, confirm=(lambda q: q == ask) if yes else None), None

        self._start_load("workfile", label, job)

    def cancel_load(self) -> None:
        """Forget the load in progress; its result is dropped when it arrives."""
        if self._loading is None:
            return
        stop = self._load_cancel.pop(self._load_generation, None)
        if stop is not None:
            stop()  # the reader stops at its next step instead of running to the end
        self._load_generation += 1
        self._loading = None
        self.loadCancelled.emit()

    def _start_load(self, kind: str, label: str, job, *, cancel=None) -> None:
        self._load_generation += 1
        gen = self._load_generation
        if cancel is not None:
            self._load_cancel[gen] = cancel
        task = Task(gen, job, self._load_signals)
        self._load_tasks[gen] = task
        self._load_kind[gen] = kind
        self._loading = label
        self.loadStarted.emit(label)
        self._pool.start(task)

    def _on_load_stage(self, gen: int, stage: str, payload: object) -> None:
        if gen == self._load_generation and stage == "progress":
            fraction, message = payload
            self.loadProgress.emit(round(100 * fraction), message)

    def _on_load_failed(self, gen: int, message: str) -> None:
        self._load_cancel.pop(gen, None)
        self._load_tasks.pop(gen, None)
        self._load_kind.pop(gen, None)
        if gen != self._load_generation:
            return
        self._loading = None
        self.loadFailed.emit(message)

    def _on_load_done(self, gen: int, result: object) -> None:
        self._load_cancel.pop(gen, None)
        self._load_tasks.pop(gen, None)
        kind = self._load_kind.pop(gen, None)
        if gen != self._load_generation:
            return
        label = self._loading or ""
        self._loading = None
        if kind == "workfile":
            state, restored, ask = result
            if ask is not None:
                self._restore_confirmed(label, state, ask)
                return
            self._adopt_workfile(Path(label), state, restored)
        else:
            assert isinstance(result, LoadOutcome)
            self._adopt_sales(result)
        self.loadFinished.emit(label)

    def _adopt_sales(self, outcome: LoadOutcome) -> None:
        sales = outcome.sales
        path = Path(sales.source.path)
        same_file = self._sales_path is not None and _same_path(path, self._sales_path)
        self._sales = sales
        self._sales_path = path
        self._rules_date = outcome.reference_date
        self._invalidate_results()
        if not same_file:
            self._user_exclusions = ()
            self._selection = None
            self._set_workfile(None, None)
        if outcome.spec is not None:
            self._spec = outcome.spec
            self.modelChanged.emit(self._spec)
        elif self._spec is None:
            self._spec = starter_spec(sales)
            if self._spec is not None:
                self.modelChanged.emit(self._spec)
        if outcome.subject is not None:
            self._subject = dict(outcome.subject)
            self.subjectChanged.emit(self.subject)
        self.salesChanged.emit(sales)
        if not same_file:
            self.exclusionsChanged.emit()
            self.selectionChanged.emit(None)
        self.refit_now()

    def _adopt_workfile(self, path: Path, state: WorkfileState, restored) -> None:
        self._sales = restored.sales
        self._sales_path = Path(restored.sales.source.path)
        self._import_settings = import_settings_from_dict(
            state.import_settings, source=state.location
        )
        self._spec = restored.spec
        self._subject = dict(restored.subject)
        self._rules_date = self._effective_reference()  # as restore judged the sale dates
        self._user_exclusions = tuple(restored.user_exclusions)
        self._comparables = ComparablesChoice.from_dict(state.comparables)
        self.comparablesChanged.emit(self._comparables)
        checks = (state.settings or {}).get(CHECK_SETTINGS_KEY)
        if checks is not None:
            self._diagnostic_settings = DiagnosticSettings.from_dict(dict(checks))
        self._selection = None
        self._invalidate_results()
        self._set_workfile(path, state)
        self._check_against = state
        self.salesChanged.emit(self._sales)
        self.modelChanged.emit(self._spec)
        self.subjectChanged.emit(self.subject)
        self.exclusionsChanged.emit()
        self.selectionChanged.emit(None)
        for note in restored.sales.notes:
            if "embedded" in note:
                self.notice.emit(note)
        for note in state.recovered:  # what an interrupted save left, and what became of it
            self.notice.emit(note)
        self.refit_now()

    # --- saving ----------------------------------------------------------------------
    def save_workfile(
        self,
        path: str | Path,
        *,
        settings: Mapping[str, Any] | None = None,
        embed: bool = True,
    ) -> Path:
        """Write the workfile (atomically) and remember it as the session's workfile.

        The last results are stored only when they belong to the state being saved,
        so a reopened workfile can prove it reproduces them.
        """
        if self._sales is None or self._spec is None:
            raise RuntimeError("nothing to save: load sales and set a model first")
        current = self.results_current
        p = Path(path)
        settings = {**dict(settings or {}), CHECK_SETTINGS_KEY: self._diagnostic_settings.to_dict()}
        state = make_state(
            sales=self._sales,
            spec=self._spec,
            subject=self._subject,
            import_settings=self._import_settings,
            user_exclusions=self._user_exclusions,
            settings=settings,
            fit=self._fit if current else None,
            valuation=self._valuation if current else None,
            workfile_path=p,
            embed=embed,
            previous=self._workfile_state,
            comparables=self._comparables.to_dict(),
        )
        written = save_workfile(p, state)
        self._set_workfile(p, written)
        return p

    def _set_workfile(self, path: Path | None, state: WorkfileState | None) -> None:
        changed = path != self._workfile_path
        self._workfile_path = path
        self._workfile_state = state
        if changed:
            self.workfileChanged.emit(None if path is None else str(path))

    # --- edits -----------------------------------------------------------------------
    def set_import_settings(self, settings: ImportSettings) -> None:
        """Change how sales are read; loaded sales are read again with the new settings."""
        if settings == self._import_settings:
            return
        self._import_settings = settings
        if self._sales_path is not None and self._sales is not None:
            self.load_sales(self._sales_path, roles=self._sales.roles)

    def set_roles(self, roles: RoleMap) -> None:
        """Map columns to roles; the sales are read again with the new map."""
        if self._sales is None or self._sales_path is None:
            return
        if dict(roles.columns) == dict(self._sales.roles.columns):
            return
        self.load_sales(self._sales_path, roles=roles)

    def set_model(self, spec: ModelSpec) -> None:
        """Replace the model; a refit follows after a short pause."""
        if spec == self._spec:
            return
        self._spec = spec
        self.modelChanged.emit(spec)
        if not self._recheck_sale_dates():
            self.request_refit()

    def set_subject(self, subject: Mapping[str, Any]) -> None:
        """Replace the subject's attributes; the subject is valued again after a short pause."""
        new = dict(subject)
        if new == self._subject:
            return
        self._subject = new
        self.subjectChanged.emit(self.subject)
        if not self._recheck_sale_dates():
            self.request_refit()

    def _effective_reference(self):
        """The date sale dates are judged against now (None: today)."""
        model_date = None if self._spec is None else self._spec.effective_date
        return rules_at(effective_date_of(self._subject, model_date)).reference_date

    def _dates_affected(self, when) -> bool:
        """Whether judging the sale dates against ``when`` could change which sales are
        used: a used sale lies after its limit, or a sale was excluded as too late."""
        sales = self._sales
        col = sales.roles.column("sale_date")
        if col is None or col not in sales.frame.columns:
            return False
        latest = pd.Timestamp(rules_at(when).latest_sale())
        dates = pd.to_datetime(sales.frame[col], errors="coerce")
        if bool((dates > latest).any()):
            return True
        return any(
            e.column == col and e.reason.startswith("sale date '") and "' is after " in e.reason
            for e in sales.excluded
        )

    def _recheck_sale_dates(self) -> bool:
        """Read the sales again when the effective date moved (the plausibility rule for
        sales after it must follow); True when a read was started (it refits after)."""
        if self._sales is None or self._sales_path is None or self._loading is not None:
            return False
        when = self._effective_reference()
        if when == self._rules_date:
            return False
        if not self._dates_affected(when):
            self._rules_date = when  # no sale is on the other side of the new limit
            return False
        if not self._sales_path.is_file():
            self.notice.emit(
                f"The effective date is now {when or 'today'}, but the sales file "
                f"{self._sales_path} is not at hand: its sale dates were checked against "
                f"{self._rules_date or 'the day it was read'} and are not checked again."
            )
            self._rules_date = when
            return False
        self.load_sales(
            self._sales_path, roles=self._sales.roles, expect_sha256=self._sales.source.sha256
        )
        return True

    def set_diagnostic_settings(self, settings: DiagnosticSettings) -> None:
        """Check fits with ``settings``; the current fit is checked again, not refitted."""
        if settings == self._diagnostic_settings:
            return
        self._diagnostic_settings = settings
        self.refit_now()

    def exclude_sale(self, row: int, reason: str) -> None:
        """Leave the sale at file row ``row`` out of the model, for ``reason``."""
        reason = reason.strip()
        if not reason:
            raise ValueError("an exclusion needs a reason")
        if self._sales is None:
            return
        if self.sale_record(row) is None:
            raise ValueError(f"file row {row} is not among the sales read")
        sid = self.sale_id(row)
        kept = tuple(e for e in self._user_exclusions if e.row != row)
        self._user_exclusions = (*kept, Exclusion(row, sid, reason, None, "user"))
        self.exclusionsChanged.emit()
        self.request_refit()

    def include_sale(self, row: int) -> None:
        """Use the sale at file row ``row`` again (a user's or the model file's exclusion)."""
        changed = False
        kept = tuple(e for e in self._user_exclusions if e.row != row)
        if len(kept) != len(self._user_exclusions):
            self._user_exclusions = kept
            changed = True
        spec = self._spec
        sid = self.sale_id(row)
        if spec is not None and sid is not None and spec.exclude:
            remaining = tuple(e for e in spec.exclude if e.sale_id != sid)
            if len(remaining) != len(spec.exclude):
                self._spec = replace(spec, exclude=remaining)
                self.modelChanged.emit(self._spec)
                changed = True
        if changed:
            self.exclusionsChanged.emit()
            self.request_refit()

    def set_user_exclusions(self, exclusions: tuple[Exclusion, ...]) -> None:
        """Replace the user's exclusions as a whole (what undo and redo put back)."""
        exclusions = tuple(exclusions)
        if exclusions == self._user_exclusions:
            return
        self._user_exclusions = exclusions
        self.exclusionsChanged.emit()
        self.request_refit()

    def can_include(self, row: int) -> bool:
        """Whether the sale at ``row`` was left out by the user or by the model file's list."""
        if any(e.row == row for e in self._user_exclusions):
            return True
        sid = self.sale_id(row)
        return (
            sid is not None
            and self._spec is not None
            and any(e.sale_id == sid for e in self._spec.exclude)
        )

    def sale_id(self, row: int) -> str | None:
        """The sale id of file row ``row`` (None without a sale-id column)."""
        rec = self.sale_record(row)
        id_col = self._sales.roles.column("sale_id") if self._sales is not None else None
        if rec is None or id_col is None:
            return None
        value = rec.get(id_col)
        return None if value is None or value != value else str(value)

    def select_sale(self, row: int | None) -> None:
        if row == self._selection:
            return
        self._selection = row
        self.selectionChanged.emit(row)

    # --- fitting ---------------------------------------------------------------------
    def request_refit(self) -> None:
        """Refit after :data:`REFIT_DELAY_MS`; another request within it restarts the wait."""
        self._refit_timer.start()

    def refit_now(self) -> None:
        """Start the refit (or, when only the subject changed, the revaluation) now."""
        self._refit_timer.stop()
        if self._sales is None or self._spec is None:
            return
        self._generation += 1
        gen = self._generation
        for old_gen, task in list(self._fit_tasks.items()):
            if self._pool.tryTake(task):  # not started yet: it never will be
                del self._fit_tasks[old_gen]
        inputs = self._inputs()
        reuse = self._fit if self._fit is not None and self._fit_inputs == inputs else None
        checked = self._diagnostics
        job = FitJob(
            sales=self._sales,
            spec=self._spec,
            user_exclusions=self._user_exclusions,
            subject=dict(self._subject),
            import_settings=self._import_settings,
            reuse=reuse,
            diagnostic_settings=self._diagnostic_settings,
            # a reused fit is checked again when its check is missing (an earlier job's
            # check was overtaken) or was made with other settings
            recheck=reuse is not None
            and (checked is None or checked.settings != self._diagnostic_settings),
        )
        task = Task(gen, lambda report: run_fit_job(job, report), self._fit_signals)
        self._fit_tasks[gen] = task
        self._pending_inputs = inputs
        self._busy = True
        self._fitting = reuse is None
        if reuse is None:
            self.fitStarted.emit()
        self._pool.start(task)

    def _inputs(self) -> tuple:
        return (id(self._sales), self._spec, self._user_exclusions)

    def _on_fit_stage(self, gen: int, stage: str, payload: object) -> None:
        if gen != self._generation:
            return
        if stage == "fit":
            self._fitting = False
            self._fit = payload
            self._fit_inputs = self._pending_inputs
            self._fit_error = None
            self._diagnostics = None
            self.fitFinished.emit(payload)
        elif stage == "valuation":
            self._valuation = payload
            self._valuation_error = None
            self.valuationChanged.emit(payload)
            self._check_reproduction()
        elif stage == "valuation_error":
            self._valuation = None
            self._valuation_error = str(payload)
            self.valuationFailed.emit(str(payload))
            self.valuationChanged.emit(None)
            self._check_reproduction()
        elif stage == "diagnostics":
            self._diagnostics = payload
            self.diagnosticsChanged.emit(payload)

    def _on_fit_done(self, gen: int, _result: object) -> None:
        self._fit_tasks.pop(gen, None)
        if gen == self._generation:
            self._fitting = self._busy = False

    def _on_fit_failed(self, gen: int, message: str) -> None:
        self._fit_tasks.pop(gen, None)
        if gen != self._generation:
            return
        self._fitting = self._busy = False
        if self._fit is not None and self._fit_inputs == self._pending_inputs:
            # the fit itself succeeded; what came after it (diagnostics) did not
            self._diagnostics = None
            self.diagnosticsChanged.emit(None)
            self.notice.emit(f"diagnostics could not be computed: {message}")
            return
        self._fit = None
        self._fit_inputs = None
        self._fit_error = message
        self._valuation = None
        self._diagnostics = None
        self.fitFailed.emit(message)
        self.valuationChanged.emit(None)
        self.diagnosticsChanged.emit(None)

    def _invalidate_results(self) -> None:
        self._fit_inputs = None

    def _check_reproduction(self) -> None:
        state = self._check_against
        if state is None or self._fit is None:
            return
        self._check_against = None
        diffs = check_reproduced(state, self._fit, self._valuation)
        if diffs:
            self.notice.emit(
                f"reopened workfile: {len(diffs)} number(s) differ from the saved results "
                f"(first: {diffs[0]})"
            )
        elif state.last_results is not None:
            self.notice.emit("reopened workfile: the saved results were reproduced exactly")

    # --- shutting down ---------------------------------------------------------------
    def shutdown(self, timeout_ms: int = 120_000) -> None:
        """Stop timers, drop pending work, stop running reads and wait for tasks to end.

        Nothing of the session may be destroyed while a pool thread still reports to it.
        """
        self._refit_timer.stop()
        self._generation += 1
        self._load_generation += 1
        for stop in list(self._load_cancel.values()):
            stop()  # a read stops at its next progress step
        self._load_cancel.clear()
        self._pool.clear()
        self._pool.waitForDone(timeout_ms)
        self._grid_runner.cancel()
        self._grid_runner.wait(timeout_ms)
        self._fit_tasks.clear()
        self._load_tasks.clear()


def _same_path(a: Path, b: Path) -> bool:
    try:
        return a.resolve() == b.resolve()
    except OSError:
        return a == b
