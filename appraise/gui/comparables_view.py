"""The Comparables tab: ranked candidates, the adjustment grid, reconciliation, the
market-conditions index and a map of the subject and its comparables.

Everything is computed by :func:`appraise.pipeline.grid` on a pool thread (the session's
:class:`~appraise.gui.grid_runner.GridRunner`, shared with the worksheet); the tab only
draws what comes back. The choices (effective date,
filters, pins, chosen comparables, weights) live in the session's
:class:`~appraise.engine.comparables.ComparablesChoice`, which the workfile keeps.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QCheckBox,
    QDoubleSpinBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from appraise import pipeline
from appraise.engine.comparables import ComparablesChoice, SelectionSettings
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.labels import group_label
from appraise.report.numbers import MISSING, fixed, money, percent

from .session import Session

KM_PER_DEGREE = 2 * math.pi * 6371.0088 / 360
RINGS_KM = (0.5, 1.0, 2.0, 5.0)
CANDIDATE_COLUMNS = (
    "Pinned",
    "Sale id",
    "Score",
    "Gross %",
    "km",
    "Months",
    "Same region",
    "Price",
)


def _num_item(value: float | None, text: str) -> QTableWidgetItem:
    item = QTableWidgetItem(text)
    item.setData(Qt.ItemDataRole.UserRole, value)
    if value is not None and math.isfinite(value):
        item.setData(Qt.ItemDataRole.EditRole, float(value))
        item.setText(text)
    item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    return item


class _SortItem(QTableWidgetItem):
    """Sorts by the number behind the text."""

    def __lt__(self, other: QTableWidgetItem) -> bool:
        a, b = self.data(Qt.ItemDataRole.UserRole), other.data(Qt.ItemDataRole.UserRole)
        if isinstance(a, int | float) and isinstance(b, int | float):
            return float(a) < float(b)
        return self.text() < other.text()


def _sort_item(value: Any, text: str) -> QTableWidgetItem:
    item = _SortItem(text)
    item.setData(Qt.ItemDataRole.UserRole, value)
    item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
    return item


class ComparablesView(QWidget):
    """The sales comparison tab (see the module docstring)."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        import pyqtgraph as pg

        self.session = session
        self.grid = None
        self.table = None
        self._currency = "$"

        # --- choices
        self.effective = QLineEdit()
        self.effective.setPlaceholderText("YYYY-MM-DD, the subject's date of value")
        self.max_km = QDoubleSpinBox(minimum=0, maximum=1000, decimals=1, specialValueText="any")
        self.max_months = QDoubleSpinBox(minimum=0, maximum=600, decimals=0, specialValueText="any")
        self.same_region = QCheckBox("same region only")
        self.count = QSpinBox(minimum=1, maximum=12, value=4)
        self.use_ranking = QPushButton("Use the ranking")
        self.pin_button = QPushButton("Pin / unpin selected")
        self.use_selected = QPushButton("Use selected as comparables")
        # two rows, the filters then the actions, so the tab fits beside the side panels
        # on a 1366-pixel laptop screen
        filters_row = QHBoxLayout()
        for label, w in (
            ("Effective date", self.effective),
            ("Max km", self.max_km),
            ("Max months", self.max_months),
            ("", self.same_region),
            ("Comparables", self.count),
        ):
            if label:
                filters_row.addWidget(QLabel(label))
            filters_row.addWidget(w)
        filters_row.addStretch(1)
        actions_row = QHBoxLayout()
        for button in (self.pin_button, self.use_selected, self.use_ranking):
            actions_row.addWidget(button)
        actions_row.addStretch(1)
        bar = QVBoxLayout()
        bar.addLayout(filters_row)
        bar.addLayout(actions_row)

        self.candidates = QTableWidget(0, len(CANDIDATE_COLUMNS))
        self.candidates.setHorizontalHeaderLabels(CANDIDATE_COLUMNS)
        self.candidates.setSortingEnabled(True)
        self.candidates.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)

        self.grid_table = QTableWidget(0, 0)
        self.grid_table.itemChanged.connect(self._weight_edited)
        self.reconciliation = QLabel("")
        self.reconciliation.setWordWrap(True)
        self.reconciliation.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.status = QLabel("")
        self.status.setWordWrap(True)

        self.index_plot = pg.PlotWidget(background="w", title="Market conditions")
        self.index_plot.setLabel("bottom", "months from the effective date")
        self.index_plot.setLabel("left", "price index (1 = effective date)")
        self.map_plot = pg.PlotWidget(background="w", title="Subject and comparables (km)")
        self.map_plot.setAspectLocked(True, ratio=1.0)
        self.map_plot.setLabel("bottom", "km east of the subject")
        self.map_plot.setLabel("left", "km north of the subject")

        plots = QSplitter(Qt.Orientation.Horizontal)
        plots.addWidget(self.index_plot)
        plots.addWidget(self.map_plot)
        lower = QWidget()
        lv = QVBoxLayout(lower)
        lv.addWidget(self.grid_table, 3)
        lv.addWidget(self.reconciliation)
        lv.addWidget(plots, 2)
        split = QSplitter(Qt.Orientation.Vertical)
        split.addWidget(self.candidates)
        split.addWidget(lower)
        layout = QVBoxLayout(self)
        layout.addLayout(bar)
        layout.addWidget(self.status)
        layout.addWidget(split, 1)

        self._filling = False
        self._show_choice(session.comparables)
        self.effective.editingFinished.connect(self._choices_edited)
        for w in (self.max_km, self.max_months, self.count):
            w.valueChanged.connect(self._choices_edited)
        self.same_region.toggled.connect(self._choices_edited)
        self.use_ranking.clicked.connect(self._use_ranking)
        self.pin_button.clicked.connect(self._toggle_pins)
        self.use_selected.clicked.connect(self._use_selected)
        session.gridChanged.connect(self._grid_changed)
        session.valuationChanged.connect(
            lambda *_: self.status.setText("updating the adjustment grid...")
        )
        session.gridFailed.connect(self._failed)
        session.comparablesChanged.connect(self._show_choice)
        session.subjectChanged.connect(lambda *_: self._show_choice(session.comparables))
        if session.grid is not None:
            self._grid_changed(session.grid)

    # --- choices -------------------------------------------------------------------
    def set_currency(self, symbol: str) -> None:
        self._currency = symbol
        if self.grid is not None:
            self._show(self.grid, self.table)

    def _subject_date(self) -> str:
        value = self.session.subject.get("effective_date")
        return "" if value is None else str(value).strip()[:10]

    def _show_choice(self, c: ComparablesChoice) -> None:
        """The choices on screen; the effective date is the subject's (one date of value per
        analysis), unless an older workfile's choices carry one of their own."""
        self._filling = True
        self.effective.setText(c.effective_date or self._subject_date())
        self.max_km.setValue(c.filters.max_km or 0)
        self.max_months.setValue(c.filters.max_months or 0)
        self.same_region.setChecked(c.filters.same_region_only)
        self.count.setValue(c.filters.count)
        self._filling = False

    def _choices_edited(self, *_: object) -> None:
        if self._filling:
            return
        c = self.session.comparables
        filters = SelectionSettings(
            max_km=self.max_km.value() or None,
            max_months=self.max_months.value() or None,
            same_region_only=self.same_region.isChecked(),
            count=self.count.value(),
        )
        eff = self.effective.text().strip() or None
        if eff is not None and eff != (c.effective_date or self._subject_date()):
            # the date of value belongs to the subject: the value, the grid and the
            # worksheet then share it
            self.session.set_subject({**self.session.subject, "effective_date": eff})
            c = dataclasses.replace(c, effective_date=None)
        self.session.set_comparables(dataclasses.replace(c, filters=filters))

    def _selected_ids(self) -> list[str]:
        rows = sorted({i.row() for i in self.candidates.selectedIndexes()})
        return [self.candidates.item(r, 1).text() for r in rows]

    def _toggle_pins(self) -> None:
        c = self.session.comparables
        pins = list(c.pinned)
        for sid in self._selected_ids():
            if sid in pins:
                pins.remove(sid)
            else:
                pins.append(sid)
        self.session.set_comparables(dataclasses.replace(c, pinned=tuple(pins), weights=None))

    def _use_selected(self) -> None:
        ids = self._selected_ids()
        if ids:
            c = self.session.comparables
            self.session.set_comparables(dataclasses.replace(c, chosen=tuple(ids), weights=None))

    def _use_ranking(self) -> None:
        c = self.session.comparables
        self.session.set_comparables(dataclasses.replace(c, chosen=None, weights=None))

    def _weight_edited(self, item: QTableWidgetItem) -> None:
        if self._filling or self.grid is None or item.row() != self.grid_table.rowCount() - 1:
            return
        try:
            weights = [
                float(self.grid_table.item(item.row(), j).text().rstrip("%")) / 100
                for j in range(self.grid_table.columnCount())
            ]
        except (ValueError, AttributeError):
            self.status.setText("a weight must be a percentage, such as 40%")
            return
        total = sum(weights)
        if abs(total - 1) > 1e-6:
            self.status.setText(
                f"the weights add up to {100 * total:.1f}%: they must add up to 100%"
            )
            return
        c = self.session.comparables
        ids = tuple(col.sale_id for col in self.grid.comparables)
        self.session.set_comparables(dataclasses.replace(c, chosen=ids, weights=tuple(weights)))

    # --- results -------------------------------------------------------------------
    def refresh(self) -> None:
        """Ask the session for a fresh grid (it arrives by ``gridChanged``)."""
        self.status.setText("updating the adjustment grid...")
        self.session.refresh_grid()

    def _grid_changed(self, grid) -> None:
        if grid is None:
            return  # the reason, if any, comes by gridFailed; keep the last grid drawn
        self._show(grid, self.session.grid_candidates)

    def _failed(self, message: str) -> None:
        self.status.setText(f"no adjustment grid: {message}")

    # --- drawing -------------------------------------------------------------------
    def _show(self, grid, table) -> None:
        self.grid, self.table = grid, table
        self.status.setText(" | ".join(grid.warnings) if grid.warnings else "")
        self._fill_candidates(table, grid)
        self._fill_grid(grid)
        self._fill_reconciliation(grid)
        self._draw_index(grid)
        self._draw_map(grid, table)

    def _fill_candidates(self, table, grid) -> None:
        cur = self._currency
        pins = set(self.session.comparables.pinned)
        chosen = {c.sale_id for c in grid.comparables}
        shown = table[table["eligible"]].sort_values("score", kind="stable").head(200)
        self.candidates.setSortingEnabled(False)
        self.candidates.setRowCount(len(shown))
        for i, (_, r) in enumerate(shown.iterrows()):
            sid = str(r["sale_id"])
            mark = ("pinned" if sid in pins else "") + (" *" if sid in chosen else "")
            same = r.get("same_region")
            cells = [
                _sort_item(mark, mark.strip()),
                _sort_item(sid, sid),
                _sort_item(float(r["score"]), fixed(r["score"], 1)),
                _sort_item(float(r["gross_pct"]), percent(r["gross_pct"], 1)),
                _sort_item(float(r["distance_km"]), fixed(r["distance_km"], 2)),
                _sort_item(float(r["months"]), fixed(r["months"], 1)),
                _sort_item(str(same), MISSING if same is None else ("yes" if same else "no")),
                _sort_item(float(r["sale_price"]), money(r["sale_price"], cur)),
            ]
            for j, item in enumerate(cells):
                self.candidates.setItem(i, j, item)
        self.candidates.setSortingEnabled(True)

    def _fill_grid(self, grid) -> None:
        cur = self._currency
        comps = grid.comparables
        labels = ["Sale price", "Sale date", "Distance (km)"]
        labels += [
            ("Market conditions: " if a.market_conditions else "") + group_label(a.group)
            for a in comps[0].adjustments
        ]
        labels += ["Net adjustment", "Gross adjustment", "Adjusted price", "Weight"]
        self._filling = True
        self.grid_table.clear()
        self.grid_table.setColumnCount(len(comps))
        self.grid_table.setRowCount(len(labels))
        self.grid_table.setVerticalHeaderLabels(labels)
        self.grid_table.setHorizontalHeaderLabels([c.sale_id for c in comps])
        for j, c in enumerate(comps):
            date = MISSING if c.sale_date is None else str(c.sale_date)[:10]
            cells = [
                _num_item(c.sale_price, money(c.sale_price, cur)),
                _num_item(None, date),
                _num_item(
                    c.distance_km, fixed(c.distance_km, 2) if c.distance_km is not None else MISSING
                ),
            ]
            for a in c.adjustments:
                item = _num_item(a.amount, money(a.amount, cur))
                item.setToolTip(f"standard error {money(a.se, cur)}")
                cells.append(item)
            cells += [
                _num_item(c.net, f"{money(c.net, cur)} ({percent(c.net_pct, 1)})"),
                _num_item(c.gross, f"{money(c.gross, cur)} ({percent(c.gross_pct, 1)})"),
                _num_item(c.adjusted, f"{money(c.adjusted, cur)} (SE {money(c.adjusted_se, cur)})"),
            ]
            w = QTableWidgetItem(percent(c.weight, 1))
            w.setToolTip("edit: weights must add up to 100%")
            cells.append(w)
            if c.flags:
                for k in (len(cells) - 4, len(cells) - 3):
                    cells[k].setToolTip("; ".join(c.flags))
                    cells[k].setForeground(Qt.GlobalColor.darkRed)
            for i, item in enumerate(cells):
                self.grid_table.setItem(i, j, item)
        self._filling = False

    def _fill_reconciliation(self, grid) -> None:
        cur = self._currency
        r = grid.reconciliation
        lines = [
            f"Effective date {str(grid.effective_date)[:10]}. {grid.order_note}.",
            f"Reconciled value {money(r.value, cur)} (weights from {r.weights_from}); "
            f"adjusted prices {money(r.low, cur)} to {money(r.high, cur)}.",
            f"Regression estimate {money(r.regression_estimate, cur)}, {percent(r.level)} "
            f"single-sale interval {money(r.regression_low, cur)} to {money(r.regression_high, cur)}.",
        ]
        flags = [f"{c.sale_id}: {f}" for c in grid.comparables for f in c.flags]
        lines += flags
        lines.append(ONE_LINE_CAUTION)
        self.reconciliation.setText("\n".join(lines))

    def _draw_index(self, grid) -> None:
        import pyqtgraph as pg

        from appraise.qtrender.grid_figures import index_points

        p = index_points(grid)
        plot = self.index_plot
        plot.clear()
        lo = plot.plot(p["x"], p["low"], pen=pg.mkPen(150, 150, 150))
        hi = plot.plot(p["x"], p["high"], pen=pg.mkPen(150, 150, 150))
        plot.addItem(pg.FillBetweenItem(lo, hi, brush=pg.mkBrush(46, 84, 150, 50)))
        plot.plot(p["x"], p["index"], pen=pg.mkPen(46, 84, 150, width=2))
        plot.plot(
            p["comp_x"],
            p["comp_y"],
            pen=None,
            symbol="t",
            symbolSize=11,
            symbolBrush=pg.mkBrush(200, 40, 30),
        )
        title = (
            "Market conditions"
            if p["has_time"]
            else "Market conditions: the model has no time term"
        )
        plot.setTitle(title)

    def _draw_map(self, grid, table) -> None:
        import pyqtgraph as pg

        plot = self.map_plot
        plot.clear()
        fit = self.session.fit
        if "latitude" not in table.columns or fit is None:
            plot.setTitle("Subject and comparables: no coordinates")
            return
        sub = pipeline.subject_frame(pipeline.filled(dict(self.session.subject)), fit.sales)
        lat_c = fit.sales.roles.column("latitude")
        lon_c = fit.sales.roles.column("longitude")
        lat0, lon0 = float(sub[lat_c].iloc[0]), float(sub[lon_c].iloc[0])
        ids = [c.sale_id for c in grid.comparables]
        rows = table.set_index("sale_id").loc[ids]
        x = (rows["longitude"].to_numpy() - lon0) * KM_PER_DEGREE * math.cos(math.radians(lat0))
        y = (rows["latitude"].to_numpy() - lat0) * KM_PER_DEGREE
        t = np.linspace(0, 2 * np.pi, 121)
        for r in RINGS_KM:
            plot.plot(
                r * np.cos(t),
                r * np.sin(t),
                pen=pg.mkPen(170, 170, 170, style=Qt.PenStyle.DashLine),
            )
        plot.plot(x, y, pen=None, symbol="o", symbolSize=10, symbolBrush=pg.mkBrush(46, 84, 150))
        for sid, xi, yi in zip(ids, x, y, strict=True):
            label = pg.TextItem(sid, color=(20, 20, 20), anchor=(0, 1))
            label.setPos(float(xi), float(yi))
            plot.addItem(label)
        plot.plot(
            [0], [0], pen=None, symbol="star", symbolSize=16, symbolBrush=pg.mkBrush(200, 40, 30)
        )
        plot.setTitle(
            "Subject (star) and comparables; rings at "
            + ", ".join(f"{r:g}" for r in RINGS_KM)
            + " km"
        )


__all__ = ["ComparablesView"]
