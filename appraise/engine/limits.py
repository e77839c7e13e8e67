"""Documented limits on the work any input file can ask for.

A sales file, a model file, a subject, a role map or a workfile may come from anyone.
Each limit below bounds the time and memory one input can cost, and each is checked
*before* the expensive step (parsing, expanding, reading a sheet), so a hostile file is
refused in well under a second with a message naming the file and the limit.

The numbers are far above anything a real valuation needs:

===============================  ===========  =================================================
limit                            value        why this size
===============================  ===========  =================================================
JSON / TOML nesting depth        64           a workfile nests 6 deep; a model file 3
                                              (a TOML dotted key nests once per dot)
JSON integer digits              100          a sale price has at most 12
workfile size                    256 MiB      one embedding 100,000 sales is about 10 MiB
derived variables per model      500          a rich model has 20
derived-variable chain depth     64           ``a`` uses ``b`` uses ``c`` ... 64 deep
nodes of one resolved feature    20,000       derived variables are shared, not copied
XLSX uncompressed size           512 MiB      100,000 sales x 30 columns is about 120 MiB
XLSX rows of one sheet           1,048,576    the most a spreadsheet program writes
XLSX columns of one sheet        16,384       the same (column XFD)
XLSX cells (rows x columns)      30,000,000   what fits in memory as a table of cells
Parquet declared cells           30,000,000   the same, read from the footer
XLSX part ratio (over 32 MiB)    100 x        real sheets compress 5-15 times; a bomb hundreds
sales columns / subject keys     2,000        a listing export has a few hundred at most
design columns                   2,000        a onehot of a sale id would give one per sale
design cells (sales x columns)   40,000,000   320 MB of float64, needed a few times by OLS
design value magnitude           1e100        sums of squares overflow near 1e154
===============================  ===========  =================================================

Expression text length and nesting live beside the parser
(:data:`appraise.engine.expressions.MAX_LENGTH`, :data:`~appraise.engine.expressions.MAX_DEPTH`).
"""

from __future__ import annotations

import json
import re
import tomllib
import zipfile
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .errors import AppraiseError, DataError

MAX_NESTING = 64
"""Deepest nesting of arrays/objects (JSON) or arrays/inline tables (TOML) accepted."""

MAX_INT_DIGITS = 100
"""Longest integer literal accepted in a JSON file."""

MAX_WORKFILE_BYTES = 256 * 1024 * 1024
"""Largest workfile opened (it is read whole; embedded sales are base64 text in it)."""

MAX_DERIVED = 500
"""Most derived variables one model may define."""

MAX_DERIVED_CHAIN = 64
"""Longest chain of derived variables referring to each other."""

MAX_FEATURE_NODES = 20_000
"""Most nodes in one feature once its derived variables are resolved (shared nodes once)."""

MAX_XLSX_UNCOMPRESSED = 512 * 1024 * 1024
"""Most bytes an .xlsx may hold once unzipped (all parts together)."""

MAX_XLSX_ROWS = 1_048_576
"""Most rows one sheet may have."""

MAX_XLSX_COLUMNS = 16_384
"""Most columns one sheet may have."""

MAX_XLSX_CELLS = 30_000_000
"""Most cells (rows x columns of the sheet's extent) one sheet may span."""


# --- JSON and TOML ------------------------------------------------------------------------
# strings as "unrolled loops" (a run of plain characters, then escapes each followed by
# another run): one step per run, where an alternation per character took 0.5 s and
# hundreds of megabytes of matcher state for a 5 MB string
_JSON_STRING = re.compile(r'"[^"\\]*(?:\\.[^"\\]*)*"', re.DOTALL)
_TOML_SKIP = re.compile(
    r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"[^"\\\n]*(?:\\.[^"\\\n]*)*"|\'[^\'\n]*\'|#[^\n]*'
)


def nesting_depth(text: str, *, toml: bool = False) -> int:
    """The deepest bracket nesting of a JSON (or TOML) text, strings and comments skipped.

    Counted without parsing: strings (and TOML comments) are cut out, then the running
    sum of ``[``/``{`` (+1) and ``]``/``}`` (-1) is taken with numpy, so a 50 MB text is
    measured in a fraction of a second. In TOML a dotted key (``a.b.c = 1``, ``[a.b.c]``)
    nests a table per dot, so the dots of one line outside strings and numbers count too.
    A malformed text may be measured roughly; the parser then refuses it.
    """
    bare = (_TOML_SKIP if toml else _JSON_STRING).sub("", text)
    codes = np.frombuffer(bare.encode("utf-8", "replace"), dtype=np.uint8)
    if codes.size == 0:
        return 0
    step = np.isin(codes, (0x5B, 0x7B)).astype(np.int64) - np.isin(codes, (0x5D, 0x7D))
    depth = int(max(0, np.cumsum(step).max()))
    if toml:  # a dotted key a.b.c nests one table per dot (and costs tomllib n**2 for n dots)
        dots = max((len(_KEY_DOT.findall(line)) for line in bare.splitlines()), default=0)
        depth = max(depth, dots + 1 if dots else 0)
    return depth


_KEY_DOT = re.compile(r"(?<!\d)\.|\.(?!\d)")  # a dot that is not inside a number


def limited_int(text: str) -> int:
    """``int(text)`` for ``json.loads(parse_int=...)``; ValueError past :data:`MAX_INT_DIGITS`."""
    if len(text.lstrip("-")) > MAX_INT_DIGITS:
        raise ValueError(f"a whole number of {len(text)} digits; the limit is {MAX_INT_DIGITS}")
    return int(text)


def load_json_text(
    text: str,
    *,
    source: str,
    error: type[AppraiseError],
    what: str = "the file",
) -> Any:
    """``json.loads`` with the nesting and integer-size limits, every failure an ``error``.

    Raises
    ------
    error
        Nested deeper than :data:`MAX_NESTING`; an integer longer than
        :data:`MAX_INT_DIGITS`; not valid JSON (with line and column).
    """
    depth = nesting_depth(text)
    if depth > MAX_NESTING:
        raise error(
            f"{what} is nested {depth:,} levels deep; the limit is {MAX_NESTING}", file=source
        )
    try:
        return json.loads(text, parse_int=limited_int)
    except json.JSONDecodeError as exc:
        raise error(
            f"{what} is not valid JSON: {exc.msg} (line {exc.lineno}, column {exc.colno})",
            file=source,
        ) from None
    except ValueError as exc:  # an integer over the limit
        raise error(f"{what} holds {exc}", file=source) from None
    except RecursionError:  # unreachable after the depth check; kept as a last guard
        raise error(f"{what} is nested too deeply", file=source) from None


def load_toml_text(
    text: str,
    *,
    source: str,
    error: type[AppraiseError],
    what: str = "the file",
) -> dict:
    """``tomllib.loads`` with the nesting limit, every failure an ``error``."""
    depth = nesting_depth(text, toml=True)
    if depth > MAX_NESTING:
        raise error(
            f"{what} is nested {depth:,} levels deep; the limit is {MAX_NESTING}", file=source
        )
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise error(f"not valid TOML: {exc}", file=source) from None
    except ValueError as exc:  # an integer past Python's 4,300-digit conversion limit
        raise error(f"{what} holds a number too long to read ({exc})", file=source) from None
    except RecursionError:
        raise error(f"{what} is nested too deeply", file=source) from None


def decode_utf8(data: bytes, *, source: str, error: type[AppraiseError], what: str) -> str:
    """UTF-8 text (a leading BOM dropped); a byte that is not UTF-8 is an ``error``."""
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(
            f"{what} is not UTF-8 text (byte {exc.start} is 0x{data[exc.start]:02x})",
            file=source,
        ) from None


# --- XLSX ---------------------------------------------------------------------------------
# XML lets an attribute be quoted with ' or ", with white space around the =, and openpyxl
# reads a reference in any letter case (and with $ signs): each form is matched, or a far
# cell written r='XFD1048576' or r="xfd1048576" would pass unseen
_Q = rb"""\s*=\s*["']"""
_DIMENSION = re.compile(
    rb"<(?:\w+:)?dimension\s+ref" + _Q + rb"\$?([A-Za-z]+)?\$?(\d+)?(?::\$?([A-Za-z]+)\$?(\d+))?"
)
_CELL_REF = re.compile(rb"<(?:\w+:)?c\s[^>]*?\br" + _Q + rb"\$?([A-Za-z]+)\$?(\d+)")
_ROW_REF = re.compile(rb"<(?:\w+:)?row\s[^>]*?\br" + _Q + rb"(\d+)")
_ROW_TAG = re.compile(rb"<(?:\w+:)?row[\s>/]")
_CHUNK = 1 << 20


def column_number(letters: bytes | str) -> int:
    """Spreadsheet column letters as a 1-based number: ``A`` = 1, ``Z`` = 26, ``XFD`` = 16384."""
    n = 0
    for ch in (letters.decode("ascii") if isinstance(letters, bytes) else letters).upper():
        n = n * 26 + (ord(ch) - 64)
    return n


def check_xlsx(path: Path) -> None:
    """Refuse an .xlsx whose unzipped size or sheet extent is over the limits, before parsing.

    Every worksheet part is checked, not only the one to be read. The sizes the zip directory
    declares bound what can be decompressed (the reader stops at the declared size), so
    the total is checked from the directory alone. The sheet's extent is the larger of
    its declared ``<dimension>`` and the cell and row references actually written,
    found by streaming the XML in 1 MiB pieces and stopping as soon as a limit is passed.

    Raises
    ------
    DataError
        Naming the file and the limit passed.
    """
    file = str(path)
    try:
        zf = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError, ValueError) as exc:
        raise DataError(
            f"cannot be read as an .xlsx workbook ({type(exc).__name__}: {exc})"
            + _not_a_workbook_hint(path),
            file=file,
        ) from None
    with zf:
        infos = zf.infolist()
        total = sum(i.file_size for i in infos)
        if total > MAX_XLSX_UNCOMPRESSED:
            raise DataError(
                f"the workbook unzips to {total:,} bytes; the limit is "
                f"{MAX_XLSX_UNCOMPRESSED:,} bytes (a damaged or hostile file?)",
                file=file,
            )
        for info in infos:
            _check_ratio(info, file)
        for name in [i.filename for i in infos if _is_sheet(i.filename)]:
            _check_sheet_extent(zf, name, file)


MAX_XLSX_RATIO = 100
"""Most times a large part of a workbook (:data:`XLSX_RATIO_FROM` bytes or more unzipped)
may unzip to its stored size: sheets of real sales compress 5 to 15 times; a sheet or
shared-string table of the same few bytes repeated (a zip bomb that stays under the size
limit) compresses hundreds of times and would keep the reader busy for minutes."""

XLSX_RATIO_FROM = 32 * 1024 * 1024
"""Unzipped size from which :data:`MAX_XLSX_RATIO` applies (small parts compress freely)."""


def _check_ratio(info: zipfile.ZipInfo, file: str) -> None:
    if info.file_size < XLSX_RATIO_FROM:
        return
    ratio = info.file_size / max(info.compress_size, 1)
    if ratio > MAX_XLSX_RATIO:
        raise DataError(
            f"the workbook part '{info.filename}' unzips to {info.file_size:,} bytes, "
            f"{ratio:,.0f} times its stored size; the limit is {MAX_XLSX_RATIO} times "
            "for parts over 32 MiB (a zip bomb?)",
            file=file,
        )


def sheet_rows(rows: Iterable[Sequence[object]], file: str, sheet: str) -> list[list[object]]:
    """The rows a sheet reader yields, as lists, stopped at the first row that passes a limit.

    A second guard behind :func:`check_xlsx`: the reader pads a row with empty cells up to
    its last written cell and yields an empty row for every row number it skips, so a
    reference the scan did not recognise would still cost a row of 16,384 cells, or a
    million empty rows; here the columns of one row (:data:`MAX_SALES_COLUMNS`), the rows
    (:data:`MAX_XLSX_ROWS`) and the cells together (:data:`MAX_XLSX_CELLS`) are counted as
    they arrive.
    """
    out: list[list[object]] = []
    cells = 0
    for row in rows:
        width = len(row)
        if width > MAX_SALES_COLUMNS:
            raise DataError(
                f"row {len(out) + 1:,} of sheet '{sheet}' reaches column {width:,}; "
                f"the limit is {MAX_SALES_COLUMNS:,} columns",
                file=file,
                row=len(out) + 1,
            )
        cells += width
        if len(out) >= MAX_XLSX_ROWS or cells > MAX_XLSX_CELLS:
            raise DataError(
                f"sheet '{sheet}' passes {MAX_XLSX_ROWS:,} rows or {MAX_XLSX_CELLS:,} cells "
                f"at row {len(out) + 1:,}",
                file=file,
                row=len(out) + 1,
            )
        out.append(list(row))
    return out


def _not_a_workbook_hint(path: Path) -> str:
    """What a file named .xlsx that is no zip archive seems to hold (a CSV saved under the
    wrong name is common), for the message."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(4096)
    except OSError:
        return ""
    if head.startswith(b"\xd0\xcf\x11\xe0"):
        return "; it is an old .xls or a password-protected workbook: save it as .xlsx or .csv"
    try:
        text = head.decode("utf-8-sig")
    except UnicodeDecodeError:
        return ""
    first = text.splitlines()[0] if text.strip() else ""
    if any(d in first for d in (",", ";", "\t")):
        return "; it looks like CSV text: rename it .csv"
    return ""


def _is_sheet(name: str) -> bool:
    return name.startswith("xl/worksheets/") and name.endswith(".xml")


def _check_sheet_extent(zf: zipfile.ZipFile, name: str, file: str) -> None:
    rows = cols = tagged_rows = 0
    tail = b""
    first = True
    try:
        fh = zf.open(name)
    except KeyError:
        return  # openpyxl reports the missing part itself
    with fh:
        while True:
            try:
                block = fh.read(_CHUNK)
            except (zipfile.BadZipFile, OSError, EOFError, ValueError) as exc:
                raise DataError(
                    f"the workbook is damaged ({type(exc).__name__}: {exc})", file=file
                ) from None
            if not block:
                break
            piece = tail + block
            if first:
                m = _DIMENSION.search(piece)
                if m is not None and m.group(3):
                    rows = max(rows, int(m.group(4)))
                    cols = max(cols, column_number(m.group(3)))
                first = False
            cut = piece.rfind(b"<")  # keep a tag that straddles the piece boundary
            body, tail = (piece[:cut], piece[cut:]) if cut > 0 else (piece, b"")
            tagged_rows += len(_ROW_TAG.findall(body))
            found = _CELL_REF.findall(body)
            if found:
                cols = max(cols, *(column_number(c) for c in {f[0] for f in found}))
                rows = max(rows, int(max((f[1] for f in found), key=lambda d: (len(d), d))))
            refs = _ROW_REF.findall(body)
            if refs:
                rows = max(rows, max(int(r) for r in refs))
            _refuse_extent(max(rows, tagged_rows), cols, file)
    _refuse_extent(max(rows, tagged_rows), cols, file)


def _refuse_extent(rows: int, cols: int, file: str) -> None:
    if rows > MAX_XLSX_ROWS:
        raise DataError(
            f"the sheet reaches row {rows:,}; the limit is {MAX_XLSX_ROWS:,} rows", file=file
        )
    if cols > MAX_XLSX_COLUMNS:
        raise DataError(
            f"the sheet reaches column {cols:,}; the limit is {MAX_XLSX_COLUMNS:,} columns",
            file=file,
        )
    if rows * cols > MAX_XLSX_CELLS:
        raise DataError(
            f"the sheet spans {rows:,} rows x {cols:,} columns = {rows * cols:,} cells "
            f"(a cell far from the others?); the limit is {MAX_XLSX_CELLS:,} cells",
            file=file,
        )


# --- the design matrix ----------------------------------------------------------------------
MAX_DESIGN_MAGNITUDE = 1e100
"""Largest absolute value a design column may hold. Least squares forms sums of squares
and cross-products; beyond about 1e154 they overflow, and well before that the rank
decision is meaningless, so such a column is refused with its name instead of being
reported as collinear."""


def design_scale_problem(X: np.ndarray, names: tuple[str, ...]) -> str | None:
    """A message naming the design columns whose values exceed :data:`MAX_DESIGN_MAGNITUDE`."""
    if X.size == 0:
        return None
    # fmax/fmin skip NaN like nanmax, without nanmax's copy of |X| (0.4 s at 1M x 22)
    peak = np.maximum(np.fmax.reduce(X, axis=0), -np.fmin.reduce(X, axis=0))
    bad = [(n, v) for n, v in zip(names, peak, strict=True) if v > MAX_DESIGN_MAGNITUDE]
    if not bad:
        return None
    shown = ", ".join(f"'{n}' (values up to about 10^{int(np.floor(np.log10(v)))})" for n, v in bad)
    return (
        f"{shown}: too large to fit (the limit is 10^{int(np.log10(MAX_DESIGN_MAGNITUDE))}); "
        "rescale the term, e.g. divide it by a power of ten"
    )


def unusable_summary(problems: tuple[tuple[int, str, str | None], ...]) -> str:
    """Why the model could not use sales, most frequent reason first (for a fit refused
    for too few sales): ``"; 412 sales left out: '10**10**10 * living_area' is not
    finite (412)"``."""
    if not problems:
        return ""
    counts: dict[str, int] = {}
    for _, reason, _ in problems:
        counts[reason] = counts.get(reason, 0) + 1
    top = sorted(counts.items(), key=lambda kv: -kv[1])[:2]
    listed = "; ".join(f"{r} ({k:,})" for r, k in top)
    return f"; {len(problems):,} sales left out by the model: {listed}"


MAX_DESIGN_COLUMNS = 2_000
"""Most design columns one model may expand to (``onehot`` levels and ``poly`` terms included)."""

MAX_DESIGN_CELLS = 40_000_000
"""Most cells (sales x design columns) of the design matrix: 320 MB of float64, which the
least-squares fit needs a few times over; beyond it a model would exhaust memory."""


def design_size_problem(columns: dict[str, int], rows: int, absorbed: int = 0) -> str | None:
    """A message when a design would be too large; ``columns`` maps each feature to the
    number of design columns it expands to; ``absorbed`` columns (a large ``onehot`` the
    structured fit takes as level codes, :mod:`.absorb`) count as columns but build no cells."""
    total = sum(columns.values()) + 1
    widest = max(columns, key=columns.get) if columns else ""
    if total > MAX_DESIGN_COLUMNS:
        return (
            f"the model expands to {total:,} design columns ('{widest}' alone gives "
            f"{columns[widest]:,}); the limit is {MAX_DESIGN_COLUMNS:,} "
            "(a onehot of a column with a value per sale, such as an id?)"
        )
    if (total - absorbed) * rows > MAX_DESIGN_CELLS:
        total -= absorbed
        return (
            f"{rows:,} sales x {total:,} design columns = {total * rows:,} cells; the limit is "
            f"{MAX_DESIGN_CELLS:,} ('{widest}' gives {columns[widest]:,} columns)"
        )
    return None


# --- Parquet ---------------------------------------------------------------------------------
MAX_PARQUET_CELLS = MAX_XLSX_CELLS
"""Most cells (rows x columns) a Parquet file may declare: run-length encoding lets a file of
a few kilobytes declare hundreds of millions of rows."""


def check_parquet(path: Path) -> None:
    """Refuse a Parquet file whose declared rows x columns pass :data:`MAX_PARQUET_CELLS`,
    from its footer alone (nothing is decoded)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        meta = pq.ParquetFile(path).metadata
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise DataError(f"cannot be read as a Parquet file ({exc})", file=str(path)) from None
    rows, cols = int(meta.num_rows), int(meta.num_columns)
    if rows * cols > MAX_PARQUET_CELLS:
        raise DataError(
            f"the file declares {rows:,} rows x {cols:,} columns = {rows * cols:,} cells; "
            f"the limit is {MAX_PARQUET_CELLS:,} cells",
            file=str(path),
        )


MAX_SALES_COLUMNS = 2_000
"""Columns a sales file may have (a listing export has a few hundred at most; each column
is cleaned on its own, so twenty thousand of them would take a minute)."""


def check_columns(n: int, file: str, *, at_least: bool = False) -> None:
    """DataError when a sales file has more than :data:`MAX_SALES_COLUMNS` columns
    (``at_least``: ``n`` was counted only as far as the limit)."""
    if n > MAX_SALES_COLUMNS:
        raise DataError(
            f"the file has {'at least ' if at_least else ''}{n:,} columns; "
            f"the limit is {MAX_SALES_COLUMNS:,} "
            "(keep the columns the valuation needs)",
            file=file,
        )
