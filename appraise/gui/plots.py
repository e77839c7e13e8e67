"""The window's four sale plots, drawn with pyqtgraph from the one plot-data definition.

What each plot shows (titles, axes, the subject, reference lines, the map in km) is
defined without Qt in :mod:`appraise.report.plotdata`, which the worksheet's figures
(:mod:`appraise.qtrender.figures`) draw too. Here the data become interactive
``pg.PlotItem`` objects: hover a sale for its details, click to select it, right-click
to exclude it (with a reason). The ``*_figure`` functions are pure (results in, a
:class:`SalePlot` out); :class:`PlotsView` builds them for a
:class:`~appraise.gui.session.Session` and redraws them when its results change.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from html import escape
from typing import TYPE_CHECKING, Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPoint, QThreadPool, QTimer
from PySide6.QtWidgets import QGraphicsEllipseItem, QLabel, QMenu, QVBoxLayout, QWidget

from appraise.engine.sales import Exclusion, SalesTable
from appraise.report.plotdata import (
    MAX_DRAWN,
    PlotData,
    SalePoints,
    group_order,
    location_plot,
    model_sale_plot,
    price_area_plot,
    residual_plot,
    sale_points,
    subject_mark,
)

from .plot_items import (
    AXIS_COLOUR,
    EXCLUDED_COLOUR,
    REFERENCE_LINE_COLOUR,
    SINGLE_COLOUR,
    SUBJECT_COLOUR,
    TEXT_COLOUR,
    GroupedAxis,
    SaleScatter,
    interval_bar,
    money_axis,
    reference_line,
    region_styles,
    sale_scatter,
    selection_ring,
    show_message,
    subject_label,
    subject_marker,
)
from .sales_view import exclude_with_reason
from .workers import Task, TaskSignals

if TYPE_CHECKING:
    from appraise.engine.fitting import FitResult
    from appraise.engine.valuation import Valuation

    from .session import Session

__all__ = [
    "PlotsView",
    "SalePlot",
    "SalePoints",
    "location_figure",
    "predicted_actual_figure",
    "price_area_figure",
    "residual_figure",
    "sale_menu",
    "sale_points",
]


# --- building the plots -----------------------------------------------------------------------


@dataclass(eq=False)
class SalePlot:
    """A built plot, plus what a view needs to highlight a sale or move the subject in it.

    ``kind`` is one of "price_area", "model_sale", "residuals", "location" (or a checks
    plot's kind); ``rows``/``xy`` are the file rows drawn (sorted) and their positions.
    """

    plot: pg.PlotItem
    kind: str
    roles: Mapping[str, str] = field(default_factory=dict)
    scatters: list[SaleScatter] = field(default_factory=list)
    rows: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    xy: np.ndarray = field(default_factory=lambda: np.zeros((0, 2)))
    ring: pg.ScatterPlotItem | None = None
    subject_items: list = field(default_factory=list)
    points: SalePoints | None = None

    def position(self, row: int) -> tuple[float, float] | None:
        """Where the sale at file row ``row`` is drawn, or None."""
        i = int(np.searchsorted(self.rows, row))
        if i < len(self.rows) and self.rows[i] == row:
            return float(self.xy[i, 0]), float(self.xy[i, 1])
        return None

    def select(self, row: int | None) -> bool:
        """Ring the sale at file row ``row`` (None clears); False when it is not drawn here."""
        if self.ring is None:
            return False
        xy = None if row is None else self.position(int(row))
        if xy is None:
            self.ring.setData(x=[], y=[])
            return False
        self.ring.setData(x=[xy[0]], y=[xy[1]])
        return True

    def set_subject(
        self, valuation: Valuation | None, subject: Mapping[str, Any] | None = None
    ) -> None:
        """Draw the subject for ``valuation`` (or, on the map, the entered ``subject``),
        replacing what was drawn for the previous one."""
        for item in self.subject_items:
            self.plot.removeItem(item)
        self.subject_items = []
        if self.ring is None or self.points is None:  # a message, or not a sale plot
            return
        mark = subject_mark(self.kind, self.points, valuation, subject)
        for item in _subject_items(mark):
            self.plot.addItem(item)
            self.subject_items.append(item)


def _subject_items(mark) -> list:
    if mark is None:
        return []
    items = []
    if mark.line is not None:
        angle = 90 if mark.line == "vertical" else 0
        at = mark.x if angle == 90 else mark.y
        items.append(reference_line(angle, at, "Subject", dashed=False))
    if mark.x is None or mark.y is None:
        return items
    if mark.low is not None and mark.high is not None:
        items += interval_bar(mark.x, mark.y, mark.low, mark.high)
    items.append(subject_marker(mark.x, mark.y))
    items.append(subject_label(mark.x, mark.y))
    for r in mark.rings_km:
        circle = QGraphicsEllipseItem(mark.x - r, mark.y - r, 2 * r, 2 * r)
        circle.setPen(pg.mkPen(REFERENCE_LINE_COLOUR, width=1, style=pg.QtCore.Qt.PenStyle.DotLine))
        circle.setZValue(-4)
        label = pg.TextItem(f"{r:g} km", color=REFERENCE_LINE_COLOUR, anchor=(0.5, 1.0))
        label.setPos(mark.x, mark.y + r)
        items += [circle, label]
    return items


def new_plot(title: str, bottom: pg.AxisItem, left: pg.AxisItem, legend: bool) -> pg.PlotItem:
    for axis in (bottom, left):
        axis.setPen(pg.mkPen(AXIS_COLOUR))
        axis.setTextPen(pg.mkPen(TEXT_COLOUR))
    plot = pg.PlotItem(axisItems={"bottom": bottom, "left": left})
    plot.setTitle(title, size="11pt", color=TEXT_COLOUR)
    plot.showGrid(x=True, y=True, alpha=0.18)
    plot.setMenuEnabled(False)
    plot.hideButtons()
    if legend:
        plot.addLegend(
            offset=(8, 8),
            labelTextSize="8pt",
            labelTextColor=TEXT_COLOUR,
            brush=pg.mkBrush(255, 255, 255, 215),
            pen=pg.mkPen("#BBBBBB"),
            verSpacing=-6,
        )
    return plot


def _scatter_sales(
    sp: SalePlot, pts: SalePoints, x: np.ndarray, y: np.ndarray, currency: str
) -> None:
    """Excluded sales hollow and grey underneath, used sales on top by region group
    (beyond the readable number of colours the smallest regions share one "other").

    Only the drawn positions (all sales, or the seeded subsample) are looked at, so a
    county's million sales cost what its 20,000 drawn ones do."""
    drawn_at = pts.drawn()  # positions, sorted
    dx, dy, rows = x[drawn_at], y[drawn_at], pts.rows[drawn_at]
    finite = np.isfinite(dx) & np.isfinite(dy)
    used = pts.used[drawn_at]
    order_idx = np.argsort(rows, kind="stable")
    order_rows = rows[order_idx]

    def tip(x=None, y=None, data=None):
        i = int(np.searchsorted(order_rows, data))
        return pts.describe(int(drawn_at[order_idx[i]]), currency)

    out = ~used & finite
    if out.any():
        s = sale_scatter(
            dx[out],
            dy[out],
            rows[out],
            colour=EXCLUDED_COLOUR,
            hollow=True,
            name=f"Excluded ({int((~pts.used).sum())})",
            tip=tip,
        )
        s.setZValue(-1)
        sp.plot.addItem(s)
        sp.scatters.append(s)
    keep = used & finite
    if pts.groups is None:
        groups = [("Sales", keep, SINGLE_COLOUR, "o")]
    else:
        styles = region_styles(group_order(pts.groups))  # colours from every sale's group
        drawn_groups = pts.groups[drawn_at]
        groups = [
            (lvl, keep & (drawn_groups == lvl), st.colour, st.symbol) for lvl, st in styles.items()
        ]
    for name, mask, colour, symbol in groups:
        if mask.any():
            s = sale_scatter(
                dx[mask], dy[mask], rows[mask], colour=colour, symbol=symbol, name=name, tip=tip
            )
            sp.plot.addItem(s)
            sp.scatters.append(s)
    drawn = order_idx[finite[order_idx]]
    sp.rows = rows[drawn]
    sp.xy = np.column_stack([dx[drawn], dy[drawn]])
    sp.roles = pts.roles
    sp.ring = selection_ring()
    sp.plot.addItem(sp.ring)


def _axis(orientation: str, money: bool, currency: str) -> pg.AxisItem:
    return money_axis(orientation, currency) if money else GroupedAxis(orientation)


def draw_plot(
    data: PlotData,
    pts: SalePoints,
    *,
    currency: str = "$",
    selected: int | None = None,
    legend: bool = True,
    valuation: Valuation | None = None,
    subject: Mapping[str, Any] | None = None,
) -> SalePlot:
    """Draw one :class:`~appraise.report.plotdata.PlotData` as an interactive plot."""
    title = data.title if data.note is None else f"{data.title} ({data.note})"
    plot = new_plot(
        title,
        _axis("bottom", data.x_axis.money, currency),
        _axis("left", data.y_axis.money, currency),
        legend,
    )
    sp = SalePlot(plot, data.kind, points=pts)
    plot.setLabel("bottom", data.x_axis.label)
    plot.setLabel("left", data.y_axis.label)
    if data.message is not None or data.x is None or data.y is None:
        show_message(plot, data.message or "Nothing to draw.")
        return sp
    _scatter_sales(sp, pts, data.x, data.y, currency)
    for line in data.lines:
        if line.kind == "diagonal":
            both = np.concatenate([data.x, data.y])
            both = both[np.isfinite(both)]
            if both.size:
                lo, hi = float(both.min()), float(both.max())
                plot.addItem(reference_line(45, (0, 0), line.label))
                plot.setXRange(lo, hi, padding=0.04)
                plot.setYRange(lo, hi, padding=0.04)
        else:
            angle = 0 if line.kind == "horizontal" else 90
            plot.addItem(reference_line(angle, line.value, line.label, dashed=line.dashed))
    if data.equal_aspect:
        plot.getViewBox().setAspectLocked(True, ratio=1.0)
        _scale_bar(plot, data)
    sp.set_subject(valuation, subject)
    sp.select(selected)
    return sp


def _scale_bar(plot: pg.PlotItem, data: PlotData) -> None:
    """A round-length bar in the map's corner (the axes are in km, drawn to scale)."""
    x = data.x[np.isfinite(data.x)] if data.x is not None else np.zeros(0)
    if x.size == 0:
        return
    span = float(x.max() - x.min()) or 1.0
    size = next((v for v in (10.0, 5.0, 2.0, 1.0, 0.5) if v <= span / 4), 0.5)
    bar = pg.ScaleBar(size=size, suffix="m", pen=pg.mkPen(TEXT_COLOUR, width=2))
    bar.size = size  # in km: the label below says so
    bar.text.setText(f"{size:g} km")
    bar.setParentItem(plot.getViewBox())
    bar.anchor((1, 1), (1, 1), offset=(-16, -16))


def price_area_figure(
    fit: FitResult | None,
    valuation: Valuation | None = None,
    *,
    sales: SalesTable | None = None,
    user_exclusions: Iterable[Exclusion] = (),
    currency: str = "$",
    selected: int | None = None,
    legend: bool = True,
    points: SalePoints | None = None,
) -> SalePlot:
    """Sale price against living area; the subject's estimate with its prediction interval."""
    pts = (
        points
        if points is not None
        else sale_points(fit, sales=sales, user_exclusions=user_exclusions)
    )
    return draw_plot(
        price_area_plot(pts, valuation, currency),
        pts,
        currency=currency,
        selected=selected,
        legend=legend,
        valuation=valuation,
    )


def predicted_actual_figure(
    fit: FitResult | None,
    valuation: Valuation | None = None,
    *,
    user_exclusions: Iterable[Exclusion] = (),
    currency: str = "$",
    selected: int | None = None,
    legend: bool = True,
    points: SalePoints | None = None,
) -> SalePlot:
    """The model's value against the sale price; on the dashed 45-degree line they agree."""
    if fit is None and points is None:
        return _message_plot(model_sale_plot, currency, legend)
    pts = points if points is not None else sale_points(fit, user_exclusions=user_exclusions)
    return draw_plot(
        model_sale_plot(pts, fit, valuation, currency),
        pts,
        currency=currency,
        selected=selected,
        legend=legend,
        valuation=valuation,
    )


def residual_figure(
    fit: FitResult | None,
    valuation: Valuation | None = None,
    *,
    user_exclusions: Iterable[Exclusion] = (),
    currency: str = "$",
    selected: int | None = None,
    legend: bool = True,
    points: SalePoints | None = None,
) -> SalePlot:
    """Residuals (response scale) against the model's value in price units; zero and ±2s."""
    if fit is None and points is None:
        return _message_plot(residual_plot, currency, legend)
    pts = points if points is not None else sale_points(fit, user_exclusions=user_exclusions)
    return draw_plot(
        residual_plot(pts, fit, valuation, currency),
        pts,
        currency=currency,
        selected=selected,
        legend=legend,
        valuation=valuation,
    )


def location_figure(
    fit: FitResult | None,
    valuation: Valuation | None = None,
    *,
    sales: SalesTable | None = None,
    subject: Mapping[str, Any] | None = None,
    user_exclusions: Iterable[Exclusion] = (),
    currency: str = "$",
    selected: int | None = None,
    legend: bool = True,
    points: SalePoints | None = None,
) -> SalePlot:
    """The sales in km east and north of their median position, to scale; the subject
    (from ``valuation.subject``, else from ``subject``) with distance rings."""
    if fit is None and sales is None and points is None:
        return _message_plot(location_plot, currency, legend, "No sales loaded.")
    pts = (
        points
        if points is not None
        else sale_points(fit, sales=sales, user_exclusions=user_exclusions)
    )
    return draw_plot(
        location_plot(pts, valuation, subject),
        pts,
        currency=currency,
        selected=selected,
        legend=legend,
        valuation=valuation,
        subject=subject,
    )


def _message_plot(builder, currency: str, legend: bool, message: str | None = None) -> SalePlot:
    """A plot that only says why it is empty (no fit, no sales), with its usual axes."""
    empty = SalePoints(
        rows=np.zeros(0, dtype=np.int64),
        sale_ids=np.zeros(0, dtype=object),
        price=np.zeros(0),
        area=None,
        region=None,
        lat=None,
        lon=None,
        used=np.zeros(0, dtype=bool),
        reason=np.zeros(0, dtype=object),
        fitted=np.zeros(0),
        resid=np.zeros(0),
        area_unit="ft2",
    )
    data = (
        builder(empty, None) if builder is location_plot else builder(empty, None, None, currency)
    )
    if message is not None:
        from dataclasses import replace

        data = replace(data, message=message)
    return draw_plot(data, empty, currency=currency, legend=legend)


def legend_html(pts: SalePoints | None) -> str:
    """A one-line legend shared by the four plots (rich text for a QLabel)."""
    parts = []
    if pts is not None and pts.groups is not None:
        for level, st in region_styles(group_order(pts.groups)).items():
            mark = {"o": "●", "s": "■", "t": "▼", "d": "◆"}.get(st.symbol, "⬟")
            parts.append(f'<span style="color:{st.colour}">{mark}</span>&nbsp;{escape(level)}')
    elif pts is not None:
        parts.append(f'<span style="color:{SINGLE_COLOUR}">●</span>&nbsp;Sales')
    if pts is not None and (~pts.used).any():
        parts.append(
            f'<span style="color:{EXCLUDED_COLOUR}">○</span>&nbsp;Excluded&nbsp;'
            f"({int((~pts.used).sum())})"
        )
    parts.append(f'<span style="color:{SUBJECT_COLOUR}">★</span>&nbsp;<b>Subject</b>')
    return "&nbsp;&nbsp;&nbsp; ".join(parts)


# --- the view ---------------------------------------------------------------------------------


class PlotsView(QWidget):
    """The four plots in a 2x2 grid, following a session.

    Redraws (coalesced into one per event-loop turn) on ``salesChanged``,
    ``fitFinished``, ``fitFailed`` and ``exclusionsChanged``; on ``valuationChanged``
    and ``subjectChanged`` alone only the subject moves (the sales stay drawn: with
    tens of thousands of sales, drawing them is the slow part). Moves the selection
    ring on ``selectionChanged``. A click selects a sale in the
    session; a right click offers to exclude it (asking why) or to use it again.

    Beyond :data:`~appraise.report.plotdata.MAX_DRAWN` sales the points are collected
    (:func:`~appraise.report.plotdata.sale_points`, half a second at a million sales) on
    a pool thread; the plots shown stay until the new ones are drawn.
    """

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.figures: list[SalePlot] = []
        self._drawn_for: tuple = ()
        self._stale = True
        self._points_gen = 0
        self._points_pool = QThreadPool(self)
        self._points_pool.setMaxThreadCount(1)
        self._points_signals = TaskSignals(self)
        self._points_signals.finished.connect(self._points_ready)
        self.collecting = False  # points being collected on the pool thread
        self.legend = QLabel(self)
        self.legend.setWordWrap(True)
        self.canvas = pg.GraphicsLayoutWidget(self)
        self.canvas.setBackground("w")
        self.canvas.ci.setSpacing(4)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(self.legend)
        layout.addWidget(self.canvas, 1)

        self._redraw_timer = QTimer(self)
        self._redraw_timer.setSingleShot(True)
        self._redraw_timer.setInterval(0)
        self._redraw_timer.timeout.connect(self.redraw)
        for signal in (
            session.salesChanged,
            session.fitFinished,
            session.fitFailed,
            session.valuationChanged,
            session.exclusionsChanged,
            session.subjectChanged,
        ):
            signal.connect(self.schedule_redraw)
        session.selectionChanged.connect(self.show_selection)
        self.redraw()

    # --- drawing ---
    def schedule_redraw(self, *_args) -> None:
        """Redraw once the current burst of signals is over; in a hidden tab, when shown."""
        if self.window().isVisible() and not self.isVisible():
            self._stale = True
            return
        self._redraw_timer.start()

    def showEvent(self, event) -> None:  # noqa: N802 (Qt's name)
        super().showEvent(event)
        if self._stale:
            self.redraw()

    def _current(self) -> tuple[FitResult | None, Valuation | None, SalesTable | None]:
        s = self.session
        sales = s.sales
        fit = s.fit if s.fit is not None and s.fit.sales is sales else None
        valuation = s.valuation if fit is not None else None
        return fit, valuation, sales

    def redraw(self) -> None:
        """Rebuild the plots when the sales, the fit or the exclusions changed; when only
        the valuation or the subject did, move the subject and keep the sales drawn.
        """
        self._redraw_timer.stop()
        self._stale = False
        fit, valuation, sales = self._current()
        s = self.session
        currency = s.import_settings.currency_symbol or "$"
        waiting = (s.fit_error, s.is_fitting) if fit is None else None  # shown in place of a fit
        drawn_for = (fit, sales, s.user_exclusions, currency, waiting)
        if self.figures and _same_inputs(drawn_for, self._drawn_for):
            for f in self.figures:
                f.set_subject(valuation, s.subject)
            return
        self._drawn_for = drawn_for
        self._points_gen += 1  # points still being collected for older inputs are dropped
        self.collecting = False
        if sales is None:
            self.canvas.clear()
            self.figures = []
            self.legend.setText("Load a sales file to see the plots.")
            return
        exclusions = s.user_exclusions
        if len(sales.frame) > MAX_DRAWN:
            gen = self._points_gen
            job = Task(
                gen,
                lambda _r: sale_points(fit, sales=sales, user_exclusions=exclusions),
                self._points_signals,
            )
            self.collecting = True
            self._points_pool.start(job)
            return
        self._draw(fit, valuation, sales, sale_points(fit, sales=sales, user_exclusions=exclusions))

    def _points_ready(self, gen: int, pts: object) -> None:
        if gen != self._points_gen:
            return
        fit, valuation, sales = self._current()
        self._draw(fit, valuation, sales, pts, one_per_turn=True)  # type: ignore[arg-type]

    def wait_for_points(self, timeout_ms: int = 60_000) -> None:
        """Block until points being collected on the pool thread are in (closing, tests)."""
        self._points_pool.waitForDone(timeout_ms)

    def _draw(
        self,
        fit: FitResult | None,
        valuation: Valuation | None,
        sales: SalesTable,
        pts: SalePoints,
        *,
        one_per_turn: bool = False,
    ) -> None:
        """Build the four plots from ``pts``; with ``one_per_turn`` (a county's sales)
        each in its own turn of the event loop, so the window answers in between;
        ``collecting`` stays set until the last one is in."""
        s = self.session
        currency = s.import_settings.currency_symbol or "$"
        self.canvas.clear()
        common = dict(
            user_exclusions=s.user_exclusions,
            currency=currency,
            selected=s.selection,
            legend=False,
            points=pts,
        )
        builders = [
            lambda: price_area_figure(fit, valuation, sales=sales, **common),
            lambda: predicted_actual_figure(fit, valuation, **common),
            lambda: residual_figure(fit, valuation, **common),
            lambda: location_figure(fit, valuation, sales=sales, subject=s.subject, **common),
        ]
        msg = (
            None
            if fit is not None
            else _clip(s.fit_error or ("Fitting…" if s.is_fitting else "No fit yet."))
        )
        figures: list[SalePlot] = []
        gen = self._points_gen
        self.collecting = one_per_turn

        def add_next() -> None:
            if gen != self._points_gen:  # newer inputs: their own drawing has started
                return
            k = len(figures)
            f = builders[k]()
            if msg is not None and k in (1, 2):
                show_message(f.plot, msg)
            self.canvas.addItem(f.plot, row=k // 2, col=k % 2)
            for scatter in f.scatters:
                scatter.saleClicked.connect(self.session.select_sale)
                scatter.saleMenuRequested.connect(self.open_sale_menu)
            figures.append(f)
            if len(figures) < len(builders):
                if one_per_turn:
                    QTimer.singleShot(0, self, add_next)
                else:
                    add_next()
                return
            self.figures = figures
            self.legend.setText(legend_html(pts))
            self.collecting = False
            if one_per_turn:  # the subject or the selection may have moved meanwhile
                for f in figures:
                    f.set_subject(self._current()[1], s.subject)
                    f.select(s.selection)

        add_next()

    def show_selection(self, row: int | None) -> None:
        for f in self.figures:
            f.select(row)

    # --- excluding from a plot ---
    def sale_menu(self, row: int) -> QMenu:
        """The right-click menu for the sale at file row ``row``."""
        return sale_menu(self, self.session, row)

    def open_sale_menu(self, row: int, screen_pos: QPoint) -> None:
        self.session.select_sale(row)
        self.sale_menu(row).exec(screen_pos)


def sale_menu(parent: QWidget, session: Session, row: int, suggested: str = "") -> QMenu:
    """The right-click menu of a sale in a plot: exclude it, asking why (``suggested``
    offered first), or use it again when the user left it out."""
    menu = QMenu(parent)
    if any(e.row == row for e in session.user_exclusions):
        act = menu.addAction("Use this sale again")
        act.triggered.connect(lambda: session.include_sale(row))
    else:
        act = menu.addAction("Exclude this sale...")
        act.triggered.connect(lambda: exclude_with_reason(parent, session, row, suggested))
    return menu


def _same_inputs(a: tuple, b: tuple) -> bool:
    """Same fit and sales objects (identity), same exclusions, currency and fit state."""
    if len(a) != len(b) or not a:
        return False
    return a[0] is b[0] and a[1] is b[1] and a[2:] == b[2:]


def _clip(text: str, width: int = 90) -> str:
    return text if len(text) <= width else text[: width - 1] + "…"
