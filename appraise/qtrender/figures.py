"""Charts for the worksheet, drawn with pyqtgraph off-screen and returned as PNG bytes.

Each chart is laid out at 800 x 500 logical pixels and exported twice as wide
(1600 px), so text and markers stay legible in print. The functions that know
about fits (:func:`worksheet_figures`) take the plot data the window draws too
(:mod:`appraise.report.plotdata`); :func:`scatter_chart` draws.
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

LEGEND_TEXT_SIZE = "17pt"
"""Legend text, sized for print: the chart is exported at twice its layout width, and
the legend's label is drawn at its own point size, so this reads like the axis labels
on paper (about 7 pt on an A4 or Letter page)."""

LEGEND_SYMBOL_SIZE = 14.0
"""Diameter of the legend's marker samples (pixels of the layout)."""


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
    """A reference line through its points (two for a straight line; more for a ring)."""

    x: tuple[float, ...]
    y: tuple[float, ...]
    label: str = ""


def money_axis_class(currency: str):
    import pyqtgraph as pg

    class MoneyAxis(pg.AxisItem):
        """Tick labels as money: ``$250k``, ``$1.2M``."""

        def tickStrings(self, values, scale, spacing):  # noqa: N802 (pyqtgraph's name)
            return [_short_money(v * scale, currency, spacing * scale) for v in values]

    return MoneyAxis


def plain_axis_class():
    import pyqtgraph as pg

    class PlainAxis(pg.AxisItem):
        """Tick labels written out with thousands separators (``12,500``, ``0.0005``),
        never pyqtgraph's ``%g`` (``1e+06``) for large or small values."""

        def tickStrings(self, values, scale, spacing):  # noqa: N802 (pyqtgraph's name)
            step = spacing * scale
            places = max(0, math.ceil(-math.log10(step))) if step > 0 else 0
            return [f"{v * scale:,.{places}f}" for v in values]

    return PlainAxis


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

    axis_items = {
        "bottom": (money_axis_class(currency) if money_x else plain_axis_class())(
            orientation="bottom"
        ),
        "left": (money_axis_class(currency) if money_y else plain_axis_class())(orientation="left"),
    }
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
        labelTextSize=LEGEND_TEXT_SIZE,
        brush=(255, 255, 255, 210),
        pen=(160, 160, 160),
        verSpacing=-2,
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
        symbol_pen = pg.mkPen(255, 255, 255, 200, width=0.5) if s.size < 12 else pg.mkPen("k")
        plot.plot(
            x[ok],
            y[ok],
            pen=None,
            symbol=s.symbol,
            symbolSize=s.size,
            symbolBrush=pg.mkBrush(s.colour),
            symbolPen=symbol_pen,
            antialias=True,
        )
        if s.label and legend is not None:
            # the legend shows a larger sample than the points, so it reads in print
            sample = pg.ScatterPlotItem(
                symbol=s.symbol,
                size=max(s.size, LEGEND_SYMBOL_SIZE),
                brush=pg.mkBrush(s.colour),
                pen=pg.mkPen(90, 90, 90, 200, width=0.5),
            )
            legend.addItem(sample, s.label)
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
    """The worksheet's sale plots for a fit and the subject's valuation: the very plots
    the window shows (:mod:`appraise.report.plotdata`), drawn for print.

    A plot that cannot be drawn (no living-area or coordinate roles mapped) is left out.
    """
    from ..report.plotdata import sale_plots, sale_points

    points = sale_points(fit)
    figures = []
    for data in sale_plots(points, fit, valuation, currency=currency):
        if data.message is not None or data.x is None:
            continue
        key = FIGURE_KEYS[data.kind]
        figures.append(Figure(plot_chart(data, points, currency), data.caption, key))
    return tuple(figures)


FIGURE_KEYS = {
    "price_area": "price-area",
    "model_sale": "predicted",
    "residuals": "residuals",
    "location": "map",
}
"""The worksheet's name of each sale plot (kept from the first worksheets)."""


EXCLUDED_COLOUR = (138, 138, 138, 150)


def region_series(points: Any, x: np.ndarray, y: np.ndarray, mask: np.ndarray) -> list[Series]:
    """The sales under ``mask`` as one series per region group, in the colours and
    symbols the window gives them (levels sorted; see ``gui.plot_items.region_styles``)."""
    from ..report.plotdata import group_order

    if points.groups is None:
        return [Series(x[mask], y[mask], "Sales")]
    out = []
    for i, level in enumerate(sorted(group_order(points.groups), key=str)):
        m = mask & (points.groups == level)
        if m.any():
            colour, symbol = region_style(i)
            out.append(Series(x[m], y[m], str(level), rgba(colour, 200), symbol))
    return out


def plot_chart(data: Any, points: Any, currency: str = "$") -> bytes:
    """One :class:`~appraise.report.plotdata.PlotData` as PNG bytes: left-out sales grey
    and small, the used sales by region group, the subject in its own colour."""
    drawn = np.zeros(len(points), dtype=bool)
    drawn[points.drawn()] = True
    x = np.asarray(data.x, dtype=float)
    y = np.asarray(data.y, dtype=float)
    series: list[Series] = []
    out = ~points.used & drawn
    if out.any():
        series.append(Series(x[out], y[out], "Left out", EXCLUDED_COLOUR, "o", 5.0))
    series += region_series(points, x, y, points.used & drawn)
    lines: list[Line] = []
    finite = np.concatenate([x[np.isfinite(x)], y[np.isfinite(y)]])
    xs = x[np.isfinite(x)]
    for ln in data.lines:
        if ln.kind == "diagonal" and finite.size:
            lo, hi = float(finite.min()), float(finite.max())
            lines.append(Line((lo, hi), (lo, hi), ln.label or ""))
        elif ln.kind == "horizontal" and xs.size:
            lines.append(
                Line((float(xs.min()), float(xs.max())), (ln.value, ln.value), ln.label or "")
            )
    mark = data.subject
    if mark is not None and mark.x is not None and mark.y is not None:
        bars = ((mark.low, mark.high),) if mark.low is not None and mark.high is not None else ()
        series.append(
            Series(
                np.array([mark.x]),
                np.array([mark.y]),
                "Subject (estimate)" if bars else "Subject",
                SUBJECT_COLOUR,
                "star",
                18,
                bars,
            )
        )
        for r in mark.rings_km:
            t = np.linspace(0, 2 * math.pi, 97)
            lines.append(
                Line(tuple(mark.x + r * np.cos(t)), tuple(mark.y + r * np.sin(t)), f"{r:g} km")
            )
    elif mark is not None and mark.line == "vertical" and mark.x is not None:
        ys = y[np.isfinite(y)]
        if ys.size:
            lines.append(Line((mark.x, mark.x), (float(ys.min()), float(ys.max())), "Subject"))
    title = data.title if data.note is None else f"{data.title} ({data.note})"
    return scatter_chart(
        series,
        lines=lines,
        title=title,
        xlabel=data.x_axis.label,
        ylabel=data.y_axis.label,
        money_x=data.x_axis.money,
        money_y=data.y_axis.money,
        currency=currency,
        aspect=1.0 if data.equal_aspect else None,
    )
