"""The two plots of the checks tab, drawn from a :class:`~appraise.engine.diagnostics.Diagnostics`.

* externally studentized residual against leverage, the flag limits drawn;
* the leave-one-out ratio (value / price) against value, as the ratio study sees it.

Flagged sales are vermillion diamonds on top of blue circles (colour and shape, so
colour-blind readers tell them apart too); every point has the same size (a sale that
moves the coefficients is flagged, which says it more plainly than a bigger dot; its
Cook's distance is in the tooltip and the tables). Like :mod:`appraise.gui.plots`, the builders are pure (results in, a
:class:`~appraise.gui.plots.SalePlot` out) and the points are
:class:`~appraise.gui.plot_items.SaleScatter` items that report clicks by file row.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from appraise.engine.diagnostics import Diagnostics
from appraise.report.numbers import MISSING, money, number
from appraise.report.plotdata import MAX_DRAWN, SUBSAMPLE_SEED, drawn_positions

from .plot_items import (
    EXCLUDED_COLOUR,
    OKABE_ITO,
    SINGLE_COLOUR,
    TEXT_COLOUR,
    GroupedAxis,
    money_axis,
    reference_line,
    sale_scatter,
    selection_ring,
    show_message,
)
from .plots import SalePlot, new_plot

FLAG_COLOUR = OKABE_ITO["vermillion"]
FLAG_SYMBOL = "d"
MAX_FLAGS_DRAWN = 5_000
"""Beyond this many flagged sales (a county's checks flag some 5% of its sales) a seeded
random subsample of them is drawn, on top of the plain sales' subsample."""


def ascending_order(rows: np.ndarray) -> np.ndarray:
    """The stable order that sorts ``rows``: no sort when they are in order already (the
    checks hold the sales in file order; a million of them sort in 60 ms)."""
    if len(rows) < 2 or bool(np.all(rows[1:] >= rows[:-1])):
        return np.arange(len(rows))
    return np.argsort(rows, kind="stable")


def positions_by_row(d: Diagnostics) -> Callable[[int], int | None]:
    """File row -> position in the diagnostics' arrays (None when not there)."""
    rows = np.asarray(d.rows, dtype=np.int64)
    if len(rows) < 2 or bool(np.all(rows[1:] >= rows[:-1])):  # file order: no sort, no copy

        def found(row: int) -> int | None:
            i = int(np.searchsorted(rows, row))
            return i if i < len(rows) and rows[i] == row else None

        return found
    order = np.argsort(rows, kind="stable")
    sorted_rows = rows[order]

    def find(row: int) -> int | None:
        i = int(np.searchsorted(sorted_rows, row))
        return int(order[i]) if i < len(sorted_rows) and sorted_rows[i] == row else None

    return find


def describe_sale(d: Diagnostics, i: int, currency: str = "$") -> str:
    """What a hover shows for the sale at position ``i``: id, price, its checks, its flags."""
    infl = d.influence
    sid = d.sale_ids[i]
    loo_value = d.loo.price_prediction[i]
    lines = [
        f"Sale {sid}" if sid is not None else "Sale",
        f"Price {money(d.price[i], currency)}",
        f"Leave-one-out value {money(loo_value, currency)}",
    ]
    if math.isfinite(loo_value) and d.price[i] > 0:
        lines.append(f"Ratio {loo_value / d.price[i]:.3f}")
    lines += [
        f"Leverage {infl.leverage[i]:.4f}",
        f"Studentized residual {_signed(infl.student_external[i], '.2f')}",
        f"Cook's distance {number_text(infl.cooks_distance[i], '.4g')}",
        f"File row {int(d.rows[i])}",
    ]
    flag = d.flag_for_row(int(d.rows[i]))
    if flag is not None:
        lines.extend("Flag: " + f.text for f in flag.findings)
    return "\n".join(lines)


def number_text(x: float, fmt: str) -> str:
    """``x`` in format ``fmt``; an em dash when it is missing or not finite. A ``g``
    format keeps its significant digits but never turns to scientific notation."""
    if x is None or not math.isfinite(x):
        return MISSING
    if fmt.endswith("g"):
        text = number(x, int(fmt.strip("+.g") or 6))
        return "+" + text if fmt.startswith("+") and x >= 0 else text
    return format(x, fmt)


def _signed(x: float, fmt: str) -> str:
    return number_text(x, "+" + fmt)


def _draw_sales(
    sp: SalePlot,
    d: Diagnostics,
    x: np.ndarray,
    y: np.ndarray,
    *,
    tip: Callable[..., str],
    hollow: np.ndarray | None = None,
    hollow_name: str = "",
) -> None:
    """Plain sales blue, flagged ones vermillion diamonds on top, all of one size.

    Beyond :data:`~appraise.report.plotdata.MAX_DRAWN` sales a seeded random subsample
    of the plain sales is drawn, and every flagged sale (or, beyond
    :data:`MAX_FLAGS_DRAWN` flagged, a seeded subsample of them too); the title says so. The counts in the names are of
    all sales, and the selection ring finds any sale, drawn or not.
    """
    rows = np.asarray(d.rows, dtype=np.int64)
    flagged = np.zeros(d.n, dtype=bool)
    flagged[np.fromiter((f.position for f in d.flags), dtype=np.intp, count=len(d.flags))] = True
    finite = np.isfinite(x) & np.isfinite(y)
    shown = finite
    if d.n > MAX_DRAWN:
        picked = np.zeros(d.n, dtype=bool)
        picked[drawn_positions(d.n)] = True
        flag_at = np.flatnonzero(flagged)
        if len(flag_at) > MAX_FLAGS_DRAWN:
            rng = np.random.default_rng(SUBSAMPLE_SEED)
            flag_at = rng.choice(flag_at, size=MAX_FLAGS_DRAWN, replace=False)
        picked[flag_at] = True
        shown = finite & picked
        drawn_flags = int((picked & flagged).sum())
        every = (
            "every flagged sale"
            if drawn_flags == int(flagged.sum())
            else f"{drawn_flags:,} of the {int(flagged.sum()):,} flagged"
        )
        note = f"{int(picked.sum()):,} of {d.n:,} sales drawn, a seeded random sample; {every}"
        sp.plot.setTitle(f"{sp.plot.titleLabel.text} ({note})", size="11pt", color=TEXT_COLOUR)
    hollow = np.zeros(d.n, dtype=bool) if hollow is None else hollow
    groups = (
        (finite & hollow, EXCLUDED_COLOUR, "o", True, hollow_name, -1),
        (finite & ~hollow & ~flagged, SINGLE_COLOUR, "o", False, "Sales", 0),
        (finite & ~hollow & flagged, FLAG_COLOUR, FLAG_SYMBOL, False, "Flagged", 1),
    )
    for mask, colour, symbol, empty, name, z in groups:
        if not mask.any():
            continue
        draw = mask & shown
        s = sale_scatter(
            x[draw],
            y[draw],
            rows[draw],
            colour=colour,
            symbol=symbol,
            hollow=empty,
            name=f"{name} ({int(mask.sum())})",
            tip=tip,
        )
        s.setZValue(z)
        sp.plot.addItem(s)
        sp.scatters.append(s)
    sp.rows, sp.xy = _sorted_positions(rows, x, y, finite)
    sp.ring = selection_ring()
    sp.plot.addItem(sp.ring)


def _sorted_positions(
    rows: np.ndarray, x: np.ndarray, y: np.ndarray, finite: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The file rows of the drawable sales in ascending order and their (x, y), for
    :meth:`SalePlot.position`. Rows already in order (as the checks hold them) skip the
    sort and the gather: a million sales cost 5 ms instead of 100 on the window's thread."""
    if len(rows) < 2 or bool(np.all(rows[1:] >= rows[:-1])):
        if finite.all():
            return rows, np.column_stack([x, y])
        return rows[finite], np.column_stack([x[finite], y[finite]])
    order = np.argsort(rows, kind="stable")
    drawn = order[finite[order]]
    return rows[drawn], np.column_stack([x[drawn], y[drawn]])


def _tip_for(d: Diagnostics, currency: str) -> Callable[..., str]:
    find = positions_by_row(d)

    def tip(x=None, y=None, data=None) -> str:
        i = find(int(data))
        return "" if i is None else describe_sale(d, i, currency)

    return tip


def influence_figure(
    d: Diagnostics | None, *, currency: str = "$", selected: int | None = None
) -> SalePlot:
    """Externally studentized residual against leverage, with the flag limits drawn.

    A sale to the right of the dashed vertical line has unusual attributes (leverage
    above the limit); above or below the dashed horizontal lines its price is far
    from what the others predict; a diamond is flagged (by these limits or because it
    moves the coefficients, Cook's distance). Sales with leverage 1 have no studentized
    residual and are not drawn. The statistics keep their names in the axis titles and
    the help; the titles say first what they mean.
    """
    plot = new_plot(
        "Price gap against how unusual the sale is",
        GroupedAxis("bottom"),
        GroupedAxis("left"),
        False,
    )
    sp = SalePlot(plot, "influence")
    plot.setLabel("bottom", "How unusual its attributes are (leverage)")
    plot.setLabel("left", "Price gap, in standard errors (studentized residual)")
    if d is None:
        show_message(plot, "No checks yet.")
        return sp
    infl, t = d.influence, d.thresholds
    _draw_sales(sp, d, infl.leverage, infl.student_external, tip=_tip_for(d, currency))
    plot.addItem(reference_line(0, 0.0, None, dashed=False))
    plot.addItem(reference_line(0, t.student, f"+{t.student:g}"))
    plot.addItem(reference_line(0, -t.student, f"-{t.student:g}"))
    limit = reference_line(90, t.leverage, f"{d.settings.leverage_multiple:g}p/n")
    limit.label.setPosition(0.5)  # clear of the residual limits' labels at the right
    plot.addItem(limit)
    sp.select(selected)
    return sp


def ratio_figure(
    d: Diagnostics | None, *, currency: str = "$", selected: int | None = None
) -> SalePlot:
    """Leave-one-out ratio (value / price) against value, as the ratio study sees it.

    The horizontal axis is the value measure of the PRB regression,
    :math:`\\tfrac12(A/\\tilde r + S)` (A the leave-one-out value, S the price,
    :math:`\\tilde r` the median ratio): plotting against price alone or value alone
    would tilt the cloud by itself. Lines at ratio 1 and at ±10 % (the PPE10 band);
    with the trim on, its fences, and the trimmed sales drawn hollow.
    """
    plot = new_plot(
        "Leave-one-out ratio against value", money_axis("bottom", currency), GroupedAxis("left"),
        False,
    )  # fmt: skip
    sp = SalePlot(plot, "ratio")
    plot.setLabel(
        "bottom", f"Value level: mean of the price and the model value ÷ median ratio ({currency})"
    )
    plot.setLabel("left", "Model value ÷ sale price (model fitted without the sale)")
    if d is None:
        show_message(plot, "No checks yet.")
        return sp
    a, s = d.loo.price_prediction, d.price
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = a / s
    median = d.ratio_study.get("median").value
    x = 0.5 * (a / median + s) if math.isfinite(median) and median > 0 else s
    trimmed = np.isin(d.rows, [t.row for t in d.ratio_study.trimmed])
    _draw_sales(sp, d, x, ratio, tip=_tip_for(d, currency), hollow=trimmed, hollow_name="Trimmed")
    plot.addItem(reference_line(0, 1.0, None, dashed=False))
    plot.addItem(reference_line(0, 1.1, "+10%"))
    plot.addItem(reference_line(0, 0.9, "-10%"))
    if d.ratio_study.fences is not None:
        for fence in d.ratio_study.fences:
            plot.addItem(reference_line(0, fence, "trim fence"))
    sp.select(selected)
    return sp


def legend_html() -> str:
    """What the marks of both plots mean (rich text for a QLabel)."""
    return (
        f'<span style="color:{SINGLE_COLOUR}">●</span>&nbsp;Sale&nbsp;&nbsp; '
        f'<span style="color:{FLAG_COLOUR}">◆</span>&nbsp;Flagged&nbsp;&nbsp; '
        f'<span style="color:{EXCLUDED_COLOUR}">○</span>&nbsp;Trimmed from the ratio '
        "study&nbsp;&nbsp; dashed lines = the limits that flag a sale"
    )
