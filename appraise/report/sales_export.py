"""Every sale with what the model made of it, for a spreadsheet.

One row per row of the sales file, in file order: the sale's own columns as read,
then the model's value for it (the fitted value, from a fit that saw it), its
leave-one-out value and prediction interval (from the fit without it), the
ratio the ratio study uses (leave-one-out value / sale price), its leverage,
studentized residual and Cook's distance, and the flags of the model check in
words. Sales left out of the fit keep their row, with the reason and no results.

Values on the price scale are the smearing-corrected mean for a log response,
:math:`\\hat p = e^{\\hat y} \\cdot \\bar{e^{r}}` (Duan 1983), the same as the
valuation; the interval ends are :math:`e^{\\hat y_{(i)} \\pm t\\, s_{(i)} / \\sqrt{1 - h_i}}`.
Written through :mod:`appraise.report.tables`, so text cells that a spreadsheet
would take for a formula stay text.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from ..engine.diagnostics.crossval import to_price
from ..engine.errors import ReportError
from ..engine.sales import ROW_COLUMN
from .cautions import ONE_LINE_CAUTION
from .content import Cell, Table
from .numbers import percent, plain
from .tables import write_csv, write_xlsx

EXCLUDED_BY: dict[str, str] = {
    "import": "reading the file",
    "model": "the model",
    "user": "the user",
}


def result_columns(level: float) -> tuple[str, ...]:
    """Headings of the results that follow the sale's own columns."""
    lvl = percent(level, 1 if round(level * 100) != level * 100 else 0)
    return (
        "Used in the fit",
        "Left out because",
        "Model value (fitted)",
        "Leave-one-out value",
        f"Leave-one-out {lvl} low",
        f"Leave-one-out {lvl} high",
        "Price inside its own interval",
        "Ratio (leave-one-out value / price)",
        "Leverage",
        "Studentized residual",
        "Cook's distance",
        "Flags",
    )


def sales_results_table(fit: Any, diagnostics: Any) -> Table:
    """The sales and their results as a :class:`~appraise.report.content.Table`
    (key ``"sales"``); ``diagnostics`` must come from the same fit."""
    rows_fit = np.asarray(fit.rows, dtype=int)
    rows_diag = np.asarray(diagnostics.rows, dtype=int)
    if rows_fit.shape != rows_diag.shape or not np.array_equal(rows_fit, rows_diag):
        raise ReportError("the model check does not belong to this fit; run the check again")
    frame = fit.sales.frame
    own = [c for c in frame.columns if c != ROW_COLUMN]
    by_row = {int(r): i for i, r in enumerate(frame[ROW_COLUMN].to_numpy())}
    infl, loo = diagnostics.influence, diagnostics.loo
    fitted = to_price(np.asarray(fit.fitted, dtype=float), fit.spec.response, fit.smearing)
    price = np.asarray(diagnostics.price, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = loo.price_prediction / price
    flags = {f.position: "; ".join(x.text for x in f.findings) for f in diagnostics.flags}

    records: dict[int, tuple[Cell, ...]] = {}
    for pos, row in enumerate(rows_fit.tolist()):
        i = by_row.get(int(row))
        sale = tuple(_cell(frame[c].iloc[i]) for c in own) if i is not None else (None,) * len(own)
        records[int(row)] = (
            int(row),
            *sale,
            "yes",
            None,
            _num(fitted[pos]),
            _num(loo.price_prediction[pos]),
            _num(loo.low[pos]),
            _num(loo.high[pos]),
            "yes" if bool(loo.inside[pos]) else "no",
            _num(ratio[pos]),
            _num(infl.leverage[pos]),
            _num(infl.student_external[pos]),
            _num(infl.cooks_distance[pos]),
            flags.get(pos, ""),
        )
    blank = (None,) * (len(result_columns(diagnostics.level)) - 2)
    for e in fit.excluded:
        if int(e.row) in records:
            continue
        i = by_row.get(int(e.row))
        if i is not None:
            sale = tuple(_cell(frame[c].iloc[i]) for c in own)
        else:  # dropped while reading: only what the exclusion keeps
            sale = tuple(e.sale_id if c == fit.sales.roles.column("sale_id") else None for c in own)
        by = EXCLUDED_BY.get(e.source, e.source)
        records[int(e.row)] = (int(e.row), *sale, "no", f"{e.reason} (by {by})", *blank)
    columns = ("File row", *own, *result_columns(diagnostics.level))
    values = tuple(records[r] for r in sorted(records))
    return Table(
        key="sales",
        title="Sales with the model's results",
        columns=columns,
        rows=tuple(tuple(plain(v) if v is not None else "" for v in r) for r in values),
        values=values,
        note=ONE_LINE_CAUTION,
    )


def write_sales_results(fit: Any, diagnostics: Any, path: str | Path) -> Path:
    """Write :func:`sales_results_table` as CSV, or XLSX when ``path`` ends in ``.xlsx``
    (the workbook gets a second sheet with the caution; a CSV ends with it)."""
    p = Path(path)
    table = sales_results_table(fit, diagnostics)
    suffix = p.suffix.lower()
    if suffix == ".xlsx":
        return write_xlsx([table, _caution_table()], p)
    if suffix not in (".csv", ".txt"):
        raise ReportError("the sales are written as .csv or .xlsx", file=str(p))
    # a CSV has no second sheet: the caution is its last line
    width = len(table.columns)
    last = (f"Caution: {ONE_LINE_CAUTION}",) + ("",) * (width - 1)
    with_caution = replace(table, rows=(*table.rows, last), values=(*(table.values or ()), last))
    return write_csv(with_caution, p)


def _caution_table() -> Table:
    return Table(key="caution", title="", columns=("Caution",), rows=((ONE_LINE_CAUTION,),))


def _num(x: float) -> float | None:
    v = float(x)
    return v if np.isfinite(v) else None


def _cell(v: Any) -> Cell:
    """A value of the sales frame as a spreadsheet cell: numbers stay numbers, dates
    become ISO text, missing values empty."""
    if v is None or (isinstance(v, float) and not np.isfinite(v)):
        return None
    if isinstance(v, bool | np.bool_):
        return "yes" if v else "no"
    if isinstance(v, int | np.integer):
        return int(v)
    if isinstance(v, float | np.floating):
        return float(v)
    text = plain(v)
    return None if text == plain(None) else text


__all__: Sequence[str] = ("result_columns", "sales_results_table", "write_sales_results")
