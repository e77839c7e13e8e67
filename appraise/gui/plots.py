"""The four sale plots and the view that shows them beside a session.

* price against living area, coloured by region, the subject's estimate and
  its prediction interval marked;
* predicted against sale price, with the 45-degree line of a perfect fit;
* residuals against fitted price, with zero and two residual standard deviations;
* where the sales are (longitude, latitude; degrees scaled so distances look
  right at the sales' latitude), the subject marked.

The ``build_*_plot`` functions are pure: results in, a ``pg.PlotItem`` out, no
session, so the worksheet's figure renderer can draw the very same plots off
screen; each takes ``points=`` (from :func:`sale_points`) so that a caller
drawing several computes them once. :class:`PlotsView` builds them for a
:class:`~appraise.gui.session.Session`, redraws them when the session's results
change, and turns clicks into the session's selection and right clicks into
exclusions (with a reason).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from html import escape
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtCore import QPoint, QTimer
from PySide6.QtWidgets import QLabel, QMenu, QVBoxLayout, QWidget

from appraise.engine.errors import AppraiseError
from appraise.engine.sales import ROW_COLUMN, Exclusion, SalesTable
from appraise.report.numbers import money

from .plot_items import (
    AREA_UNIT_LABELS,
    AXIS_COLOUR,
    EXCLUDED_COLOUR,
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

if TYPE_CHECKING:
    from appraise.engine.fitting import FitResult
    from appraise.engine.valuation import Valuation

    from .session import Session

NO_REGION = "(no region)"


# --- the numbers behind the plots -----------------------------------------------------------


@dataclass(frozen=True, eq=False)
class SalePoints:
    """One entry per sale in the sales table (imported rows), aligned arrays.

    ``used`` is False for sales the model or the user left out; ``reason`` says
    why. ``fitted`` is the model's value in price units (for a log response the
    smearing-corrected mean, as the valuation's estimate), also for a left-out
    sale when the model can be evaluated on it; NaN otherwise. ``resid`` is on
    the response scale (log price for a log response): sale minus model.
    """

    rows: np.ndarray
    sale_ids: np.ndarray
    price: np.ndarray
    area: np.ndarray | None
    region: np.ndarray | None
    lat: np.ndarray | None
    lon: np.ndarray | None
    used: np.ndarray
    reason: np.ndarray
    fitted: np.ndarray
    resid: np.ndarray
    area_unit: str
    roles: Mapping[str, str] = field(default_factory=dict)

    def __len__(self) -> int:
        return len(self.rows)

    @property
    def unit_label(self) -> str:
        return AREA_UNIT_LABELS.get(self.area_unit, self.area_unit)

    def describe(self, i: int, currency: str = "$") -> str:
        """What a hover shows for sale ``i``: id, price, living area, region, file row."""
        lines = [f"Sale {self.sale_ids[i]}" if self.sale_ids[i] is not None else "Sale"]
        lines.append(f"Price {money(self.price[i], currency)}")
        if self.area is not None and math.isfinite(self.area[i]):
            lines.append(f"Living area {self.area[i]:,.0f} {self.unit_label}")
        if self.region is not None:
            lines.append(f"Region {self.region[i]}")
        if math.isfinite(self.fitted[i]):
            lines.append(f"Model {money(self.fitted[i], currency)}")
        lines.append(f"File row {int(self.rows[i])}")
        if not self.used[i]:
            lines.append(f"Excluded: {self.reason[i]}")
        return "\n".join(lines)


def _column(frame: pd.DataFrame, name: str | None, kind: str = "number") -> np.ndarray | None:
    if name is None or name not in frame.columns:
        return None
    if kind == "number":
        return pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float)
    values = frame[name].astype("string").fillna(NO_REGION).str.strip()
    return values.replace("", NO_REGION).to_numpy(dtype=object)


def sale_points(
    fit: FitResult | None = None,
    *,
    sales: SalesTable | None = None,
    user_exclusions: Iterable[Exclusion] = (),
) -> SalePoints:
    """Collect what the plots draw from a fit (or, before any fit, from the sales alone).

    ``user_exclusions`` made after ``fit`` was computed are shown as excluded at once,
    before the refit lands.
    """
    if fit is not None:
        sales = fit.sales
    if sales is None:
        raise ValueError("sale_points needs a fit or a sales table")
    frame = sales.frame
    roles = sales.roles
    rows = frame[ROW_COLUMN].to_numpy(dtype=np.int64)
    n = len(rows)
    price_col = fit.target if fit is not None else roles.column("price")
    price = _column(frame, price_col)
    if price is None:
        price = np.full(n, np.nan)
    id_col = roles.column("sale_id")
    if id_col in frame.columns:
        ids = frame[id_col].astype("string").to_numpy(dtype=object, na_value=None)
    else:
        ids = np.full(n, None, dtype=object)

    reason = np.full(n, None, dtype=object)
    used = np.ones(n, dtype=bool)
    fitted = np.full(n, np.nan)
    resid = np.full(n, np.nan)
    pos = pd.Index(rows)
    if fit is not None:
        at = pos.get_indexer(np.asarray(fit.rows, dtype=np.int64))
        ok = at >= 0
        used[:] = False
        used[at[ok]] = True
        fitted[at[ok]] = fit.fitted_price()[ok]
        resid[at[ok]] = np.asarray(fit.resid, dtype=float)[ok]
        for e in fit.excluded:
            i = pos.get_indexer([e.row])[0]
            if i >= 0:
                reason[i] = e.reason
        _predict_left_out(fit, frame, ~used, price, fitted, resid)
    for e in user_exclusions:
        i = pos.get_indexer([int(e.row)])[0]
        if i >= 0:
            used[i] = False
            reason[i] = e.reason
    reason[~used & (reason == None)] = "left out of the model"  # noqa: E711 (elementwise)
    return SalePoints(
        rows=rows,
        sale_ids=ids,
        price=price,
        area=_column(frame, roles.column("living_area")),
        region=_column(frame, roles.column("region"), kind="text"),
        lat=_column(frame, roles.column("latitude")),
        lon=_column(frame, roles.column("longitude")),
        used=used,
        reason=reason,
        fitted=fitted,
        resid=resid,
        area_unit=sales.area_unit,
        roles=dict(roles.columns),
    )


def _predict_left_out(fit, frame, left_out, price, fitted, resid) -> None:
    """The model's value for sales it did not use, where their inputs allow (in place).

    A left-out sale may lack an input or hold a category level the fit never saw;
    it then simply has no model value.
    """
    idx = np.flatnonzero(left_out)
    if idx.size == 0:
        return
    sub = frame.iloc[idx]
    try:
        built = fit.design.build(sub)
    except AppraiseError:
        return
    ok = np.asarray(built.row_ok, dtype=bool)
    if not ok.any():
        return
    xb = np.asarray(built.matrix, dtype=float)[ok] @ np.asarray(fit.params, dtype=float)
    at = idx[ok]
    if fit.spec.response == "log":
        fitted[at] = np.exp(xb) * fit.smearing
        with np.errstate(divide="ignore", invalid="ignore"):
            resid[at] = np.log(price[at]) - xb
    else:
        fitted[at] = xb
        resid[at] = price[at] - xb


def subject_value(
    subject: Mapping[str, Any] | None, roles: Mapping[str, str], role: str
) -> float | None:
    """A numeric subject attribute looked up by its sales column, else by its role name."""
    if not subject:
        return None
    for key in (roles.get(role), role):
        if key is not None and key in subject:
            try:
                v = float(subject[key])
            except (TypeError, ValueError):
                return None
            return v if math.isfinite(v) else None
    return None


# --- building the plots -----------------------------------------------------------------------


@dataclass(eq=False)
class SalePlot:
    """A built plot, plus what a view needs to highlight a sale or move the subject in it.

    ``kind`` is one of "price_area", "model_sale", "residuals", "location";
    ``rows``/``xy`` are the file rows drawn (sorted) and their positions.
    """

    plot: pg.PlotItem
    kind: str
    roles: Mapping[str, str] = field(default_factory=dict)
    scatters: list[SaleScatter] = field(default_factory=list)
    rows: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    xy: np.ndarray = field(default_factory=lambda: np.zeros((0, 2)))
    ring: pg.ScatterPlotItem | None = None
    subject_items: list = field(default_factory=list)

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
        if self.ring is None:  # nothing drawn: the plot holds a message
            return
        for item in _SUBJECT_PAINTERS[self.kind](self, valuation, subject):
            self.plot.addItem(item)
            self.subject_items.append(item)


def _subject_on_price_area(sp: SalePlot, valuation, subject) -> list:
    area0 = subject_value(valuation.subject if valuation else None, sp.roles, "living_area")
    if valuation is None or area0 is None:
        return []
    est = valuation.estimate
    return [
        *interval_bar(area0, est, valuation.low, valuation.high),
        subject_marker(area0, est),
        subject_label(area0, est),
    ]


def _subject_on_model_sale(sp: SalePlot, valuation, subject) -> list:
    if valuation is None:
        return []
    return [reference_line(0, valuation.estimate, "Subject", dashed=False)]


def _subject_on_residuals(sp: SalePlot, valuation, subject) -> list:
    if valuation is None:
        return []
    return [reference_line(90, valuation.estimate, "Subject", dashed=False)]


def _subject_on_map(sp: SalePlot, valuation, subject) -> list:
    source = valuation.subject if valuation is not None else subject
    lat0 = subject_value(source, sp.roles, "latitude")
    lon0 = subject_value(source, sp.roles, "longitude")
    if lat0 is None or lon0 is None:
        return []
    return [subject_marker(lon0, lat0), subject_label(lon0, lat0)]


_SUBJECT_PAINTERS = {
    "price_area": _subject_on_price_area,
    "model_sale": _subject_on_model_sale,
    "residuals": _subject_on_residuals,
    "location": _subject_on_map,
}


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
    """Excluded sales hollow and grey underneath, used sales on top by region."""
    finite = np.isfinite(x) & np.isfinite(y)
    order_idx = np.argsort(pts.rows, kind="stable")
    order_rows = pts.rows[order_idx]

    def tip(x=None, y=None, data=None):
        i = int(np.searchsorted(order_rows, data))
        return pts.describe(int(order_idx[i]), currency)

    out = ~pts.used & finite
    if out.any():
        s = sale_scatter(
            x[out],
            y[out],
            pts.rows[out],
            colour=EXCLUDED_COLOUR,
            hollow=True,
            name=f"Excluded ({int(out.sum())})",
            tip=tip,
        )
        s.setZValue(-1)
        sp.plot.addItem(s)
        sp.scatters.append(s)
    keep = pts.used & finite
    if pts.region is None:
        groups = [("Sales", keep, SINGLE_COLOUR, "o")]
    else:
        styles = region_styles(list(dict.fromkeys(pts.region)))
        groups = [
            (lvl, keep & (pts.region == lvl), st.colour, st.symbol) for lvl, st in styles.items()
        ]
    for name, mask, colour, symbol in groups:
        if mask.any():
            s = sale_scatter(
                x[mask], y[mask], pts.rows[mask], colour=colour, symbol=symbol, name=name, tip=tip
            )
            sp.plot.addItem(s)
            sp.scatters.append(s)
    drawn = order_idx[finite[order_idx]]
    sp.rows = pts.rows[drawn]
    sp.xy = np.column_stack([x[drawn], y[drawn]])
    sp.roles = pts.roles
    sp.ring = selection_ring()
    sp.plot.addItem(sp.ring)


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
    plot = new_plot(
        "Price against living area", GroupedAxis("bottom"), money_axis("left", currency), legend
    )
    sp = SalePlot(plot, "price_area")
    plot.setLabel("bottom", f"Gross living area ({pts.unit_label})")
    plot.setLabel("left", f"Sale price ({currency})")
    if pts.area is None:
        show_message(plot, "No living-area column is mapped: map one under column roles.")
        return sp
    _scatter_sales(sp, pts, pts.area, pts.price, currency)
    sp.set_subject(valuation)
    sp.select(selected)
    return sp


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
    plot = new_plot(
        "Model value against sale price",
        money_axis("bottom", currency),
        money_axis("left", currency),
        legend,
    )
    sp = SalePlot(plot, "model_sale")
    plot.setLabel("bottom", f"Sale price ({currency})")
    plot.setLabel("left", f"Model value ({currency})")
    if fit is None:
        show_message(plot, "No fit yet.")
        return sp
    pts = points if points is not None else sale_points(fit, user_exclusions=user_exclusions)
    _scatter_sales(sp, pts, pts.price, pts.fitted, currency)
    both = np.concatenate([pts.price, pts.fitted])
    both = both[np.isfinite(both)]
    if both.size:
        lo, hi = float(both.min()), float(both.max())
        plot.addItem(reference_line(45, (0, 0), "model = sale"))
        plot.setXRange(lo, hi, padding=0.04)
        plot.setYRange(lo, hi, padding=0.04)
    sp.set_subject(valuation)
    sp.select(selected)
    return sp


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
    log = fit is not None and fit.spec.response == "log"
    left = GroupedAxis("left") if log or fit is None else money_axis("left", currency)
    plot = new_plot("Residuals against model value", money_axis("bottom", currency), left, legend)
    sp = SalePlot(plot, "residuals")
    plot.setLabel("bottom", f"Model value ({currency})")
    plot.setLabel("left", "Residual (log of price)" if log else f"Residual ({currency})")
    if fit is None:
        show_message(plot, "No fit yet.")
        return sp
    pts = points if points is not None else sale_points(fit, user_exclusions=user_exclusions)
    _scatter_sales(sp, pts, pts.fitted, pts.resid, currency)
    plot.addItem(reference_line(0, 0.0, None, dashed=False))
    s = float(fit.sigma)
    plot.addItem(reference_line(0, 2 * s, "+2s"))
    plot.addItem(reference_line(0, -2 * s, "-2s"))
    sp.set_subject(valuation)
    sp.select(selected)
    return sp


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
    """Longitude against latitude, one degree of longitude drawn cos(latitude) as wide.

    The subject comes from ``valuation.subject``, else from ``subject`` (keys are
    sales columns or role names).
    """
    plot = new_plot("Where the sales are", GroupedAxis("bottom"), GroupedAxis("left"), legend)
    sp = SalePlot(plot, "location")
    plot.setLabel("bottom", "Longitude (degrees)")
    plot.setLabel("left", "Latitude (degrees)")
    if fit is None and sales is None:
        show_message(plot, "No sales loaded.")
        return sp
    pts = (
        points
        if points is not None
        else sale_points(fit, sales=sales, user_exclusions=user_exclusions)
    )
    if pts.lat is None or pts.lon is None:
        show_message(plot, "Latitude and longitude are not mapped: map them under column roles.")
        return sp
    _scatter_sales(sp, pts, pts.lon, pts.lat, currency)
    lat_ok = pts.lat[np.isfinite(pts.lat)]
    if lat_ok.size:
        # x pixels per degree / y pixels per degree = cos(latitude): equal distances look equal
        plot.getViewBox().setAspectLocked(True, ratio=math.cos(math.radians(lat_ok.mean())))
    sp.set_subject(valuation, subject)
    sp.select(selected)
    return sp


def build_price_area_plot(fit, valuation=None, **kw) -> pg.PlotItem:
    """:func:`price_area_figure`'s plot: price against living area, subject marked."""
    return price_area_figure(fit, valuation, **kw).plot


def build_predicted_actual_plot(fit, valuation=None, **kw) -> pg.PlotItem:
    """:func:`predicted_actual_figure`'s plot: model value against sale price, 45-degree line."""
    return predicted_actual_figure(fit, valuation, **kw).plot


def build_residual_plot(fit, valuation=None, **kw) -> pg.PlotItem:
    """:func:`residual_figure`'s plot: residuals against the model's value."""
    return residual_figure(fit, valuation, **kw).plot


def build_location_plot(fit, valuation=None, **kw) -> pg.PlotItem:
    """:func:`location_figure`'s plot: the sales' coordinates, subject marked."""
    return location_figure(fit, valuation, **kw).plot


def legend_html(pts: SalePoints | None) -> str:
    """A one-line legend shared by the four plots (rich text for a QLabel)."""
    parts = []
    if pts is not None and pts.region is not None:
        for level, st in region_styles(list(dict.fromkeys(pts.region))).items():
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
    """

    def __init__(self, session: Session, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.figures: list[SalePlot] = []
        self._drawn_for: tuple = ()
        self._stale = True
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
        self.canvas.clear()
        if sales is None:
            self.figures = []
            self.legend.setText("Load a sales file to see the plots.")
            return
        pts = sale_points(fit, sales=sales, user_exclusions=s.user_exclusions)
        common = dict(
            user_exclusions=s.user_exclusions,
            currency=currency,
            selected=s.selection,
            legend=False,
            points=pts,
        )
        figures = [
            price_area_figure(fit, valuation, sales=sales, **common),
            predicted_actual_figure(fit, valuation, **common),
            residual_figure(fit, valuation, **common),
            location_figure(fit, valuation, sales=sales, subject=s.subject, **common),
        ]
        if fit is None:
            msg = s.fit_error or ("Fitting…" if s.is_fitting else "No fit yet.")
            for f in figures[1:3]:
                show_message(f.plot, _clip(msg))
        for k, f in enumerate(figures):
            self.canvas.addItem(f.plot, row=k // 2, col=k % 2)
            for scatter in f.scatters:
                scatter.saleClicked.connect(self.session.select_sale)
                scatter.saleMenuRequested.connect(self.open_sale_menu)
        self.figures = figures
        self.legend.setText(legend_html(pts))

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

    def ask_exclusion(self, row: int) -> bool:
        """Ask why the sale is left out (the sales table's own dialog); exclude it if told."""
        return exclude_with_reason(self, self.session, row)


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
