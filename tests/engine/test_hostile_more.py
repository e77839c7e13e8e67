"""More hostile files for the readers, variations the first hostile tests lacked.

Every case failed before its fix: a hang or gigabytes (a far cell the scan did not
recognise, a shared-string table of one short string repeated), a traceback from the
workbook reader (a damaged style, a shared-string index past the table, an entity bomb),
a header of a million columns read for minutes. Each must now be one ``DataError`` naming
the file and the limit or the damage. Expected texts are properties of the files built
here.
"""

from __future__ import annotations

import zipfile
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from appraise.engine import limits
from appraise.engine.errors import DataError, ModelFileError
from appraise.engine.importing import load_sales
from appraise.engine.modelspec import parse_model
from appraise.engine.settings import ImportSettings

SHEET = "xl/worksheets/sheet1.xml"
STRINGS = "xl/sharedStrings.xml"
NS = b'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"'
HEAD = b'<?xml version="1.0" encoding="UTF-8"?><worksheet ' + NS + b"><sheetData>"
TAIL = b"</sheetData></worksheet>"


def _rows(n: int = 12) -> bytes:
    """A header and ``n`` ordinary sales as sheet rows (inline strings, plain numbers)."""
    out = [b'<row r="1"><c r="A1" t="inlineStr"><is><t>price</t></is></c>']
    out.append(b'<c r="B1" t="inlineStr"><is><t>living_area</t></is></c></row>')
    for k in range(2, n + 2):
        out.append(
            f'<row r="{k}"><c r="A{k}"><v>{300_000 + 1_000 * k}</v></c>'
            f'<c r="B{k}"><v>{1_400 + 9 * k}</v></c></row>'.encode()
        )
    return b"".join(out)


def _workbook(path: Path, parts: dict[str, bytes | Callable[[], Iterator[bytes]]]) -> Path:
    """A workbook saved by openpyxl with the named parts replaced (or added)."""
    from openpyxl import Workbook

    base = path.with_suffix(".base.xlsx")
    wb = Workbook()
    wb.active.append(["price", "living_area"])
    wb.active.append(["x", "y"])  # a shared string table is written
    wb.save(base)
    with zipfile.ZipFile(base) as src, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as out:
        names = {i.filename for i in src.infolist()}
        for name in names | set(parts):
            if name not in parts:
                out.writestr(src.getinfo(name), src.read(name))
                continue
            part = parts[name]
            with out.open(name, "w", force_zip64=True) as fh:
                for piece in [part] if isinstance(part, bytes) else part():
                    fh.write(piece)
    base.unlink()
    return path


def _read(path: Path) -> None:
    load_sales(path, ImportSettings())


@pytest.mark.parametrize(
    "far",
    [
        b"<row r='1048576'><c r='XFD1048576'><v>1</v></c></row>",  # single quotes
        b'<row r="1048576"><c r="xfd1048576"><v>1</v></c></row>',  # lower case
        b'<row r = "1048576"><c r = "XFD1048576"><v>1</v></c></row>',  # spaces around =
        b'<row r="1048576"><c r="$XFD$1048576"><v>1</v></c></row>',  # dollar signs
    ],
)
def test_a_far_cell_in_any_spelling_is_refused_by_the_scan(tmp_path, far):
    # each spelling passed the scan, and openpyxl then padded a row to 16,384 cells and
    # yielded a million empty rows: over 60 s and gigabytes
    f = _workbook(tmp_path / "far.xlsx", {SHEET: HEAD + _rows() + far + TAIL})
    with pytest.raises(DataError) as info:
        _read(f)
    assert "17,179,869,184 cells" in info.value.message
    assert info.value.file == str(f)


def test_a_far_cell_the_scan_cannot_see_is_stopped_by_the_row_guard(tmp_path):
    # references written with character entities (&#x58; is X) are decoded by the XML
    # parser but invisible to a byte scan: the rows are counted as they arrive instead
    far = b'<row r="14"><c r="A14"><v>1</v></c><c r="&#x58;FD14"><v>1</v></c></row>'
    f = _workbook(tmp_path / "entity.xlsx", {SHEET: HEAD + _rows() + far + TAIL})
    with pytest.raises(DataError) as info:
        _read(f)
    assert "row 14 of sheet 'Sheet' reaches column 16,384" in info.value.message
    assert info.value.row == 14


def test_sheet_rows_counts_rows_and_cells_as_they_arrive(monkeypatch):
    monkeypatch.setattr(limits, "MAX_XLSX_CELLS", 10)
    with pytest.raises(DataError, match="at row 6"):
        limits.sheet_rows(iter([(1, 2)] * 8), "f.xlsx", "S")
    assert limits.sheet_rows(iter([(1, 2)] * 5), "f.xlsx", "S") == [[1, 2]] * 5


def test_a_shared_string_bomb_is_refused_from_the_zip_directory(tmp_path):
    # 2,000,000 copies of one short string: 34 MB stored in about 80 kB. Nothing refused
    # such a table (the size limit is 512 MiB), and 25,000,000 copies (1 MB stored) kept
    # the reader busy past 60 s; the ratio rule refuses both from the zip directory
    def strings() -> Iterator[bytes]:
        yield b'<?xml version="1.0" encoding="UTF-8"?><sst ' + NS + b">"
        for _ in range(20):
            yield b"<si><t>a</t></si>" * 100_000
        yield b"</sst>"

    f = _workbook(tmp_path / "sst.xlsx", {STRINGS: strings})
    with pytest.raises(DataError) as info:
        _read(f)
    assert "'xl/sharedStrings.xml' unzips to 34,000,115 bytes, 412 times" in info.value.message
    assert "the limit is 100 times" in info.value.message


def test_a_large_part_that_compresses_like_real_sales_is_not_refused(tmp_path):
    # a 40 MB sheet of varied numbers stores at about a tenth: the ratio rule leaves it
    import random

    rng = random.Random(7)

    def sheet() -> Iterator[bytes]:
        yield HEAD + _rows(1)
        for k in range(3, 400_003, 1_000):
            yield b"".join(
                f'<row r="{j}"><c r="A{j}"><v>{rng.randint(10**5, 10**6)}</v></c>'
                f'<c r="B{j}"><v>{rng.random() * 3000:.6f}</v></c></row>'.encode()
                for j in range(k, k + 1_000)
            )
        yield TAIL

    f = _workbook(tmp_path / "big.xlsx", {SHEET: sheet})
    with zipfile.ZipFile(f) as z:
        info = z.getinfo(SHEET)
    assert info.file_size > limits.XLSX_RATIO_FROM
    assert info.file_size / info.compress_size < limits.MAX_XLSX_RATIO
    limits.check_xlsx(f)  # no DataError


def _entity_bomb() -> bytes:
    """A sheet whose one text cell is an entity expanding to 10**9 characters."""
    defs = [b'<!ENTITY a "aaaaaaaaaa">']
    for i in range(8):
        ref = "&" + ("b" * i if i else "a") + ";"
        defs.append(f'<!ENTITY {"b" * (i + 1)} "{ref * 10}">'.encode())
    cell = b'<row r="14"><c r="A14" t="inlineStr"><is><t>&bbbbbbbb;</t></is></c></row>'
    doctype = b"<!DOCTYPE worksheet [" + b"".join(defs) + b"]>"
    return b'<?xml version="1.0"?>' + doctype + HEAD[38:] + _rows() + cell + TAIL


@pytest.mark.parametrize(
    ("parts", "needle"),
    [
        # a fill without its pattern: openpyxl raised TypeError
        (
            {
                "xl/styles.xml": b'<?xml version="1.0"?><styleSheet ' + NS + b"><fills "
                b'count="1"><fill/></fills></styleSheet>'
            },
            "TypeError",
        ),
        # a shared-string index past the table: IndexError
        (
            {SHEET: HEAD + _rows() + b'<row r="14"><c r="A14" t="s"><v>99999</v></c></row>' + TAIL},
            "sheet 'Sheet' cannot be read (IndexError",
        ),
        # a number cell holding NaN: ValueError in openpyxl's cast
        (
            {SHEET: HEAD + _rows() + b'<row r="14"><c r="A14"><v>NaN</v></c></row>' + TAIL},
            "ValueError",
        ),
        # an entity bomb in the sheet: expat's amplification limit, a ParseError
        ({SHEET: _entity_bomb()}, "ParseError"),
    ],
)
def test_a_damaged_workbook_part_is_a_data_error(tmp_path, parts, needle):
    f = _workbook(tmp_path / "bad.xlsx", parts)
    with pytest.raises(DataError) as info:
        _read(f)
    assert needle in info.value.message
    assert info.value.file == str(f)


def test_a_toml_integer_past_pythons_digit_limit_is_a_model_file_error():
    # tomllib raised ValueError ("Exceeds the limit (4300 digits)"): a traceback
    with pytest.raises(ModelFileError, match="number too long"):
        parse_model(
            'target = "price"\nfeatures = ["living_area"]\nlevel = ' + "9" * 5_000 + "\n",
            source="m.toml",
        )


# --- CSV ------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("header", "counted"),
    [
        (",".join(f"c{i}" for i in range(1_000_000)) + "\n", "at least 144,961 columns"),
        ("a," * 3_000_000, "at least 524,289 columns"),  # one 6 MB line, no line end
        (
            ",".join("n" * 70 for _ in range(30_000)) + "\nx\n",
            "at least 14,769 columns",
        ),  # 1 MiB / 71
    ],
)
def test_a_csv_header_wider_than_the_limit_is_refused_before_parsing(tmp_path, header, counted):
    # a header of a million columns was split into a million pandas columns: over 60 s
    f = tmp_path / "wide.csv"
    f.write_text(header, encoding="utf-8")
    with pytest.raises(DataError) as info:
        _read(f)
    assert counted in info.value.message
    assert "the limit is 2,000" in info.value.message


def test_a_header_at_the_column_limit_is_read(tmp_path):
    f = tmp_path / "ok.csv"
    names = ["price", *(f"c{i}" for i in range(1_999))]
    f.write_text(",".join(names) + "\n" + ",".join(["300000"] + ["1"] * 1_999) + "\n")
    table = load_sales(f, ImportSettings())
    assert table.frame.shape[0] == 1


# --- workfiles ------------------------------------------------------------------------------
def _saved_workfile(tmp_path: Path) -> tuple[Path, Path]:
    """A workfile of nine sales (embedded) and a one-feature model; its path and the sales'."""
    from appraise.engine.workfile import make_state, save_workfile

    sales_file = tmp_path / "s.csv"
    sales_file.write_text(
        "id,price,living_area\n" + "".join(f"s{i},{300_000 + i},{1_400 + i}\n" for i in range(9))
    )
    wf = tmp_path / "w.appraise.json"
    state = make_state(
        sales=load_sales(sales_file, ImportSettings()),
        spec=parse_model('target = "price"\nfeatures = ["living_area"]\n'),
        subject={"living_area": 1_500},
        import_settings=ImportSettings(),
        workfile_path=wf,
    )
    save_workfile(wf, state)
    return wf, sales_file


def _tampered(wf: Path, edit: Callable[[dict], None]) -> Path:
    import json

    doc = json.loads(wf.read_text(encoding="utf-8"))
    edit(doc)
    bad = wf.with_name("bad.appraise.json")
    bad.write_text(json.dumps(doc, allow_nan=True), encoding="utf-8")
    return bad


def test_an_embedded_copy_that_fails_to_read_names_the_workfile(tmp_path):
    # the error named the temporary copy (/tmp/appraise-xxxx/s.csv), gone once printed
    import base64
    import hashlib

    from appraise.engine.workfile import load_workfile, restore

    wf, sales_file = _saved_workfile(tmp_path)
    sales_file.unlink()  # only the embedded copy is left
    hostile = ",".join(f"c{i}" for i in range(5_000)).encode() + b"\n"

    def edit(doc: dict) -> None:
        doc["sales"]["embedded"]["data"] = base64.b64encode(hostile).decode()
        doc["sales"]["sha256"] = hashlib.sha256(hostile).hexdigest()

    bad = _tampered(wf, edit)
    with pytest.raises(DataError) as info:
        restore(load_workfile(bad))
    assert info.value.file == f"{bad} (its embedded copy of 's.csv')"
    assert "5,000 columns" in info.value.message
    assert "appraise-" not in str(info.value)


@pytest.mark.parametrize(
    ("edit", "needle"),
    [
        # the window opened these and failed later, on a pool thread (the grid: a
        # DateParseError traceback) or in the fit and valuation, the session changed
        (
            lambda d: d.update(comparables={"effective_date": "9999-99-99"}),
            "'comparables.effective_date' must be a date",
        ),
        (
            lambda d: d.update(comparables={"filters": {"max_km": "far"}}),
            "'comparables.filters.max_km' must be a finite number",
        ),
        (
            lambda d: d.update(comparables={"weights": [float("nan")]}),
            "'comparables.weights[0]' must be a finite number",
        ),
        (
            lambda d: d["model"].update(features=["__import__('os').system('id')"]),
            "the model it holds is invalid: in '__import__",
        ),
        (
            lambda d: d["model"].update(derived={"a": "living_area.__class__"}),
            "attribute access is not allowed",
        ),
        (
            lambda d: d["subject"].update(living_area=float("inf")),
            "the subject it holds is invalid: 'living_area': 'inf' is not a finite number",
        ),
        # a currency symbol stripped from cells: '1' read '1150,000 sq ft' as 50,000 and
        # '-' read '150,001-' as +150,001, silently
        (
            lambda d: d["import_settings"].update(currency_symbol="1"),
            "'import_settings.currency_symbol' holds a digit, sign or bracket",
        ),
        (
            lambda d: d["import_settings"].update(currency_symbol="-"),
            "'import_settings.currency_symbol' holds a digit, sign or bracket",
        ),
        (
            lambda d: d["import_settings"].update(currency_symbol="."),
            "or only separators",
        ),
    ],
)
def test_a_workfile_refused_before_anything_is_applied(tmp_path, edit, needle):
    from appraise.engine.errors import WorkfileError
    from appraise.engine.workfile import load_workfile, restore

    wf, _ = _saved_workfile(tmp_path)
    bad = _tampered(wf, edit)
    with pytest.raises(WorkfileError) as info:
        restore(load_workfile(bad))
    assert needle in info.value.message
    assert info.value.file == str(bad)


@pytest.mark.parametrize(
    ("encoding", "prefix", "note"),
    [
        ("utf-32-le", "\ufeff", "file is UTF-32 text"),  # FF FE 00 00: was taken as UTF-16
        ("utf-32-be", "\ufeff", "file is UTF-32 text"),
        ("utf-16-be", "", "without a byte-order mark (be)"),  # was read as UTF-8: NULs
        ("utf-16-le", "", "without a byte-order mark (le)"),
    ],
)
def test_utf32_and_unmarked_utf16_files_are_read(tmp_path, encoding, prefix, note):
    text = prefix + "id,price,living_area\n"
    text += "".join(f"s{i},{300_000 + 1_000 * i},{1_400 + 7 * i}\n" for i in range(20))
    f = tmp_path / "s.csv"
    f.write_bytes(text.encode(encoding))
    table = load_sales(f, ImportSettings())
    assert len(table.frame) == 20
    assert table.frame["price"].tolist() == [300_000.0 + 1_000 * i for i in range(20)]
    assert any(note in n for n in table.notes), table.notes


def test_ascii_text_with_nul_bytes_here_and_there_is_not_taken_for_utf16(tmp_path):
    f = tmp_path / "s.csv"
    body = "".join(f"s{i},{300_000 + i},{1_400 + i}\n" for i in range(30))
    f.write_bytes(("id,price,living_area\n" + body).replace("s1,", "s\x001,").encode())
    table = load_sales(f, ImportSettings())
    assert len(table.frame) == 30
    assert not any("UTF-16" in n for n in table.notes)


def test_a_living_area_read_as_1_5_is_excluded_not_used(tmp_path):
    # three cells decide the decimal mark ',' for the whole file; '1,500 sq ft' then reads
    # as 1.5 square feet and went into the fit (only 'not positive' was a rule)
    rows = ["id,price,living_area"]
    rows += [f's{i},{300_000 + 1_000 * i},"{1_400 + 7 * i},5"' for i in range(20)]
    rows.append('odd,350000,"1,500 sq ft"')
    f = tmp_path / "s.csv"
    f.write_text("\n".join(rows) + "\n", encoding="utf-8")
    table = load_sales(f, ImportSettings())
    reasons = {e.sale_id: e.reason for e in table.excluded}
    assert reasons == {"odd": "living area '1,500 sq ft' is below the plausible 5"}
    assert len(table.frame) + len(table.excluded) == 21


def test_living_areas_stated_in_thousands_are_noted_not_excluded(tmp_path):
    f = tmp_path / "s.csv"
    body = "".join(f"s{i},{300_000 + 1_000 * i},{1.2 + 0.05 * i:.2f}\n" for i in range(20))
    f.write_text("id,price,living_area\n" + body, encoding="utf-8")
    table = load_sales(f, ImportSettings())
    assert len(table.frame) == 20
    assert any("mostly below 5 (median 1.675)" in n for n in table.notes), table.notes


def test_a_csv_saved_as_xlsx_is_named_for_what_it_is(tmp_path):
    f = tmp_path / "sales.xlsx"
    f.write_text("id,price,living_area\na,300000,1500\n", encoding="utf-8")
    with pytest.raises(DataError) as info:
        _read(f)
    assert info.value.message.endswith("; it looks like CSV text: rename it .csv")


def test_a_quote_never_closed_is_noted_with_its_row_and_column(tmp_path):
    # the rest of the file became one sale id: "Rows in file: 2" and "price is missing",
    # nothing said why 2,000 sales were not read
    body = "".join(f"s{i},{300_000 + i},1500\n" for i in range(2_000))
    f = tmp_path / "s.csv"
    f.write_text('id,price,living_area\na,310000,1400\n"s,1,1500\n' + body, encoding="utf-8")
    table = load_sales(f, ImportSettings())
    assert len(table.frame) + len(table.excluded) == 2
    assert (
        "row 3, column 'id': one quoted cell runs over 2,001 lines to the end of the file "
        "(a quote opened and never closed?); the rows in it were not read as sales"
    ) in table.notes


def test_quoted_line_breaks_of_ordinary_cells_are_not_noted(tmp_path):
    body = "".join(f's{i},{300_000 + i},"12 Mill Lane\nAshcombe"\n' for i in range(300))
    f = tmp_path / "s.csv"
    f.write_text("id,price,address\n" + body, encoding="utf-8")
    table = load_sales(f, ImportSettings())
    assert len(table.frame) == 300
    assert not any("never closed" in n for n in table.notes)
