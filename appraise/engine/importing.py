"""Read a comparable-sales export (CSV, XLSX or Parquet) into a :class:`SalesTable`.

Every cell is read as it stands (text stays text until parsed here; typed
spreadsheet and Parquet values pass through the same cleaning), so nothing is
guessed by a library. Each column gets a kind -- number, date, text, or the
yes/no flag of the arm's-length role -- from its role when it has one, else
from its content.

Rows that cannot be used are excluded with a reason, never dropped:
unparseable, missing or non-positive price; missing or unreadable sale date
(when that role is mapped); a sale not at arm's length or with an unreadable
flag; a duplicate sale id (the first is kept); an empty row; a CSV row with
more values than the header has columns. A bad cell anywhere else becomes
missing and is listed in the notes with its row and column.

Row numbers are file rows as a spreadsheet shows them: the header is row 1.
"""

from __future__ import annotations

import io
import re
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from functools import partial
from pathlib import Path
from typing import BinaryIO

import numpy as np
import pandas as pd

from .cell_columns import blank_mask, fast_iso_dates, fast_numbers, missing_mask, strip_texts
from .cells import (
    area_unit_of,
    brief,
    clean_text,
    is_missing,
    parse_date,
    parse_flag,
    parse_number,
)
from .coded_cells import CodedCells
from .csv_reading import DELIMITERS as DELIMITERS  # re-exported: part of this module's API
from .csv_reading import CsvScan, file_sha256, read_csv_cells, scan_csv
from .csv_reading import sniff_delimiter as sniff_delimiter
from .errors import AppraiseError, DataError, RoleError
from .limits import check_columns, check_parquet, check_xlsx, sheet_rows
from .plausibility import DEFAULT_RULES, PlausibilityRules, RowChecks, decide_decimal_mark
from .roles import AREA_ROLES, ROLE_KINDS, RoleMap, guess_roles, list_headers, resolve_roles
from .sales import ROW_COLUMN, Exclusion, SalesTable, SourceInfo
from .settings import SQFT_PER_M2, AreaUnit, ImportSettings

Progress = Callable[[float, str], None]
"""``progress(fraction, message)``: how a long read reports how far it is."""

FORMATS: dict[str, str] = {
    ".csv": "csv",
    ".tsv": "csv",
    ".txt": "csv",
    ".xlsx": "xlsx",
    ".xlsm": "xlsx",
    ".parquet": "parquet",
    ".pq": "parquet",
}
"""File suffix -> format read."""

UNIT_TEXT: dict[str, str] = {"ft2": "ft²", "m2": "m²"}
FIRST_DATA_ROW = 2  # the header is row 1
_NOTE_EXAMPLES = 8  # bad cells listed per column in a note before "and N more"


# --- raw tables ----------------------------------------------------------------------


@dataclass
class RawTable:
    """A file's cells before cleaning: header cells, one list per column, notes.

    ``long_rows`` maps the position of a CSV row holding more values than the
    header has columns to its number of values; ``serial_dates`` says whether
    numbers in a date column are spreadsheet day numbers (XLSX).
    """

    headers: list[object]
    columns: list[list[object] | np.ndarray | CodedCells]  # array: typed Parquet numbers
    fmt: str
    notes: list[str] = field(default_factory=list)
    long_rows: dict[int, int] = field(default_factory=dict)  # position -> values in the row
    serial_dates: bool = False  # numbers in a date column are spreadsheet day numbers

    @property
    def n_rows(self) -> int:
        return len(self.columns[0]) if self.columns else 0


def _columns_from_rows(
    rows: list[Sequence[object]], width: int, fill: object
) -> list[list[object]]:
    """Rows (possibly ragged) as ``width`` column lists, short rows padded with ``fill``."""
    if not rows:
        return [[] for _ in range(width)]
    even = [r if len(r) == width else [*r[:width], *[fill] * (width - len(r))] for r in rows]
    return [list(col) for col in zip(*even, strict=True)]


def _blank(value: object) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


def _trim_trailing_blank_rows(rows: list[Sequence[object]], notes: list[str]) -> None:
    """Remove rows after the last row holding anything, and say how many."""
    n = len(rows)
    while rows and all(_blank(v) for v in rows[-1]):
        rows.pop()
    if n - len(rows):
        k = n - len(rows)
        notes.append(f"{k} blank row{'s' if k > 1 else ''} after the last sale ignored")


def _read_csv(path: Path, data: bytes | None, progress: Progress | None = None) -> RawTable:
    """A CSV file's cells, streamed from ``path`` (or read from ``data`` when given)."""
    opener = _opener(path, data)
    scan = scan_csv(opener, str(path))
    return _csv_table(path, opener, scan, progress)


def _opener(path: Path, data: bytes | None) -> Callable[[], BinaryIO]:
    if data is not None:
        return lambda: io.BytesIO(data)
    return lambda: open(path, "rb")  # noqa: SIM115 - the readers close it


def _csv_table(
    path: Path, opener: Callable[[], BinaryIO], scan: CsvScan, progress: Progress | None
) -> RawTable:
    step = progress or _no_progress

    def reading(fraction: float, rows: int) -> None:
        step(0.05 + 0.25 * min(fraction, 1.0), f"reading rows ({rows:,} so far)")

    cells = read_csv_cells(opener, scan, str(path), reading)
    return RawTable(cells.header, cells.columns, "csv", cells.notes, cells.long_rows)


def _xlsx_rows(path: Path, sheet: str | int) -> tuple[list[str], str, list[list[object]]]:
    """The sheet names, the chosen sheet and its rows; any failure of the reader on a
    damaged or hand-made part (TypeError on a style, ParseError on the XML, IndexError on
    a shared string, ValueError on a cell) is a DataError naming the file and sheet."""
    from openpyxl import load_workbook

    try:
        wb = load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # noqa: BLE001 - whatever the reader meets in a hostile file
        raise DataError(
            f"cannot be read as an .xlsx workbook ({type(exc).__name__}: {exc})", file=str(path)
        ) from None
    name: str | None = None
    try:
        names = list(wb.sheetnames)
        if isinstance(sheet, str) and sheet in names:
            name = sheet
        elif isinstance(sheet, int) or (isinstance(sheet, str) and sheet.strip().isdigit()):
            k = int(sheet)
            name = names[k] if 0 <= k < len(names) else None
        if name is None:
            raise DataError(
                f"there is no sheet {sheet!r}; sheets are {list_headers(names)} "
                "(give a name or a 0-based index)",
                file=str(path),
            )
        ws = wb[name]
        if hasattr(ws, "reset_dimensions"):
            ws.reset_dimensions()  # do not trust the size a writer recorded
        return names, name, sheet_rows(ws.iter_rows(values_only=True), str(path), name)
    except AppraiseError:
        raise
    except Exception as exc:  # noqa: BLE001 - a cell or part the reader cannot decode
        raise DataError(
            f"sheet '{name}' cannot be read ({type(exc).__name__}: {exc})", file=str(path)
        ) from None
    finally:
        wb.close()


def _read_xlsx(path: Path, sheet: str | int) -> RawTable:
    check_xlsx(path)  # size and extent limits, before any sheet is parsed
    with warnings.catch_warnings():  # openpyxl warns on stderr about parts it repairs
        warnings.simplefilter("ignore")
        names, name, rows = _xlsx_rows(path, sheet)
    notes: list[str] = [f"sheet '{name}'"] if len(names) > 1 else []
    _trim_trailing_blank_rows(rows, notes)
    if not rows:
        raise DataError(f"sheet '{name}' is empty", file=str(path))
    if all(_blank(v) for v in rows[0]):
        raise DataError(
            f"row 1 of sheet '{name}' is empty; the header must be on the first row",
            file=str(path),
            row=1,
        )
    width = max(len(r) for r in rows)
    header = rows[0] + [None] * (width - len(rows[0]))
    return RawTable(header, _columns_from_rows(rows[1:], width, None), "xlsx", notes, {}, True)


def _read_parquet(path: Path) -> RawTable:
    import pyarrow as pa
    import pyarrow.parquet as pq

    check_parquet(path)  # declared rows x columns, from the footer, before decoding
    try:
        table = pq.read_table(path)
    except (pa.ArrowException, OSError) as exc:
        raise DataError(f"cannot be read as a Parquet file ({exc})", file=str(path)) from None
    if table.num_columns == 0:
        raise DataError("the Parquet file has no columns", file=str(path))
    columns = []
    for i in range(table.num_columns):
        kind = table.schema.field(i).type
        column = table.column(i)
        if pa.types.is_floating(kind) or (pa.types.is_integer(kind) and column.null_count == 0):
            columns.append(column.to_numpy())  # typed numbers taken as they are (null -> NaN)
            continue
        if pa.types.is_nested(kind):  # lists and records: read as text
            columns.append([None if v is None else str(v) for v in column.to_pylist()])
            continue
        columns.append(_parquet_coded(column))
    return RawTable(list(table.column_names), columns, "parquet")


_PY_SLICE = 50_000
"""Cells made Python objects per call: each call holds the interpreter lock briefly, so
the window's thread keeps turning while a pool thread reads a million-row file."""


def _parquet_coded(column) -> CodedCells:
    """A Parquet column of text, dates, flags or integers with gaps as codes into its
    distinct cells (Arrow's dictionary encoding; only the distinct cells become Python
    objects, in slices). A missing cell has code -1."""
    import pyarrow as pa

    try:
        encoded = column.combine_chunks().dictionary_encode()
    except (pa.ArrowNotImplementedError, pa.ArrowTypeError):  # a type Arrow cannot encode
        cells = np.empty(len(column), dtype=object)
        cells[:] = column.to_pylist()
        codes, uniques = pd.factorize(cells, use_na_sentinel=True)
        return CodedCells(codes.astype(np.int32), np.asarray(uniques, dtype=object))
    codes = encoded.indices.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int32)
    dictionary = encoded.dictionary
    uniques = np.empty(len(dictionary), dtype=object)
    for lo in range(0, len(dictionary), _PY_SLICE):
        part = dictionary.slice(lo, _PY_SLICE)
        if pa.types.is_string(part.type) or pa.types.is_large_string(part.type):
            uniques[lo : lo + len(part)] = part.to_numpy(zero_copy_only=False)
        else:  # dates, times, flags, integers, decimals, bytes: as Python values
            uniques[lo : lo + len(part)] = part.to_pylist()
    return CodedCells(codes, uniques)


# --- headers -------------------------------------------------------------------------


def clean_headers(raw: Sequence[object]) -> tuple[list[str], list[str]]:
    """Cleaned header names and notes on what changed.

    Stripped, BOM characters removed, inner white space collapsed; an empty
    header becomes ``column_<k>`` (k = 1-based position); a repeated name
    becomes ``name_2``, ``name_3``... ``_row`` is reserved for the file row.
    """
    names: list[str] = []
    notes: list[str] = []
    taken = {ROW_COLUMN}
    for k, h in enumerate(raw, start=1):
        text = "" if is_missing(h) and not isinstance(h, str) else clean_text(h)
        text = " ".join(text.replace("\ufeff", "").split())
        if not text:
            text = f"column_{k}"
            notes.append(f"column {k} has no header; named '{text}'")
        name, n = text, 1
        while name in taken:
            n += 1
            name = f"{text}_{n}"
        if name != text:
            notes.append(f"header '{text}' repeats; column {k} renamed '{name}'")
        taken.add(name)
        names.append(name)
    return names, notes


def header_area_unit(header: str) -> AreaUnit | None:
    """The area unit a header names, in brackets or at its end (``Living Area (m²)``)."""
    parts = re.findall(r"[(\[]([^)\]]*)[)\]]", header)
    parts.append(re.sub(r"[(\[][^)\]]*[)\]]", " ", header))
    for part in parts:
        unit = area_unit_of(part)
        if unit is not None:
            return unit
    return None


# --- columns -------------------------------------------------------------------------


@dataclass(frozen=True)
class _Distinct:
    """A column as codes into its distinct cells, so each distinct text is parsed once.

    ``codes[i]`` is the index of cell ``i`` in ``uniques`` (-1 for None/NaN);
    ``first[k]`` the position of the first cell holding ``uniques[k]`` and
    ``counts[k]`` how many cells hold it; ``blank[k]`` says it is a missing marker
    (white space included).
    """

    codes: np.ndarray
    uniques: list[object]
    first: np.ndarray
    counts: np.ndarray
    blank: np.ndarray
    void: np.ndarray  # per cell: nothing at all (None, NaN, white space), not even a marker
    array: np.ndarray  # ``uniques`` as an array (object, or float for a typed float column)

    @classmethod
    def of(cls, values: Sequence[object] | np.ndarray | CodedCells) -> _Distinct:
        if isinstance(values, CodedCells):
            codes, uniques = values.factorized()  # a CSV column: already coded
        else:
            if isinstance(values, np.ndarray) and values.dtype.kind in "fiu":
                cells = values  # a typed Parquet column: hashed as numbers, NaN the sentinel
            else:
                cells = np.empty(len(values), dtype=object)
                cells[:] = values
            codes, uniques = pd.factorize(cells, use_na_sentinel=True)
        codes = codes.astype(np.int32)  # half the memory of the platform integer
        uniques = np.asarray(uniques)
        k = len(uniques)
        # factorize numbers the distinct values by first appearance: a code's first cell
        # is where the running maximum of the codes first reaches it
        seen = np.flatnonzero(codes >= 0)
        c = codes[seen]
        before = np.maximum.accumulate(np.concatenate(([-1], c[:-1]))) if len(c) else c
        first = seen[c > before]
        counts = np.bincount(c, minlength=k)
        blank = missing_mask(uniques) if k else np.zeros(0, dtype=bool)
        void = np.append(blank_mask(uniques) if k else np.zeros(0, dtype=bool), True)[codes]
        return cls(codes, list(uniques), first, counts, blank, void, uniques)

    def spread(self, per_unique: np.ndarray, fill: object) -> np.ndarray:
        """Per-cell array from one value per distinct cell; ``fill`` where there is no cell."""
        return np.append(per_unique, np.array([fill], dtype=per_unique.dtype))[self.codes]

    def parse(self, parse: Callable[[object], object]) -> tuple[list[object], list[str | None]]:
        """``parse`` applied to each distinct non-missing cell: values and failure reasons."""
        k = len(self.uniques)
        values: list[object] = [None] * k
        reasons: list[str | None] = [None] * k
        for j, u in enumerate(self.uniques):
            if self.blank[j]:
                continue
            try:
                values[j] = parse(u)
            except ValueError as exc:
                reasons[j] = str(exc)
        return values, reasons


@dataclass
class _Clean:
    """One column after cleaning.

    ``values`` per cell; ``missing`` marks cells with no value (blank or a
    marker such as "N/A"), ``void`` cells with nothing in them at all; ``bad`` marks cells written but unreadable, with
    :meth:`reason` saying why. ``forms`` counts date forms, ``units`` area units
    written in cells.
    """

    kind: str  # "number" | "date" | "text" | "flag"
    values: np.ndarray
    missing: np.ndarray
    void: np.ndarray
    bad: np.ndarray
    codes: np.ndarray
    reasons: list[str | None]
    forms: dict[str, int] = field(default_factory=dict)
    units: dict[str, int] = field(default_factory=dict)

    def reason(self, i: int) -> str:
        return str(self.reasons[self.codes[i]])

    @classmethod
    def build(
        cls, kind: str, d: _Distinct, values: np.ndarray, reasons: list[str | None]
    ) -> _Clean:
        failed = np.array([r is not None for r in reasons] + [False], dtype=bool)
        missing = np.append(d.blank, True)[d.codes]
        return cls(kind, values, missing, d.void, failed[d.codes], d.codes, reasons)


_LEADING_ZERO = re.compile(r"\s*0\d+\s*")


def _number_parse(settings: ImportSettings) -> Callable[[object], float]:
    return partial(parse_number, decimal=settings.decimal, currency_symbol=settings.currency_symbol)


def infer_kind(values: Sequence[object] | _Distinct, settings: ImportSettings) -> str:
    """``"number"``, ``"date"`` or ``"text"`` for a column without a role.

    Number when nearly every non-missing cell reads as one (at most one bad
    cell in five, and more good than bad) and none is a code with a leading
    zero such as ``02134``; else date by the same rule; else text.
    """
    d = values if isinstance(values, _Distinct) else _Distinct.of(values)
    present = ~d.blank
    n = int(d.counts[present].sum())
    if n == 0:
        return "text"
    if d.array.dtype.kind in "fiu" and np.isfinite(d.array).all():
        return "number"  # a typed number column (Parquet): every cell reads as a number
    allowed_bad = max(1, n // 5)

    def mostly(parse: Callable[[object], object]) -> bool:
        _, reasons = d.parse(parse)
        ok = int(
            sum(c for c, r, p in zip(d.counts, reasons, present, strict=True) if p and r is None)
        )
        return n - ok <= allowed_bad and ok > n - ok

    codes_like = any(isinstance(u, str) and _LEADING_ZERO.fullmatch(u) for u in d.uniques)
    if not codes_like and mostly(_number_parse(settings)):
        return "number"
    if mostly(partial(parse_date, order="DMY")):  # any order: only the kind is asked here
        return "date"
    return "text"


def _clean_floats(
    d: _Distinct,
    kind: str,
    parse: Callable[[object], object],
    area: bool = False,
    decimal: str | None = None,
) -> _Clean:
    """Numbers, or flags as 1.0/0.0: NaN where missing or unreadable.

    With ``decimal`` (numbers), the distinct cells whose reading is certain from their
    shape are read at once (:func:`.cell_columns.fast_numbers`); ``parse`` reads the rest.
    """
    k = len(d.uniques)
    per_unique = np.full(k, np.nan)
    reasons: list[str | None] = [None] * k
    decided = np.zeros(k, dtype=bool)
    if decimal is not None and k:
        got, decided = fast_numbers(d.array, decimal)
        decided &= ~d.blank
        per_unique[decided] = got[decided]
    for j in np.flatnonzero(~decided & ~d.blank):
        try:
            per_unique[j] = float(parse(d.uniques[j]))  # type: ignore[arg-type]
        except ValueError as exc:
            reasons[j] = str(exc)
    col = _Clean.build(kind, d, d.spread(per_unique, np.nan), reasons)
    if area:
        for j in np.flatnonzero(~decided):  # a cell read at once names no unit
            u, r, c = d.uniques[j], reasons[j], d.counts[j]
            unit = area_unit_of(u) if isinstance(u, str) and r is None else None
            if unit is not None:
                col.units[unit] = col.units.get(unit, 0) + int(c)
    return col


def _clean_dates(
    d: _Distinct,
    settings: ImportSettings,
    serial_ok: bool,
    *,
    file: str,
    column: str,
) -> _Clean:
    order = settings.date_order
    k = len(d.uniques)
    # YYYY-MM-DD cells are read at once (form "iso"); parse_date reads the others
    per_unique, decided = fast_iso_dates(d.array) if k else (np.zeros(0, "M8[ns]"), d.blank)
    decided &= ~d.blank
    parsed: list[object] = [None] * k
    reasons: list[str | None] = [None] * k
    parse = partial(parse_date, order=order, serial_ok=serial_ok)
    for j in np.flatnonzero(~decided & ~d.blank):
        try:
            parsed[j] = parse(d.uniques[j])
        except ValueError as exc:
            reasons[j] = str(exc)
    first: dict[str, tuple[int, str]] = {}
    forms: dict[str, int] = {}
    if decided.any():
        at = np.flatnonzero(decided)
        forms["iso"] = int(d.counts[at].sum())
        j = int(at[np.argmin(d.first[at])])
        first["iso"] = (int(d.first[j]), clean_text(d.uniques[j]))
    for j, reading in enumerate(parsed):
        if reading is None:
            continue
        forms[reading.form] = forms.get(reading.form, 0) + int(d.counts[j])
        if reading.form not in first or d.first[j] < first[reading.form][0]:
            first[reading.form] = (int(d.first[j]), clean_text(d.uniques[j]))
        if reading.value is not None:
            per_unique[j] = np.datetime64(reading.value, "ns")
    problem = date_order_problem(first, order)
    if problem is not None:
        raise DataError(problem[1], file=file, row=problem[0] + FIRST_DATA_ROW, column=column)
    col = _Clean.build("date", d, d.spread(per_unique, np.datetime64("NaT")), reasons)
    col.forms = forms
    return col


def date_order_problem(first: dict[str, tuple[int, str]], order: str) -> tuple[int, str] | None:
    """What the date order cannot settle in a column, if anything: ``(position, message)``.

    ``first`` maps each date form seen (see :class:`~appraise.engine.cells.DateReading`)
    to the position and text of its first cell. Day and month are never swapped
    silently: an ambiguous date under "ISO", a date that can only be read
    against the chosen order, or a column holding both unambiguous orders is a
    problem.
    """
    day_first, month_first = first.get("day_first"), first.get("month_first")
    if order == "ISO" and "ambiguous" in first:
        i, text = first["ambiguous"]
        seen = ""
        if day_first or month_first:
            j, other = day_first or month_first
            way = "day/month" if day_first else "month/day"
            seen = f"; row {j + FIRST_DATA_ROW} ('{other}') can only be {way}"
        return i, (
            f"'{text}' could be day/month or month/day{seen}. Set the date order "
            "(--date-order DMY or MDY) to say how dates are written"
        )
    clash = {"MDY": day_first, "DMY": month_first}.get(order)
    if clash is not None:
        i, text = clash
        way = "day/month" if order == "MDY" else "month/day"
        return i, (
            f"'{text}' can only be read as {way}, which contradicts the date order {order}; "
            "check the date order setting (--date-order) or the cell"
        )
    if day_first and month_first:
        (i, a), (j, b) = sorted([day_first, month_first])
        return j, (
            f"dates are written both day/month and month/day: row {i + FIRST_DATA_ROW} "
            f"'{a}' and row {j + FIRST_DATA_ROW} '{b}' cannot both be right"
        )
    return None


def _clean_texts(d: _Distinct) -> _Clean:
    per_unique = np.full(len(d.uniques), None, dtype=object)
    if len(d.uniques):
        plain = np.array([type(u) is str for u in d.uniques], dtype=bool) & ~d.blank
        per_unique[plain] = strip_texts(d.array[plain])  # clean_text of a str
        other = ~plain & ~d.blank
        per_unique[other] = [clean_text(u) for u in d.array[other]]
    return _Clean.build("text", d, d.spread(per_unique, None), [None] * len(d.uniques))


def _typed_numbers(values: object) -> bool:
    """A typed number column (Parquet) with no infinite cell: it reads as it is."""
    return (
        isinstance(values, np.ndarray)
        and values.dtype.kind in "fiu"
        and len(values) > 0
        and not np.isinf(values).any()
        and not np.isnan(values).all()
    )


def _typed_clean(values: np.ndarray) -> _Clean:
    """The cleaned form of a typed number column: the numbers, NaN missing and void, none
    bad -- what :func:`_clean_floats` gives it, without hashing every distinct value."""
    v = np.asarray(values, dtype=float)  # no copy of a float column: the frame's column
    missing = np.isnan(v)  # is taken with a mask later (a copy of its own)
    n = len(v)
    return _Clean(
        "number", v, missing, missing.copy(), np.zeros(n, bool), np.zeros(n, np.intp), [None]
    )


def _clean_column(
    d: _Distinct,
    kind: str,
    settings: ImportSettings,
    *,
    serial_ok: bool,
    area: bool,
    file: str,
    column: str,
) -> _Clean:
    if kind == "number":
        return _clean_floats(d, kind, _number_parse(settings), area, settings.decimal)
    if kind == "date":
        return _clean_dates(d, settings, serial_ok, file=file, column=column)
    if kind == "flag":
        return _clean_floats(d, kind, parse_flag)
    return _clean_texts(d)


# --- the whole file ------------------------------------------------------------------


def read_raw_table(
    path: Path,
    data: bytes | None,
    fmt: str,
    settings: ImportSettings,
    progress: Progress | None = None,
) -> RawTable:
    """The cells of a file of format ``fmt`` ("csv", "xlsx", "parquet"), not yet cleaned.

    ``data`` is the file's bytes when they are already read (only CSV uses them; the
    others reopen ``path``); None streams a CSV file from ``path`` in chunks.
    """
    if fmt == "csv":
        return _read_csv(path, data, progress)
    if fmt == "xlsx":
        return _read_xlsx(path, settings.sheet)
    return _read_parquet(path)


def format_of(path: Path) -> str:
    """The format read for ``path``'s suffix; DataError for an unknown one."""
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        known = ", ".join(sorted(FORMATS))
        extra = " (save it as .xlsx)" if path.suffix.lower() == ".xls" else ""
        raise DataError(
            f"unknown file type '{path.suffix or '(none)'}'{extra}; sales files are {known}",
            file=str(path),
        )
    return fmt


def _check_readable(path: Path) -> None:
    """DataError when ``path`` is missing, not a file, or a name the system refuses."""
    try:
        exists, is_file = path.exists(), path.is_file()
    except (OSError, ValueError) as exc:  # a name too long (ENAMETOOLONG), a NUL byte
        raise DataError(f"cannot be opened ({exc.strerror or exc})", file=str(path)) from None
    if not exists:
        raise DataError("file not found", file=str(path))
    if not is_file:
        raise DataError("not a file", file=str(path))


def read_file_bytes(path: Path) -> bytes:
    """The bytes of ``path``; DataError when missing, not a file or unreadable."""
    _check_readable(path)
    try:
        return path.read_bytes()
    except OSError as exc:
        raise DataError(f"cannot read the file: {exc.strerror}", file=str(path)) from None


def _no_price_error(headers: Sequence[str], file: str) -> RoleError:
    return RoleError(
        "no column has the price role. Headers found: "
        f"{list_headers(headers)}. Map one with a role map such as "
        '{"format": "appraise-roles", "version": 1, "roles": {"price": "<header>"}} '
        "given with --roles",
        file=file,
    )


def _raw_text(v: object) -> str:
    return "" if v is None else brief(clean_text(v))


def load_sales(
    path: str | Path,
    settings: ImportSettings = ImportSettings(),  # noqa: B008 - frozen, safe as a default
    roles: RoleMap | None = None,
    *,
    progress: Progress | None = None,
    rules: PlausibilityRules = DEFAULT_RULES,
) -> SalesTable:
    """Read a sales export and clean it.

    Parameters
    ----------
    path:
        A ``.csv`` (also ``.tsv``/``.txt``), ``.xlsx`` or ``.parquet`` file.
    settings:
        Decimal mark, date order, area unit, sheet, currency symbol.
    roles:
        A role map to use as it stands; ``None`` suggests one from the headers.
    progress:
        Called as ``progress(fraction, message)`` as the work advances (fraction in
        0..1). It may raise :class:`~appraise.engine.errors.Cancelled` to stop the read.
    rules:
        The plausibility rules (:mod:`appraise.engine.plausibility`): implausible
        prices, areas, sale dates and years built exclude their rows with a reason;
        the decimal mark is decided once for the whole file and reported.

    Returns
    -------
    SalesTable
        Used rows in ``frame`` (with ``_row``), every other row in ``excluded``
        with a reason, and ``len(frame) + len(excluded) == source.rows_in_file``.

    Raises
    ------
    DataError
        Missing, unreadable or empty file, unknown file type, no such sheet, a
        CSV quoting error, an ambiguous or contradictory date (naming row and
        column and the setting that settles it).
    RoleError
        No price column, or a role map naming a column the file does not have.
    """
    step = progress or _no_progress
    p = Path(path)
    fmt = format_of(p)
    step(0.0, f"reading {p.name}")
    file = str(path)
    _check_readable(p)
    opener = _opener(p, None)
    try:
        if fmt == "csv":
            scan = scan_csv(opener, file)
            sha256, size = scan.sha256, scan.size
        else:
            sha256, size = file_sha256(opener)
    except OSError as exc:
        raise DataError(f"cannot read the file: {exc.strerror}", file=file) from None
    if not size:
        raise DataError("the file is empty", file=file)
    step(0.05, f"parsing {fmt.upper()}")
    try:
        if fmt == "csv":
            raw = _csv_table(p, opener, scan, progress)
        else:
            raw = read_raw_table(p, None, fmt, settings, progress)
    except OSError as exc:
        raise DataError(f"cannot read the file: {exc.strerror}", file=file) from None
    check_columns(len(raw.headers), file)
    if raw.n_rows == 0:
        raise DataError("the file has a header but no rows of sales", file=file)
    headers, header_notes = clean_headers(raw.headers)
    # with no map given, the roles are guessed from the headers and the columns' content
    values = None if roles is not None else dict(zip(headers, raw.columns, strict=True))
    role_map = resolve_roles(headers, roles, file=file, values=values)
    guesses = () if values is None else guess_roles(headers, values)
    if role_map.column("price") is None:
        raise _no_price_error(headers, file)
    n = raw.n_rows
    notes = list(raw.notes) + header_notes
    decision = decide_decimal_mark(
        {c: raw.columns[headers.index(c)] for c in _money_and_area_columns(role_map, headers)},
        settings.decimal,
        currency_symbol=settings.currency_symbol,
    )
    if decision.mark != settings.decimal:
        settings = replace(settings, decimal=decision.mark)
    if decision.note:
        notes.append(decision.note)
    for pos in raw.long_rows:  # misaligned values: read nothing from them
        for col in raw.columns:
            col[pos] = None

    cleaned: dict[str, _Clean] = {}
    for i, (name, values) in enumerate(zip(headers, raw.columns, strict=True)):
        step(0.3 + 0.6 * i / len(headers), f"cleaning column '{name}'")
        role = role_map.role_of(name)
        if (not role or ROLE_KINDS[role] == "number") and _typed_numbers(values):
            cleaned[name] = _typed_clean(values)  # nothing to parse: no distinct cells needed
            continue
        d = _Distinct.of(values)
        kind = ROLE_KINDS[role] if role else infer_kind(d, settings)
        cleaned[name] = _clean_column(
            d,
            kind,
            settings,
            serial_ok=raw.serial_dates,
            area=role in AREA_ROLES,
            file=file,
            column=name,
        )

    step(0.9, "checking rows")
    checks = _row_checks(raw, headers, role_map, cleaned, rules)
    excluded = _exclusions(raw, headers, role_map, cleaned, checks)
    notes += checks.notes
    used = np.ones(n, dtype=bool)
    for e in excluded:
        used[e.row - FIRST_DATA_ROW] = False
    notes += _column_notes(headers, role_map, cleaned, used, settings)

    examples = _raw_examples(headers, raw.columns)
    del raw, checks  # the cells as read are no longer needed: let them go before the frame
    columns = {}
    for name in headers:  # each cleaned column let go once its used rows are taken
        columns[name] = _series(cleaned.pop(name), used)
    columns[ROW_COLUMN] = np.flatnonzero(used).astype(np.int64) + FIRST_DATA_ROW
    frame = pd.DataFrame(columns, copy=False)
    del columns
    source = SourceInfo(path=file, sha256=sha256, format=fmt, rows_in_file=n)
    step(1.0, "done")
    return SalesTable(
        frame=frame,
        excluded=tuple(excluded),
        roles=role_map,
        source=source,
        area_unit=settings.area_unit,
        notes=tuple(notes),
        examples=examples,
        role_guesses=tuple(g for g in guesses if role_map.column(g.role) == g.column),
    )


def _raw_examples(
    headers: Sequence[str], columns: Sequence[Sequence[object]], look: int = 2000, keep: int = 4
) -> dict[str, tuple[str, ...]]:
    """Each column's most frequent values among its first ``look`` cells, as written."""
    out: dict[str, tuple[str, ...]] = {}
    for name, values in zip(headers, columns, strict=True):
        counts: dict[str, int] = {}
        for v in values[:look]:
            if v is None:
                continue
            t = str(v).strip()
            if t:
                counts[t] = counts.get(t, 0) + 1
        out[name] = tuple(sorted(counts, key=lambda t: -counts[t])[:keep])
    return out


def _money_and_area_columns(roles: RoleMap, headers: Sequence[str]) -> list[str]:
    cols = [roles.column(r) for r in ("price", *AREA_ROLES)]
    return [c for c in dict.fromkeys(cols) if c is not None and c in headers]


def _row_checks(
    raw: RawTable, headers: list[str], roles: RoleMap, cleaned: dict[str, _Clean], rules
) -> RowChecks:
    """The plausibility rules over the cleaned price, date, area and year-built columns."""
    values = {}
    for role in ("price", "sale_date", "living_area", "lot_area", "year_built"):
        col = roles.column(role)
        if col is not None and col in cleaned and cleaned[col].kind in ("number", "date"):
            values[role] = (col, cleaned[col].values)
    return RowChecks(values, dict(zip(headers, raw.columns, strict=True)), rules)


def _no_progress(fraction: float, message: str) -> None:
    """The default progress callback: nobody is listening."""


def _series(col: _Clean, used: np.ndarray) -> pd.Series:
    values = col.values[used]
    if col.kind == "text":
        return pd.Series(values, dtype="str")
    return pd.Series(values)


def _exclusions(
    raw: RawTable,
    headers: list[str],
    roles: RoleMap,
    cleaned: dict[str, _Clean],
    checks: RowChecks | None = None,
) -> list[Exclusion]:
    """One exclusion per unusable row: the first of these reasons that applies.

    Long CSV row, empty row, price (unreadable, missing, not positive, then
    implausible), sale date (unreadable, missing, implausible), arm's-length flag
    (unreadable, "no"), implausible area or year built, then a sale id already seen
    on a row that is used. The plausibility rules come from ``checks``.
    """
    n = raw.n_rows
    raw_of = dict(zip(headers, raw.columns, strict=True))
    id_col = roles.column("sale_id")
    ids = cleaned[id_col].values if id_col else np.full(n, None, dtype=object)
    open_rows = np.ones(n, dtype=bool)
    found: list[tuple[int, str, str | None]] = []

    def take(mask: np.ndarray, reason: Callable[[int], str], column: str | None) -> None:
        for i in np.flatnonzero(mask & open_rows):
            found.append((int(i), reason(int(i)), column))
        open_rows[mask] = False

    long_rows = np.zeros(n, dtype=bool)
    long_rows[list(raw.long_rows)] = True
    width = len(headers)
    take(
        long_rows,
        lambda i: (
            f"too many values: {raw.long_rows[i]} in a row under {width} headers "
            "(a value holding the delimiter may be missing its quotes)"
        ),
        None,
    )
    take(np.logical_and.reduce([c.void for c in cleaned.values()]), lambda i: "empty row", None)

    price_col = roles.column("price")
    price = cleaned[price_col]
    take(price.bad, lambda i: f"price {price.reason(i)}", price_col)
    take(price.missing, lambda i: "price is missing", price_col)
    with np.errstate(invalid="ignore"):
        not_positive = price.values <= 0
    take(
        not_positive,
        lambda i: f"price '{_raw_text(raw_of[price_col][i])}' is not positive",
        price_col,
    )
    for mask, why, column in checks.price(open_rows) if checks else ():
        take(mask, why, column)
    date_col = roles.column("sale_date")
    if date_col is not None:
        dates = cleaned[date_col]
        take(dates.bad, lambda i: f"sale date {dates.reason(i)}", date_col)
        take(dates.missing, lambda i: "sale date is missing", date_col)
    for mask, why, column in checks.sale_date(open_rows) if checks else ():
        take(mask, why, column)
    flag_col = roles.column("arms_length")
    if flag_col is not None:
        flags = cleaned[flag_col]
        take(flags.bad, lambda i: f"arm's-length flag {flags.reason(i)}", flag_col)
        take(
            flags.values == 0.0,
            lambda i: f"not an arm's-length sale ('{_raw_text(raw_of[flag_col][i])}')",
            flag_col,
        )
    for mask, why, column in checks.rest(open_rows) if checks else ():
        take(mask, why, column)
    if id_col is not None:
        # an id seen again among the rows still open, in file order (hashed by pandas)
        at = np.flatnonzero(open_rows & ~cleaned[id_col].missing)
        codes, uniques = pd.factorize(ids[at])  # each distinct id hashed once
        if cleaned[id_col].kind == "text":  # every id a text: distinct ids print apart
            key, keys = codes, np.asarray(uniques, dtype=object)
        else:
            texts = np.array([u if type(u) is str else str(u) for u in uniques], dtype=object)
            same, keys = pd.factorize(texts)  # ids that print the same are the same id
            key = same[codes]
        _, first = np.unique(key, return_index=True)  # each id's first open row
        again = np.ones(len(at), dtype=bool)
        again[first] = False
        repeats = np.zeros(n, dtype=bool)
        repeats[at[again]] = True
        seen_again = np.bincount(key, minlength=len(keys)) > 1
        shown = first[seen_again[key[first]]]  # first rows of the ids that come again
        first_of_id = dict(
            zip(keys[key[shown]].astype(str), (at[shown] + FIRST_DATA_ROW).tolist(), strict=True)
        )
        take(
            repeats,
            lambda i: (
                f"duplicate sale id '{brief(str(ids[i]))}' "
                f"(first seen on row {first_of_id[str(ids[i])]})"
            ),
            id_col,
        )
    return [
        Exclusion(
            i + FIRST_DATA_ROW,
            None if i in raw.long_rows or ids[i] is None else str(ids[i]),
            reason,
            column,
        )
        for i, reason, column in sorted(found)
    ]


def _column_notes(
    headers: list[str],
    roles: RoleMap,
    cleaned: dict[str, _Clean],
    used: np.ndarray,
    settings: ImportSettings,
) -> list[str]:
    """Notes on the used rows: bad cells left blank, dates resolved, units, missing flags."""
    notes: list[str] = []
    unit = settings.area_unit
    for name in headers:
        col = cleaned[name]
        role = roles.role_of(name)
        if role in AREA_ROLES:
            named = header_area_unit(name)
            if named is not None and named != unit:
                notes.append(
                    f"header '{name}' names {UNIT_TEXT[named]} but the area unit setting is "
                    f"{UNIT_TEXT[unit]}; values are kept as read (set the area unit to "
                    f"{named} if the file is in {UNIT_TEXT[named]})"
                )
            for other, count in col.units.items():
                if other != unit:
                    notes.append(
                        f"{count} cell{'s' if count > 1 else ''} in '{name}' marked "
                        f"{UNIT_TEXT[other]} while the area unit setting is {UNIT_TEXT[unit]}; "
                        "values are kept as read"
                    )
        if role in ("price", "sale_date"):
            pass  # their bad cells exclude the row; the exclusion says why
        elif role == "arms_length":
            missing = int(np.count_nonzero(col.missing & used))
            if missing:
                notes.append(
                    f"{missing} used row{'s have' if missing > 1 else ' has'} no arm's-length flag "
                    f"in '{name}'; kept as arm's-length sales"
                )
        else:
            bad = [(i, col.reason(i)) for i in np.flatnonzero(col.bad & used)]
            if bad:
                shown = "; ".join(f"row {i + FIRST_DATA_ROW}: {r}" for i, r in bad[:_NOTE_EXAMPLES])
                more = len(bad) - _NOTE_EXAMPLES
                notes.append(
                    f"column '{name}': {len(bad)} cell{'s' if len(bad) > 1 else ''} could not be "
                    f"read as {'a ' + col.kind if col.kind != 'flag' else 'yes/no'} and "
                    f"{'are' if len(bad) > 1 else 'is'} left blank ({shown}"
                    f"{f'; and {more} more' if more > 0 else ''})"
                )
        if col.kind == "date":
            ambiguous = col.forms.get("ambiguous", 0)
            if ambiguous:
                way = "day/month" if settings.date_order == "DMY" else "month/day"
                notes.append(
                    f"{ambiguous} ambiguous date{'s' if ambiguous > 1 else ''} in '{name}' read "
                    f"as {way} (date order {settings.date_order})"
                )
            serial = col.forms.get("serial", 0)
            if serial:
                notes.append(f"{serial} date(s) in '{name}' read from spreadsheet day numbers")
    return notes


# --- units ---------------------------------------------------------------------------


def convert_area(table: SalesTable, to_unit: AreaUnit) -> SalesTable:
    """The table with its living and lot areas in ``to_unit``.

    1 m² = 10.763910416709722 ft² (0.3048 m to the foot, exactly). Only the
    columns with the ``living_area`` and ``lot_area`` roles change; headers
    stay as they are; a note records the conversion. Same unit: returned as is.
    """
    if to_unit not in UNIT_TEXT:
        raise DataError(f"unknown area unit '{to_unit}'; use ft2 or m2")
    if to_unit == table.area_unit:
        return table
    factor = SQFT_PER_M2 if to_unit == "ft2" else 1.0 / SQFT_PER_M2
    frame = table.frame.copy()
    changed = []
    for role in AREA_ROLES:
        col = table.roles.column(role)
        if col is not None and col in frame.columns:
            frame[col] = frame[col] * factor
            changed.append(f"'{col}'")
    what = ", ".join(changed) if changed else "no area columns"
    note = (
        f"areas converted from {UNIT_TEXT[table.area_unit]} to {UNIT_TEXT[to_unit]} "
        f"({what}; 1 m² = {SQFT_PER_M2} ft²)"
    )
    return replace(table, frame=frame, area_unit=to_unit, notes=(*table.notes, note))
