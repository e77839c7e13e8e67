"""The checks tab: how well the fitted model holds up, and which sales to look at again.

Everything shown comes from the session's :class:`~appraise.engine.diagnostics.Diagnostics`,
computed on the worker after each fit (this module never computes a check on the UI
thread). The tab holds, from top to bottom:

* a strip of figures, each beside its acceptable range with a within/outside mark
  in words and in colour (Okabe-Ito blue and vermillion, told apart under the
  common colour-vision deficiencies): the ratio study of the leave-one-out values,
  leave-one-out accuracy and interval coverage, the condition number and the
  verdict of the Breusch-Pagan test with what to do about uneven spread;
* two plots: externally studentized residual against leverage (the flag limits
  drawn, point size growing with Cook's distance) and the leave-one-out ratio
  against value; flagged sales are vermillion diamonds, a click selects a sale, a
  right click excludes it with the flag's reason offered;
* tabs: the flagged sales (exclude with a reason, copy the model-file block), every
  sale's measures, the terms' (generalized) variance inflation, the residual tests
  and accuracy, and the ratio study in full.

Like the plots and the worksheet, the tab does its work only while it is shown:
results that arrive while it is hidden mark it out of date.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import pyqtgraph as pg
from PySide6.QtCore import (
    QAbstractTableModel,
    QItemSelectionModel,
    QModelIndex,
    QPoint,
    Qt,
    QTimer,
)
from PySide6.QtWidgets import (
    QAbstractItemView,
    QApplication,
    QCheckBox,
    QComboBox,
    QFrame,
    QGridLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QSpinBox,
    QSplitter,
    QTableView,
    QTabWidget,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.diagnostics import Diagnostics, SaleFlag
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.diagnostics_section import PRB_CI_LEVEL
from appraise.report.labels import COLLINEARITY_COLUMNS
from appraise.report.numbers import percent
from appraise.report.text import format_diagnostics

from .diagnostics_plots import influence_figure, legend_html, ratio_figure
from .diagnostics_tables import (
    OUTSIDE_COLOUR,
    VERDICT_MARKS,
    LazyRows,
    SaleChecksModel,
    SummaryItem,
    TextTableModel,
    condition_text,
    flagged_row,
    measure_cells,
    ratio_note,
    spread_advice,
    summary_items,
    term_cells,
    tests_html,
)
from .plots import SalePlot, sale_menu
from .sales_view import exclude_with_reason
from .session import Session

REFRESH_DELAY_MS = 0
SETTINGS_DELAY_MS = 400
TABLES_MIN_HEIGHT = 300
"""The tables under the plots keep room for about ten rows of sales."""
PLOTS_MIN_HEIGHT = 320
"""Edits of folds and seed within this many milliseconds lead to one new check."""
TILE_WIDTH = 138
"""Width a tile of the strip is given when the strip decides how many fit in a row."""

EMPTY_TEXT = "No checks yet: load sales and a model; each fit is checked as soon as it is made."


# --- the strip ---------------------------------------------------------------------------------


class SummaryTile(QFrame):
    """One figure of the strip: label, value, range and verdict (words and colour)."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("checkTile")
        self.label = QLabel()
        self.value = QLabel()
        self.reference = QLabel()
        self.verdict = QLabel()
        for w in (self.label, self.reference, self.verdict):
            w.setStyleSheet("font-size: 8pt; color: #444444;")
        self.value.setStyleSheet("font-size: 11pt; font-weight: bold; color: #1a1a1a;")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(7, 3, 5, 3)
        lay.setSpacing(0)
        for w in (self.label, self.value, self.reference, self.verdict):
            lay.addWidget(w)
        self.item: SummaryItem | None = None

    def show_item(self, item: SummaryItem) -> None:
        self.item = item
        words, colour, background = VERDICT_MARKS[item.verdict]
        self.label.setText(item.label)
        self.value.setText(item.value)
        self.reference.setText(item.reference)
        self.verdict.setText(words)
        self.verdict.setStyleSheet(f"font-size: 8pt; font-weight: bold; color: {colour};")
        self.verdict.setVisible(bool(words))
        self.setStyleSheet(
            f"QFrame#checkTile {{ background: {background}; border-left: 4px solid {colour}; }}"
        )
        self.setToolTip(item.detail)


class SummaryStrip(QWidget):
    """The tiles in as many columns as the width allows (reflowed on resize)."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.tiles: dict[str, SummaryTile] = {}
        self._order: list[str] = []
        self._columns = 0
        self._grid = QGridLayout(self)
        self._grid.setContentsMargins(0, 0, 0, 0)
        self._grid.setSpacing(4)

    def set_items(self, items: Sequence[SummaryItem]) -> None:
        keys = [i.key for i in items]
        if keys != self._order:
            for tile in self.tiles.values():
                self._grid.removeWidget(tile)
                tile.deleteLater()
            self.tiles = {k: SummaryTile(self) for k in keys}
            self._order = keys
            self._columns = 0
        for item in items:
            self.tiles[item.key].show_item(item)
        self._reflow()

    def clear(self) -> None:
        self.set_items(())

    def resizeEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        super().resizeEvent(event)
        self._reflow()

    def _reflow(self) -> None:
        columns = max(2, self.width() // TILE_WIDTH)
        if columns == self._columns:
            return
        self._columns = columns
        for tile in self.tiles.values():
            self._grid.removeWidget(tile)
        for k, key in enumerate(self._order):
            self._grid.addWidget(self.tiles[key], k // columns, k % columns)


# --- the view -------------------------------------------------------------------------------


def _table(model: QAbstractTableModel, *, sortable: bool = False) -> QTableView:
    view = QTableView()
    view.setModel(model)
    view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
    view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    view.setWordWrap(False)
    view.verticalHeader().setVisible(False)
    view.verticalHeader().setDefaultSectionSize(view.fontMetrics().height() + 6)
    header = view.horizontalHeader()
    header.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
    header.setResizeContentsPrecision(50)  # widths from the first rows, not all of them
    header.setStretchLastSection(True)
    if sortable:
        view.setSortingEnabled(True)
    return view


def _table_page(table: QTableView, note: QLabel) -> QWidget:
    """A tab page: the table, and a note under it."""
    note.setWordWrap(True)
    page = QWidget()
    lay = QVBoxLayout(page)
    lay.setContentsMargins(0, 2, 0, 0)
    lay.addWidget(table, 1)
    lay.addWidget(note)
    return page


DEFER_TABLES_FROM = 200_000
"""From this many sales the tables are filled in the event loop's next turn after the
plots: each half takes about 0.2 s of the window's thread at a million sales, together
they would hold the window still for 0.4 s."""
DEFER_MS = 30
"""The pause before the tables: a zero-time timer runs before the paint and the clicks
waiting in the queue (Qt serves those first), a short one after them."""


class DiagnosticsView(QWidget):
    """The checks of the session's current fit; follows ``session`` through its signals."""

    def __init__(
        self, session: Session, parent: QWidget | None = None, *, currency: str = "$"
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.currency = currency
        self.diagnostics: Diagnostics | None = None
        """The checks shown (may lag the session's while a refit runs)."""
        self.figures: list[SalePlot] = []
        self._stale = True

        # options and state
        self.status = QLabel(EMPTY_TEXT)
        self.status.setWordWrap(True)
        self.trim_box = QCheckBox("&Trim outlying ratios")
        self.trim_box.setToolTip(
            "Ratio study: leave out ratios beyond 3 interquartile ranges of the quartiles "
            "(IAAO 2013); the sales trimmed are listed under Ratio study"
        )
        self.folds_box = QSpinBox()
        self.folds_box.setRange(2, 100)
        self.folds_box.setPrefix("folds ")
        self.folds_box.setToolTip("Number of folds of the k-fold cross-validation")
        self.seed_box = QSpinBox()
        self.seed_box.setRange(0, 2_147_483_647)
        self.seed_box.setPrefix("seed ")
        self.seed_box.setToolTip("Seed of the shuffle that deals the sales into folds")
        self.coverage_box = QComboBox()
        self.coverage_box.setEditable(True)  # a derived variable or expression may be typed
        self.coverage_box.setMinimumContentsLength(12)
        self.coverage_box.setToolTip(
            "Split the coverage of the leave-one-out intervals by this column, role or "
            "expression too (fifths when it is a number), beside the fifths of predicted "
            "price and the regions"
        )
        self._fill_coverage_choices()
        session.salesChanged.connect(lambda *_: self._fill_coverage_choices())
        self.copy_text_button = QPushButton("Copy as te&xt")
        self.copy_text_button.setToolTip("The whole check-up as the command line prints it")
        self.copy_text_button.clicked.connect(self.copy_text)
        self._show_settings(session.diagnostic_settings)
        self._settings_timer = QTimer(self)
        self._settings_timer.setSingleShot(True)
        self._settings_timer.setInterval(SETTINGS_DELAY_MS)
        self._settings_timer.timeout.connect(self.apply_settings)
        self.trim_box.toggled.connect(lambda _on: self.apply_settings())
        self.folds_box.valueChanged.connect(lambda _v: self._settings_timer.start())
        self.seed_box.valueChanged.connect(lambda _v: self._settings_timer.start())
        self.coverage_box.activated.connect(lambda _i: self.apply_settings())
        self.coverage_box.lineEdit().editingFinished.connect(self.apply_settings)
        bar = QHBoxLayout()
        bar.addWidget(self.status, 1)
        bar.addWidget(QLabel("Coverage also by"))
        for w in (
            self.coverage_box,
            self.trim_box,
            self.folds_box,
            self.seed_box,
            self.copy_text_button,
        ):
            bar.addWidget(w)

        # the strip
        self.strip = SummaryStrip()
        self.advice = QLabel()
        self.advice.setWordWrap(True)
        self.advice.setStyleSheet(f"color: {OUTSIDE_COLOUR};")
        self.advice.hide()
        top = QWidget()
        top_lay = QVBoxLayout(top)
        top_lay.setContentsMargins(0, 0, 0, 0)
        top_lay.setSpacing(3)
        top_lay.addLayout(bar)
        top_lay.addWidget(self.strip)
        top_lay.addWidget(self.advice)

        # the plots
        self.legend = QLabel(legend_html())
        self.legend.setWordWrap(True)
        self.canvas = pg.GraphicsLayoutWidget()
        self.canvas.setBackground("w")
        self.canvas.ci.setSpacing(4)
        plots = QWidget()
        plots_lay = QVBoxLayout(plots)
        plots_lay.setContentsMargins(0, 0, 0, 0)
        plots_lay.addWidget(self.legend)
        plots_lay.addWidget(self.canvas, 1)

        # the tables
        self.flagged_model = TextTableModel(("Row", "Sale", "Findings"), right=(0,))
        self.flagged_table = _table(self.flagged_model)
        self.flagged_table.doubleClicked.connect(lambda _i: self.exclude_current_flag())
        self.flagged_table.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        self.flagged_table.customContextMenuRequested.connect(self._flag_menu)
        self.exclude_button = QPushButton("Exclu&de…")
        self.exclude_button.setToolTip(
            "Leave the selected sale out of the model, giving the cause found as the reason"
        )
        self.exclude_button.clicked.connect(self.exclude_current_flag)
        self.copy_line_button = QPushButton("Copy model-f&ile line")
        self.copy_line_button.setToolTip(
            "Copy the [[exclude]] block of the selected sale, to paste into the model file"
        )
        self.copy_line_button.clicked.connect(self.copy_model_file_line)
        self.flag_hint = QLabel(
            "A flag asks for a second look at the sale, not for its removal: exclude it "
            "once the cause (a data error, a sale not at arm's length) is known."
        )
        self.flag_hint.setWordWrap(True)
        self.flag_hint.setStyleSheet("color: #555555;")
        flag_bar = QHBoxLayout()
        flag_bar.addWidget(self.flag_hint, 1)
        flag_bar.addWidget(self.exclude_button)
        flag_bar.addWidget(self.copy_line_button)
        flagged = QWidget()
        flagged_lay = QVBoxLayout(flagged)
        flagged_lay.setContentsMargins(0, 2, 0, 0)
        flagged_lay.addLayout(flag_bar)
        flagged_lay.addWidget(self.flagged_table)

        self.sales_model = SaleChecksModel()
        self.sales_table = _table(self.sales_model, sortable=True)
        self.sales_table.horizontalHeader().setStretchLastSection(False)
        self.terms_model = TextTableModel(
            (
                "Term",
                "Kind",
                "Columns",
                COLLINEARITY_COLUMNS["gvif"],
                COLLINEARITY_COLUMNS["gvif_root"],
                "Rule",
                "Verdict",
            ),
            right=(2, 3, 4),
        )
        self.terms_table = _table(self.terms_model)
        self.condition_label = QLabel()
        terms = _table_page(self.terms_table, self.condition_label)
        self.tests_text = QTextBrowser()
        self.tests_text.setOpenLinks(False)
        self.measures_model = TextTableModel(
            (
                "Measure",
                "Value",
                f"{percent(PRB_CI_LEVEL)} interval",
                "Acceptable range",
                "Verdict",
            ),
            right=(1,),
        )
        self.measures_table = _table(self.measures_model)
        self.ratio_label = QLabel()
        ratio = _table_page(self.measures_table, self.ratio_label)

        self.tabs = QTabWidget()
        self.tabs.addTab(flagged, "Flagged sales")
        self.tabs.addTab(self.sales_table, "All sales")
        self.tabs.addTab(terms, "Terms")
        self.tabs.addTab(self.tests_text, "Tests and accuracy")
        self.tabs.addTab(ratio, "Ratio study")

        # a movable split between the plots and the tables; neither may be squeezed shut:
        # the tables keep room for about ten rows, and on a small screen the tab scrolls
        split = QSplitter(Qt.Orientation.Vertical)
        split.setObjectName("checksSplit")
        split.addWidget(plots)
        split.addWidget(self.tabs)
        split.setChildrenCollapsible(False)
        split.setHandleWidth(7)
        split.setStretchFactor(0, 3)
        split.setStretchFactor(1, 2)
        plots.setMinimumHeight(PLOTS_MIN_HEIGHT)
        self.tabs.setMinimumHeight(TABLES_MIN_HEIGHT)
        self.split = split
        caution = QLabel(ONE_LINE_CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #555555;")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(top)
        lay.addWidget(split, 1)
        lay.addWidget(caution)

        for table, model in ((self.flagged_table, None), (self.sales_table, self.sales_model)):
            table.selectionModel().currentRowChanged.connect(
                lambda cur, _prev, m=model: self._row_chosen(cur, m)
            )
        self._refresh_timer = QTimer(self)
        self._refresh_timer.setSingleShot(True)
        self._refresh_timer.setInterval(REFRESH_DELAY_MS)
        self._refresh_timer.timeout.connect(self.refresh)
        session.diagnosticsChanged.connect(self.schedule_refresh)
        for signal in (session.fitStarted, session.fitFinished, session.fitFailed):
            signal.connect(lambda *_a: self._update_status())
        session.exclusionsChanged.connect(self._exclusions_changed)
        session.selectionChanged.connect(self.show_selection)
        self._update_buttons()
        self.refresh()

    # --- following the session ---
    def set_currency(self, symbol: str) -> None:
        """Show money in ``symbol`` (redrawn now, or when next shown)."""
        if symbol == self.currency:
            return
        self.currency = symbol
        self.figures = []  # forces a rebuild of what is shown
        self.schedule_refresh()

    def schedule_refresh(self, *_args) -> None:
        """Refresh once the current burst of signals is over; in a hidden tab, when shown."""
        if self.window().isVisible() and not self.isVisible():
            self._stale = True
            self._update_status()
            return
        self._refresh_timer.start()

    def showEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        super().showEvent(event)
        if self._stale:
            self.refresh()

    def refresh(self) -> None:
        """Show the session's current checks (or keep the last ones while a refit runs)."""
        self._refresh_timer.stop()
        self._stale = False
        s = self.session
        d = s.diagnostics
        if d is None and (s.fit is not None and s.is_busy):
            d = self.diagnostics  # the new fit's checks are on their way: keep the last
        if self.figures and d is self.diagnostics:
            self._update_status()
            return
        self.diagnostics = d
        self._show(d)
        self._update_status()

    def _show(self, d: Diagnostics | None) -> None:
        cur = self.currency
        selected = self.session.selection
        self.canvas.clear()
        self.figures = [
            influence_figure(d, currency=cur, selected=selected),
            ratio_figure(d, currency=cur, selected=selected),
        ]
        for k, f in enumerate(self.figures):
            self.canvas.addItem(f.plot, row=0, col=k)
            for scatter in f.scatters:
                scatter.saleClicked.connect(self.session.select_sale)
                scatter.saleMenuRequested.connect(self.open_sale_menu)
        if d is None:
            self.strip.clear()
            self.advice.hide()
            for model in (self.flagged_model, self.terms_model, self.measures_model):
                model.set_rows([])
            self.sales_model.set_diagnostics(None)
            self.tests_text.clear()
            self.condition_label.clear()
            self.ratio_label.clear()
            self.tabs.setTabText(0, "Flagged sales")
            self.tabs.setTabText(1, "All sales")
            self._update_buttons()
            return
        self.strip.set_items(summary_items(d, cur))
        advice = spread_advice(d)
        self.advice.setText(advice)
        self.advice.setVisible(bool(advice))
        if d.n >= DEFER_TABLES_FROM:  # the tables after the plots are painted
            QTimer.singleShot(DEFER_MS, lambda: self._show_tables(d))
        else:
            self._show_tables(d)

    def _show_tables(self, d: Diagnostics) -> None:
        """The sale, term and measure tables of ``d`` (if it is still the one shown)."""
        if d is not self.diagnostics:
            return
        cur = self.currency
        flags = d.flags  # formatted when shown: a county's checks flag tens of thousands
        self.flagged_model.set_rows(
            LazyRows(len(flags), lambda k: flagged_row(flags[k])),
            tips=LazyRows(
                len(flags), lambda k: flags[k].reason + "\n\n" + flags[k].model_file_line()
            ),
        )
        self._exclusions_changed()
        self.tabs.setTabText(0, f"Flagged sales ({len(d.flags)} of {d.n})")
        self.tabs.setTabText(1, f"All sales ({d.n})")
        self.sales_model.set_diagnostics(d, cur)
        cells, colours = term_cells(d)
        self.terms_model.set_rows(cells, colours=colours)
        self.condition_label.setText(condition_text(d))
        self.tests_text.setHtml(tests_html(d, cur))
        cells, colours, tips = measure_cells(d)
        self.measures_model.set_rows(cells, colours=colours, tips=tips)
        self.ratio_label.setText(ratio_note(d))
        for table in (self.flagged_table, self.terms_table, self.measures_table):
            table.resizeColumnsToContents()
        self.sales_table.resizeColumnsToContents()
        self._show_settings(self.session.diagnostic_settings)
        self.show_selection(self.session.selection)
        self._update_buttons()

    def _update_status(self) -> None:
        s, d = self.session, self.diagnostics
        if d is None:
            if s.fit_error or s.is_busy:
                text = s.fit_error or "Fitting and checking…"
            elif s.fit is not None:
                text = "The checks of this fit could not be computed (see the status bar)."
            else:
                text = EMPTY_TEXT
        elif s.diagnostics is not d or s.is_fitting or self._stale:
            text = "Refitting: the checks below are those of the previous fit."
        elif d.settings != s.diagnostic_settings:
            text = "Checking again with the new options…"
        else:
            text = (
                f"{d.n:,} sales, {d.p} design columns, {d.response} response: "
                f"{len(d.flags)} sale(s) flagged."
            )
        self.status.setText(text)

    def _exclusions_changed(self) -> None:
        """Flagged sales the user has just excluded turn grey until the refit lands."""
        d = self.diagnostics
        if d is None:
            return
        out = {e.row for e in self.session.user_exclusions}
        self.flagged_model.set_muted({k for k, f in enumerate(d.flags) if f.row in out})
        self._update_status()

    # --- options ---
    def _fill_coverage_choices(self) -> None:
        """Role names, then the other headers, as choices of the coverage split."""
        sales = self.session.sales
        current = self.coverage_box.currentText()
        self.coverage_box.blockSignals(True)
        self.coverage_box.clear()
        self.coverage_box.addItem("")
        if sales is not None:
            roles = dict(sales.roles.columns)
            for role in roles:
                self.coverage_box.addItem(role)
            for h in sales.frame.columns:
                if h not in roles.values() and not str(h).startswith("_"):
                    self.coverage_box.addItem(str(h))
        self.coverage_box.setCurrentText(current)
        self.coverage_box.blockSignals(False)

    def _show_settings(self, settings) -> None:
        self.coverage_box.blockSignals(True)
        self.coverage_box.setCurrentText(settings.coverage_term or "")
        self.coverage_box.blockSignals(False)
        for box, value in (
            (self.trim_box, settings.trim),
            (self.folds_box, settings.folds),
            (self.seed_box, settings.seed),
        ):
            box.blockSignals(True)
            if isinstance(box, QCheckBox):
                box.setChecked(bool(value))
            else:
                box.setValue(int(value))
            box.blockSignals(False)

    def apply_settings(self) -> None:
        """Send the options to the session, which checks the current fit again."""
        self._settings_timer.stop()
        current = self.session.diagnostic_settings
        wanted = replace(
            current,
            trim=self.trim_box.isChecked(),
            folds=self.folds_box.value(),
            seed=self.seed_box.value(),
            coverage_term=self.coverage_box.currentText().strip() or None,
        )
        if wanted != current:
            self.session.set_diagnostic_settings(wanted)
            self._update_status()

    # --- selection ---
    def _row_chosen(self, current: QModelIndex, model: SaleChecksModel | None) -> None:
        if not current.isValid():
            return
        if model is None:
            flag = self.current_flag()
            row = flag.row if flag is not None else None
        else:
            row = model.row_at(current.row())
        if row is not None and self.session.sale_record(row) is not None:
            self.session.select_sale(row)
        self._update_buttons()

    def show_selection(self, row: int | None) -> None:
        """Ring the sale in the plots and select it in the tables."""
        for f in self.figures:
            f.select(row)
        d = self.diagnostics
        flag_pos = None
        if d is not None and row is not None:
            flag_pos = next((k for k, f in enumerate(d.flags) if f.row == row), None)
        _select(self.flagged_table, flag_pos)
        _select(self.sales_table, None if row is None else self.sales_model.position_of(row))
        self._update_buttons()

    def current_flag(self) -> SaleFlag | None:
        """The flagged sale selected in the flagged table."""
        d = self.diagnostics
        index = self.flagged_table.selectionModel().currentIndex()
        if d is None or not index.isValid() or index.row() >= len(d.flags):
            return None
        return d.flags[index.row()]

    def _update_buttons(self) -> None:
        flag = self.current_flag()
        self.exclude_button.setEnabled(
            flag is not None and self.session.sale_record(flag.row) is not None
        )
        self.copy_line_button.setEnabled(flag is not None)
        self.copy_text_button.setEnabled(self.diagnostics is not None)

    # --- actions ---
    def exclude_current_flag(self) -> bool:
        """Ask why and exclude the selected flagged sale. The box starts empty: a flag
        is a reason to look again, not a reason for removal (the reason must be the cause
        found, typed or chosen by the user)."""
        flag = self.current_flag()
        if flag is None or self.session.sale_record(flag.row) is None:
            return False
        return exclude_with_reason(self, self.session, flag.row)

    def copy_model_file_line(self) -> str:
        """Put the selected flag's ``[[exclude]]`` block on the clipboard; returns it."""
        flag = self.current_flag()
        if flag is None:
            return ""
        text = flag.model_file_line()
        QApplication.clipboard().setText(text)
        return text

    def copy_text(self) -> str:
        """Put the check-up as plain text (as ``appraise diagnose`` prints it) on the clipboard."""
        d = self.diagnostics
        if d is None:
            return ""
        spec = self.session.spec
        text = format_diagnostics(d, title=spec.title if spec is not None else "")
        text += "\n\n" + ONE_LINE_CAUTION
        QApplication.clipboard().setText(text)
        return text

    def open_sale_menu(self, row: int, screen_pos: QPoint) -> None:
        """Right click on a sale in a plot: exclude it (asking why, not offering the flag)."""
        self.session.select_sale(row)
        menu = sale_menu(self, self.session, row, "")
        menu.exec(screen_pos)
        menu.deleteLater()

    def _flag_menu(self, pos: QPoint) -> None:
        index = self.flagged_table.indexAt(pos)
        d = self.diagnostics
        if not index.isValid() or d is None:
            return
        row = d.flags[index.row()].row
        self.session.select_sale(row)
        menu = sale_menu(self, self.session, row, "")
        menu.addAction("Copy model-file line", self.copy_model_file_line)
        menu.exec(self.flagged_table.viewport().mapToGlobal(pos))
        menu.deleteLater()


def _select(table: QTableView, position: int | None) -> None:
    sel = table.selectionModel()
    if position is None:
        sel.clear()  # the current index too: the buttons act on it
        return
    index = table.model().index(position, 0)
    if sel.currentIndex().row() != position:
        sel.setCurrentIndex(
            index,
            QItemSelectionModel.SelectionFlag.ClearAndSelect
            | QItemSelectionModel.SelectionFlag.Rows,
        )
    table.scrollTo(index)
