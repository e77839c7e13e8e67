"""The worksheet as plain content: sections made of blocks (facts, tables, figures,
notices, paragraphs, a signature block). No Qt types: figures are PNG bytes.

Renderers (``report.html``, ``report.tables``, ``qtrender.pdf``) read this and
nothing else, so every output shows the same strings.
"""

from __future__ import annotations

import struct
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Literal

from ..engine.errors import ReportError

PageSize = Literal["A4", "Letter"]
PAGE_SIZES: tuple[str, ...] = ("A4", "Letter")

Cell = str | int | float | None
"""A raw table value as exported to CSV/XLSX (numbers stay numbers)."""

_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@dataclass(frozen=True)
class Paragraph:
    """A paragraph of plain text (never markup: renderers escape it)."""

    text: str


@dataclass(frozen=True)
class Facts:
    """Label/value pairs printed as a two-column list."""

    rows: tuple[tuple[str, str], ...]
    title: str = ""


@dataclass(frozen=True)
class Table:
    """A table of display strings, optionally with the raw values behind them.

    ``key`` names the table for export (``coefficients.csv``). ``rows`` hold the
    printed strings; ``values`` (same shape) hold the raw values written to
    CSV/XLSX, so a coefficient keeps its full precision in a spreadsheet while the
    page shows a rounded figure. ``align`` is ``"l"`` or ``"r"`` per column.
    """

    key: str
    title: str
    columns: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    values: tuple[tuple[Cell, ...], ...] | None = None
    align: tuple[str, ...] = ()
    note: str = ""

    def __post_init__(self) -> None:
        width = len(self.columns)
        for r in self.rows:
            if len(r) != width:
                raise ReportError(f"table '{self.key}': a row has {len(r)} cells, expected {width}")
        if self.values is not None:
            if len(self.values) != len(self.rows) or any(len(v) != width for v in self.values):
                raise ReportError(f"table '{self.key}': values do not match the printed rows")
        if self.align and len(self.align) != width:
            raise ReportError(f"table '{self.key}': align has {len(self.align)} entries")

    def alignment(self, j: int) -> str:
        return self.align[j] if self.align else "l"

    def export_rows(self) -> tuple[tuple[Cell, ...], ...]:
        """The rows as they go to a spreadsheet: raw values when known, else the text."""
        return self.values if self.values is not None else self.rows


@dataclass(frozen=True)
class Figure:
    """A rendered chart: PNG bytes and a caption. ``width``/``height`` are read
    from the PNG header."""

    png: bytes
    caption: str
    key: str = ""
    width: int = field(init=False)
    height: int = field(init=False)

    def __post_init__(self) -> None:
        if len(self.png) < 24 or not self.png.startswith(_PNG_SIGNATURE):
            raise ReportError(f"figure '{self.key or self.caption}' is not a PNG image")
        w, h = struct.unpack(">II", self.png[16:24])
        object.__setattr__(self, "width", int(w))
        object.__setattr__(self, "height", int(h))


NoticeKind = Literal["caution", "warning", "note"]


@dataclass(frozen=True)
class Notice:
    """A boxed list: cautions, warnings or notes."""

    kind: NoticeKind
    items: tuple[str, ...]
    title: str = ""


@dataclass(frozen=True)
class SignatureBlock:
    """A statement followed by labelled blank lines for the appraiser to complete."""

    statement: str
    fields: tuple[str, ...]


Block = Paragraph | Facts | Table | Figure | Notice | SignatureBlock


@dataclass(frozen=True)
class Section:
    """A titled part of the worksheet. ``new_page`` starts it on a fresh page in print."""

    key: str
    title: str
    blocks: tuple[Block, ...]
    new_page: bool = False


@dataclass(frozen=True)
class Worksheet:
    """The whole worksheet.

    ``title`` and ``effective_date`` go in every page header, ``workfile_id`` in
    every page footer. ``page_size`` is the paper the PDF writer uses.
    """

    title: str
    effective_date: str
    workfile_id: str
    sections: tuple[Section, ...]
    page_size: PageSize = "A4"
    generated: str = ""

    def __post_init__(self) -> None:
        if self.page_size not in PAGE_SIZES:
            raise ReportError(f"page size must be one of {', '.join(PAGE_SIZES)}")

    def blocks(self) -> Iterator[Block]:
        for section in self.sections:
            yield from section.blocks

    def tables(self) -> tuple[Table, ...]:
        return tuple(b for b in self.blocks() if isinstance(b, Table))

    def table(self, key: str) -> Table | None:
        return next((t for t in self.tables() if t.key == key), None)

    def figures(self) -> tuple[Figure, ...]:
        return tuple(b for b in self.blocks() if isinstance(b, Figure))

    def section(self, key: str) -> Section | None:
        return next((s for s in self.sections if s.key == key), None)
