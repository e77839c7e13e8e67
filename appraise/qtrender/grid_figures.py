"""The market-conditions index chart of the sales comparison, for the worksheet.

x is months from the effective date (negative = before it), y the price index
(1 = prices at the effective date); the band is the index's confidence band and the
comparables are marked at their sale dates on the index.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..report.content import Figure
from .figures import Line, Series, scatter_chart

MONTH_DAYS = 365.2425 / 12
COMPARABLE_COLOUR = (200, 40, 30, 255)


def index_points(grid: Any) -> dict:
    """Plot data of the index: months from the effective date, index, band, comparables."""
    d = grid.to_dict() if hasattr(grid, "to_dict") else dict(grid)
    m = d["market_conditions"]
    eff = np.datetime64(d["effective_date"])
    pts = m["points"]

    def months(date: str) -> float:
        return float((np.datetime64(date[:10]) - eff) / np.timedelta64(1, "D") / MONTH_DAYS)

    x = np.array([months(p["date"]) for p in pts])
    order = np.argsort(x)
    comps = [c for c in d["comparables"] if c.get("sale_date")]
    cx = np.array([months(c["sale_date"]) for c in comps])
    idx = np.array([p["index"] for p in pts], dtype=float)[order]
    cy = np.interp(cx, x[order], idx) if len(cx) else np.array([])
    return {
        "x": x[order],
        "index": idx,
        "low": np.array([p["low"] for p in pts], dtype=float)[order],
        "high": np.array([p["high"] for p in pts], dtype=float)[order],
        "comp_x": cx,
        "comp_y": cy,
        "comp_ids": [c["sale_id"] for c in comps],
        "has_time": bool(m["has_time_term"]),
        "level": m["level"],
    }


def index_figure(grid: Any) -> Figure:
    """The index with its band and the comparables' sale dates, as a worksheet Figure."""
    p = index_points(grid)
    lvl = f"{100 * p['level']:.0f}%"
    lines = [
        Line(tuple(p["x"]), tuple(p["index"]), "index"),
        Line(tuple(p["x"]), tuple(p["low"]), f"{lvl} band"),
        Line(tuple(p["x"]), tuple(p["high"]), ""),
    ]
    series = [
        Series(p["comp_x"], p["comp_y"], "comparables' sale dates", COMPARABLE_COLOUR, "t", 12)
    ]
    png = scatter_chart(
        series,
        title="Market conditions: price index relative to the effective date"
        + ("" if p["has_time"] else " (no time term: flat)"),
        xlabel="months from the effective date",
        ylabel="price index (1 = effective date)",
        lines=lines,
    )
    return Figure(
        png,
        f"Market-conditions index with its {lvl} band; triangles mark the comparables' sales.",
        "market_index",
    )


__all__ = ["index_figure", "index_points"]
