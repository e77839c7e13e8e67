"""Exports and terminal text with hostile strings: control characters, hidden formula starts.

The formula starters and the leading-quote defence follow the OWASP "CSV Injection" page
(owasp.org/www-community/attacks/CSV_Injection); the characters an XLSX cannot hold are
those XML 1.0 forbids (section 2.2: C0 controls other than tab, LF and CR).
"""

from __future__ import annotations

import csv
import io

import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from appraise.engine.errors import ReportError
from appraise.report.content import Section, Table, Worksheet
from appraise.report.safe_text import (
    FORMULA_STARTERS,
    INVISIBLE,
    TerminalStream,
    export_text,
    terminal_text,
)
from appraise.report.tables import export_tables, write_csv, write_xlsx

HIDDEN_FORMULAS = [
    '\u200b=HYPERLINK("http://x")',  # zero-width space first
    "\ufeff=1+1",  # byte-order mark first
    "  =1+1",  # white space first
    "\uff1dSUM(A1)",  # full-width equals sign
    "\uff0b1",  # full-width plus
    "\uff20cmd",  # full-width commercial at
    "\u2060\u200d-2+3",  # word joiner, zero-width joiner
]


@pytest.mark.parametrize("text", HIDDEN_FORMULAS)
def test_a_formula_behind_invisible_characters_or_in_full_width_is_neutralised(text):
    assert export_text(text) == "'" + text


@pytest.mark.parametrize("text", ["x;=1+1", "a,=cmd", "b\t@x", "c; \u200b=1", "d;\uff1d1"])
def test_a_formula_after_a_separator_inside_a_cell_is_broken(text):
    out = export_text(text)
    assert out != text
    # split the cell on every separator a reader might use: no piece starts a formula
    for sep in ";,\t|":
        for piece in out.split(sep)[1:]:
            visible = piece.lstrip(" " + INVISIBLE)
            assert not visible[:1] or visible[0] not in FORMULA_STARTERS, (text, out)


def test_control_characters_are_escaped_visibly_not_dropped():
    assert export_text("S-\x1b[31m\x07\x00") == "S-\\x1b[31m\\x07\\x00"
    assert terminal_text("id \x1b]0;pwned\x07 \x9b \u202e") == "id \\x1b]0;pwned\\x07 \\x9b \\u202e"
    assert terminal_text("two\nlines\tand a tab") == "two\nlines\tand a tab"


def test_harmless_text_is_untouched():
    for text in ["Old Mill", "S-0042", "412,500", "a - b", "name@example", "x = 1"]:
        assert export_text(text) == text


def _hostile_table(key: str) -> Table:
    ids = ["S-\x1b[31mRED\x07", "\x00nul", '\u200b=HYPERLINK("http://x")', "ok;=1+1"]
    rows = tuple((i, 1.5) for i in ids)
    return Table(key, "", ("id", "value"), tuple((r[0], "1.5") for r in rows), rows)


def test_xlsx_with_control_characters_is_written_and_reads_back_escaped(tmp_path):
    # openpyxl refuses these characters outright (IllegalCharacterError) when stored raw
    path = write_xlsx([_hostile_table("t")], tmp_path / "t.xlsx")
    ws = openpyxl.load_workbook(path)["t"]
    values = [ws.cell(r, 1).value for r in range(2, 6)]
    assert values == [
        "S-\\x1b[31mRED\\x07",
        "\\x00nul",
        '\'\u200b=HYPERLINK("http://x")',
        "ok;'=1+1",
    ]
    assert all(c.data_type != "f" for row in ws.iter_rows() for c in row)


def test_a_table_that_fails_does_not_stop_the_others(tmp_path):
    good = Table("coefficients", "", ("a",), (("1",),))
    bad = Table("exclusions", "", ("a",), (("2",),))
    ws = Worksheet(
        title="t", effective_date="", workfile_id="", sections=(Section("s", "S", (good, bad)),)
    )
    out = tmp_path / "out"
    out.mkdir()
    (out / "coefficients.xlsx").mkdir()  # a folder where a file should go: that write fails
    with pytest.raises(ReportError) as info:
        export_tables(ws, out)
    msg = str(info.value)
    assert "coefficients.xlsx" in msg and "exclusions.xlsx" in msg.split("written:")[1]
    assert (out / "exclusions.xlsx").is_file() and (out / "exclusions.csv").is_file()


@settings(max_examples=200, deadline=None)  # 200 random strings: about half a second
@given(st.text(alphabet=st.characters(codec="utf-8"), max_size=40))
def test_no_exported_text_starts_a_formula_or_holds_an_illegal_character(text):
    out = export_text(text)
    visible = out.lstrip(" \u00a0\t\r\n" + INVISIBLE)
    assert not (visible[:1] and visible[0] in FORMULA_STARTERS) or out.startswith("'")
    assert not any(ord(c) < 0x20 and c not in "\t\n\r" for c in out)
    buf = io.StringIO()
    csv.writer(buf).writerow([out])  # and the CSV writer takes it
    assert not any(ord(c) < 0x20 and c not in "\n\t" for c in terminal_text(text))


def test_terminal_stream_escapes_whatever_is_printed():
    target = io.StringIO()
    print("sale S-\x1b[2J\x07", file=TerminalStream(target))
    assert target.getvalue() == "sale S-\\x1b[2J\\x07\n"


def test_csv_export_of_hostile_ids(tmp_path):
    path = write_csv(_hostile_table("t"), tmp_path / "t.csv")
    with path.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    assert [r[0] for r in rows[1:]] == [
        "S-\\x1b[31mRED\\x07",
        "\\x00nul",
        '\'\u200b=HYPERLINK("http://x")',
        "ok;'=1+1",
    ]
