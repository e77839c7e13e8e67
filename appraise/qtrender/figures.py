"""Charts for the worksheet, drawn with pyqtgraph off-screen and returned as PNG bytes.

Each chart is laid out at 800 x 500 logical pixels and exported twice as wide
(1600 px), so text and markers stay legible in print. The functions that know
about fits (:func:`worksheet_figures`) only pick the numbers; :func:`scatter_chart`
draws.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..report.content import Figure
from ..report.numbers import money
from .palette import region_style, rgba
from .qtapp import ensure_app

LOGICAL_SIZE = (800, 500)
EXPORT_WIDTH = 1600

SALES_COLOUR = (46, 84, 150, 170)
SUBJECT_COLOUR = (200, 40, 30, 255)
LINE_COLOUR = (110, 110, 110, 255)


@dataclass(frozen=True)
class Series:
    """Points (and optionally vertical bars) to draw on a chart.

    ``bars`` holds one ``(low, high)`` per point, drawn as a vertical line through
    it (an interval). ``symbol`` is a pyqtgraph symbol code (``"o"``, ``"star"``...).
    """

    x: np.ndarray
    y: np.ndarray
    label: str
    colour: tuple[int, int, int, int] = SALES_COLOUR
    symbol: str = "o"
    size: float = 7.0
    bars: tuple[tuple[float, float], ...] = ()


@dataclass(frozen=True)
class Line:
    """A straight reference line through two points."""

    x: tuple[float, float]
    y: tuple[float, float]
    label: str = ""


def money_axis_class(currency: str):
    import pyqtgraph as pg

    class MoneyAxis(pg.AxisItem):
        """Tick labels as money: ``$250k``, ``$1.2M``."""

        def tickStrings(self, values, scale, spacing):  # noqa: N802 (pyqtgraph's name)
            return [_short_money(v * scale, currency, spacing * scale) for v in values]

    return MoneyAxis


def _short_money(v: float, currency: str, spacing: float) -> str:
    a = abs(v)
    sign = "-" if v < 0 else ""
    if a >= 1e6 and spacing >= 1e5:
        return f"{sign}{currency}{a / 1e6:g}M"
    if a >= 1e3 and spacing >= 1e3:
        return f"{sign}{currency}{a / 1e3:g}k"
    return money(v, currency)


def scatter_chart(
    series: Sequence[Series],
    *,
    title: str,
    xlabel: str,
    ylabel: str,
    lines: Sequence[Line] = (),
    money_x: bool = False,
    money_y: bool = False,
    currency: str = "$",
    aspect: float | None = None,
) -> bytes:
    """Draw a scatter chart and return it as PNG bytes (``EXPORT_WIDTH`` pixels wide).

    ``aspect`` locks the ratio of pixels per x unit to pixels per y unit (a map uses
    ``cos(latitude)``, so that a degree of longitude is drawn shorter than a degree of
    latitude by the same factor as on the ground).
    """
    ensure_app()
    import pyqtgraph as pg
    import pyqtgraph.exporters  # noqa: F401  (registers ImageExporter)
    from PySide6.QtGui import QFont

    axis_items = {}
    if money_x:
        axis_items["bottom"] = money_axis_class(currency)(orientation="bottom")
    if money_y:
        axis_items["left"] = money_axis_class(currency)(orientation="left")
    plot = pg.PlotItem(axisItems=axis_items)
    view = pg.GraphicsView(background="w")
    view.setCentralItem(plot)
    w, h = LOGICAL_SIZE
    view.resize(w, h)
    plot.setGeometry(0, 0, w, h)

    tick_font = QFont()
    tick_font.setPointSizeF(10)
    for name in ("left", "bottom"):
        ax = plot.getAxis(name)
        ax.setPen(pg.mkPen(60, 60, 60))
        ax.setTextPen(pg.mkPen(20, 20, 20))
        ax.setStyle(tickFont=tick_font)
        ax.enableAutoSIPrefix(False)  # no "(x0.001)" scale factors in printed labels
    plot.getAxis("left").setWidth(78)
    plot.setTitle(title, color="#111111", size="13pt")
    label_style = {"color": "#111111", "font-size": "11pt"}
    plot.setLabel("bottom", xlabel, **label_style)
    plot.setLabel("left", ylabel, **label_style)
    plot.showGrid(x=True, y=True, alpha=0.15)
    legend = plot.addLegend(
        offset=(10, 10),
        labelTextColor="#111111",
        labelTextSize="12pt",
        brush=(255, 255, 255, 210),
        pen=(160, 160, 160),
    )

    for ln in lines:
        plot.plot(
            list(ln.x),
            list(ln.y),
            pen=pg.mkPen(LINE_COLOUR, width=1.5, style=pg.QtCore.Qt.PenStyle.DashLine),
            name=ln.label or None,
        )
    for s in series:
        x = np.asarray(s.x, dtype=float)
        y = np.asarray(s.y, dtype=float)
        ok = np.isfinite(x) & np.isfinite(y)
        for (lo, hi), xi, okk in zip(s.bars, x, ok, strict=False):
            if okk and math.isfinite(lo) and math.isfinite(hi):
                plot.plot([xi, xi], [lo, hi], pen=pg.mkPen(s.colour, width=2.5))
        plot.plot(
            x[ok],
            y[ok],
            pen=None,
            symbol=s.symbol,
            symbolSize=s.size,
            symbolBrush=pg.mkBrush(s.colour),
            symbolPen=pg.mkPen(255, 255, 255, 200, width=0.5) if s.size < 12 else pg.mkPen("k"),
            name=s.label,
            antialias=True,
        )
    if aspect is not None:
        plot.getViewBox().setAspectLocked(True, ratio=aspect)
    if legend is not None and not any(s.label for s in series):
        legend.hide()

    _settle_layout(plot)
    exporter = pg.exporters.ImageExporter(plot)
    exporter.parameters()["width"] = EXPORT_WIDTH
    image = exporter.export(toBytes=True)
    view.deleteLater()
    return _png_bytes(image)


def _settle_layout(plot) -> None:
    """Deliver the layout requests pending for the chart's items, and nothing else.

    A full ``processEvents()`` would run the caller's other pending events (signals
    from worker threads) in the middle of drawing. Each receiver is named: with
    PySide6 6.12 on Python 3.11, ``sendPostedEvents(None, ...)`` drops a reference
    to ``None`` per call and, called often enough, aborts the interpreter.
    """
    from PySide6.QtCore import QCoreApplication, QEvent, QObject

    receivers = [plot, *(i for i in plot.scene().items() if isinstance(i, QObject))]
    for obj in receivers:
        QCoreApplication.sendPostedEvents(obj, QEvent.Type.LayoutRequest)


def _png_bytes(image) -> bytes:
    from PySide6.QtCore import QBuffer, QByteArray, QIODevice

    data = QByteArray()
    buffer = QBuffer(data)
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    image.save(buffer, "PNG", 50)  # mid compression: about as small as the default, faster
    buffer.close()
    return bytes(data.data())


# --- the worksheet's charts ------------------------------------------------------
def worksheet_figures(fit: Any, valuation: Any, *, currency: str = "$") -> tuple[Figure, ...]:
    """The worksheet's charts for a fit and the subject's valuation.

    Predicted against actual price, residuals against fitted values, price
    against living area with the subject marked, and a map of the sales with the
    subject (the last two only when the living-area / latitude and longitude
    roles are mapped and the subject has those values).
    """
    figures = [
        Figure(predicted_vs_actual(fit, valuation, currency), _caption_pva(valuation), "predicted"),
        Figure(residual_chart(fit), _caption_resid(fit), "residuals"),
    ]
    area = price_vs_area(fit, valuation, currency)
    if area is not None:
        figures.append(Figure(area, _caption_area(valuation), "price-area"))
    where = sales_map(fit, valuation)
    if where is not None:
        figures.append(
            Figure(
                where,
                "Where the sales are (longitude against latitude), with "
                "the subject marked by a star.",
                "map",
            )
        )
    return tuple(figures)


def _lvl(valuation: Any) -> str:
    return f"{100.0 * float(valuation.level):g}%"


def _caption_pva(valuation: Any) -> str:
    return (
        "Predicted against actual sale price. Points on the dashed line are predicted "
        f"exactly; the subject's estimate is shown on the line with its {_lvl(valuation)} "
        "prediction interval."
    )


def _caption_resid(fit: Any) -> str:
    scale = " (log scale)" if fit.spec.response == "log" else ""
    return (
        f"Residuals against fitted values{scale}. A funnel or a curve suggests unequal "
        "variance or a missing term."
    )


def _caption_area(valuation: Any) -> str:
    return (
        "Sale price against living area; the subject (star) is drawn at its estimate with "
        f"its {_lvl(valuation)} prediction interval."
    )


def _subject_bar(valuation: Any) -> tuple[tuple[float, float], ...]:
    return ((float(valuation.low), float(valuation.high)),)


def predicted_vs_actual(fit: Any, valuation: Any, currency: str = "$") -> bytes:
    pred = np.asarray(fit.fitted_price(), dtype=float)
    actual = np.asarray(fit.price, dtype=float)
    est = float(valuation.estimate)
    lo = float(np.nanmin([pred.min(), actual.min(), valuation.low]))
    hi = float(np.nanmax([pred.max(), actual.max(), valuation.high]))
    return scatter_chart(
        [
            Series(pred, actual, "Sales"),
            Series(
                np.array([est]),
                np.array([est]),
                "Subject (estimate)",
                SUBJECT_COLOUR,
                "star",
                18,
                _subject_bar(valuation),
            ),
        ],
        lines=[Line((lo, hi), (lo, hi), "Predicted = actual")],
        title="Predicted against actual price",
        xlabel="Predicted price",
        ylabel="Sale price",
        money_x=True,
        money_y=True,
        currency=currency,
    )


def residual_chart(fit: Any) -> bytes:
    fitted = np.asarray(fit.fitted, dtype=float)
    resid = np.asarray(fit.resid, dtype=float)
    log = fit.spec.response == "log"
    return scatter_chart(
        [Series(fitted, resid, "")],
        lines=[Line((float(fitted.min()), float(fitted.max())), (0.0, 0.0))],
        title="Residuals against fitted values",
        xlabel="Fitted value (log of price)" if log else "Fitted price",
        ylabel="Residual (log scale)" if log else "Residual",
        money_x=not log,
        money_y=not log,
    )


def _subject_number(fit: Any, valuation: Any, role: str) -> tuple[str, float] | None:
    col = fit.sales.roles.column(role)
    if col is None or col not in fit.frame.columns:
        return None
    v = (valuation.subject or {}).get(col)
    try:
        fv = float(v)
    except (TypeError, ValueError):
        return None
    return (col, fv) if math.isfinite(fv) else None


def price_vs_area(fit: Any, valuation: Any, currency: str = "$") -> bytes | None:
    found = _subject_number(fit, valuation, "living_area")
    if found is None:
        return None
    col, subject_area = found
    area = fit.frame[col].to_numpy(dtype=float)
    return scatter_chart(
        [
            *_by_region(fit, area, np.asarray(fit.price, dtype=float)),
            Series(
                np.array([subject_area]),
                np.array([float(valuation.estimate)]),
                "Subject (estimate)",
                SUBJECT_COLOUR,
                "star",
                18,
                _subject_bar(valuation),
            ),
        ],
        title="Sale price against living area",
        xlabel=f"Living area ({fit.sales.area_unit})",
        ylabel="Sale price",
        money_y=True,
        currency=currency,
    )


def _by_region(fit: Any, x: np.ndarray, y: np.ndarray) -> list[Series]:
    """One series per region (sorted, the app's colours and symbols), or one for all sales."""
    col = fit.sales.roles.column("region")
    if col is None or col not in fit.frame.columns:
        return [Series(x, y, "Sales")]
    labels = fit.frame[col].astype("string").fillna("(blank)").to_numpy(dtype=object)
    out = []
    for i, level in enumerate(sorted(set(labels), key=str)):
        mask = labels == level
        colour, symbol = region_style(i)
        out.append(Series(x[mask], y[mask], str(level), rgba(colour, 200), symbol))
    return out


def sales_map(fit: Any, valuation: Any) -> bytes | None:
    lat = _subject_number(fit, valuation, "latitude")
    lon = _subject_number(fit, valuation, "longitude")
    if lat is None or lon is None:
        return None
    lats = fit.frame[lat[0]].to_numpy(dtype=float)
    lons = fit.frame[lon[0]].to_numpy(dtype=float)
    # Equal distances look equal: a degree of longitude is cos(latitude) degrees of latitude.
    mid = float(np.nanmean(np.append(lats, lat[1])))
    return scatter_chart(
        [
            *_by_region(fit, lons, lats),
            Series(np.array([lon[1]]), np.array([lat[1]]), "Subject", SUBJECT_COLOUR, "star", 18),
        ],
        title="Sales and subject",
        xlabel="Longitude",
        ylabel="Latitude",
        aspect=max(math.cos(math.radians(mid)), 0.05),
    )
