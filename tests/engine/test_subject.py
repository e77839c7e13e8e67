"""The subject property is read like the sales: same columns, same kinds, same settings.

Expected values are the subject's own entries read by eye; the sales come from
the hand-written fixture files beside these tests.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from appraise.engine.errors import SubjectError
from appraise.engine.importing import load_sales
from appraise.engine.roles import RoleMap
from appraise.engine.settings import ImportSettings
from appraise.engine.subject import read_subject

FIXTURES = Path(__file__).parent / "fixtures"


@pytest.fixture(scope="module")
def sales():
    return load_sales(FIXTURES / "messy_sales.csv")


def test_role_names_and_headers_land_in_the_sales_columns(sales):
    subject = read_subject(
        {
            "living_area": "1,840 sq ft",  # a role name
            "Beds": "3",  # a header
            "region": " Quarry Bend ",
            "sale_date": "2026-06-30",
            "address": "4 Tollgate Row",
            "effective_date": "2026-06-30",
        },
        sales,
    )
    assert len(subject) == 1
    assert list(subject.columns) == [
        "Sale Date",
        "Living Area (sq ft)",
        "Beds",
        "Neighbourhood",
        "address",
        "effective_date",
    ]
    row = subject.iloc[0]
    assert row["Living Area (sq ft)"] == 1840.0
    assert row["Beds"] == 3.0
    assert row["Neighbourhood"] == "Quarry Bend"
    assert row["Sale Date"] == pd.Timestamp("2026-06-30")
    assert row["effective_date"] == pd.Timestamp("2026-06-30")
    assert row["address"] == "4 Tollgate Row"  # extra keys are kept
    assert subject["Living Area (sq ft)"].dtype == np.float64
    assert subject["Sale Date"].dtype == np.dtype("datetime64[ns]")
    assert subject["effective_date"].dtype == np.dtype("datetime64[ns]")


def test_values_follow_the_sales_settings():
    roles = RoleMap({"price": "Preis", "sale_date": "Datum", "living_area": "Wohnfläche (m²)"})
    s = ImportSettings(decimal=",", date_order="DMY", area_unit="m2")
    sales = load_sales(FIXTURES / "semicolon_decimal_comma.csv", s, roles)
    subject = read_subject({"living_area": "123,5", "Datum": "05.03.2026"}, sales, s)
    assert subject["Wohnfläche (m²)"].iloc[0] == 123.5  # decimal comma, as the sales
    assert subject["Datum"].iloc[0] == pd.Timestamp("2026-03-05")  # day first, as the sales


def test_an_ambiguous_subject_date_under_iso_is_an_error(sales):
    with pytest.raises(SubjectError, match="could be day/month") as info:
        read_subject({"sale_date": "03/04/2026"}, sales)
    assert info.value.column == "sale_date"


def test_missing_markers_become_missing(sales):
    subject = read_subject({"Beds": "N/A", "region": ""}, sales)
    assert np.isnan(subject["Beds"].iloc[0])
    assert pd.isna(subject["Neighbourhood"].iloc[0])


def test_json_file(tmp_path, sales):
    p = tmp_path / "subject.json"
    p.write_text(json.dumps({"living_area": 1500, "bedrooms": 2, "note": "corner lot"}))
    subject = read_subject(p, sales)
    assert subject["Living Area (sq ft)"].iloc[0] == 1500.0
    assert subject["Beds"].iloc[0] == 2.0
    assert subject["note"].iloc[0] == "corner lot"


def test_one_row_csv_file(tmp_path, sales):
    p = tmp_path / "subject.csv"
    p.write_text('Living Area (sq ft),Neighbourhood,Sale Date\n"1,650",Lanterns,2026-05-01\n')
    subject = read_subject(p, sales)
    assert subject["Living Area (sq ft)"].iloc[0] == 1650.0
    assert subject["Neighbourhood"].iloc[0] == "Lanterns"
    assert subject["Sale Date"].iloc[0] == pd.Timestamp("2026-05-01")


@pytest.mark.parametrize(
    ("name", "content", "match"),
    [
        ("subject.json", "[1, 2]", "one JSON object"),
        ("subject.json", "{oops", "not valid JSON"),
        ("subject.csv", "Beds\n3\n4\n", "this one has 2 rows"),
        ("subject.csv", "Beds\n", "this one has 0 rows"),
        ("subject.dat", "x", "unknown file type"),
    ],
)
def test_bad_subject_files(tmp_path, sales, name, content, match):
    p = tmp_path / name
    p.write_text(content)
    with pytest.raises(SubjectError, match=match) as info:
        read_subject(p, sales)
    assert info.value.file == str(p)


def test_subject_file_not_found(tmp_path, sales):
    with pytest.raises(SubjectError, match="file not found"):
        read_subject(tmp_path / "none.json", sales)


@pytest.mark.parametrize(
    ("values", "column"),
    [
        ({"living_area": "big"}, "living_area"),
        ({"Beds": [3]}, "Beds"),
        ({"Beds": True}, "Beds"),
        ({"Sale Date": "31/02/2026"}, "Sale Date"),
    ],
)
def test_values_that_do_not_read(sales, values, column):
    with pytest.raises(SubjectError) as info:
        read_subject(values, sales)
    assert info.value.column == column


def test_a_role_name_and_its_header_must_agree(sales):
    same = read_subject({"bedrooms": 3, "Beds": "3"}, sales)
    assert same["Beds"].iloc[0] == 3.0
    with pytest.raises(SubjectError, match="both give column 'Beds'"):
        read_subject({"bedrooms": 3, "Beds": 4}, sales)
