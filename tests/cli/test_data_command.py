"""``appraise data``: what was read, used and excluded, as text and as JSON.

Runs the real command through ``appraise.cli.main`` on the importer's
hand-written fixtures; expected rows and reasons are read off those files.
"""

from __future__ import annotations

import csv
import hashlib
import json
from pathlib import Path

import pytest

from appraise.cli import main

FIXTURES = Path(__file__).resolve().parents[1] / "engine" / "fixtures"
MESSY = FIXTURES / "messy_sales.csv"
SEMICOLON = FIXTURES / "semicolon_decimal_comma.csv"


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_json_document(capsys):
    code, out, err = run(capsys, "data", str(MESSY), "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert set(doc) == {
        "rows_in_file",
        "rows_used",
        "rows_excluded",
        "excluded",
        "roles",
        "area_unit",
        "notes",
        "columns",
        "source",
    }
    assert (doc["rows_in_file"], doc["rows_used"], doc["rows_excluded"]) == (16, 4, 12)
    assert doc["source"] == {
        "path": str(MESSY),
        "sha256": hashlib.sha256(MESSY.read_bytes()).hexdigest(),  # reference: hashlib
        "format": "csv",
    }
    assert doc["area_unit"] == "ft2"
    assert doc["roles"]["price"] == "Sale Price"
    first = doc["excluded"][0]
    assert first == {
        "row": 3,
        "id": "S-0102",
        "reason": "price '$4l2000' is not a number",
        "column": "Sale Price",
        "source": "import",
    }
    cols = {c["name"]: c for c in doc["columns"]}
    assert "_row" not in cols
    price = cols["Sale Price"]
    # used prices 412,500; 298,000; 505,000; 389,900 (rows 2, 8, 13, 15 of the fixture)
    assert price["kind"] == "number" and price["role"] == "price"
    assert (price["count"], price["missing"]) == (4, 0)
    assert (price["min"], price["max"]) == (298000.0, 505000.0)
    assert price["mean"] == pytest.approx((412500 + 298000 + 505000 + 389900) / 4, rel=1e-15)
    assert cols["Sale Date"]["kind"] == "date"
    assert (cols["Sale Date"]["min"], cols["Sale Date"]["max"]) == ("2024-03-05", "2024-04-07")
    assert cols["Neighbourhood"]["levels"] == {"Orchard Rise": 2, "Lanterns": 1, "Quarry Bend": 1}
    assert cols["Living Area (sq ft)"]["missing"] == 1


def test_text_summary(capsys):
    code, out, _ = run(capsys, "data", str(MESSY))
    assert code == 0
    assert "Rows in file: 16   used: 4   excluded: 12" in out
    # 12 exclusions in the fixture: 5 price, 1 sale date, 2 not at arm's length, 1 flag,
    # 1 duplicate id, 1 empty row, 1 long row
    assert (
        "by reason: price 5, not an arm's-length sale 2, arm's-length flag 1, "
        "duplicate sale id 1, empty row 1, sale date 1, too many values 1"
    ) in out
    assert "row 4 (S-0103): price 'call agent' is not a number [Sale Price]" in out
    assert "row 11: empty row" in out
    assert "price        Sale Price" in out
    assert "lot_area     (none)" in out
    assert "Columns:" in out and "Neighbourhood" in out


def test_settings_options_and_a_saved_role_map(tmp_path, capsys):
    roles = tmp_path / "roles.json"
    roles.write_text(
        json.dumps(
            {
                "format": "appraise-roles",
                "version": 1,
                "roles": {"price": "Preis", "sale_date": "Datum", "sale_id": "Verkauf"},
            }
        )
    )
    code, out, err = run(
        capsys,
        "data",
        str(SEMICOLON),
        "--decimal",
        ",",
        "--date-order",
        "DMY",
        "--area-unit",
        "m2",
        "--roles",
        str(roles),
        "--json",
    )
    assert code == 0, err
    doc = json.loads(out)
    assert doc["rows_used"] == 4 and doc["area_unit"] == "m2"
    assert doc["roles"] == {"price": "Preis", "sale_date": "Datum", "sale_id": "Verkauf"}
    preis = next(c for c in doc["columns"] if c["name"] == "Preis")
    assert preis["max"] == 1234567.89  # "1.234.567,89" under decimal ","


def test_save_roles_then_reuse(tmp_path, capsys):
    saved = tmp_path / "roles.json"
    code, out1, _ = run(capsys, "data", str(MESSY), "--save-roles", str(saved), "--json")
    assert code == 0
    assert json.loads(saved.read_text())["format"] == "appraise-roles"
    code, out2, _ = run(capsys, "data", str(MESSY), "--roles", str(saved), "--json")
    assert code == 0
    assert json.loads(out1)["roles"] == json.loads(out2)["roles"]
    assert json.loads(out1)["excluded"] == json.loads(out2)["excluded"]


def test_exclusions_csv_export(tmp_path, capsys):
    target = tmp_path / "excluded.csv"
    code, _, _ = run(capsys, "data", str(MESSY), "--exclusions-csv", str(target))
    assert code == 0
    with target.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))  # reference reader: the standard library's csv module
    assert [r["row"] for r in rows] == [
        "3",
        "4",
        "5",
        "6",
        "7",
        "9",
        "10",
        "11",
        "12",
        "14",
        "16",
        "17",
    ]
    assert rows[1] == {
        "row": "4",
        "id": "S-0103",
        "reason": "price 'call agent' is not a number",
        "column": "Sale Price",
        "source": "import",
    }


def test_exclusion_export_neutralises_formula_like_cells(tmp_path, capsys):
    sales = tmp_path / "sales.csv"
    sales.write_text('Sale ID,Sale Price\n=HYPERLINK("x"),call agent\n@A1,100\n')
    target = tmp_path / "excluded.csv"
    code, _, _ = run(capsys, "data", str(sales), "--exclusions-csv", str(target))
    assert code == 0
    with target.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows[0]["id"] == '\'=HYPERLINK("x")'  # kept as text, not a formula


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (["data", "{tmp}/none.csv"], "none.csv: file not found"),
        (["data", "{tmp}/noprice.csv"], "no column has the price role"),
        (["data", str(MESSY), "--roles", "{tmp}/none.json"], "role map file not found"),
        (["data", "{tmp}/book.xlsx", "--sheet", "Nope"], "there is no sheet 'Nope'"),
        (["data", str(FIXTURES / "month_first_dates.csv")], "row 2, column 'Closing Date'"),
    ],
)
def test_user_errors_exit_2_with_one_line_and_no_traceback(tmp_path, capsys, args, needle):
    (tmp_path / "noprice.csv").write_text("Asking,Beds\n1,2\n")
    from openpyxl import Workbook

    wb = Workbook()
    wb.active.append(["Sale Price"])
    wb.active.append([1])
    wb.save(tmp_path / "book.xlsx")
    code, out, err = run(capsys, *[a.replace("{tmp}", str(tmp_path)) for a in args])
    assert code == 2
    assert needle in err
    assert "Traceback" not in err and err.count("\n") == 1
    assert out == ""
