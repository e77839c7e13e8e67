"""Terminal text of the sales comparison: the adjustment grid, reconciliation, index."""

from __future__ import annotations

from ..engine.grid import Grid
from ..engine.jsonable import iso_date
from .labels import group_label
from .numbers import fixed, money, percent


def _row(label: str, cells: list[str], width: int) -> str:
    return f"{label:<34}" + "".join(f"{c:>{width}}" for c in cells)


def format_grid(grid: Grid) -> str:
    """The grid as plain text: one column per comparable, SE in brackets under each amount."""
    comps = grid.comparables
    width = max(16, *(len(c.sale_id) + 2 for c in comps))
    lines = [
        f"Sales comparison (effective date {iso_date(grid.effective_date)})",
        grid.order_note,
        "",
        _row("Comparable", [c.sale_id for c in comps], width),
        _row("Sale price", [money(c.sale_price) for c in comps], width),
        _row("Sale date", [iso_date(c.sale_date) or "-" for c in comps], width),
        _row(
            "Distance (km)",
            [fixed(c.distance_km, 2) if c.distance_km is not None else "-" for c in comps],
            width,
        ),
        _row(
            "Months before effective date",
            [fixed(c.months, 1) if c.months is not None else "-" for c in comps],
            width,
        ),
    ]
    for k, group in enumerate(grid.groups):
        label = (
            "Market conditions: " if comps[0].adjustments[k].market_conditions else ""
        ) + group_label(group)
        lines.append(_row(label[:33], [money(c.adjustments[k].amount) for c in comps], width))
        lines.append(_row("", [f"(SE {money(c.adjustments[k].se)})" for c in comps], width))
    lines += [
        _row("Net adjustment", [money(c.net) for c in comps], width),
        _row("Net % of sale price", [percent(c.net_pct, 1) for c in comps], width),
        _row("Gross adjustment", [money(c.gross) for c in comps], width),
        _row("Gross % of sale price", [percent(c.gross_pct, 1) for c in comps], width),
        _row("Adjusted price", [money(c.adjusted) for c in comps], width),
        _row("  standard error", [money(c.adjusted_se) for c in comps], width),
        _row("Weight", [percent(c.weight, 1) for c in comps], width),
        "",
    ]
    rec = grid.reconciliation
    lines += [
        f"Reconciled value: {money(rec.value)} (weights from {rec.weights_from})",
        f"Range of adjusted prices: {money(rec.low)} to {money(rec.high)}",
        f"Regression estimate: {money(rec.regression_estimate)}, "
        f"{percent(rec.level)} single-sale interval {money(rec.regression_low)} to {money(rec.regression_high)}",
    ]
    m = grid.market
    if m.has_time and m.monthly_rate is not None:
        rate = percent(m.monthly_rate, 2) if grid.response == "log" else money(m.monthly_rate)
        lines.append(f"Market conditions: {rate} per month ({', '.join(m.groups)})")
    flagged = [(c.sale_id, f) for c in comps for f in c.flags]
    if flagged:
        lines += ["", "Flags (need the appraiser's comment; common practice, not a rule):"]
        lines += [f"  {sid}: {f}" for sid, f in flagged]
    if grid.warnings:
        lines += ["", "Warnings:"] + [f"  - {w}" for w in grid.warnings]
    if grid.caution:
        lines += ["", grid.caution]
    return "\n".join(lines)


__all__ = ["format_grid"]
