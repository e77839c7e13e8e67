"""The Neighbourhoods tab: region effects with intervals, the tests between regions, the
slope of an interacted term in each region, the ratio study by region and price tier, and
the sales on a map coloured by their region's effect.

The analysis (:func:`appraise.engine.regions.analyse_regions`) runs on a pool thread of
the tab's own one-at-a-time runner whenever the fit or the subject's valuation changes;
the tab only draws what comes back. The tables are the worksheet section's tables
(:mod:`appraise.report.regions_section`), so the window and the printed worksheet say the
same thing in the same words.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QLabel,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from appraise.engine.regions import (
    RegionAnalysis,
    alpha_text,
    analyse_regions,
    has_region_term,
    level_labels,
)
from appraise.qtrender.palette import OKABE_ITO, rgba
from appraise.report.cautions import ONE_LINE_CAUTION
from appraise.report.content import Table
from appraise.report.numbers import fixed, money, pvalue, signed_percent
from appraise.report.plotdata import drawn_positions, subsample_note
from appraise.report.regions_section import (
    REFERENCE_MARK,
    SUBJECT_MARK,
    area_price_table,
    effects_table,
    level_name,
    level_text,
    pairwise_table,
    slope_tables,
    strata_table,
)

from .grid_runner import GridRunner
from .session import Session

KM_PER_DEGREE = 2 * math.pi * 6371.0088 / 360
LOW_COLOUR = OKABE_ITO["blue"]
HIGH_COLOUR = OKABE_ITO["vermillion"]
MID_COLOUR = "#D9D9D9"
NO_REGIONS = (
    "The model has no region term. Add onehot(region) to the features (and, for region "
    "slopes, a product such as living_area * onehot(region)) to compare neighbourhoods."
)


def effect_colour_map(low: float, high: float) -> tuple[pg.ColorMap, float]:
    """Blue (lowest effect) through grey (no effect) to vermillion (highest), colours from
    the app's colour-blind-safe palette, and the half-span: an effect e maps to
    0.5 + 0.5 e / span, so no effect is always the grey middle."""
    span = max(abs(low), abs(high)) or 1.0
    return pg.ColorMap(
        pos=np.array([0.0, 0.5, 1.0]),
        color=[rgba(LOW_COLOUR), rgba(MID_COLOUR), rgba(HIGH_COLOUR)],
    ), span


def fill_table(widget: QTableWidget, table: Table, note: QLabel | None = None) -> None:
    """Show a worksheet :class:`Table` in a table widget (its note in ``note``)."""
    widget.setSortingEnabled(False)
    widget.clear()
    widget.setColumnCount(len(table.columns))
    widget.setRowCount(len(table.rows))
    widget.setHorizontalHeaderLabels(list(table.columns))
    right = Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter  # once, not a cell
    on_right = [table.alignment(j) == "r" for j in range(len(table.columns))]
    for i, row in enumerate(table.rows):
        for j, text in enumerate(row):
            item = QTableWidgetItem(text)
            if on_right[j]:
                item.setTextAlignment(right)
            widget.setItem(i, j, item)
    widget.setToolTip(table.note)
    if note is not None:
        note.setText(table.note)
    widget.resizeColumnsToContents()


def _note() -> QLabel:
    label = QLabel()
    label.setWordWrap(True)
    label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
    return label


def _plot() -> pg.PlotWidget:
    """A white plot with vertical grid lines, as every plot of the tab."""
    plot = pg.PlotWidget()
    plot.setBackground("w")
    plot.showGrid(x=True, y=False, alpha=0.2)
    return plot


def _page(*items: tuple[QWidget, int]) -> QWidget:
    """A page of the tab: the widgets one under the other with their stretch factors."""
    page = QWidget()
    lay = QVBoxLayout(page)
    lay.setContentsMargins(0, 0, 0, 0)
    for widget, stretch in items:
        lay.addWidget(widget, stretch)
    return page


def _table() -> QTableWidget:
    t = QTableWidget()
    t.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
    t.verticalHeader().setVisible(False)
    t.verticalHeader().setDefaultSectionSize(t.fontMetrics().height() + 6)
    t.setWordWrap(False)
    return t


def _scale(ra: RegionAnalysis, value: float) -> float:
    """What the plots show: percent for a log response, the response itself otherwise."""
    return 100.0 * math.expm1(value) if ra.response == "log" else value


class RegionsView(QWidget):
    """The neighbourhood tab. ``analysis`` holds what is drawn (None: nothing yet)."""

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.analysis: RegionAnalysis | None = None
        self.runner = GridRunner(self)
        self.runner.done.connect(self._show)
        self.runner.failed.connect(self._failed)

        self.summary = QLabel()
        self.summary.setWordWrap(True)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.caution = QLabel(ONE_LINE_CAUTION)
        self.caution.setWordWrap(True)

        self.forest, self.effects, self.effects_note = _plot(), _table(), _note()
        effects_page = _page((self.forest, 3), (self.effects, 2), (self.effects_note, 0))

        self.pairs, self.pairs_note = _table(), _note()
        pairs_page = _page((self.pairs, 1), (self.pairs_note, 0))

        self.slope_plot, self.slopes = _plot(), _table()
        self.slope_note = QLabel()
        self.slope_note.setWordWrap(True)
        slopes_page = _page((self.slope_note, 0), (self.slope_plot, 3), (self.slopes, 2))

        self.area_plot, self.area_prices, self.area_note = _plot(), _table(), _note()
        area_page = _page((self.area_plot, 3), (self.area_prices, 2), (self.area_note, 0))

        self.strata = _table()
        self.warnings = QLabel()
        self.warnings.setWordWrap(True)
        self.warnings.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        strata_page = QWidget()
        lay = QVBoxLayout(strata_page)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.strata, 3)
        lay.addWidget(self.warnings, 1)
        self.map = pg.PlotWidget()
        self.map.setBackground("w")
        self.map.setAspectLocked(True)
        self.map.setLabel("bottom", "km east of the centre of the sales")
        self.map.setLabel("left", "km north")

        self.pages = QTabWidget()
        self.pages.addTab(effects_page, "Effects")
        self.pages.addTab(pairs_page, "Pairs")
        self.pages.addTab(area_page, "Price per area")
        self.pages.addTab(slopes_page, "Slopes")
        self.pages.addTab(strata_page, "Ratio study")
        self.pages.addTab(self.map, "Map")

        outer = QVBoxLayout(self)
        outer.addWidget(self.summary)
        outer.addWidget(self.pages, 1)
        outer.addWidget(self.caution)

        session.fitFinished.connect(self.refresh)
        session.valuationChanged.connect(self.refresh)
        session.salesChanged.connect(self._clear)
        self._clear()

    # --- running -------------------------------------------------------------------
    def refresh(self, *_args) -> None:
        """Start the analysis of the current fit (and subject) on the pool thread."""
        fit = self.session.fit
        if fit is None:
            return
        if not has_region_term(fit):
            self.runner.cancel()
            self._clear(NO_REGIONS)
            return
        valuation = self.session.valuation
        subject = getattr(valuation, "subject", None) or None
        self.runner.start(lambda: analyse_regions(fit, subject=subject))

    def _failed(self, message: str) -> None:
        self._clear(f"Neighbourhood analysis failed: {message}")

    def _clear(self, message: object = None) -> None:
        self.analysis = None
        self.summary.setText(message if isinstance(message, str) else "No fit yet.")
        for w in (self.forest, self.slope_plot, self.area_plot, self.map):
            w.clear()
        for t in (self.effects, self.pairs, self.slopes, self.area_prices, self.strata):
            t.clear()
            t.setRowCount(0)
            t.setColumnCount(0)
        for label in (self.slope_note, self.warnings, self.effects_note, self.pairs_note):
            label.setText("")
        self.area_note.setText("")

    # --- drawing -------------------------------------------------------------------
    def _show(self, ra: RegionAnalysis) -> None:
        self.analysis = ra
        j = ra.joint
        groups = (
            "; ".join("{" + ", ".join(g) + "}" for g in ra.groups.groups)
            if ra.groups.groups
            else ra.groups.method
        )
        subject = f" The subject is in {ra.subject_region}." if ra.subject_region else ""
        self.summary.setText(
            f"{len(ra.term.levels)} regions against {ra.term.reference} "
            f"({ra.term.expression}).{subject} All effects zero: F = {fixed(j.statistic, 2)} "
            f"on {j.df_num} and {j.df_den} df, p {pvalue(j.p_value)}. Regions that cannot be "
            f"told apart at {alpha_text(1 - ra.level)}: {groups}."
            + (f" {len(ra.warnings)} warning(s), listed under Ratio study." if ra.warnings else "")
        )
        self.summary.setToolTip("\n".join(ra.warnings))
        fill_table(self.effects, effects_table(ra), self.effects_note)
        fill_table(self.pairs, pairwise_table(ra), self.pairs_note)
        st = strata_table(ra)
        if st is not None:
            fill_table(self.strata, st)
        notes = [st.note] if st is not None else []
        self.warnings.setText("\n".join([*notes, *(f"- {w}" for w in ra.warnings)]))
        self._draw_forest(ra)
        self._draw_area_prices(ra)
        self._draw_slopes(ra)
        self._draw_map(ra)

    def forest_rows(self, ra: RegionAnalysis) -> list[tuple[str, float, float, float]]:
        """(label, effect, low, high) per region as drawn, lowest effect at the bottom."""
        out = []
        for e in ra.sorted_effects():
            lo, hi = (
                (e.effect.value, e.effect.value) if e.reference else (e.effect.low, e.effect.high)
            )
            label = level_name(ra, e.level) + (" (thin)" if e.thin else "")
            out.append((label, _scale(ra, e.effect.value), _scale(ra, lo), _scale(ra, hi)))
        return out

    def _draw_forest(self, ra: RegionAnalysis) -> None:
        plot = self.forest
        plot.clear()
        rows = self.forest_rows(ra)
        y = np.arange(len(rows), dtype=float)
        x = np.array([r[1] for r in rows])
        lo = np.array([r[2] for r in rows])
        hi = np.array([r[3] for r in rows])
        ok = np.isfinite(lo) & np.isfinite(hi)
        bars = pg.ErrorBarItem(
            x=x[ok], y=y[ok], left=(x - lo)[ok], right=(hi - x)[ok], beam=0.2,
            pen=pg.mkPen("#444444", width=1.5),
        )  # fmt: skip
        plot.addItem(bars)
        plot.addItem(
            pg.InfiniteLine(pos=0.0, angle=90, pen=pg.mkPen("#888888", style=Qt.PenStyle.DashLine))
        )
        effects = ra.sorted_effects()
        symbols = ["d" if e.reference else "o" for e in effects]
        brushes = [
            pg.mkBrush(255, 255, 255) if e.thin else pg.mkBrush(*rgba(OKABE_ITO["blue"]))
            for e in effects
        ]
        pens = [
            pg.mkPen(OKABE_ITO["vermillion"], width=2.5)
            if e.level == ra.subject_region
            else pg.mkPen(OKABE_ITO["blue"], width=1.5)
            for e in effects
        ]
        self.forest_points = pg.ScatterPlotItem(
            x=x, y=y, symbol=symbols, brush=brushes, pen=pens, size=11
        )
        plot.addItem(self.forest_points)
        plot.getAxis("left").setTicks([sparse_ticks([r[0] for r in rows])])
        unit = "% effect (e^b - 1)" if ra.response == "log" else "effect (price)"
        plot.setLabel(
            "bottom", f"{unit} against {ra.term.reference}, {level_text(ra.level)} interval"
        )
        plot.setTitle("Region effects: diamond = reference, hollow = thin, red edge = subject's")

    def _draw_area_prices(self, ra: RegionAnalysis) -> None:
        plot = self.area_plot
        plot.clear()
        table = area_price_table(ra)
        if table is None:
            plot.setTitle("No living-area column in the model (living_area role)")
            self.area_prices.setRowCount(0)
            return
        fill_table(self.area_prices, table, self.area_note)
        rows = sorted(ra.area_prices, key=lambda a: a.per_unit.value)
        y = np.arange(len(rows), dtype=float)
        x = np.array([a.per_unit.value for a in rows])
        lo = np.array([a.per_unit.low for a in rows])
        hi = np.array([a.per_unit.high for a in rows])
        plot.addItem(
            pg.ErrorBarItem(x=x, y=y, left=x - lo, right=hi - x, beam=0.2, pen=pg.mkPen("#444444"))
        )
        plot.addItem(
            pg.ScatterPlotItem(x=x, y=y, size=10, brush=pg.mkBrush(*rgba(OKABE_ITO["orange"])))
        )
        plot.getAxis("left").setTicks([sparse_ticks([level_name(ra, a.level) for a in rows])])
        plot.setLabel("bottom", "price per unit of living area at the region's typical sale")
        plot.setTitle(f"Price per unit of living area, {level_text(ra.level)} interval")

    def _draw_slopes(self, ra: RegionAnalysis) -> None:
        plot = self.slope_plot
        plot.clear()
        if not ra.slopes:
            self.slope_note.setText(
                "No region slopes: add a product such as living_area * onehot(region) "
                "(with living_area and onehot(region)) to let the slope differ by region."
            )
            self.slopes.setRowCount(0)
            return
        s = ra.slopes[0]
        tables = slope_tables(ra)
        fill_table(self.slopes, tables[0])
        self.slope_note.setText(tables[0].note)
        rows = sorted(s.slopes, key=lambda r: r.slope.value)
        y = np.arange(len(rows), dtype=float)
        x = np.array([r.slope.value for r in rows])
        lo = np.array([r.slope.low for r in rows])
        hi = np.array([r.slope.high for r in rows])
        plot.addItem(
            pg.ErrorBarItem(x=x, y=y, left=x - lo, right=hi - x, beam=0.2, pen=pg.mkPen("#444444"))
        )
        plot.addItem(
            pg.ScatterPlotItem(
                x=x, y=y, size=10, brush=pg.mkBrush(*rgba(OKABE_ITO["bluish green"]))
            )
        )
        plot.getAxis("left").setTicks(
            [[(float(i), level_name(ra, r.level)) for i, r in enumerate(rows)]]
        )
        plot.setLabel("bottom", f"slope of {s.factor} ({s.unit})")
        plot.setTitle(f"Slope of {s.factor} in each region, {level_text(ra.level)} interval")

    def map_points(self, ra: RegionAnalysis) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
        """(east km, north km, region effect) of every sale used, or None without
        coordinates."""
        fit = self.session.fit
        if fit is None or not ra.centroids:
            return None
        roles = fit.sales.roles
        lat_c, lon_c = roles.column("latitude"), roles.column("longitude")
        frame = fit.frame
        lat = frame[lat_c].to_numpy(dtype=float)
        lon = frame[lon_c].to_numpy(dtype=float)
        lat0, lon0 = float(np.nanmean(lat)), float(np.nanmean(lon))
        east = (lon - lon0) * KM_PER_DEGREE * math.cos(math.radians(lat0))
        north = (lat - lat0) * KM_PER_DEGREE
        by_level = {e.level: e.effect.value for e in ra.effects}
        # each distinct value labelled once (a county has a million sales, a few regions)
        codes, uniques = pd.factorize(frame[ra.term.column], use_na_sentinel=True)
        labels = level_labels(pd.Series(uniques))
        per_level = pd.Series(labels, dtype=object).map(by_level).to_numpy(dtype=float)
        effect = np.append(per_level, np.nan)[np.where(codes < 0, len(uniques), codes)]
        self._map_origin = (lat0, lon0)
        return east, north, effect

    def _draw_map(self, ra: RegionAnalysis) -> None:
        plot = self.map
        plot.clear()
        pts = self.map_points(ra)
        if pts is None:
            plot.setTitle("No coordinates mapped (latitude and longitude roles)")
            return
        east, north, effect = pts
        cmap, span = effect_colour_map(float(np.nanmin(effect)), float(np.nanmax(effect)))
        # a county's sales: a seeded subsample beyond MAX_DRAWN, said in the title; one
        # brush per region (the effect is the region's), not one per sale
        keep = drawn_positions(len(east), MAP_MAX_DRAWN)
        east, north, effect = east[keep], north[keep], effect[keep]
        shade = np.clip(0.5 + 0.5 * np.nan_to_num(effect, nan=0.0) / span, 0.0, 1.0)
        values, inverse = np.unique(shade, return_inverse=True)
        if len(values) > MAP_SHADES:  # thousands of regions: the colour scale in steps
            shade = np.round(shade * (MAP_SHADES - 1)) / (MAP_SHADES - 1)
            values, inverse = np.unique(shade, return_inverse=True)
        # one scatter per shade with a single brush: pyqtgraph draws a brush per point
        # far more slowly (0.2 s for 20,000 points on the window's thread)
        self.map_sales = []
        for k, colour in enumerate(cmap.map(values, mode="qcolor")):
            at = inverse == k
            item = pg.ScatterPlotItem(
                x=east[at], y=north[at], size=6, pen=None, brush=pg.mkBrush(colour)
            )
            plot.addItem(item)
            self.map_sales.append(item)
        note = subsample_note(len(pts[0]), MAP_MAX_DRAWN)
        lat0, lon0 = self._map_origin
        labelled = labelled_centroids(ra)
        effects = {e.level: e for e in ra.effects}
        for c in labelled:
            x = (c.longitude - lon0) * KM_PER_DEGREE * math.cos(math.radians(lat0))
            y = (c.latitude - lat0) * KM_PER_DEGREE
            e = effects[c.level]
            text = pg.TextItem(
                f"{c.level}\n{_effect_text(ra, e.effect.value)}", color="#000000", anchor=(0.5, 0.5)
            )
            text.setPos(x, y)
            plot.addItem(text)
        plot.setTitle(
            "Sales coloured by their region's effect (blue lower, vermillion higher than "
            f"{ra.term.reference}); "
            + (
                "labels at each region's centre"
                if len(labelled) == len(ra.centroids)
                else f"labels at the centres of the {len(labelled)} regions with the most sales "
                f"(of {len(ra.centroids):,}) and the subject's"
            )
            + (f"; {note}" if note else "")
        )


MAX_TICK_LABELS = 60
"""Most region names written along a plot's axis; beyond, every k-th row is named (and
the reference and the subject's), the others are still drawn and listed in the tables."""


def sparse_ticks(labels: list[str]) -> list[tuple[float, str]]:
    """Axis ticks (row, name) for ``labels``: every one up to :data:`MAX_TICK_LABELS`,
    else every k-th and those marked as the reference or the subject's."""
    if len(labels) <= MAX_TICK_LABELS:
        return [(float(i), t) for i, t in enumerate(labels)]
    step = -(-len(labels) // MAX_TICK_LABELS)
    return [
        (float(i), t)
        for i, t in enumerate(labels)
        if i % step == 0 or REFERENCE_MARK in t or SUBJECT_MARK in t
    ]


MAP_MAX_LABELS = 30
"""Most regions labelled on the map (those with the most sales, and the subject's): a
county's thousand tract labels would cover the map and take a second to lay out."""


def labelled_centroids(ra: RegionAnalysis) -> list:
    """The centroids the map labels: all, or the :data:`MAP_MAX_LABELS` with the most
    sales and the subject's region."""
    cs = list(ra.centroids)
    if len(cs) <= MAP_MAX_LABELS:
        return cs
    top = sorted(cs, key=lambda c: (-c.count, c.level))[:MAP_MAX_LABELS]
    chosen = {c.level for c in top}
    return [c for c in cs if c.level in chosen or c.level == ra.subject_region]


MAP_MAX_DRAWN = 5_000
"""Most sales drawn on the map (a seeded subsample beyond, said in the title): pyqtgraph
spends about 7 ms of the window's thread on every thousand points, and a map of a few
thousand dots shows where each region lies as well as twenty thousand would."""

MAP_SHADES = 64
"""Most distinct colours on the map; beyond them the effect scale is drawn in steps."""


def _effect_text(ra: RegionAnalysis, value: float) -> str:
    if ra.response == "log":
        return signed_percent(100 * math.expm1(value), 3)
    return ("+" if value >= 0 else "") + money(value)


__all__ = ["RegionsView", "effect_colour_map", "fill_table"]
