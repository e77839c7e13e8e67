"""The worksheet tab: a preview of the valuation worksheet, Print and Export.

The preview is the same Qt document the PDF writer prints (``qtrender.pdf``), and
Export PDF calls that writer, so screen, paper and file show the same content.
The worksheet is rebuilt from the session's results only while the tab is visible
(drawing the charts takes a moment); results arriving while it is hidden mark it
out of date. Nothing here fits a model: it reads ``session.fit``,
``session.valuation`` and ``session.diagnostics``.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QTimer
from PySide6.QtWidgets import (
    QComboBox,
    QFileDialog,
    QHBoxLayout,
    QLabel,
    QMessageBox,
    QPushButton,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.errors import AppraiseError
from appraise.qtrender.figures import worksheet_figures
from appraise.qtrender.grid_figures import index_figure
from appraise.qtrender.pdf import build_document, page_size_of, paint_pages, write_pdf
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.content import PAGE_SIZES, Worksheet
from appraise.report.html import render_html
from appraise.report.paper import default_page_size
from appraise.report.sales_export import sales_results_table, write_sales_results
from appraise.report.settings import ReportSettings
from appraise.report.tables import export_all_tables
from appraise.report.worksheet import build_worksheet

from .session import Session

REBUILD_DELAY_MS = 150
"""Results that arrive together (fit, valuation, diagnostics) lead to one rebuild."""

EMPTY_TEXT = (
    "No worksheet yet: load sales, a model and a subject; the worksheet appears once "
    "the subject has been valued."
)


class WorksheetView(QWidget):
    """Preview, print and export the valuation worksheet of ``session``."""

    def __init__(
        self, session: Session, parent: QWidget | None = None, *, currency: str = "$"
    ) -> None:
        super().__init__(parent)
        self._session = session
        self._currency = currency
        self._worksheet: Worksheet | None = None
        self._document = None  # the QTextDocument shown; kept so it outlives the browser's use
        self._dirty = True

        self.state = QLabel(EMPTY_TEXT)
        self.state.setWordWrap(True)
        self.page_size = QComboBox()
        self.page_size.addItems(list(PAGE_SIZES))
        self.page_size.setCurrentText(default_page_size())  # Letter in the US, else A4
        self.page_size.currentTextChanged.connect(self._page_size_changed)
        self.print_button = QPushButton("&Print…")
        self.print_button.clicked.connect(self.print_worksheet)
        self.pdf_button = QPushButton("Export &PDF…")
        self.pdf_button.clicked.connect(self._ask_export_pdf)
        self.html_button = QPushButton("Export &HTML…")
        self.html_button.clicked.connect(self._ask_export_html)
        self.tables_button = QPushButton("Export &tables…")
        self.tables_button.clicked.connect(self._ask_export_tables)
        self.sales_button = QPushButton("Export &sales…")
        self.sales_button.setToolTip(
            "Every sale with its fitted value, leave-one-out value and interval, ratio and "
            "flags, as CSV or XLSX"
        )
        self.sales_button.clicked.connect(self._ask_export_sales)
        bar = QHBoxLayout()
        bar.addWidget(QLabel("Paper:"))
        bar.addWidget(self.page_size)
        bar.addStretch(1)
        for b in (
            self.print_button,
            self.pdf_button,
            self.html_button,
            self.tables_button,
            self.sales_button,
        ):
            bar.addWidget(b)

        self.preview = QTextBrowser()
        self.preview.setOpenLinks(False)
        caution = QLabel(ONE_LINE_CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #555555;")

        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addLayout(bar)
        lay.addWidget(self.state)
        lay.addWidget(self.preview, 1)
        lay.addWidget(caution)

        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(REBUILD_DELAY_MS)
        self._timer.timeout.connect(self._rebuild_if_shown)
        for signal in (
            session.fitStarted,
            session.fitFinished,
            session.fitFailed,
            session.valuationChanged,
            session.diagnosticsChanged,
            session.exclusionsChanged,
            session.gridChanged,
        ):
            signal.connect(self._results_changed)
        self._update_buttons()

    # --- state ------------------------------------------------------------------------
    @property
    def current_worksheet(self) -> Worksheet | None:
        """The worksheet shown, or None when there is nothing to show."""
        return self._worksheet

    def set_currency(self, symbol: str) -> None:
        if symbol != self._currency:
            self._currency = symbol
            self._results_changed()

    def _results_changed(self, *_args) -> None:
        self._dirty = True
        self._timer.start()

    def _page_size_changed(self, _size: str) -> None:
        self._dirty = True
        self._rebuild_if_shown()

    def showEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        super().showEvent(event)
        if self._dirty:
            self._timer.start()

    def _rebuild_if_shown(self) -> None:
        if self.isVisible():
            self.refresh()

    def refresh(self) -> Worksheet | None:
        """Rebuild the worksheet from the session's current results and show it."""
        s = self._session
        self._dirty = False
        fit, valuation, diagnostics = s.fit, s.valuation, s.diagnostics
        if fit is None or valuation is None:
            self._worksheet = None
            self._document = None
            self.preview.clear()
            self.state.setText(s.fit_error or s.valuation_error or EMPTY_TEXT)
            self.state.show()
            self._update_buttons()
            return None
        grid = s.grid
        try:
            self._worksheet = build_worksheet(
                fit,
                valuation,
                diagnostics=diagnostics,
                figures=worksheet_figures(fit, valuation, currency=self._currency),
                settings=ReportSettings(
                    currency=self._currency, page_size=self.page_size.currentText()
                ),
                workfile_id=s.workfile_path.name if s.workfile_path else None,
                grid=grid,
                grid_figures=() if grid is None else (index_figure(grid),),
            )
        except AppraiseError as exc:
            self._worksheet = None
            self.state.setText(f"The worksheet could not be built: {exc}")
            self.state.show()
            self._update_buttons()
            return None
        self._document = build_document(
            self._worksheet, text_width=max(480.0, self.preview.viewport().width() - 24.0)
        )
        self.preview.setDocument(self._document)
        now = (s.fit, s.valuation, s.diagnostics, s.grid)
        if any(a is not b for a, b in zip(now, (fit, valuation, diagnostics, grid), strict=True)):
            self._results_changed()  # results moved on while this one was drawn
        if s.is_fitting or not s.results_current:
            self.state.setText("Refitting: the worksheet shows the previous results.")
            self.state.show()
        else:
            self.state.hide()
        self._update_buttons()
        return self._worksheet

    def _update_buttons(self) -> None:
        ready = self._worksheet is not None
        for b in (self.print_button, self.pdf_button, self.html_button, self.tables_button):
            b.setEnabled(ready)
        self.sales_button.setEnabled(
            self._session.fit is not None and self._session.diagnostics is not None
        )

    def _ensure_worksheet(self) -> Worksheet | None:
        if self._worksheet is None or self._dirty:
            self.refresh()
        return self._worksheet

    # --- output -----------------------------------------------------------------------
    def export_pdf(self, path: str | Path) -> int:
        """Write the worksheet to ``path`` with the same writer as ``appraise report``."""
        ws = self._ensure_worksheet()
        if ws is None:
            raise AppraiseError("there is no worksheet to export yet")
        return write_pdf(ws, path, page_size=self.page_size.currentText())

    def export_html(self, path: str | Path) -> Path:
        ws = self._ensure_worksheet()
        if ws is None:
            raise AppraiseError("there is no worksheet to export yet")
        p = Path(path)
        p.write_text(render_html(ws), encoding="utf-8")
        return p

    def export_tables(self, target: str | Path) -> tuple[Path, ...]:
        """Every table of the worksheet, and the sales with their results when the checks
        have run: one workbook with a sheet each (``target`` ends in .xlsx) or a CSV per
        table in the folder ``target``."""
        ws = self._ensure_worksheet()
        if ws is None:
            raise AppraiseError("there is no worksheet to export yet")
        s = self._session
        extra = ()
        if s.fit is not None and s.diagnostics is not None:
            extra = (sales_results_table(s.fit, s.diagnostics),)
        return export_all_tables(ws, target, extra=extra)

    def export_sales(self, path: str | Path) -> Path:
        """Each sale with the model's results (``appraise diagnose --sales-out``)."""
        s = self._session
        if s.fit is None or s.diagnostics is None:
            raise AppraiseError("the sales have no results yet: wait for the model check")
        return write_sales_results(s.fit, s.diagnostics, path)

    def print_to(self, printer) -> int:
        """Paint the worksheet on a configured ``QPrinter``; returns the page count."""
        ws = self._ensure_worksheet()
        if ws is None:
            raise AppraiseError("there is no worksheet to print yet")
        return paint_pages(ws, printer)

    def print_worksheet(self) -> None:
        """Ask for a printer (QPrintDialog) and print the worksheet on it."""
        from PySide6.QtPrintSupport import QPrintDialog, QPrinter

        if self._ensure_worksheet() is None:
            return
        printer = QPrinter(QPrinter.PrinterMode.HighResolution)
        printer.setPageSize(page_size_of(self.page_size.currentText()))
        dialog = QPrintDialog(printer, self)
        dialog.setWindowTitle("Print worksheet")
        if dialog.exec() != QPrintDialog.DialogCode.Accepted:
            return
        self._run(lambda: self.print_to(printer), "Could not print")

    def _ask_export_pdf(self) -> None:
        path, _ = QFileDialog.getSaveFileName(
            self, "Export worksheet as PDF", "worksheet.pdf", "PDF (*.pdf)"
        )
        if path:
            self._run(lambda: self.export_pdf(path), "Could not write the PDF")

    def _ask_export_html(self) -> None:
        path, _ = QFileDialog.getSaveFileName(
            self, "Export worksheet as HTML", "worksheet.html", "HTML (*.html *.htm)"
        )
        if path:
            self._run(lambda: self.export_html(path), "Could not write the HTML")

    def _ask_export_tables(self) -> None:
        workbook, csvs = "Workbook, a sheet per table (*.xlsx)", "CSV files, one per table (*)"
        path, chosen = QFileDialog.getSaveFileName(
            self, "Export every table", "worksheet-tables.xlsx", f"{workbook};;{csvs}"
        )
        if not path:
            return
        target = Path(path)
        if chosen == workbook and target.suffix.lower() != ".xlsx":
            target = target.with_suffix(".xlsx")
        elif chosen == csvs:
            target = target.with_suffix("")  # a folder of that name
        self._run(lambda: self.export_tables(target), "Could not write the tables")

    def _ask_export_sales(self) -> None:
        path, _ = QFileDialog.getSaveFileName(
            self,
            "Export the sales with their results",
            "sales-results.xlsx",
            "Workbook (*.xlsx);;CSV (*.csv)",
        )
        if path:
            self._run(lambda: self.export_sales(path), "Could not write the sales")

    def _run(self, action, title: str) -> None:
        try:
            action()
        except (AppraiseError, OSError) as exc:
            QMessageBox.warning(self, title, str(exc))
