"""Hostile input files built on the fly for the reliability tests (never stored in the repo).

Every builder writes into a folder the test gives and returns the path. XLSX files start
from a real workbook written by openpyxl; only the sheet's XML part is swapped for the
hostile one, so everything else about the file is ordinary.
"""

from __future__ import annotations

import zipfile
from collections.abc import Iterator
from pathlib import Path

SHEET = "xl/worksheets/sheet1.xml"
_HEAD = (
    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
)


def workbook_with_sheet_xml(path: Path, pieces: Iterator[bytes] | bytes) -> Path:
    """An .xlsx whose first sheet's XML is ``pieces`` (streamed into the zip)."""
    from openpyxl import Workbook

    base = path.with_suffix(".base.xlsx")
    wb = Workbook()
    wb.active.append(["price", "living_area"])
    wb.save(base)
    with zipfile.ZipFile(base) as src, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as out:
        for info in src.infolist():
            if info.filename == SHEET:
                with out.open(SHEET, "w", force_zip64=True) as fh:
                    for piece in [pieces] if isinstance(pieces, bytes) else pieces:
                        fh.write(piece)
            else:
                out.writestr(info, src.read(info.filename))
    base.unlink()
    return path


def far_cell_xlsx(path: Path, *, honest_dimension: bool = True) -> Path:
    """Four cells near A1 and one at XFD1048576 (the last cell a sheet can have)."""
    dim = b"A1:XFD1048576" if honest_dimension else b"A1:B2"
    xml = (
        _HEAD + b'<dimension ref="' + dim + b'"/><sheetData>'
        b'<row r="1"><c r="A1" t="inlineStr"><is><t>price</t></is></c>'
        b'<c r="B1" t="inlineStr"><is><t>living_area</t></is></c></row>'
        b'<row r="2"><c r="A2"><v>300000</v></c><c r="B2"><v>1500</v></c></row>'
        b'<row r="1048576"><c r="XFD1048576"><v>1</v></c></row>'
        b"</sheetData></worksheet>"
    )
    return workbook_with_sheet_xml(path, xml)


def many_rows_xlsx(path: Path, rows: int) -> Path:
    """A sheet of ``rows`` empty ``<row/>`` elements after the header: tiny zipped, huge read."""

    def pieces() -> Iterator[bytes]:
        yield (
            _HEAD + b'<sheetData><row r="1"><c r="A1" t="inlineStr"><is><t>price</t></is></c></row>'
        )
        block = b"<row/>" * 100_000
        for _ in range(rows // 100_000):
            yield block
        yield b"<row/>" * (rows % 100_000)
        yield b"</sheetData></worksheet>"

    return workbook_with_sheet_xml(path, pieces())


def zip_bomb_xlsx(path: Path, megabytes: int) -> Path:
    """A sheet padded with ``megabytes`` MiB of spaces (compresses about 1000 to 1)."""

    def pieces() -> Iterator[bytes]:
        yield _HEAD + b"<sheetData>"
        block = b" " * (1 << 20)
        for _ in range(megabytes):
            yield block
        yield b"</sheetData></worksheet>"

    return workbook_with_sheet_xml(path, pieces())
