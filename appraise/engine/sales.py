"""The table of comparable sales as read: used rows, excluded rows with reasons, provenance."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from .jsonable import to_jsonable
from .roles import RoleGuess, RoleMap
from .settings import AreaUnit

ROW_COLUMN = "_row"
"""Column of :attr:`SalesTable.frame` holding each sale's 1-based file row (header = row 1)."""


@dataclass(frozen=True)
class Exclusion:
    """One row that is not used, and why.

    ``row`` is the 1-based file row (header = 1), ``sale_id`` the value of the
    sale-id column when there is one, ``column`` the column that caused it (if
    any), ``source`` who excluded it: "import", "model" (a model file's exclude
    list or a value the model needs is missing) or "user".
    """

    row: int
    sale_id: str | None
    reason: str
    column: str | None = None
    source: str = "import"

    def to_dict(self) -> dict:
        return {
            "row": self.row,
            "id": self.sale_id,
            "reason": self.reason,
            "column": self.column,
            "source": self.source,
        }


@dataclass(frozen=True)
class SourceInfo:
    """Where the table came from: path as given, SHA-256 of the bytes, format, rows in the file."""

    path: str
    sha256: str
    format: str  # "csv" | "xlsx" | "parquet"
    rows_in_file: int


@dataclass(frozen=True, eq=False)
class SalesTable:
    """Sales as read and cleaned.

    ``frame`` holds the *used* rows with cleaned header names, parsed numbers,
    parsed dates (``datetime64``) and a ``_row`` column with the file row.
    ``excluded`` holds every other row. Always
    ``len(frame) + len(excluded) == source.rows_in_file``.
    ``notes`` are human-readable remarks on what the reader decided (for example
    "12 dates read as day/month (setting DMY)").
    """

    frame: pd.DataFrame
    excluded: tuple[Exclusion, ...]
    roles: RoleMap
    source: SourceInfo
    area_unit: AreaUnit
    notes: tuple[str, ...] = field(default=())
    examples: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    """Per column, its most frequent values as written in the file (at most four), so a
    flag read as 1/0 can still be shown as the file's own "Yes"/"No"."""
    role_guesses: tuple[RoleGuess, ...] = ()
    """How each role was guessed, when no role map was given (confidence and reason)."""

    @property
    def n_used(self) -> int:
        return len(self.frame)

    @cached_property
    def medians(self) -> Mapping[str, float]:
        """The median of each number column of the used rows that has a value (computed
        once a table: the subject form shows them as hints on every edit)."""
        out: dict[str, float] = {}
        for name in self.frame.columns:
            column = self.frame[name]
            if name == ROW_COLUMN or not pd.api.types.is_numeric_dtype(column):
                continue
            values = column.to_numpy(dtype=float, na_value=np.nan)
            values = values[~np.isnan(values)]
            if values.size:
                out[name] = float(np.median(values))
        return out

    @cached_property
    def _levels(self) -> dict[str, tuple[str, ...]]:
        return {}

    def levels_by_count(self, name: str) -> tuple[str, ...]:
        """The distinct values of a column of the used rows as text, the most frequent
        first (computed once a column)."""
        hit = self._levels.get(name)
        if hit is None:
            counts = self.frame[name].dropna().astype(str).value_counts()
            hit = self._levels[name] = tuple(counts.index)
        return hit

    def column_summaries(self, max_levels: int = 20) -> tuple[ColumnSummary, ...]:
        """One :class:`ColumnSummary` per column of the used rows (``_row`` left out)."""
        return tuple(
            summarize_column(self.frame[name], name, self.roles.role_of(name), max_levels)
            for name in self.frame.columns
            if name != ROW_COLUMN
        )


@dataclass(frozen=True)
class ColumnSummary:
    """What a column of the used rows holds.

    ``kind`` is "number", "date" or "text"; ``count`` non-missing values,
    ``missing`` the rest. Numbers have ``min``/``max``/``mean``; dates ``min``/``max``;
    text ``levels`` (the most frequent values with their counts, at most
    ``max_levels``) and ``distinct`` (how many different values there are).
    """

    name: str
    role: str | None
    kind: str
    count: int
    missing: int
    min: float | pd.Timestamp | None = None
    max: float | pd.Timestamp | None = None
    mean: float | None = None
    levels: tuple[tuple[str, int], ...] = ()
    distinct: int | None = None

    def to_dict(self) -> dict:
        out = {
            "name": self.name,
            "role": self.role,
            "kind": self.kind,
            "count": self.count,
            "missing": self.missing,
            "min": to_jsonable(self.min),
            "max": to_jsonable(self.max),
        }
        if self.kind == "number":
            out["mean"] = self.mean
        if self.kind == "text":
            out["levels"] = dict(self.levels)
            out["distinct"] = self.distinct
        return out


def column_kind(series: pd.Series) -> str:
    """ "number", "date" or "text" from a cleaned column's dtype."""
    if pd.api.types.is_datetime64_any_dtype(series.dtype):
        return "date"
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        return "number"
    return "text"


def _most_frequent(counts: pd.Series, k: int) -> list[tuple[object, int]]:
    """The ``k`` most frequent values, most frequent first, ties in the order of the value.

    Only the values that can be among the first ``k`` are sorted in Python: those counted
    more often than the ``k``-th count, and the smallest few of those counted exactly as
    often, chosen by Arrow (a column of two million different ids sorts ``k`` values in
    Python, not two million).
    """
    values = counts.to_numpy()
    if len(values) > k:
        import pyarrow as pa
        import pyarrow.compute as pc

        kth = np.partition(values, len(values) - k)[len(values) - k]
        # by position: a boolean or label lookup on two million text labels hashes them all
        above = counts.iloc[np.flatnonzero(values > kth)]
        tie_at = np.flatnonzero(values == kth)
        ties = counts.index[tie_at]
        keys = pa.table({"v": pa.array(np.asarray(ties, dtype=object), type=pa.string())})
        smallest = pc.select_k_unstable(keys, k - len(above), sort_keys=[("v", "ascending")])
        counts = pd.concat([above, counts.iloc[tie_at[smallest.to_numpy()]]])
    return sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))[:k]


def summarize_column(
    series: pd.Series, name: str, role: str | None = None, max_levels: int = 20
) -> ColumnSummary:
    """Summary of one cleaned column (see :class:`ColumnSummary`)."""
    kind = column_kind(series)
    present = series.dropna()
    count, missing = int(len(present)), int(len(series) - len(present))
    if kind == "number":
        values = present.to_numpy(dtype=float)
        if not count:
            return ColumnSummary(name, role, kind, count, missing)
        return ColumnSummary(
            name, role, kind, count, missing,
            float(np.min(values)), float(np.max(values)), float(np.mean(values)),
        )  # fmt: skip
    if kind == "date":
        if not count:
            return ColumnSummary(name, role, kind, count, missing)
        return ColumnSummary(name, role, kind, count, missing, present.min(), present.max())
    counts = present.astype(str).value_counts(sort=False)
    levels = tuple((str(k), int(v)) for k, v in _most_frequent(counts, max_levels))
    return ColumnSummary(name, role, kind, count, missing, levels=levels, distinct=int(len(counts)))
