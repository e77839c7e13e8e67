"""Export worksheet tables to CSV and XLSX, safe to open in a spreadsheet.

A text cell that begins with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
return could be taken for a formula by a spreadsheet program; such cells are
written with a leading single quote so they stay text. Numbers are written as
numbers (a negative coefficient is a number, not a formula), missing values as
empty cells.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Iterable, Sequence
from decimal import Decimal
from pathlib import Path

from ..engine.errors import ReportError
from ..engine.exclusions import EXCLUSION_FIELDS, exclusion_records
from ..engine.sales import Exclusion
from .content import Cell, Facts, Table, Worksheet
from .safe_text import export_text

FORMULA_TRIGGERS: tuple[str, ...] = ("=", "+", "-", "@", "\t", "\r")

DEFAULT_EXPORTS: tuple[str, ...] = ("coefficients", "exclusions")
"""Keys of the tables written by :func:`export_tables` unless told otherwise."""


def neutralise(value: Cell) -> Cell:
    """Make one cell safe for a spreadsheet.

    Text goes through :func:`.safe_text.export_text` (control characters escaped, a
    formula start neutralised with a leading ``'`` even behind invisible characters
    or in full-width form, ``;=`` inside a cell broken); numbers pass through
    unchanged (non-finite numbers and ``None`` become empty).
    """
    if value is None:
        return None
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        v = float(value)
        if not math.isfinite(v):
            return None
        return value
    if hasattr(value, "item") and not isinstance(value, str):  # numpy scalar
        return neutralise(value.item())
    return export_text(str(value))


def safe_rows(table: Table) -> list[list[Cell]]:
    """Header and rows of ``table`` with every cell neutralised."""
    rows: list[list[Cell]] = [[neutralise(c) for c in table.columns]]
    rows.extend([neutralise(c) for c in row] for row in table.export_rows())
    return rows


def write_csv(table: Table, path: str | Path) -> Path:
    """Write one table as UTF-8 CSV (with a byte-order mark so spreadsheets read it as UTF-8)."""
    p = Path(path)
    try:
        with p.open("w", encoding="utf-8-sig", newline="") as fh:
            writer = csv.writer(fh)
            for row in safe_rows(table):
                writer.writerow(["" if c is None else _csv_text(c) for c in row])
    except OSError as exc:
        raise ReportError(f"cannot write CSV: {exc.strerror}", file=str(p)) from None
    return p


def _csv_text(c: Cell) -> str:
    if isinstance(c, float):
        return float_text(c)
    return str(c)


def float_text(x: float) -> str:
    """The shortest text that reads back to the same float, written positionally
    (``1.26986e-05 -> "0.0000126986"``): a person opening the file never meets
    scientific notation, and nothing is lost."""
    text = repr(float(x))
    if "e" not in text and "E" not in text:
        return text
    return format(Decimal(text), "f")


def write_xlsx(tables: Sequence[Table], path: str | Path) -> Path:
    """Write tables to one workbook, one sheet per table (named by the table key).

    Strings are stored as strings, never as formulas, on top of the quote prefix.
    """
    from openpyxl import Workbook
    from openpyxl.styles import Font

    if not tables:
        raise ReportError("no tables to write", file=str(path))
    wb = Workbook()
    wb.remove(wb.active)
    p = Path(path)
    try:
        for table in tables:
            ws = wb.create_sheet(title=_sheet_name(table.key))
            for r, row in enumerate(safe_rows(table), start=1):
                for c, value in enumerate(row, start=1):
                    cell = ws.cell(row=r, column=c)
                    cell.value = value
                    if isinstance(value, str):
                        cell.data_type = "s"  # openpyxl would otherwise read "=..." as a formula
            for cell in ws[1]:
                cell.font = Font(bold=True)
    except ValueError as exc:  # openpyxl's IllegalCharacterError is one; export_text prevents it
        raise ReportError(f"cannot write XLSX: {exc}", file=str(p)) from None
    try:
        wb.save(p)
    except OSError as exc:
        raise ReportError(f"cannot write XLSX: {exc.strerror}", file=str(p)) from None
    return p


def _sheet_name(key: str) -> str:
    bad = set("[]:*?/\\")
    name = "".join("_" if ch in bad else ch for ch in key)[:31]
    return name or "table"


def export_tables(
    worksheet: Worksheet, directory: str | Path, keys: Iterable[str] = DEFAULT_EXPORTS
) -> tuple[Path, ...]:
    """Write each named table present in ``worksheet`` as ``<key>.csv`` and ``<key>.xlsx``.

    Returns the paths written. Tables not in the worksheet (for example no
    exclusions) are skipped.
    """
    d = _folder(directory)
    written: list[Path] = []
    failed: list[str] = []
    for key in keys:
        table = worksheet.table(key)
        if table is None:
            continue
        for name, write in (
            (f"{key}.csv", lambda t, p: write_csv(t, p)),
            (f"{key}.xlsx", lambda t, p: write_xlsx([t], p)),
        ):
            try:  # a table that cannot be written never stops the others
                written.append(write(table, d / name))
            except ReportError as exc:
                failed.append(f"{name} ({exc.message})")
    if failed:
        done = ", ".join(p.name for p in written) or "nothing"
        raise ReportError(f"could not write {'; '.join(failed)}; written: {done}", file=str(d))
    return tuple(written)


def _folder(directory: str | Path) -> Path:
    d = Path(directory)
    try:
        d.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ReportError(f"cannot create folder: {exc.strerror}", file=str(d)) from None
    return d


def all_tables(worksheet: Worksheet, extra: Sequence[Table] = ()) -> tuple[Table, ...]:
    """Every table of the worksheet (coefficients, fit, estimate, checks, ratio study,
    exclusions, the sales-comparison grid, regions... whatever it holds), in the order
    printed, then ``extra`` (for example the sales with their results); facts lists
    become two-column tables keyed by their section. Keys are unique (``grid_2``)."""
    tables: list[Table] = []
    seen: dict[str, int] = {}
    for section in worksheet.sections:
        for block in section.blocks:
            if isinstance(block, Table):
                table = block
            elif isinstance(block, Facts) and section.key not in _FACTS_LEFT_OUT:
                key = section.key if not block.title else f"{section.key}-{_slug(block.title)}"
                table = Table(
                    key=key, title=block.title, columns=("Item", "Value"), rows=block.rows
                )
            else:
                continue
            tables.append(_unique(table, seen))
    tables.extend(_unique(t, seen) for t in extra)
    return tuple(tables)


_FACTS_LEFT_OUT = ("stamp",)
"""Facts that are not results (the versions stamp) stay in the worksheet only."""


def _slug(title: str) -> str:
    return "-".join("".join(ch if ch.isalnum() else " " for ch in title.lower()).split())[:24]


def _unique(table: Table, seen: dict[str, int]) -> Table:
    from dataclasses import replace

    n = seen.get(table.key, 0) + 1
    seen[table.key] = n
    return table if n == 1 else replace(table, key=f"{table.key}_{n}")


def export_all_tables(
    worksheet: Worksheet, target: str | Path, extra: Sequence[Table] = ()
) -> tuple[Path, ...]:
    """Write every table of the worksheet (see :func:`all_tables`): to one workbook with
    a sheet each when ``target`` ends in ``.xlsx``, else as one CSV per table into the
    folder ``target``. Returns the paths written."""
    tables = all_tables(worksheet, extra)
    if not tables:
        raise ReportError("the worksheet holds no tables", file=str(target))
    p = Path(target)
    if p.suffix.lower() == ".xlsx":
        if not p.parent.is_dir():
            raise ReportError("the folder does not exist", file=str(p))
        return (write_xlsx(tables, p),)
    d = _folder(p)
    return tuple(write_csv(t, d / f"{t.key}.csv") for t in tables)


def write_exclusion_log(excluded: Iterable[Exclusion], path: str | Path) -> Path:
    """Write the exclusion log, one row per excluded sale, spreadsheet-safe.

    CSV, or XLSX when ``path`` ends in ``.xlsx``. Cells that a spreadsheet
    could take for a formula are neutralised as everywhere in this module.
    """
    records = exclusion_records(excluded)
    values = tuple(tuple(r[k] for k in EXCLUSION_FIELDS) for r in records)
    rows = tuple(tuple("" if v is None else str(v) for v in r) for r in values)
    table = Table(
        key="exclusions", title="Excluded rows", columns=EXCLUSION_FIELDS, rows=rows, values=values
    )
    p = Path(path)
    if p.suffix.lower() == ".xlsx":
        return write_xlsx([table], p)
    if p.suffix.lower() not in (".csv", ".txt", ""):
        raise ReportError("the exclusion log is written as .csv or .xlsx", file=str(p))
    return write_csv(table, p)
