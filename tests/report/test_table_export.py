"""CSV/XLSX export: formula-like text is neutralised, numbers stay numbers.

The trigger characters (=, +, -, @, tab, carriage return) and the single-quote
prefix follow the OWASP "CSV Injection" guidance (owasp.org/www-community/attacks/CSV_Injection).
"""

from __future__ import annotations

import csv

import openpyxl
import pytest
from worksheet_samples import sample_worksheet

from appraise.engine.errors import ReportError
from appraise.report.content import Table
from appraise.report.tables import export_tables, neutralise, write_csv, write_xlsx

HOSTILE_CELLS = ["=1+1", "+SUM(A1:A2)", "-2+3", "@cmd", "\tx", "\rx"]


@pytest.mark.parametrize("text", HOSTILE_CELLS)
def test_formula_like_text_gets_a_quote(text):
    assert neutralise(text) == "'" + text


def test_numbers_and_harmless_text_pass_through():
    assert neutralise(-0.0512) == -0.0512  # a negative number stays a number
    assert neutralise(-3) == -3
    assert neutralise("Old Mill") == "Old Mill"
    assert neutralise(float("nan")) is None
    assert neutralise(None) is None


def _table() -> Table:
    rows = [(f"name {i}", h) for i, h in enumerate(HOSTILE_CELLS)]
    values = [(f"name {i}", h) for i, h in enumerate(HOSTILE_CELLS)]
    rows.append(("neg", "-1.5"))
    values.append(("neg", -1.5))
    return Table("t", "", ("Name", "=Value"), tuple(rows), tuple(values))


def test_csv_round_trip_is_formula_safe(tmp_path):
    path = write_csv(_table(), tmp_path / "t.csv")
    with path.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["Name", "'=Value"]
    body = rows[1:]
    for (_, cell), original in zip(body[:-1], HOSTILE_CELLS, strict=True):
        assert cell == "'" + original
    # The negative number is written as a plain number, no quote.
    assert body[-1] == ["neg", "-1.5"]
    for _, cell in body[:-1]:
        assert not cell.startswith(("=", "+", "-", "@", "\t", "\r"))


def test_xlsx_cells_are_strings_never_formulas_and_numbers_numeric(tmp_path):
    path = write_xlsx([_table()], tmp_path / "t.xlsx")
    wb = openpyxl.load_workbook(path)  # formulas would load as data_type "f"
    ws = wb["t"]
    kinds = {(c.row, c.column): c.data_type for row in ws.iter_rows() for c in row}
    assert "f" not in kinds.values()
    for r, original in enumerate(HOSTILE_CELLS, start=2):
        # XML 1.0 section 2.11 turns a stored carriage return into a line feed on reading.
        assert ws.cell(r, 2).value == "'" + original.replace("\r", "\n")
        assert ws.cell(r, 2).data_type == "s"
    neg = ws.cell(len(HOSTILE_CELLS) + 2, 2)
    assert neg.value == -1.5 and neg.data_type == "n"


def test_export_tables_writes_coefficients_and_exclusions(tmp_path):
    written = export_tables(sample_worksheet(), tmp_path / "out")
    names = sorted(p.name for p in written)
    assert names == ["coefficients.csv", "coefficients.xlsx", "exclusions.csv", "exclusions.xlsx"]
    wb = openpyxl.load_workbook(tmp_path / "out" / "exclusions.xlsx")
    ws = wb["exclusions"]
    assert ws["B2"].value == '\'=HYPERLINK("http://x")'
    assert ws["C2"].value == "'@SUM(A1)"
    assert ws["A2"].value == 7 and ws["A2"].data_type == "n"
    coef = openpyxl.load_workbook(tmp_path / "out" / "coefficients.xlsx")["coefficients"]
    assert coef["B3"].value == -0.0512  # raw value, full precision, numeric


def test_table_shape_is_checked():
    with pytest.raises(ReportError):
        Table("bad", "", ("a", "b"), (("only one",),))
