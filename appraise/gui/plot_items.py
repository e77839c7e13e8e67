"""Small pyqtgraph pieces the sale plots are made of: colours, axes, clickable points.

Nothing here knows about a session; :mod:`appraise.gui.plots` assembles these
into plots and :class:`~appraise.gui.plots.PlotsView` wires them to a session.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPoint, Qt, Signal
from PySide6.QtGui import QColor

from appraise.qtrender.figures import money_axis_class
from appraise.qtrender.palette import OKABE_ITO, region_style

SINGLE_COLOUR = OKABE_ITO["blue"]
"""Colour of every sale when no region column is mapped."""

SUBJECT_COLOUR = OKABE_ITO["black"]
EXCLUDED_COLOUR = "#8A8A8A"
SELECTION_COLOUR = "#000000"
REFERENCE_LINE_COLOUR = "#555555"
TEXT_COLOUR = "#222222"
AXIS_COLOUR = "#666666"

POINT_SIZE = 7
SUBJECT_SIZE = 20
SELECTION_SIZE = 19

AREA_UNIT_LABELS = {"ft2": "sq ft", "m2": "m²"}


@dataclass(frozen=True)
class PointStyle:
    """How the sales of one region are drawn."""

    colour: str
    symbol: str


def region_styles(levels: Sequence[str]) -> dict[str, PointStyle]:
    """A colour and symbol for each region, the same for the same sorted list of levels.

    Levels are sorted so every plot (and every redraw) gives a region the same
    style. The first seven get the seven Okabe-Ito colours with a circle; later
    ones cycle the colours again with the next symbol.
    """
    return {level: PointStyle(*region_style(i)) for i, level in enumerate(sorted(levels, key=str))}


# --- axes ------------------------------------------------------------------------------------


def money_axis(orientation: str, currency: str = "$") -> pg.AxisItem:
    """An axis whose ticks read as money (``$350k``): the worksheet figures' own axis."""
    return money_axis_class(currency)(orientation=orientation)


class GroupedAxis(pg.AxisItem):
    """Plain numbers with thousands separators (``1,850``); decimals only when ticks need them."""

    def __init__(self, orientation: str, **kw) -> None:
        super().__init__(orientation, **kw)
        self.enableAutoSIPrefix(False)

    def tickStrings(self, values, scale, spacing):  # noqa: N802
        step = spacing * scale
        places = max(0, math.ceil(-math.log10(step))) if step > 0 else 0
        return [f"{v * scale:,.{places}f}" for v in values]


# --- clickable sale points --------------------------------------------------------------------


class SaleScatter(pg.ScatterPlotItem):
    """Scatter of sales whose point data is the sale's file row.

    Signals
    -------
    saleClicked(int)
        Left click on a sale: its file row.
    saleMenuRequested(int, QPoint)
        Right click on a sale: its file row and the screen position for a menu.
    """

    saleClicked = Signal(int)
    saleMenuRequested = Signal(int, QPoint)

    UNIFORM_FROM = 64
    """From this many points the shared-style shortcut of :meth:`updateSpots` is taken."""

    def updateSpots(self, dataSet=None):  # noqa: N802, N803 (pyqtgraph's names)
        """Find each point's picture in the symbol atlas.

        pyqtgraph looks the picture up point by point (a Python loop: 21 ms for a
        plot's 20,000 sales, 9 ms this way; a county's four plots and two checks
        plots draw some 30 scatters). Every sale of one scatter is drawn alike, so
        while no point is hovered and none has a style of its own the picture is looked
        up once and given to all of them; otherwise pyqtgraph's own lookup runs. Both
        give the same atlas positions (tested).
        """
        data = self.data if dataSet is None else dataSet
        if (
            len(data) < self.UNIFORM_FROM
            or not (self.opts["pxMode"] and self.opts["useCache"])
            or not _shared_style(data)
        ):
            return super().updateSpots(dataSet)
        missing = data["sourceRect"]["w"] == 0
        if missing.any():
            style = (self.opts["symbol"], self.opts["size"], self.opts["pen"], self.opts["brush"])
            data["sourceRect"][missing] = self.fragmentAtlas[[style]][0]
        self._maybeRebuildAtlas()
        self._updateMaxSpotSizes(data=data)
        if missing.any():
            self.invalidate()
        return None

    def mouseClickEvent(self, ev):  # noqa: N802
        button = ev.button()
        if button not in (Qt.MouseButton.LeftButton, Qt.MouseButton.RightButton):
            ev.ignore()
            return
        pts = self.pointsAt(ev.pos())
        if len(pts) == 0:
            ev.ignore()
            return
        ev.accept()
        row = int(pts[-1].data())  # the one drawn on top
        if button == Qt.MouseButton.LeftButton:
            self.sigClicked.emit(self, pts, ev)
            self.saleClicked.emit(row)
        else:
            self.saleMenuRequested.emit(row, ev.screenPos().toPoint())


def _shared_style(data: np.ndarray) -> bool:
    """No point of pyqtgraph's record array is hovered or has a style of its own."""
    if data["hovered"].any() or (data["size"] != -1).any():
        return False
    return all(bool(np.equal(data[k], None).all()) for k in ("symbol", "pen", "brush"))


def sale_scatter(
    x: np.ndarray,
    y: np.ndarray,
    rows: np.ndarray,
    *,
    colour: str,
    symbol: str = "o",
    hollow: bool = False,
    name: str | None = None,
    tip: Callable[..., str] | None = None,
    size: float = POINT_SIZE,
) -> SaleScatter:
    """A :class:`SaleScatter` of filled (or hollow, for excluded sales) points."""
    if hollow:
        pen = pg.mkPen(colour, width=1.3)
        brush = pg.mkBrush(None)
    else:
        pen = pg.mkPen(QColor(colour).darker(150), width=0.8)  # keeps pale yellow visible
        brush = pg.mkBrush(colour)
    item = SaleScatter(
        x=np.asarray(x, dtype=float),
        y=np.asarray(y, dtype=float),
        data=np.asarray(rows, dtype=np.int64),
        pen=pen,
        brush=brush,
        symbol=symbol,
        size=size,
        name=name,
        hoverable=tip is not None,
        tip=tip,
        hoverPen=pg.mkPen(SELECTION_COLOUR, width=1.5),
    )
    return item


def selection_ring() -> pg.ScatterPlotItem:
    """The ring drawn around the selected sale (empty until a sale is selected)."""
    ring = pg.ScatterPlotItem(
        x=[],
        y=[],
        symbol="o",
        size=SELECTION_SIZE,
        pen=pg.mkPen(SELECTION_COLOUR, width=2.5),
        brush=pg.mkBrush(None),
    )
    ring.setZValue(20)
    return ring


def subject_marker(x: float, y: float, *, name: str | None = "Subject") -> pg.ScatterPlotItem:
    """A black star with a white outline: the subject property."""
    item = pg.ScatterPlotItem(
        x=[x],
        y=[y],
        symbol="star",
        size=SUBJECT_SIZE,
        pen=pg.mkPen("#FFFFFF", width=1.2),
        brush=pg.mkBrush(SUBJECT_COLOUR),
        name=name,
    )
    item.setZValue(30)
    return item


def interval_bar(x: float, estimate: float, low: float, high: float) -> list[pg.ErrorBarItem]:
    """The subject's prediction interval as a vertical bar: black on a white halo,
    so it stays visible over a crowd of sale points."""
    out = []
    for colour, width, z in (("#FFFFFF", 6, 28), (SUBJECT_COLOUR, 2.5, 29)):
        bar = pg.ErrorBarItem(
            x=np.array([x]),
            y=np.array([estimate]),
            top=np.array([high - estimate]),
            bottom=np.array([estimate - low]),
            beam=0,
            pen=pg.mkPen(colour, width=width),
        )
        bar.setZValue(z)
        out.append(bar)
    return out


def subject_label(x: float, y: float) -> pg.TextItem:
    """The word "Subject" beside the subject's star, on no background (the sales under
    it stay visible)."""
    label = pg.TextItem("Subject", color=SUBJECT_COLOUR, anchor=(-0.15, 1.1))
    font = label.textItem.font()
    font.setBold(True)
    label.setFont(font)
    label.setPos(x, y)
    label.setZValue(31)
    return label


def reference_line(
    angle: float, pos: float | tuple[float, float], label: str | None = None, *, dashed=True
) -> pg.InfiniteLine:
    """A grey reference line (the 45-degree line, zero, the subject's estimate...)."""
    pen = pg.mkPen(
        REFERENCE_LINE_COLOUR,
        width=1.2,
        style=Qt.PenStyle.DashLine if dashed else Qt.PenStyle.SolidLine,
    )
    opts = {"position": 0.92, "color": REFERENCE_LINE_COLOUR, "movable": False}
    line = pg.InfiniteLine(
        pos=pos,
        angle=angle,
        pen=pen,
        movable=False,
        label=label,
        labelOpts=opts if label else None,
    )
    line.setZValue(-5)
    return line


def show_message(plot: pg.PlotItem, message: str) -> None:
    """Replace a plot's content with a one-line message (no data, no fit...)."""
    plot.clear()
    for axis in ("left", "bottom"):
        plot.getAxis(axis).setTicks([[]])
    text = pg.TextItem(message, color="#333333", anchor=(0.5, 0.5))
    plot.addItem(text)
    text.setPos(0.5, 0.5)
    plot.setXRange(0, 1, padding=0)
    plot.setYRange(0, 1, padding=0)
