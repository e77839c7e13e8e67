"""Value a whole table of subjects (a roll of properties) with one fitted model.

The subjects file (CSV or Parquet) is read in chunks; each chunk is cleaned column by
column the way the sales columns of the same names were cleaned (vectorised, with the
per-cell parser only for cells the fast path of :mod:`.cell_columns` cannot decide) and
valued by the one prediction path, :meth:`FitResult.predict`. No Python loop runs per
subject, and memory stays flat whatever the length of the file.

Every subject row comes out, in input order, with its file row, its id, the estimate, the
median (log response), the prediction interval for one sale and the interval for the
mean, its leverage, the warnings that concern it and, for a subject that cannot be valued,
the reason (a bad cell, a missing input, a category level the sales never had, no date
for the time terms). A row is never dropped.

As for one subject: :math:`\\hat y_0 = x_0'\\hat\\beta`, the single-sale interval
:math:`\\hat y_0 \\pm t_{1-\\alpha/2,\\,n-p}\\sqrt{s^2 + x_0'Vx_0}`, for a log response the
bounds exponentiated and the estimate Duan's smearing mean :math:`e^{\\hat y_0}\\bar{e^{\\hat e}}`.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from functools import partial
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from .cell_columns import fast_iso_dates, fast_numbers, missing_mask, parse_rest, strip_texts
from .cells import MISSING_MARKERS, clean_text, is_missing, parse_date, parse_flag, parse_number
from .design import level_label
from .errors import DataError, SubjectError
from .fitting import FitResult
from .importing import FIRST_DATA_ROW, clean_headers, format_of, sniff_delimiter
from .levels import MIN_LEVEL_SALES
from .prediction import check_level
from .sales import SalesTable
from .settings import ImportSettings
from .subject import EFFECTIVE_DATE, _target
from .valuation import DATE_SLACK_DAYS

DEFAULT_CHUNK_ROWS = 50_000
"""Subjects valued at a time: the dense design of a chunk is chunk x p floats."""

CSV_BLOCK_BYTES = 1 << 22
"""Bytes of a CSV roll Arrow's reader parses at a time."""

ID_HEADERS = ("id", "subject_id", "subject id", "parcel", "parcel_id", "parcel id")
"""Headers taken as the subject's id when no column lands on the sales' id column."""

OUTPUT_COLUMNS = (
    "row",
    "id",
    "estimate",
    "median",
    "low",
    "high",
    "mean_low",
    "mean_high",
    "level",
    "leverage",
    "warnings",
    "reason",
)
"""Columns of a batch result; ``median`` only for a log response."""

Progress = Callable[[int, int | None], None]
"""``progress(rows_done, rows_in_file_or_None)`` after each chunk."""


@dataclass(frozen=True)
class ColumnPlan:
    """How the columns of a subjects file land in the sales' columns.

    ``landing`` holds ``(file header, sales column, kind)`` for every header (``kind``
    None: kept as written); ``id_header`` is the header giving each subject's id (None:
    the file row is the id); ``dates_to_fill`` are the model's date inputs, filled from
    ``effective_date`` (the row's, else the model file's) where a row has none.
    """

    landing: tuple[tuple[str, str, str | None], ...]
    id_header: str | None
    dates_to_fill: tuple[str, ...]
    effective_date: pd.Timestamp | None


@dataclass(frozen=True)
class BatchSummary:
    """What a batch run did: rows read, valued, not valued, valued with warnings."""

    rows: int
    valued: int
    not_valued: int
    with_warnings: int
    fit_warnings: tuple[str, ...]

    def to_dict(self) -> dict:
        return {
            "rows": self.rows,
            "valued": self.valued,
            "not_valued": self.not_valued,
            "with_warnings": self.with_warnings,
            "fit_warnings": list(self.fit_warnings),
        }


def plan_columns(
    headers: Sequence[str], fit: FitResult, sales: SalesTable, id_header: str | None = None
) -> ColumnPlan:
    """Where each subjects-file header lands (as :func:`~.subject.read_subject` decides).

    Raises
    ------
    SubjectError
        ``id_header`` is not a header; two headers land in the same sales column; the
        file lacks an input the model reads (a date input is excused when an effective
        date is known).
    """
    landing = []
    taken: dict[str, str] = {}
    for h in headers:
        column, kind = _target(h, sales)
        if column in taken:
            raise SubjectError(
                f"headers '{taken[column]}' and '{h}' both give column '{column}'", column=h
            )
        taken[column] = h
        landing.append((h, column, kind))
    if id_header is not None and id_header not in headers:
        raise SubjectError(f"there is no column '{id_header}' for the subject ids")
    if id_header is None:
        id_col = sales.roles.column("sale_id")
        id_header = taken.get(id_col) if id_col else None
    if id_header is None:
        id_header = next((h for h in headers if h.strip().casefold() in ID_HEADERS), None)
    date_inputs = tuple(
        c for c in fit.design.inputs if pd.api.types.is_datetime64_any_dtype(fit.frame[c])
    )
    eff = pd.Timestamp(fit.spec.effective_date) if fit.spec.effective_date else None
    can_fill = eff is not None or EFFECTIVE_DATE in taken
    lacking = [
        c for c in fit.design.inputs if c not in taken and not (c in date_inputs and can_fill)
    ]
    if lacking:
        raise SubjectError(
            "the subjects file lacks column(s) the model needs: " + ", ".join(lacking),
            column=lacking[0],
        )
    return ColumnPlan(tuple(landing), id_header, date_inputs, eff)


# --- cleaning a chunk -------------------------------------------------------------------
@dataclass
class _Reasons:
    """The first reason each row cannot be valued (None: none yet)."""

    text: np.ndarray
    has: np.ndarray  # the row has a reason already

    def add(self, mask: np.ndarray, texts: np.ndarray | str) -> None:
        open_ = mask & ~self.has
        if open_.any():
            self.text[open_] = texts if isinstance(texts, str) else texts[open_]
            self.has |= open_


_Why = tuple[np.ndarray, np.ndarray] | None
"""Reasons of unreadable cells: ``(codes into the distinct cells, reason of each)``."""


def _as_objects(values: pd.Series) -> np.ndarray:
    return values.to_numpy(dtype=object, na_value=None)


def _per_unique(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    return codes, np.asarray(uniques, dtype=object)


def _spread(per_unique: np.ndarray, codes: np.ndarray, fill: object) -> np.ndarray:
    return np.append(per_unique, np.array([fill], dtype=per_unique.dtype))[codes]


def _clean_column(
    values: np.ndarray, kind: str, settings: ImportSettings, header: str
) -> tuple[np.ndarray, _Why]:
    """One subjects column read as ``kind``: per-row values, and the reasons of the cells
    that could not be read as ``(codes, reason per distinct cell)`` (None: no reasons)."""
    codes, uniques = _per_unique(values)
    k = len(uniques)
    why = np.full(k, None, dtype=object)
    missing = missing_mask(uniques) if k else np.zeros(0, dtype=bool)
    if kind in ("number", "flag"):
        if kind == "number":
            out, decided = fast_numbers(uniques, settings.decimal)
            parse = partial(
                parse_number, decimal=settings.decimal, currency_symbol=settings.currency_symbol
            )
        else:
            out, decided = np.full(k, np.nan), np.zeros(k, dtype=bool)
            parse = _flag_value
        got, bad = parse_rest(uniques, decided | missing, parse)
        for j, v in got.items():
            out[j] = float(v)
        for j, r in bad.items():
            why[j] = r
        out[missing] = np.nan
        return _spread(out, codes, np.nan), (codes, _prefix(why, header))
    if kind == "date":
        out, decided = fast_iso_dates(uniques)
        got, bad = parse_rest(uniques, decided | missing, partial(_date_value, settings=settings))
        for j, v in got.items():
            out[j] = v
        for j, r in bad.items():
            why[j] = r
        return _spread(out, codes, np.datetime64("NaT")), (codes, _prefix(why, header))
    texts = np.full(k, None, dtype=object)
    if k:
        if pd.api.types.infer_dtype(uniques, skipna=False) == "string":
            plain = np.ones(k, dtype=bool)  # every distinct cell is a str (told at C speed)
        else:
            plain = np.array([type(u) is str for u in uniques], dtype=bool)
        texts[plain] = strip_texts(uniques[plain])
        other = ~plain & ~missing
        texts[other] = [clean_text(u) for u in uniques[other]]
        texts[missing] = None
    return _spread(texts, codes, None), None


def _typed_column(
    series: pd.Series, kind: str | None, header: str
) -> tuple[np.ndarray, _Why] | None:
    """A Parquet column already of the kind asked, taken as it is (None: not such a column).

    Numbers: NaN is missing, an infinity is not a finite number (as the per-cell rule);
    dates: NaT is missing.
    """
    dtype = series.dtype
    n = len(series)
    if (
        kind == "number"
        and pd.api.types.is_numeric_dtype(dtype)
        and not (pd.api.types.is_bool_dtype(dtype))
    ):
        v = series.to_numpy(dtype=np.float64, na_value=np.nan)
        inf = np.isinf(v)
        if not inf.any():
            return v, None
        why = np.full(n, None, dtype=object)
        why[inf] = [f"'{header}' '{x}' is not a finite number" for x in v[inf]]
        return np.where(inf, np.nan, v), (np.arange(n), why)
    if kind == "date" and pd.api.types.is_datetime64_any_dtype(dtype):
        if getattr(dtype, "tz", None) is not None:
            series = series.dt.tz_localize(None)
        return series.to_numpy(dtype="datetime64[ns]"), None
    return None


_MARKER_SET = pa.array(sorted(MISSING_MARKERS), type=pa.large_string())


def _arrow_strings(series: pd.Series) -> pa.Array | pa.ChunkedArray | None:
    """The column's Arrow string array when pandas holds it in Arrow (pandas' ``str``
    dtype, or an Arrow string dtype), without a copy; None for any other column."""
    dtype = series.dtype
    if isinstance(dtype, pd.StringDtype) and dtype.storage == "pyarrow":
        pass
    elif not (
        isinstance(dtype, pd.ArrowDtype)
        and (
            pa.types.is_string(dtype.pyarrow_dtype) or pa.types.is_large_string(dtype.pyarrow_dtype)
        )
    ):
        return None
    arr = pa.array(series.array)
    return arr if pa.types.is_large_string(arr.type) else pc.cast(arr, pa.large_string())


def _arrow_texts(series: pd.Series) -> pd.Series | None:
    """A text column held in Arrow cleaned in Arrow, as :func:`_clean_column` reads text:
    each cell stripped, a missing marker or null None (None: not an Arrow text column).

    A cell of printable ASCII only (white space in it can only be the space) is decided
    at once: stripped of spaces, a marker when its lower-cased form is in
    :data:`~.cells.MISSING_MARKERS`. Any other cell (a tab, a line break, a letter
    beyond ASCII) takes Python's ``str.strip`` and :func:`~.cells.is_missing`, so the
    rule is the per-cell one everywhere.
    """
    arr = _arrow_strings(series)
    if arr is None:
        return None
    plain = pc.fill_null(pc.ascii_is_printable(arr), True)  # a null is decided: missing
    trimmed = pc.utf8_trim(arr, " ")
    marker = pc.fill_null(pc.is_in(pc.ascii_lower(trimmed), value_set=_MARKER_SET), True)
    out = pc.if_else(pc.and_(plain, marker), pa.scalar(None, pa.large_string()), trimmed)
    rest = np.flatnonzero(~plain.to_numpy(zero_copy_only=False))
    if rest.size:
        cells = out.to_numpy(zero_copy_only=False).astype(object)
        cells[rest] = [None if is_missing(v) else v.strip() for v in arr.take(rest).to_pylist()]
        out = pa.array(cells, type=pa.large_string())
    return pd.Series(out, dtype=series.dtype, index=pd.RangeIndex(len(series)))


_PLAIN_DECIMAL = {".": r"^-?[0-9]+(?:\.[0-9]+)?$", ",": r"^-?[0-9]+(?:,[0-9]+)?$"}
"""Number texts read at once: what :func:`~.cells.parse_number` reads as the float of the
text itself (its first, plain case). Longer than :data:`_PLAIN_LONGEST` bytes they go
to the per-cell parser: up to that length no such text overflows a float (below 1e300)."""
_PLAIN_LONGEST = 300


def _arrow_cells(series: pd.Series, kind: str, settings: ImportSettings, header: str):
    """A number, flag or date column held in Arrow text, read as :func:`_clean_column`
    reads it (the same values, the same reasons); None when not an Arrow text column.

    Numbers: a cell of printable ASCII that is a missing marker, or a plain decimal
    (:data:`_PLAIN_DECIMAL`), is decided at once (Arrow's text-to-float cast rounds
    correctly, as Python's ``float`` does); the other cells go through
    :func:`_clean_column`. Flags and dates, few distinct cells in a column: each distinct
    cell (Arrow's dictionary) goes through :func:`_clean_column` once.
    """
    arr = _arrow_strings(series)
    if arr is None or kind not in ("number", "flag", "date"):
        return None
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    n = len(arr)
    if kind == "number":
        return _arrow_numbers(arr, settings, header)
    enc = pc.dictionary_encode(arr)
    codes = pc.fill_null(enc.indices, -1).to_numpy(zero_copy_only=False).astype(np.intp)
    uniques = np.asarray(enc.dictionary.to_numpy(zero_copy_only=False), dtype=object)
    clean, why = _clean_column(uniques, kind, settings, header)
    fill = np.datetime64("NaT") if kind == "date" else np.nan
    values = _spread(clean, codes, fill) if n else clean[:0]
    if why is None:
        return values, None
    unique_codes, per_unique = why
    return values, (np.append(unique_codes, -1)[codes], per_unique)


def _arrow_numbers(arr: pa.Array, settings: ImportSettings, header: str):
    # A plain decimal, or (trimmed of spaces) a marker, holds printable ASCII only, so what
    # Python's str.strip and str.lower would do to it is what Arrow does here.
    n = len(arr)
    values = np.full(n, np.nan)
    if n == 0:
        return values, None
    pattern = _PLAIN_DECIMAL[settings.decimal]

    def plain(texts):
        found = pc.and_(
            pc.match_substring_regex(texts, pattern),
            pc.less_equal(pc.binary_length(texts), _PLAIN_LONGEST),
        )
        return pc.fill_null(found, False).to_numpy(zero_copy_only=False)

    def cast(texts) -> np.ndarray:
        if settings.decimal == ",":
            texts = pc.replace_substring(texts, ",", ".")
        return pc.cast(texts, pa.float64()).to_numpy(zero_copy_only=False)

    # 1. cells written as plain decimals (nearly all of a clean export), read at once
    at = plain(arr)
    if at.all():
        values[:] = cast(arr)
        return values, None
    values[at] = cast(arr.filter(pa.array(at)))
    # 2. the other cells trimmed of spaces: plain decimals and missing markers
    rest = np.flatnonzero(~at)
    trimmed = pc.utf8_trim(arr.take(pa.array(rest)), " ")
    marker = pc.is_in(pc.ascii_lower(trimmed), value_set=_MARKER_SET)
    missing = pc.fill_null(marker, True).to_numpy(zero_copy_only=False)  # null: missing
    now = plain(trimmed)
    values[rest[now]] = cast(trimmed.filter(pa.array(now)))
    # 3. every cell still undecided by the per-cell rule
    rest = rest[~(now | missing)]
    if not rest.size:
        return values, None
    cells = np.asarray(arr.take(pa.array(rest)).to_numpy(zero_copy_only=False), dtype=object)
    clean, why = _clean_column(cells, "number", settings, header)
    values[rest] = clean
    if why is None:
        return values, None
    rest_codes, per_unique = why
    codes = np.full(n, -1, dtype=np.intp)
    codes[rest] = rest_codes
    return values, (codes, per_unique)


def _clean_ids(raw: pd.DataFrame, plan: ColumnPlan, frame: pd.DataFrame) -> pd.Series:
    """Ids as text, as the sales' id column is cleaned: stripped; missing markers None
    (the cleaned column itself when the id header lands on a text column)."""
    landed = next((c for h, c, k in plan.landing if h == plan.id_header and k == "text"), None)
    if landed is not None:
        return frame[landed]
    texts = _arrow_texts(raw[plan.id_header])
    if texts is not None:
        return texts
    cells, _ = _clean_column(_as_objects(raw[plan.id_header]), "text", ImportSettings(), "id")
    return pd.Series(cells, dtype=object)


def _prefix(why: np.ndarray, header: str) -> np.ndarray:
    out = why.copy()
    has = np.flatnonzero(pd.notna(why))
    out[has] = [f"'{header}' {r}" for r in why[has]]
    return out


def _flag_value(value: object) -> float:
    return 1.0 if parse_flag(value) else 0.0


def _date_value(value: object, *, settings: ImportSettings) -> np.datetime64:
    order = settings.date_order
    reading = parse_date(value, order=order)
    text = clean_text(value)
    if reading.value is None:
        raise ValueError(
            f"'{text}' could be day/month or month/day; set the date order (--date-order)"
        )
    if (reading.form, order) in (("day_first", "MDY"), ("month_first", "DMY")):
        raise ValueError(f"'{text}' contradicts the date order {order}")
    return np.datetime64(reading.value, "ns")


def clean_chunk(
    raw: pd.DataFrame, plan: ColumnPlan, settings: ImportSettings
) -> tuple[pd.DataFrame, _Reasons]:
    """A raw chunk as a frame of sales-like columns, and each row's first reason.

    Date inputs a row lacks are filled from its ``effective_date``, else the model's.
    """
    n = len(raw)
    reasons = _Reasons(np.full(n, None, dtype=object), np.zeros(n, dtype=bool))
    data: dict[str, object] = {}
    for header, column, kind in plan.landing:
        typed = _typed_column(raw[header], kind, header)
        if typed is not None:
            clean, why = typed
        elif kind == "text" and (texts := _arrow_texts(raw[header])) is not None:
            data[column] = texts
            continue
        elif kind is not None and (cells := _arrow_cells(raw[header], kind, settings, header)):
            clean, why = cells
        elif kind is None:
            data[column] = _as_objects(raw[header])
            continue
        else:
            clean, why = _clean_column(_as_objects(raw[header]), kind, settings, header)
        if why is not None:
            codes, per_unique = why
            has = np.append([w is not None for w in per_unique], False).astype(bool)[codes]
            reasons.add(has, _spread(per_unique, codes, None))
        data[column] = clean if kind != "text" else pd.Series(clean, dtype=object)
    frame = pd.DataFrame(data, index=pd.RangeIndex(n), copy=False)  # no block copy
    if plan.dates_to_fill:
        eff = frame[EFFECTIVE_DATE] if EFFECTIVE_DATE in frame.columns else None
        for col in plan.dates_to_fill:
            have = (
                frame[col]
                if col in frame.columns
                else pd.Series(np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]"))
            )
            filled = have
            if eff is not None:
                filled = filled.fillna(eff)
            if plan.effective_date is not None:
                filled = filled.fillna(plan.effective_date)
            gone = filled.isna().to_numpy()
            reasons.add(
                gone,
                f"no '{col}' and no effective date: give an 'effective_date' column or set "
                "effective_date in the model file",
            )
            frame[col] = filled.astype("datetime64[ns]")
    return frame, reasons


# --- valuing a chunk --------------------------------------------------------------------
@dataclass(frozen=True)
class _Ranges:
    """What the per-row warnings compare against, computed once per batch."""

    max_leverage: float
    numeric: tuple[tuple[str, float, float], ...]
    dates: tuple[tuple[str, np.datetime64, np.datetime64], ...]
    thin: tuple[tuple[str, str, dict[str, int]], ...]  # (input column, term, {level: count})


def _ranges(fit: FitResult) -> _Ranges:
    numeric, dates = [], []
    for col in fit.design.inputs:
        s = fit.frame[col]
        if pd.api.types.is_datetime64_any_dtype(s):
            slack = np.timedelta64(DATE_SLACK_DAYS, "D")
            lo = s.min().to_datetime64() - slack
            hi = s.max().to_datetime64() + slack
            dates.append((col, lo, hi))
        elif pd.api.types.is_numeric_dtype(s) and not pd.api.types.is_bool_dtype(s):
            numeric.append((col, float(s.min()), float(s.max())))
    thin = []
    for g in fit.design.groups:
        if g.kind != "onehot" or len(g.inputs) != 1:
            continue
        few = {
            c.level: c.count
            for c in fit.levels
            if c.term == g.expression and c.count < MIN_LEVEL_SALES
        }
        if few:
            thin.append((g.inputs[0], g.expression, few))
    return _Ranges(float(fit.leverage().max()), tuple(numeric), tuple(dates), tuple(thin))


def _labels(values: pd.Series) -> np.ndarray:
    if pd.api.types.is_numeric_dtype(values) or pd.api.types.is_datetime64_any_dtype(values):
        arr = values.to_numpy()
        out = np.full(len(arr), None, dtype=object)
        present = ~pd.isna(arr)
        uniq, inverse = np.unique(arr[present], return_inverse=True)
        out[present] = np.array([level_label(u) for u in uniq], dtype=object)[inverse]
        return out
    return values.to_numpy(dtype=object)


def _warnings(
    frame: pd.DataFrame,
    ok: np.ndarray,
    leverage: np.ndarray,
    low: np.ndarray,
    fit: FitResult,
    ranges: _Ranges,
) -> np.ndarray:
    """Per-row warning text (``""`` for none), the parts joined by ``"; "``."""
    n = len(frame)
    out = np.full(n, "", dtype=object)

    def add(mask: np.ndarray, text: str | np.ndarray) -> None:
        mask = mask & ok
        if not mask.any():
            return
        part = text if isinstance(text, str) else text[mask]
        sep = np.where(out[mask] == "", "", "; ").astype(object)
        out[mask] = out[mask] + sep + part

    for col, lo, hi in ranges.numeric:
        v = frame[col].to_numpy(dtype=float, na_value=np.nan)
        with np.errstate(invalid="ignore"):
            add((v < lo) | (v > hi), f"'{col}' outside the sales' range {lo:g} to {hi:g}")
    for col, lo, hi in ranges.dates:
        v = frame[col].to_numpy(dtype="datetime64[ns]")
        outside = ~np.isnat(v) & ((v < lo) | (v > hi))
        add(outside, f"'{col}' more than {DATE_SLACK_DAYS} days outside the sales' dates")
    for col, term, few in ranges.thin:
        labels = _labels(frame[col])
        for level, count in few.items():
            add(
                labels == level,
                f"level '{level}' of {term} has only {count} sale{'s' if count != 1 else ''}",
            )
    with np.errstate(invalid="ignore"):
        add(
            leverage > ranges.max_leverage,
            "leverage above every sale's: the attributes are unlike any sale (extrapolation)",
        )
        if fit.spec.response == "linear":
            add(low < 0, "negative lower bound: a linear response fits this subject poorly")
    return out


def value_chunk(
    fit: FitResult,
    raw: pd.DataFrame,
    plan: ColumnPlan,
    settings: ImportSettings,
    level: float,
    first_row: int,
    ranges: _Ranges | None = None,
) -> pd.DataFrame:
    """Value every row of one raw chunk: one output row per input row, in order.

    ``first_row`` is the file row of the chunk's first row (header = 1).
    """
    ranges = _ranges(fit) if ranges is None else ranges
    n = len(raw)
    frame, why = clean_chunk(raw, plan, settings)
    pred = fit.predict(frame, level)
    ok = pred.ok & ~why.has
    reasons = why.text
    take = np.flatnonzero(~why.has & ~pred.ok)  # a row the design or spread could not use
    reasons[take] = [pred.reasons[i] for i in take]
    estimate = np.where(ok, pred.estimate, np.nan)
    lo, hi = pred.interval(level)
    mlo, mhi = pred.interval(level, kind="mean")
    rows = np.arange(first_row, first_row + n, dtype=np.int64)
    if plan.id_header is not None:
        ids = _clean_ids(raw, plan, frame).array
    else:
        ids = rows.astype(str).astype(object)
    out = {"row": rows, "id": ids}
    out["estimate"] = estimate
    if fit.spec.response == "log":
        out["median"] = np.where(ok, pred.median, np.nan)
    out |= {
        "low": np.where(ok, lo, np.nan),
        "high": np.where(ok, hi, np.nan),
        "mean_low": np.where(ok, mlo, np.nan),
        "mean_high": np.where(ok, mhi, np.nan),
        "level": np.full(n, level),
        "leverage": np.where(ok, pred.leverage, np.nan),
        "warnings": _warnings(frame, ok, pred.leverage, lo, fit, ranges),
        "reason": np.where(ok, "", reasons.astype(object)).astype(object),
    }
    return pd.DataFrame(out, copy=False)


# --- reading subjects in chunks ---------------------------------------------------------
def count_rows(path: str | Path) -> int | None:
    """Rows below the header (Parquet: from its metadata; CSV: a count of line breaks,
    exact unless a quoted value holds a line break); None when it cannot be told."""
    p = Path(path)
    fmt = format_of(p)
    if fmt == "parquet":
        import pyarrow.parquet as pq

        return int(pq.ParquetFile(p).metadata.num_rows)
    if fmt != "csv":
        return None
    lines, last = 0, b"\n"
    with p.open("rb") as fh:
        while block := fh.read(1 << 22):
            lines += block.count(b"\n")
            last = block[-1:]
    return max(lines + (last != b"\n") - 1, 0)


def read_subject_chunks(
    path: str | Path, chunk_rows: int = DEFAULT_CHUNK_ROWS
) -> tuple[list[str], Iterator[pd.DataFrame]]:
    """The cleaned headers of a subjects file and an iterator over its raw chunks.

    CSV cells come as text exactly as written; Parquet columns keep their types.

    Raises
    ------
    DataError
        Missing or unreadable file, a format other than CSV or Parquet.
    """
    p = Path(path)
    file = str(p)
    if not p.is_file():
        raise DataError("file not found", file=file)
    fmt = format_of(p)
    if fmt == "parquet":
        import pyarrow.parquet as pq

        # pre_buffer=False: with it, the reader keeps every row group it read (memory grew
        # by a row group's bytes a row group, 170 MiB a million rows here)
        pf = pq.ParquetFile(p, pre_buffer=False)
        headers, _ = clean_headers(pf.schema_arrow.names)

        def parquet_chunks() -> Iterator[pd.DataFrame]:
            for batch in pf.iter_batches(batch_size=chunk_rows):
                frame = batch.to_pandas()
                frame.columns = headers
                yield frame

        return headers, parquet_chunks()
    if fmt != "csv":
        raise DataError("subjects for a batch are read from .csv or .parquet files", file=file)
    with p.open("rb") as fh:
        head = fh.read(1 << 16)
    try:
        sample = head.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise DataError("the subjects file is not UTF-8 text", file=file) from None
    delimiter = sniff_delimiter(sample)
    first = next(csv.reader(io.StringIO(sample), delimiter=delimiter), None)
    if not first:
        raise DataError("the subjects file is empty", file=file)
    headers, _ = clean_headers(first)

    def csv_chunks() -> Iterator[pd.DataFrame]:
        done = 0
        if not _has_quotes(p):
            try:
                for frame in _arrow_csv_chunks(p, delimiter, headers, chunk_rows):
                    yield frame
                    done += len(frame)
                return
            except pa.ArrowException:
                pass  # a row the fast reader refuses: pandas' reader decides, from there on
        for frame in _pandas_csv_chunks(p, delimiter, headers, chunk_rows, file):
            if done >= len(frame):
                done -= len(frame)
                continue
            yield frame.iloc[done:].reset_index(drop=True) if done else frame
            done = 0

    return headers, csv_chunks()


def _has_quotes(path: Path) -> bool:
    """Whether the file holds a double quote anywhere (one pass over its bytes).

    Arrow's reader and pandas' differ on a quoted field the file ends inside (pandas
    refuses the file, Arrow reads it); a file without quotes has no such field.
    """
    with path.open("rb") as fh:
        while block := fh.read(1 << 22):
            if b'"' in block:
                return True
    return False


def _arrow_csv_chunks(
    path: Path, delimiter: str, headers: list[str], chunk_rows: int
) -> Iterator[pd.DataFrame]:
    """A regular CSV file's cells, every one as the text written, ``chunk_rows`` rows a
    chunk, read by Arrow's reader (about ten times pandas' with text columns).

    It refuses (raises ``pyarrow.ArrowException``) what it does not read as pandas' reader
    does: a row with another number of fields than the header (pandas pads a short row),
    a blank line, text that is not UTF-8; the caller then goes on with pandas' reader. It
    is only asked for files without quotes (:func:`_has_quotes`).
    """
    import pyarrow.csv as pcsv

    reader = pcsv.open_csv(
        path,
        read_options=pcsv.ReadOptions(
            column_names=headers, skip_rows=1, block_size=CSV_BLOCK_BYTES
        ),
        parse_options=pcsv.ParseOptions(
            delimiter=delimiter, newlines_in_values=True, ignore_empty_lines=False
        ),
        convert_options=pcsv.ConvertOptions(
            column_types={h: pa.large_string() for h in headers},
            null_values=[],
            strings_can_be_null=False,
            quoted_strings_can_be_null=False,
        ),
    )
    pending: list[pa.RecordBatch] = []
    held = 0
    for batch in reader:
        pending.append(batch)
        held += batch.num_rows
        while held >= chunk_rows:
            table = pa.Table.from_batches(pending)
            yield _text_frame(table.slice(0, chunk_rows), headers)
            rest = table.slice(chunk_rows)
            pending, held = rest.to_batches(), rest.num_rows
    if held:
        yield _text_frame(pa.Table.from_batches(pending), headers)


def _text_frame(table: pa.Table, headers: list[str]) -> pd.DataFrame:
    frame = table.combine_chunks().to_pandas()
    frame.columns = headers
    return frame


def _pandas_csv_chunks(
    path: Path, delimiter: str, headers: list[str], chunk_rows: int, file: str
) -> Iterator[pd.DataFrame]:
    """Any CSV file's cells as the text written (a short row padded with missing cells)."""
    try:
        yield from pd.read_csv(
            path,
            sep=delimiter,
            dtype=str,
            keep_default_na=False,
            na_filter=False,
            skip_blank_lines=False,
            encoding="utf-8-sig",
            chunksize=chunk_rows,
            header=0,
            names=headers,
        )
    except (pd.errors.ParserError, UnicodeDecodeError) as exc:
        raise DataError(f"cannot read the subjects file: {exc}", file=file) from None


def _blas_threads():
    """The BLAS thread pools of the process, to run a chunk's products on one thread.

    A chunk's products are tall and thin (rows x some twenty columns): a second BLAS
    thread gains little on them and, on a machine whose other core is busy, makes each
    product wait for it (measured on two shared cores: 31 ms a 50,000-row chunk with two
    threads, 4 ms with one).
    """
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def value_file(
    fit: FitResult,
    sales: SalesTable,
    path: str | Path,
    settings: ImportSettings = ImportSettings(),  # noqa: B008 - frozen, safe as a default
    *,
    level: float | None = None,
    id_header: str | None = None,
    chunk_rows: int = DEFAULT_CHUNK_ROWS,
    progress: Progress | None = None,
) -> Iterator[pd.DataFrame]:
    """Value every subject in ``path``, yielding one result frame per chunk, in file order.

    Columns: :data:`OUTPUT_COLUMNS` (``median`` only for a log response). ``row`` is the
    file row (header = 1), ``reason`` is ``""`` for a valued row.
    """
    level = fit.spec.level if level is None else check_level(level)
    headers, chunks = read_subject_chunks(path, chunk_rows)
    plan = plan_columns(headers, fit, sales, id_header)
    ranges = _ranges(fit)
    total = count_rows(path) if progress is not None else None
    blas = _blas_threads()
    done = 0
    for raw in chunks:
        with blas.limit(limits=1, user_api="blas"):
            out = value_chunk(fit, raw, plan, settings, level, done + FIRST_DATA_ROW, ranges)
        yield out
        done += len(raw)
        if progress is not None:
            progress(done, total)


def value_frame(
    fit: FitResult,
    sales: SalesTable,
    subjects: pd.DataFrame,
    settings: ImportSettings = ImportSettings(),  # noqa: B008
    *,
    level: float | None = None,
    id_header: str | None = None,
    chunk_rows: int = DEFAULT_CHUNK_ROWS,
) -> pd.DataFrame:
    """Value the rows of a frame of raw subject cells (as a file would hold them)."""
    level = fit.spec.level if level is None else check_level(level)
    headers, _ = clean_headers(list(subjects.columns))
    raw = subjects.set_axis(headers, axis=1).reset_index(drop=True)
    plan = plan_columns(headers, fit, sales, id_header)
    ranges = _ranges(fit)
    with _blas_threads().limit(limits=1, user_api="blas"):
        parts = [
            value_chunk(
                fit, raw.iloc[s : s + chunk_rows], plan, settings, level, s + FIRST_DATA_ROW, ranges
            )
            for s in range(0, max(len(raw), 1), chunk_rows)
        ]
    return pd.concat(parts, ignore_index=True)


def summarise(results: Sequence[pd.DataFrame] | pd.DataFrame, fit: FitResult) -> BatchSummary:
    """Counts over result frames (see :class:`BatchSummary`)."""
    frames = [results] if isinstance(results, pd.DataFrame) else list(results)
    rows = sum(len(f) for f in frames)
    valued = sum(int((f["reason"] == "").sum()) for f in frames)
    warned = sum(int(((f["warnings"] != "") & (f["reason"] == "")).sum()) for f in frames)
    return BatchSummary(rows, valued, rows - valued, warned, tuple(fit.warnings))


__all__ = [
    "DEFAULT_CHUNK_ROWS",
    "OUTPUT_COLUMNS",
    "BatchSummary",
    "ColumnPlan",
    "clean_chunk",
    "count_rows",
    "plan_columns",
    "read_subject_chunks",
    "summarise",
    "value_chunk",
    "value_file",
    "value_frame",
]
