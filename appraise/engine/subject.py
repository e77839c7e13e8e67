"""The subject property: the one property being valued, described like the sales.

A subject is a JSON object, a file with a header and one row (CSV, XLSX or
Parquet), or a mapping. Keys are column headers of the sales or role names
(``living_area`` finds whatever column has that role). Each value is cleaned
the way the sales column it lands in was cleaned: a number column reads
``"$1,840"`` under the same decimal mark, a date column reads dates under the
same date order. Keys that match no sales column are kept as they are;
``effective_date`` (the date of the valuation) is read as a date.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd

from .cells import clean_text, is_missing, parse_date, parse_flag, parse_number
from .errors import DataError, SubjectError
from .importing import (
    clean_headers,
    date_order_problem,
    format_of,
    read_file_bytes,
    read_raw_table,
)
from .limits import MAX_SALES_COLUMNS, load_json_text
from .roles import ROLE_KINDS, ROLES
from .sales import ROW_COLUMN, SalesTable, column_kind
from .settings import ImportSettings

EFFECTIVE_DATE = "effective_date"


def read_subject_attributes(
    path: str | Path,
    settings: ImportSettings = ImportSettings(),  # noqa: B008 - frozen, safe as a default
) -> dict[str, object]:
    """The attributes of a subject file as a plain dict, values as written (not cleaned).

    The one reader of subject files: a JSON object, or a file with a header and one row
    (CSV, XLSX, Parquet). :func:`read_subject` cleans the values against the sales.
    """
    path = Path(path)
    file = str(path)
    if path.suffix.lower() == ".json":
        try:
            text = read_file_bytes(path).decode("utf-8-sig")
        except DataError as exc:
            raise SubjectError(exc.message, file=file) from None
        except UnicodeDecodeError:
            raise SubjectError("the subject file is not UTF-8 text", file=file) from None
        doc = load_json_text(text, source=file, error=SubjectError, what="the subject file")
        if not isinstance(doc, dict):
            raise SubjectError(
                "the subject file must hold one JSON object of column: value pairs", file=file
            )
        return doc
    try:
        raw = read_raw_table(path, read_file_bytes(path), format_of(path), settings)
    except DataError as exc:
        raise SubjectError(exc.message, file=file, row=exc.row, column=exc.column) from None
    if raw.n_rows != 1:
        raise SubjectError(
            f"a subject file has a header and one row; this one has {raw.n_rows} rows "
            "below the header",
            file=file,
        )
    headers, _ = clean_headers(raw.headers)
    return {h: col[0] for h, col in zip(headers, raw.columns, strict=True)}


def _kind_of(sales: SalesTable, column: str) -> str:
    role = sales.roles.role_of(column)
    return ROLE_KINDS[role] if role is not None else column_kind(sales.frame[column])


def _clean_value(
    value: object, kind: str, settings: ImportSettings, *, file: str | None, key: str
) -> object:
    """One subject value read as ``kind``; missing markers become NaN/NaT/None."""
    if isinstance(value, dict | list | tuple | set):
        raise SubjectError(f"'{key}' must be a single value", file=file, column=key)
    if is_missing(value):
        return {"number": np.nan, "flag": np.nan, "date": pd.NaT}.get(kind)
    try:
        if kind == "number":
            if isinstance(value, bool):
                raise ValueError(f"'{str(value).lower()}' is not a number")
            return parse_number(
                value, decimal=settings.decimal, currency_symbol=settings.currency_symbol
            )
        if kind == "flag":
            return 1.0 if parse_flag(value) else 0.0
        if kind == "date":
            reading = parse_date(value, order=settings.date_order)
            problem = date_order_problem(
                {reading.form: (0, clean_text(value))}, settings.date_order
            )
            if problem is not None:
                raise ValueError(problem[1])
            return pd.Timestamp(reading.value)
    except ValueError as exc:
        raise SubjectError(f"'{key}': {exc}", file=file, column=key) from None
    return clean_text(value)


def _target(key: str, sales: SalesTable) -> tuple[str, str | None]:
    """The sales column a subject key lands in (or the key itself), and the kind to read."""
    columns = [c for c in sales.frame.columns if c != ROW_COLUMN]
    if key in columns:
        return key, _kind_of(sales, key)
    if key in ROLES:
        col = sales.roles.column(key)
        if col is not None and col in columns:
            return col, _kind_of(sales, col)
        return key, ROLE_KINDS[key]
    squashed = " ".join(key.split()).casefold()
    matches = [c for c in columns if " ".join(c.split()).casefold() == squashed]
    if len(matches) == 1:
        return matches[0], _kind_of(sales, matches[0])
    if key == EFFECTIVE_DATE:
        return key, "date"
    return key, None


def read_subject(
    source: str | Path | Mapping[str, object],
    sales: SalesTable,
    settings: ImportSettings = ImportSettings(),  # noqa: B008 - frozen, safe as a default
) -> pd.DataFrame:
    """The subject property as a one-row frame, cleaned like ``sales``.

    Parameters
    ----------
    source:
        A path to a JSON object file or to a file with a header and one row
        (CSV, XLSX, Parquet), or a mapping of key -> value.
    sales:
        The sales the subject is compared with; its columns, roles and kinds
        decide how each value is read.
    settings:
        Decimal mark, date order and currency symbol, as for the sales.

    Returns
    -------
    pandas.DataFrame
        One row. Columns: the sales columns the keys landed in (in the sales'
        order), then other keys as given, then ``effective_date``. Numbers are
        float64, dates datetime64[ns], text str.

    Raises
    ------
    SubjectError
        File not found or unreadable, not a JSON object, not exactly one row,
        a value that does not read as its column's kind, or two keys (a role
        name and a header) giving the same column different values.
    """
    file: str | None = None
    if isinstance(source, Mapping):
        values = dict(source)
    else:
        file = str(source)
        values = read_subject_attributes(source, settings)
    if len(values) > MAX_SALES_COLUMNS:  # each key a column of a one-row frame: 100,000 took 13 s
        raise SubjectError(
            f"the subject has {len(values):,} attributes; the limit is {MAX_SALES_COLUMNS:,} "
            "(as for the columns of a sales file)",
            file=file,
        )
    landed: dict[str, tuple[str, object, str | None]] = {}  # column -> (key, value, kind)
    for key, value in values.items():
        key = str(key).strip()
        column, kind = _target(key, sales)
        if kind is None:
            cleaned = value.strip() if isinstance(value, str) else value
        else:
            cleaned = _clean_value(value, kind, settings, file=file, key=key)
        if column in landed and not _same(landed[column][1], cleaned):
            other = landed[column][0]
            raise SubjectError(
                f"'{other}' and '{key}' both give column '{column}', with different values "
                f"({landed[column][1]!r} and {cleaned!r})",
                file=file,
                column=column,
            )
        landed.setdefault(column, (key, cleaned, kind))
    order = [c for c in sales.frame.columns if c in landed]
    order += [c for c in landed if c not in order and c != EFFECTIVE_DATE]
    order += [c for c in (EFFECTIVE_DATE,) if c in landed and c not in order]
    data = {}
    for c in order:
        _, v, kind = landed[c]
        if kind in ("number", "flag"):
            data[c] = pd.Series([v], dtype="float64")
        elif kind == "date":
            data[c] = pd.Series([v], dtype="datetime64[ns]")
        elif kind == "text":
            data[c] = pd.Series([v], dtype="str")
        else:
            data[c] = pd.Series([v])
    return pd.DataFrame(data, index=pd.RangeIndex(1))


def _same(a: object, b: object) -> bool:
    if is_missing(a) and is_missing(b):
        return True
    return bool(a == b)
