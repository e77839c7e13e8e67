"""The workbench window: data on the left, the model in the middle, the subject on the right.

The window only arranges views and routes commands; the state lives in the
:class:`~appraise.gui.session.Session`, the commands in
:class:`~appraise.gui.actions.Actions`.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QFileInfo, Qt, QTimer
from PySide6.QtGui import QCloseEvent, QDragEnterEvent, QDropEvent, QGuiApplication
from PySide6.QtWidgets import (
    QDockWidget,
    QFileDialog,
    QLabel,
    QMainWindow,
    QMenu,
    QMessageBox,
    QProgressDialog,
    QScrollArea,
    QSplitter,
    QStackedWidget,
    QTabWidget,
    QWidget,
)

from appraise import __version__
from appraise.report.cautions import FULL_CAUTIONS, STATUS_CAUTION
from appraise.report.numbers import number

from .actions import Actions
from .comparables_view import ComparablesView
from .diagnostics_view import DiagnosticsView
from .help_view import HelpView
from .model_editor import ModelEditor
from .model_file import ModelFileCommands
from .plots import PlotsView
from .preferences import Preferences
from .regions_view import RegionsView
from .results_view import ResultsView
from .roles_view import RolesView
from .sales_view import ExclusionLogView, SalesView, exclude_with_reason
from .session import (
    SALES_SUFFIXES,
    WORKFILE_SUFFIX,
    Session,
    companion_files,
    is_sales_file,
    is_workfile,
    sample_sales_path,
)
from .settings_dialog import SettingsDialog
from .start_page import StartPage
from .subject_view import SubjectView
from .undo import SessionHistory
from .worksheet_view import WorksheetView

OPEN_FILTER = (
    f"Sales or workfiles (*{' *'.join(SALES_SUFFIXES)} *.json);;"
    f"Sales files (*{' *'.join(SALES_SUFFIXES)});;Workfiles (*{WORKFILE_SUFFIX} *.json)"
)
SALES_FILTER = f"Sales files (*{' *'.join(SALES_SUFFIXES)})"
WORKFILE_FILTER = f"Workfiles (*{WORKFILE_SUFFIX} *.json)"
LOAD_DIALOG_DELAY_MS = 400
NOT_VALUED = "Subject not valued"
PREFERRED_SIZE = (1400, 860)
DOCK_MIN_WIDTH = {"data": 300, "subject": 270}
"""The window's size on a screen large enough for it."""


class CentreTabs(QTabWidget):
    """The centre's tabs; a wide view scrolls inside its tab instead of widening the
    window or squeezing the side panels."""

    def add_scrolling(self, view: QWidget, label: str) -> int:
        area = QScrollArea()
        area.setWidgetResizable(True)
        area.setFrameShape(QScrollArea.Shape.NoFrame)
        area.setWidget(view)
        return self.addTab(area, label)

    def setCurrentWidget(self, widget: QWidget) -> None:  # noqa: N802 (Qt's name)
        """Show the tab of ``widget``, also when it sits in a scrolling tab."""
        for i in range(self.count()):
            page = self.widget(i)
            if page is widget or (isinstance(page, QScrollArea) and page.widget() is widget):
                self.setCurrentIndex(i)
                return
        super().setCurrentWidget(widget)


class MainWindow(QMainWindow):
    """The appraise workbench for one session."""

    def __init__(self, session: Session, prefs: Preferences, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self.prefs = prefs
        self.setWindowTitle("appraise[*]")
        self.setAcceptDrops(True)
        self._fit_to_screen()
        self.actions_ = Actions(self)

        # views
        self.sales_view = SalesView(session)
        self.roles_view = RolesView(session)
        self.exclusion_log = ExclusionLogView(session)
        self.model_editor = ModelEditor(session)
        self.results_view = ResultsView(session)
        self.subject_view = SubjectView(session)
        self.subject_view.set_currency(prefs.get("currency_symbol"))
        self.plots_view = PlotsView(session)
        self.worksheet_view = WorksheetView(session, currency=prefs.get("currency_symbol"))
        self.diagnostics_view = DiagnosticsView(session, currency=prefs.get("currency_symbol"))

        self.data_tabs = QTabWidget()
        self.data_tabs.addTab(self.sales_view, "&Sales")
        self.data_tabs.addTab(self.roles_view, "Column &roles")
        self.data_tabs.addTab(self.exclusion_log, "&Left out")
        self.data_dock = self._dock("Data", self.data_tabs, Qt.DockWidgetArea.LeftDockWidgetArea)
        self.subject_dock = self._dock(
            "Subject", self.subject_view, Qt.DockWidgetArea.RightDockWidgetArea
        )
        # side panels keep a readable width whatever the centre shows (the checks and the
        # worksheet are wide: they scroll rather than squeeze the panels)
        self.data_tabs.setMinimumWidth(DOCK_MIN_WIDTH["data"])
        self.subject_view.setMinimumWidth(DOCK_MIN_WIDTH["subject"])
        wide = self.width() >= 1300
        self.resizeDocks(
            [self.data_dock, self.subject_dock],
            [460 if wide else 330, 320 if wide else 290],
            Qt.Orientation.Horizontal,
        )

        model_split = QSplitter(Qt.Orientation.Vertical)
        model_split.addWidget(self.model_editor)
        model_split.addWidget(self.results_view)
        model_split.setStretchFactor(0, 1)
        model_split.setStretchFactor(1, 1)
        self.centre_tabs = CentreTabs()
        self.centre_tabs.addTab(model_split, "&Model")
        self.centre_tabs.addTab(self.plots_view, "&Plots")
        self.centre_tabs.add_scrolling(self.diagnostics_view, "&Checks")
        self.comparables_view = ComparablesView(self.session)
        self.centre_tabs.addTab(self.comparables_view, "C&omparables")
        self.regions_view = RegionsView(self.session)
        self.centre_tabs.addTab(self.regions_view, "&Neighbourhoods")
        self.centre_tabs.add_scrolling(self.worksheet_view, "&Worksheet")
        # the start page stands in for the tabs (and the side panels) until sales are loaded
        self.start_page = StartPage(prefs)
        self.centre_stack = QStackedWidget()
        self.centre_stack.addWidget(self.start_page)
        self.centre_stack.addWidget(self.centre_tabs)
        self.setCentralWidget(self.centre_stack)
        self.help_view: HelpView | None = None

        # status bar
        self.rows_label = QLabel()
        self.fit_label = QLabel()
        self.caution_label = QLabel(STATUS_CAUTION)
        self.caution_label.setToolTip(FULL_CAUTIONS[0][1])
        bar = self.statusBar()
        bar.addPermanentWidget(self.rows_label)
        bar.addPermanentWidget(self.fit_label)
        bar.addPermanentWidget(self.caution_label)

        # undo and redo of every change to the model, roles, exclusions and subject
        self.history = SessionHistory(session, self)
        self.model_file = ModelFileCommands(session, self, prefs.get("currency_symbol"))
        self.undo_action, self.redo_action = self.history.make_actions(self)
        self._build_menus()
        self._connect()
        self._progress: QProgressDialog | None = None
        self._progress_done: tuple[int, str] | None = None
        self._progress_timer = QTimer(self)
        self._progress_timer.setSingleShot(True)
        self._progress_timer.setInterval(LOAD_DIALOG_DELAY_MS)
        self._progress_timer.timeout.connect(self._show_progress)
        self.update_status()
        self.update_actions()
        self._show_start_or_work()

    def _dock(self, title: str, widget: QWidget, area: Qt.DockWidgetArea) -> QDockWidget:
        dock = QDockWidget(title, self)
        dock.setObjectName(f"dock_{title.lower()}")
        dock.setWidget(widget)
        dock.setFeatures(
            QDockWidget.DockWidgetFeature.DockWidgetMovable
            | QDockWidget.DockWidgetFeature.DockWidgetFloatable
            | QDockWidget.DockWidgetFeature.DockWidgetClosable
        )
        self.addDockWidget(area, dock)
        return dock

    # --- menus -------------------------------------------------------------------------
    def _build_menus(self) -> None:
        a = self.actions_
        bar = self.menuBar()
        file_menu = bar.addMenu("&File")
        file_menu.addAction(a.open)
        self.recent_menu = file_menu.addMenu("Open &recent")
        file_menu.addAction(a.open_sample)
        file_menu.addSeparator()
        file_menu.addAction(a.save)
        file_menu.addAction(a.save_as)
        file_menu.addSeparator()
        file_menu.addAction(a.print)
        file_menu.addSeparator()
        file_menu.addAction(a.quit)

        edit_menu = bar.addMenu("&Edit")
        edit_menu.addAction(self.undo_action)
        edit_menu.addAction(self.redo_action)
        edit_menu.addSeparator()
        edit_menu.addAction(a.find)
        edit_menu.addAction(a.exclude)
        edit_menu.addAction(a.include)
        edit_menu.addSeparator()
        edit_menu.addAction(a.preferences)

        model_menu = bar.addMenu("&Model")
        model_menu.addAction(a.refit)
        model_menu.addSeparator()
        for act in (
            self.model_file.open,
            self.model_file.save,
            self.model_file.save_as,
            self.model_file.compare,
        ):
            model_menu.addAction(act)
        model_menu.addSeparator()
        for text, slot in (
            ("Insert &polynomial…", self.model_editor.insert_polynomial),
            ("Insert &interaction…", self.model_editor.insert_interaction),
            ("Insert &ratio…", self.model_editor.insert_ratio),
            ("Insert region &indicators…", self.model_editor.insert_indicators),
            ("&Suggest changes…", self.model_editor.open_suggest),
        ):
            model_menu.addAction(text, slot)

        view_menu = bar.addMenu("&View")
        for dock, text in ((self.data_dock, "&Data panel"), (self.subject_dock, "S&ubject panel")):
            toggle = dock.toggleViewAction()
            toggle.setText(text)
            view_menu.addAction(toggle)

        help_menu = bar.addMenu("&Help")
        help_menu.addAction(a.help)
        help_menu.addAction(a.caution)
        help_menu.addAction(a.about)
        self._fill_recent()

    def _fill_recent(self) -> None:
        menu: QMenu = self.recent_menu
        menu.clear()
        files = self.prefs.recent_files()
        for i, path in enumerate(files, start=1):
            act = menu.addAction(f"&{i} {Path(path).name}")
            act.setToolTip(path)
            act.setStatusTip(path)
            act.triggered.connect(lambda _c=False, p=path: self.open_path(p))
        if files:
            menu.addSeparator()
        menu.addAction(self.actions_.clear_recent)
        self.actions_.clear_recent.setEnabled(bool(files))
        menu.setEnabled(True)

    def _connect(self) -> None:
        a, s = self.actions_, self.session
        a.open.triggered.connect(self.choose_and_open)
        a.open_sample.triggered.connect(self.open_sample)
        a.save.triggered.connect(self.save)
        a.save_as.triggered.connect(self.save_as)
        a.print.triggered.connect(self.print_worksheet)
        a.clear_recent.triggered.connect(self.prefs.clear_recent)
        a.quit.triggered.connect(self.close)
        a.exclude.triggered.connect(self.exclude_selected)
        a.include.triggered.connect(self.include_selected)
        a.find.triggered.connect(self.find)
        a.preferences.triggered.connect(self.edit_preferences)
        a.refit.triggered.connect(s.refit_now)
        a.about.triggered.connect(self.about)
        a.caution.triggered.connect(self.show_caution)
        a.help.triggered.connect(lambda: self.show_help())
        sp = self.start_page
        sp.openSalesRequested.connect(self.choose_sales)
        sp.openWorkfileRequested.connect(self.choose_workfile)
        sp.sampleRequested.connect(self.open_sample)
        sp.recentRequested.connect(self.open_path)
        s.salesChanged.connect(lambda *_: self._show_start_or_work())
        self.prefs.recentChanged.connect(self._fill_recent)
        self.sales_view.excludeRequested.connect(self.exclude_row)

        for sig in (
            s.salesChanged,
            s.fitFinished,
            s.fitFailed,
            s.modelChanged,
            s.selectionChanged,
            s.valuationChanged,
        ):
            sig.connect(lambda *_: self.update_actions())
        s.exclusionsChanged.connect(self.update_actions)
        for sig in (s.salesChanged, s.fitFinished, s.fitFailed, s.exclusionsChanged):
            sig.connect(lambda *_: self.update_status())
        s.fitStarted.connect(self.update_status)
        for sig in (s.modelChanged, s.subjectChanged):
            sig.connect(lambda *_: self.setWindowModified(True))
        s.exclusionsChanged.connect(lambda: self.setWindowModified(True))
        s.loadStarted.connect(self._load_started)
        s.loadFinished.connect(self._load_finished)
        s.loadFailed.connect(self._load_failed)
        s.loadProgress.connect(self._load_progress)
        s.loadCancelled.connect(self._load_ended)
        s.workfileChanged.connect(lambda _p: self._update_title())
        s.notice.connect(lambda text: self.statusBar().showMessage(text, 15_000))
        s.confirm_sales_path = self._confirm_sales_path
        s.valuationFailed.connect(
            lambda m: self.statusBar().showMessage(f"{NOT_VALUED}: {m}", 10_000)
        )
        s.valuationChanged.connect(self._valued)

    def update_actions(self) -> None:
        self.actions_.update_actions(self.session)

    def _valued(self, valuation: object) -> None:
        """A value is shown: an earlier "not valued" remark no longer holds."""
        if valuation is not None and self.statusBar().currentMessage().startswith(NOT_VALUED):
            self.statusBar().clearMessage()

    # --- status bar ---------------------------------------------------------------------
    def update_status(self) -> None:
        s = self.session
        if s.sales is None:
            self.rows_label.setText("No sales loaded")
        else:
            fit = s.fit if s.fit_current else None
            used = fit.n if fit is not None else s.sales.n_used
            left_out = s.sales.source.rows_in_file - used
            self.rows_label.setText(f"{used:,} sales used · {left_out:,} left out")
        if s.is_fitting:
            self.fit_label.setText("fitting…")
        elif s.fit_error is not None:
            self.fit_label.setText("fit failed")
        elif s.fit is not None:
            f = s.fit
            self.fit_label.setText(f"n={f.n:,}  R²={f.r2:.3f}  σ={number(f.sigma, 4)}")
        else:
            self.fit_label.setText("not fitted")

    def _update_title(self) -> None:
        path = self.session.workfile_path or self.session.sales_path
        self.setWindowTitle(f"{Path(path).name}[*] — appraise" if path else "appraise[*]")

    # --- opening ----------------------------------------------------------------------------
    def choose_and_open(self) -> None:
        start = str(self.session.sales_path.parent) if self.session.sales_path else ""
        path, _f = QFileDialog.getOpenFileName(self, "Open sales or workfile", start, OPEN_FILTER)
        if path:
            self.open_path(path)

    def choose_sales(self) -> None:
        """Ask for a sales file and open it."""
        path, _f = QFileDialog.getOpenFileName(self, "Open a sales file", "", SALES_FILTER)
        if path:
            self.open_path(path)

    def choose_workfile(self) -> None:
        """Ask for a saved workfile and open it."""
        path, _f = QFileDialog.getOpenFileName(self, "Open a workfile", "", WORKFILE_FILTER)
        if path:
            self.open_path(path)

    def _show_start_or_work(self) -> None:
        """The start page while nothing is loaded; the tabs and side panels once it is."""
        starting = self.session.sales is None
        was_starting = self.centre_stack.currentWidget() is self.start_page
        self.centre_stack.setCurrentWidget(self.start_page if starting else self.centre_tabs)
        if starting:
            self.data_dock.hide()
            self.subject_dock.hide()
        elif was_starting:
            self.data_dock.show()
            self.subject_dock.show()

    def open_path(self, path: str | Path, *, companions: bool | None = None) -> None:
        """Open a sales file or a workfile.

        For a sales file, a model and a subject file lying beside it are loaded
        with it when ``companions`` is True, offered when it is None, ignored when False.
        """
        p = Path(path)
        if not p.is_file():
            self._error("Cannot open", f"{p}: no such file")
            return
        if is_sales_file(p):
            model, subject = companion_files(p)
            if companions is None and (model or subject):
                found = ", ".join(x.name for x in (model, subject) if x)
                answer = QMessageBox.question(
                    self,
                    "Load the files beside it?",
                    f"{found} lie(s) beside {p.name}. Load them too?",
                )
                companions = answer == QMessageBox.StandardButton.Yes
            if not companions:
                model = subject = None
            self.session.load_sales(p, model_path=model, subject_path=subject)
        elif is_workfile(p):
            self.session.open_workfile(p)
        else:
            self._error(
                "Cannot open",
                f"{p.name}: not a sales file ({', '.join(SALES_SUFFIXES)}) or a workfile",
            )
            return
        self.prefs.add_recent(str(p.resolve()))

    def open_sample(self) -> None:
        """Open the invented sample town with its model and subject."""
        try:
            path = sample_sales_path()
        except Exception as exc:  # noqa: BLE001 - shown to the user, not raised
            self._error("Sample data not found", str(exc))
            return
        self.open_path(path, companions=True)

    def _load_started(self, label: str) -> None:
        self.statusBar().showMessage(f"Reading {Path(label).name}…")
        self._progress_label = label
        self._progress_done: tuple[int, str] | None = None
        self._progress_timer.start()

    def _show_progress(self) -> None:
        if not self.session.is_loading:
            return
        dlg = QProgressDialog(f"Reading {Path(self._progress_label).name}…", "&Cancel", 0, 0, self)
        dlg.setWindowTitle("appraise")
        dlg.setWindowModality(Qt.WindowModality.WindowModal)
        dlg.setMinimumDuration(0)
        dlg.canceled.connect(self.session.cancel_load)
        dlg.show()
        self._progress = dlg
        if self._progress_done is not None:  # the read reported before the dialog showed
            self._load_progress(*self._progress_done)

    def _load_progress(self, percent: int, message: str) -> None:
        self._progress_done = (percent, message)
        dlg = self._progress  # a local: a modal dialog's setValue runs the event loop,
        if dlg is None:  # which may end the load and drop self._progress meanwhile
            return
        dlg.setLabelText(f"Reading {Path(self._progress_label).name}: {message}…")
        dlg.setRange(0, 100)  # from a busy indicator to a measured bar
        dlg.setValue(percent)

    def _load_ended(self) -> None:
        self._progress_timer.stop()
        if self._progress is not None:
            self._progress.canceled.disconnect(self.session.cancel_load)
            self._progress.close()
            self._progress.deleteLater()
            self._progress = None
        self.statusBar().clearMessage()

    def _load_finished(self, label: str) -> None:
        self._load_ended()
        s = self.session
        sales = s.sales
        self._update_title()
        self.setWindowModified(False)
        if sales is not None:
            notes = "; ".join(sales.notes)
            self.statusBar().showMessage(
                f"Read {sales.source.rows_in_file:,} rows from {Path(label).name}: "
                f"{sales.n_used:,} usable, {len(sales.excluded):,} left out at import"
                + (f". {notes}" if notes else ""),
                15_000,
            )

    def _load_failed(self, message: str) -> None:
        self._load_ended()
        self._error("Could not open the file", message)

    def _confirm_sales_path(self, path: Path) -> bool:
        """Ask before reading a workfile's recorded sales path that is not a plain sales
        file (a workfile is a file anyone may have edited)."""
        answer = QMessageBox.question(
            self,
            "Read this file as the sales?",
            f"The workfile names\n\n{path}\n\nas its sales file. It is not a plain sales "
            "file (.csv, .xlsx or .parquet), so it is read only if you say so.\n\n"
            "Yes: read it (it must still hash to the SHA-256 the workfile records).\n"
            "No: use the copy of the sales embedded in the workfile, if it has one.",
            QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No,
            QMessageBox.StandardButton.No,
        )
        return answer == QMessageBox.StandardButton.Yes

    def _error(self, title: str, message: str) -> None:
        """Say what went wrong without blocking (the box is window-modal, not app-modal)."""
        self.statusBar().showMessage(message, 15_000)
        box = QMessageBox(
            QMessageBox.Icon.Warning, title, message, QMessageBox.StandardButton.Ok, self
        )
        box.setObjectName("errorBox")
        box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        box.open()

    # --- saving -----------------------------------------------------------------------------
    def save(self) -> bool:
        if self.session.workfile_path is None:
            return self.save_as()
        return self.save_to(self.session.workfile_path)

    def save_as(self) -> bool:
        s = self.session
        stem = s.sales_path.stem if s.sales_path else "valuation"
        folder = (
            s.workfile_path.parent
            if s.workfile_path
            else (s.sales_path.parent if s.sales_path else Path.cwd())
        )
        path, _f = QFileDialog.getSaveFileName(
            self,
            "Save workfile",
            str(folder / f"{stem}{WORKFILE_SUFFIX}"),
            f"Workfiles (*{WORKFILE_SUFFIX})",
        )
        if not path:
            return False
        if not path.endswith(".json"):
            path += WORKFILE_SUFFIX
        return self.save_to(Path(path))

    def save_to(self, path: Path) -> bool:
        try:
            written = self.session.save_workfile(
                path, settings=self.prefs.values(), embed=bool(self.prefs.get("embed_sales"))
            )
        except Exception as exc:  # noqa: BLE001 - any failure is shown; the old file is intact
            self._error("Could not save", str(exc))
            return False
        self.setWindowModified(False)
        self.prefs.add_recent(str(Path(written).resolve()))
        self.statusBar().showMessage(f"Saved {Path(written).name}", 8_000)
        return True

    def print_worksheet(self) -> None:
        self.centre_tabs.setCurrentWidget(self.worksheet_view)
        self.worksheet_view.print_worksheet()

    # --- editing ------------------------------------------------------------------------
    def find(self) -> None:
        self.data_dock.show()
        self.data_tabs.setCurrentWidget(self.sales_view)
        self.sales_view.focus_filter()

    def exclude_row(self, row: int) -> None:
        exclude_with_reason(self, self.session, row)

    def exclude_selected(self) -> None:
        row = self.session.selection
        if row is not None and self.session.sale_record(row) is not None:
            self.exclude_row(row)

    def include_selected(self) -> None:
        row = self.session.selection
        if row is not None:
            self.session.include_sale(row)

    def edit_preferences(self) -> None:
        dlg = SettingsDialog(self.prefs, self)
        if dlg.exec() == SettingsDialog.DialogCode.Accepted:
            self.apply_preferences()

    def apply_preferences(self) -> None:
        self.subject_view.set_currency(self.prefs.get("currency_symbol"))
        self.worksheet_view.set_currency(self.prefs.get("currency_symbol"))
        self.diagnostics_view.set_currency(self.prefs.get("currency_symbol"))
        self.session.set_import_settings(self.prefs.import_settings(self.session.import_settings))

    # --- help -------------------------------------------------------------------------------
    def about(self) -> None:
        QMessageBox.about(
            self,
            "About appraise",
            f"<b>appraise {__version__}</b><br>Values a subject property from comparable "
            "sales with a hedonic regression (OLS).<br><br>" + FULL_CAUTIONS[0][1],
        )

    def show_help(self, section: str = "syntax") -> HelpView:
        """Open the help window (F1) at ``section``; one window, kept for the session."""
        if self.help_view is None:
            self.help_view = HelpView(self)
        self.help_view.show_section(section)
        return self.help_view

    def show_caution(self) -> None:
        text = "".join(f"<p><b>{title}</b><br>{body}</p>" for title, body in FULL_CAUTIONS)
        box = QMessageBox(
            QMessageBox.Icon.Information,
            "What the estimate is",
            "",
            QMessageBox.StandardButton.Ok,
            self,
        )
        box.setText(text)
        box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        box.open()

    # --- drag and drop ----------------------------------------------------------------------
    def dragEnterEvent(self, event: QDragEnterEvent) -> None:
        if self._dropped_path(event) is not None:
            event.acceptProposedAction()
        else:
            event.ignore()

    def dropEvent(self, event: QDropEvent) -> None:
        path = self._dropped_path(event)
        if path is None:
            event.ignore()
            return
        event.acceptProposedAction()
        # open after the drop returns, so the dragging application is not kept waiting
        QTimer.singleShot(0, lambda: self.open_path(path))

    @staticmethod
    def _dropped_path(event) -> Path | None:
        urls = event.mimeData().urls() if event.mimeData().hasUrls() else []
        local = [Path(u.toLocalFile()) for u in urls if u.isLocalFile()]
        if len(local) != 1:
            return None
        p = local[0]
        return p if QFileInfo(str(p)).isFile() and (is_sales_file(p) or is_workfile(p)) else None

    # --- closing ----------------------------------------------------------------------------
    def _fit_to_screen(self) -> None:
        """The user's last size and place, else the preferred size shrunk to the screen's
        available area (a 1366 x 768 laptop sees the whole window, status bar included)."""
        saved = self.prefs.window_geometry()
        if saved is not None and self.restoreGeometry(saved):
            return
        screen = self.screen() or QGuiApplication.primaryScreen()
        avail = screen.availableGeometry() if screen is not None else None
        w, h = PREFERRED_SIZE
        if avail is not None:
            # leave room for the window frame the window manager adds
            w, h = min(w, avail.width() - 16), min(h, avail.height() - 40)
            self.move(avail.topLeft())
        self.resize(w, h)

    def closeEvent(self, event: QCloseEvent) -> None:
        if self.isWindowModified() and self.session.sales is not None:
            answer = QMessageBox.question(
                self,
                "Save the valuation?",
                "The valuation has unsaved changes. Save them?",
                QMessageBox.StandardButton.Save
                | QMessageBox.StandardButton.Discard
                | QMessageBox.StandardButton.Cancel,
            )
            if answer == QMessageBox.StandardButton.Cancel or (
                answer == QMessageBox.StandardButton.Save and not self.save()
            ):
                event.ignore()
                return
        self.prefs.save_window_geometry(self.saveGeometry())
        self.stop_background_work()
        event.accept()

    def stop_background_work(self) -> None:
        """Wait for every pool thread of this window to end (closing, tests).

        A widget must not be destroyed while a thread still reports to it.
        """
        dialog = getattr(self.model_editor, "suggest_dialog", None)
        if dialog is not None:
            dialog.wait(120_000)
        self.model_file.wait()
        self.sales_view.model.wait_for_index(120_000)
        self.plots_view.wait_for_points(120_000)
        self.session.shutdown()
