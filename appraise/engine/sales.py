"""The table of comparable sales as read: used rows, excluded rows with reasons, provenance."""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from .roles import RoleMap
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

    @property
    def n_used(self) -> int:
        return len(self.frame)
