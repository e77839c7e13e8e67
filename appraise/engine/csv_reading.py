"""Reading a CSV file's cells in chunks: memory set by a chunk, not by the file.

The file is read twice, both times as a stream. The first pass (:func:`scan_csv`) hashes
the bytes, decides the text encoding (UTF-8 with or without BOM, UTF-16 with BOM, else
Windows-1252, else Latin-1) and keeps the first 64 KiB of text for choosing the
delimiter. The second pass (:func:`read_csv_cells`) parses the text in chunks of
:data:`CHUNK_ROWS` rows, with pandas' C parser for a regular file and the :mod:`csv`
module row by row otherwise (a row longer than the header, a quoting the C parser
refuses, a NUL character); each chunk's cells are coded at once (:mod:`.coded_cells`),
so only one chunk's cells exist as separate strings. Both readers give the same cells:
short rows padded with ``""``, a blank line a row of ``""``, blank rows after the last
sale dropped and counted.
"""

from __future__ import annotations

import codecs
import csv
import hashlib
import io
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import BinaryIO

import numpy as np
import pandas as pd

from .coded_cells import CodedCells, ColumnCoder, cut, last_filled_row
from .errors import DataError

Opener = Callable[[], BinaryIO]
"""Opens the file's bytes afresh (a file on disk, or bytes already in memory)."""

DELIMITERS: tuple[str, ...] = (",", ";", "\t", "|")
"""Delimiters a CSV file may use, in order of preference when the evidence ties."""

CHUNK_ROWS = 100_000
"""Rows parsed and coded at a time."""

_BLOCK = 1 << 22  # bytes read at a time while scanning
_HEAD_CHARS = 65536  # text kept for choosing the delimiter
_DELIMITER_NAMES = {",": "commas", ";": "semicolons", "\t": "tabs", "|": "vertical bars"}


@dataclass(frozen=True)
class CsvScan:
    """What one pass over a CSV file's bytes found."""

    sha256: str
    size: int
    encoding: str  # the codec the text is read with
    skip: int  # bytes before the text (a UTF-8 byte-order mark)
    notes: tuple[str, ...]
    has_text: bool  # anything but white space
    has_nul: bool  # a NUL character in the text
    head: str  # the first 64 KiB of text


@dataclass
class CsvCells:
    """A CSV file's cells: header cells, one coded column per header, notes, long rows."""

    header: list[str]
    columns: list[CodedCells]
    notes: list[str] = field(default_factory=list)
    long_rows: dict[int, int] = field(default_factory=dict)  # position -> values in the row


def _blocks(open_binary: Opener) -> Iterator[bytes]:
    with open_binary() as f:
        while block := f.read(_BLOCK):
            yield block


def file_sha256(open_binary: Opener) -> tuple[str, int]:
    """SHA-256 of the bytes and their number, read a block at a time."""
    h, size = hashlib.sha256(), 0
    for block in _blocks(open_binary):
        h.update(block)
        size += len(block)
    return h.hexdigest(), size


class _Decoding:
    """One encoding tried over the blocks: the text's head, whether it holds anything but
    white space or a NUL, and where it first failed (None: it did not)."""

    def __init__(self, encoding: str, skip: int) -> None:
        self.encoding = encoding
        self.decoder = codecs.getincrementaldecoder(encoding)()
        self.skip = skip  # bytes of the file not given to the decoder
        self.fed = 0  # bytes given to the decoder so far
        self.failed_at: int | None = None
        self.head: list[str] = []
        self.head_chars = 0
        self.has_text = False
        self.has_nul = False

    def feed(self, block: bytes, final: bool = False) -> None:
        if self.failed_at is not None:
            return
        pending = len(self.decoder.getstate()[0])
        try:
            text = self.decoder.decode(block, final)
        except UnicodeDecodeError as exc:
            self.failed_at = self.fed - pending + exc.start
            return
        finally:
            self.fed += len(block)
        if self.head_chars < _HEAD_CHARS:
            self.head.append(text)
            self.head_chars += len(text)
        if not self.has_text and text.strip():
            self.has_text = True
        if not self.has_nul and "\x00" in text:
            self.has_nul = True

    def run(self, open_binary: Opener) -> None:
        """Decode the whole file (a second pass, when the first encoding failed)."""
        seen = 0
        for block in _blocks(open_binary):
            start = max(self.skip - seen, 0)
            seen += len(block)
            self.feed(block[start:] if start else block)
            if self.failed_at is not None:
                return
        self.feed(b"", final=True)

    def scan(self, sha256: str, size: int, notes: list[str]) -> CsvScan:
        head = "".join(self.head)[:_HEAD_CHARS]
        return CsvScan(
            sha256, size, self.encoding, self.skip, tuple(notes), self.has_text, self.has_nul, head
        )


def _unmarked_utf16(block: bytes) -> str | None:
    """``"utf-16-le"`` or ``"utf-16-be"`` when the first bytes look like UTF-16 text
    written without a byte-order mark: at least 64 bytes, every other byte NUL (ASCII text
    in UTF-16) and the bytes between not. Read as UTF-8 such a file had a NUL in every
    header and no column was found."""
    head = block[:4096]
    if len(head) < 64:
        return None
    head = head[: len(head) // 2 * 2]
    even, odd = head[0::2], head[1::2]
    if odd.count(0) >= 0.9 * len(odd) and even.count(0) == 0:
        return "utf-16-le"
    if even.count(0) >= 0.9 * len(even) and odd.count(0) == 0:
        return "utf-16-be"
    return None


def scan_csv(open_binary: Opener, file: str) -> CsvScan:
    """Hash the bytes and decide how they are read as text (see the module docstring)."""
    h, size = hashlib.sha256(), 0
    first: _Decoding | None = None
    notes: list[str] = []
    for block in _blocks(open_binary):
        h.update(block)
        if first is None:
            if block.startswith((codecs.BOM_UTF32_LE, codecs.BOM_UTF32_BE)):  # before UTF-16:
                first = _Decoding("utf-32", 0)  # FF FE 00 00 also starts with FF FE
                notes.append("file is UTF-32 text")
            elif block.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
                first = _Decoding("utf-16", 0)
                notes.append("file is UTF-16 text")
            elif (unmarked := _unmarked_utf16(block)) is not None:
                first = _Decoding(unmarked, 0)
                notes.append(f"file is UTF-16 text without a byte-order mark ({unmarked[-2:]})")
            else:
                skip = len(codecs.BOM_UTF8) if block.startswith(codecs.BOM_UTF8) else 0
                first = _Decoding("utf-8", skip)
            part = block[first.skip :]
        else:
            part = block
        size += len(block)
        first.feed(part)
    sha = h.hexdigest()
    if first is None:
        return CsvScan(sha, 0, "utf-8", 0, (), False, False, "")
    first.feed(b"", final=True)
    if first.failed_at is None:
        return first.scan(sha, size, notes)
    if notes:  # a UTF-16/32 mark (or pattern) on bytes that are not such text
        raise DataError(
            f"the file looks like {first.encoding.upper()} text but byte {first.failed_at} is not",
            file=file,
        )
    for encoding, label in (("cp1252", "Windows-1252 (cp1252)"), ("latin-1", "Latin-1")):
        other = _Decoding(encoding, first.skip)
        other.run(open_binary)
        if other.failed_at is None:
            notes.append(f"file is not UTF-8 (byte {first.failed_at}); read as {label} text")
            return other.scan(sha, size, notes)
    raise AssertionError("Latin-1 reads every byte")  # pragma: no cover


def sniff_delimiter(text: str, candidates: Sequence[str] = DELIMITERS) -> str:
    """The delimiter that splits the first rows most consistently.

    For each candidate the first 50 non-blank records are split (quotes
    respected); the winner has the largest share of rows with the header's
    number of fields, then the most fields. A candidate that leaves the
    header in one piece never wins. Falls back to ``","``.
    """
    sample = text[:_HEAD_CHARS]
    best: tuple[float, int] | None = None
    chosen = ","
    for d in candidates:
        try:
            rows = [r for r in csv.reader(io.StringIO(sample), delimiter=d) if any(r)][:50]
        except csv.Error:
            continue
        if not rows or len(rows[0]) < 2:
            continue
        width = len(rows[0])
        body = rows[1:-1] if len(rows) > 2 else rows[1:]  # the last sampled row may be cut
        agree = sum(len(r) == width for r in body) / len(body) if body else 1.0
        score = (agree, width)
        if best is None or score > best:
            best, chosen = score, d
    return chosen


def _text(open_binary: Opener, scan: CsvScan) -> tuple[BinaryIO, io.TextIOWrapper]:
    """The file's text stream (after any byte-order mark) and the bytes under it."""
    raw = open_binary()
    if scan.skip:
        raw.read(scan.skip)
    return raw, io.TextIOWrapper(raw, encoding=scan.encoding, newline="")


Step = Callable[[float, int], None]
"""``step(fraction of the bytes read, rows so far)``."""


def read_csv_cells(
    open_binary: Opener, scan: CsvScan, file: str, step: Step | None = None
) -> CsvCells:
    """The cells of a scanned CSV file, coded column by column (see the module docstring).

    Raises
    ------
    DataError
        The file holds nothing but white space, only delimiters and blank lines, or a
        quoting error the :mod:`csv` module reports (with its line).
    """
    if not scan.has_text:
        raise DataError("the file is empty", file=file)
    delimiter = sniff_delimiter(scan.head)
    notes = list(scan.notes)
    if delimiter != ",":
        notes.append(f"values separated by {_DELIMITER_NAMES[delimiter]}")
    _check_header_width(open_binary, scan, delimiter, file)
    report = step or (lambda fraction, rows: None)
    fast = None if scan.has_nul else _read_csv_columns(open_binary, scan, delimiter, report)
    if fast is not None:
        header, columns, trailing = fast
        if trailing:
            k = trailing
            notes.append(f"{k} blank row{'s' if k > 1 else ''} after the last sale ignored")
        cells = CsvCells(header, columns, notes, {})
    else:
        cells = _read_csv_rows(open_binary, scan, delimiter, file, notes, report)
    cells.notes.extend(_unclosed_quote_notes(cells))
    return cells


SWALLOWED_LINES = 100
"""Line breaks in one cell of the last row from which a quote is taken to be unclosed."""


def _unclosed_quote_notes(cells: CsvCells) -> list[str]:
    """A note when a cell of the last row spans :data:`SWALLOWED_LINES` lines or more.

    A quote that is opened and never closed makes the rest of the file one cell, so the
    cell is always in the last row: only that row is looked at (a cost per column, not per
    cell). Without the note the file reads as a few rows, the last excluded for a reason
    that hides the cause (``price is missing``).
    """
    out = []
    for name, col in zip(cells.header, cells.columns, strict=False):
        if not len(col.codes) or col.codes[-1] < 0:
            continue
        cell = col.uniques[col.codes[-1]]
        breaks = cell.count("\n") if isinstance(cell, str) else 0
        if breaks >= SWALLOWED_LINES:
            row = len(col.codes) + 1  # the header is row 1
            lines = breaks + (not cell.endswith("\n"))
            out.append(
                f"row {row:,}, column '{name}': one quoted cell runs over {lines:,} lines "
                "to the end of the file (a quote opened and never closed?); the rows in it "
                "were not read as sales"
            )
    return out


_WIDTH_PIECE = 1 << 20  # characters of the first line read at a time


def _check_header_width(open_binary: Opener, scan: CsvScan, delimiter: str, file: str) -> None:
    """Refuse a file whose first line holds more delimiters than a sales file may have
    columns (:data:`~appraise.engine.limits.MAX_SALES_COLUMNS`), before it is parsed.

    The check is made after reading the first line only as far as the limit: a header
    of a million columns (or a 200 MB line of ``a,a,a...``) was otherwise split by the
    parser into a million columns, each built as an array of its own, for minutes. A
    delimiter inside a quoted header cell counts too, so the count is an upper bound.
    """
    from .limits import MAX_SALES_COLUMNS, check_columns

    raw, text = _text(open_binary, scan)
    seen = 0
    with text:
        while True:
            piece = text.readline(_WIDTH_PIECE)
            seen += piece.count(delimiter)
            if len(piece) < _WIDTH_PIECE or piece.endswith(("\n", "\r")):
                check_columns(seen + 1, file)  # the whole line counted
                return
            if seen >= MAX_SALES_COLUMNS:
                check_columns(seen + 1, file, at_least=True)


def _read_csv_columns(
    open_binary: Opener, scan: CsvScan, delimiter: str, step: Step
) -> tuple[list[str], list[CodedCells], int] | None:
    """The cells of a regular CSV file read by pandas' C parser, a chunk at a time.

    Returns ``(header, columns, trailing blank rows dropped)``, or None when the file is
    not one this path reads exactly as :mod:`csv` does: a row longer than the header, a
    quoting the C parser refuses, nothing but blank rows. The caller then reads it row
    by row. Short rows are padded with ``""`` and a blank line is a row of ``""``, as the
    row-by-row reader gives them.
    """
    raw, text = _text(open_binary, scan)
    coder: ColumnCoder | None = None
    try:
        with text:
            reader = pd.read_csv(
                text,
                sep=delimiter,
                header=None,
                dtype=object,
                na_filter=False,
                keep_default_na=False,
                skip_blank_lines=False,
                engine="c",
                quotechar='"',
                doublequote=True,
                skipinitialspace=False,
                chunksize=CHUNK_ROWS,
            )
            with reader:
                for chunk in reader:
                    if coder is None:
                        coder = ColumnCoder(chunk.shape[1])
                    elif chunk.shape[1] != coder.width:
                        return None
                    coder.add([chunk[c].to_numpy(dtype=object) for c in chunk.columns])
                    step(raw.tell() / max(scan.size, 1), coder.rows - 1)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError, csv.Error):
        return None
    if coder is None or coder.rows < 2:
        return None
    columns = coder.finish()
    last = last_filled_row(columns)
    if last <= 0:
        return None  # a header and blank rows only: the row-by-row reader says why
    header = [str(col[0]) for col in columns]
    return header, cut(columns, 1, last + 1), coder.rows - 1 - last


def _read_csv_rows(
    open_binary: Opener, scan: CsvScan, delimiter: str, file: str, notes: list[str], step: Step
) -> CsvCells:
    """The cells read row by row with :mod:`csv`, coded a chunk of rows at a time.

    A row with more values than the header is kept whole in ``long_rows`` (its position
    and number of values) unless the extra values are all blank; short rows are padded.
    """
    raw, text = _text(open_binary, scan)
    with text:
        reader = csv.reader(text, delimiter=delimiter)
        header: list[str] | None = None
        coder: ColumnCoder | None = None
        long_rows: dict[int, int] = {}
        batch: list[list[str]] = []
        position = 0  # of the next body row
        last_filled = -1  # body position of the last row holding anything
        header_filled = False

        def flush() -> None:
            assert coder is not None
            if batch:
                cols = [np.array(c, dtype=object) for c in zip(*batch, strict=True)]
                coder.add(cols or [np.zeros(len(batch), dtype=object)] * coder.width)
                batch.clear()
                step(1.0 if raw.closed else raw.tell() / max(scan.size, 1), coder.rows)

        try:
            for row in reader:
                if header is None:
                    header = row
                    header_filled = any(v.strip() for v in row)
                    coder = ColumnCoder(len(header))
                    continue
                width = len(header)
                if any(v.strip() for v in row):
                    last_filled = position
                if len(row) > width:
                    if any(v.strip() for v in row[width:]):
                        long_rows[position] = len(row)
                    row = row[:width]
                elif len(row) < width:
                    row = [*row, *[""] * (width - len(row))]
                batch.append(row)
                position += 1
                if len(batch) >= CHUNK_ROWS:
                    flush()
        except csv.Error as exc:
            raise DataError(f"cannot read the CSV: {exc}", file=file, row=reader.line_num) from None
    if header is None or (not header_filled and last_filled < 0):
        raise DataError(
            "the file holds only delimiters and blank lines: no header, no sales", file=file
        )
    assert coder is not None
    if coder.width == 0:
        batch.clear()  # no columns: the rows hold nothing to keep
    flush()
    trailing = position - 1 - last_filled
    if trailing:
        notes.append(
            f"{trailing} blank row{'s' if trailing > 1 else ''} after the last sale ignored"
        )
    columns = cut(coder.finish(), 0, last_filled + 1)
    long_rows = {p: k for p, k in long_rows.items() if p <= last_filled}
    return CsvCells(list(header), columns, notes, long_rows)
