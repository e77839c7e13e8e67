"""Cell parsers: numbers, dates, yes/no flags and missing markers as exports write them.

Expected numbers are the amounts as written, read by a person (``$412,500`` is
four hundred and twelve thousand five hundred); the property tests use Python's
own formatting (format-spec mini-language, ``strftime``) as the independent writer.
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from appraise.engine.cells import (
    area_unit_of,
    clean_text,
    excel_serial_to_datetime,
    is_missing,
    parse_date,
    parse_flag,
    parse_number,
)

# --- numbers -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "decimal", "expected"),
    [
        # expected: the amount as written, without currency sign and separators
        ("$412,500", ".", 412500.0),
        ("412 500", ".", 412500.0),
        ("412\u202f500", ".", 412500.0),  # narrow no-break space as the thousands separator
        ("412\u00a0500", ".", 412500.0),  # no-break space
        ("412.500,00", ",", 412500.0),
        ("  $412,500.75 ", ".", 412500.75),
        ("1,234.5 sq ft", ".", 1234.5),
        ("95 m²", ".", 95.0),
        ("1.234,5 m2", ",", 1234.5),
        ("(1,200)", ".", -1200.0),  # accounting negative
        ("-$1,200", ".", -1200.0),
        ("$-1,200", ".", -1200.0),
        ("\u22125", ".", -5.0),  # the minus sign U+2212
        ("EUR 1.234,5", ",", 1234.5),
        ("412 500 €", ",", 412500.0),
        ("£ 275,000", ".", 275000.0),
        ("USD 505 000", ".", 505000.0),
        ("CAD 1,000", ".", 1000.0),
        ("1'234.50", ".", 1234.5),
        ("1.2e5", ".", 120000.0),
        ("0.5", ".", 0.5),
        (".5", ".", 0.5),
        ("12,345,678.9", ".", 12345678.9),
        ("1.234", ",", 1234.0),  # under decimal "," the dot groups thousands
    ],
)
def test_number_texts_read_as_written(text, decimal, expected):
    assert parse_number(text, decimal=decimal) == expected


@pytest.mark.parametrize(
    ("text", "decimal", "hint"),
    [
        ("412.500,00", ".", True),  # decimal-comma text under decimal "." is an error, not 412.5
        ("1,5", ".", True),  # a comma before fewer than three digits is not a thousands group
        ("1234.5", ",", True),
        ("$4l2,000", ".", False),  # a letter l for a one
        ("call agent", ".", False),
        ("12,34,567", ".", False),  # irregular grouping
        ("1,234 567", ".", False),  # two different separators
        ("1e999", ".", False),  # overflows to infinity
        ("(-5)", ".", False),
        ("5 acres", ".", False),  # a unit that is not an area unit we read is not stripped
        ("", ".", False),
    ],
)
def test_number_texts_that_are_not_numbers(text, decimal, hint):
    with pytest.raises(ValueError, match="is not a number") as info:
        parse_number(text, decimal=decimal)
    assert ("it would read with decimal mark" in str(info.value)) is hint


def test_typed_numbers_pass_and_dates_do_not():
    assert parse_number(412500) == 412500.0
    assert parse_number(np.float32(2.5)) == 2.5
    assert parse_number(Decimal("1234.50")) == 1234.5
    assert parse_number(True) == 1.0
    with pytest.raises(ValueError, match="is a date"):
        parse_number(dt.date(2024, 3, 5))
    with pytest.raises(ValueError, match="finite"):
        parse_number(float("inf"))


def test_the_settings_currency_symbol_is_stripped():
    assert parse_number("R 1 500", currency_symbol="R") == 1500.0
    with pytest.raises(ValueError):
        parse_number("R 1 500")  # "R" is not a currency sign unless the setting says so


@given(st.decimals(min_value=-(10**9), max_value=10**9, places=2, allow_nan=False))
def test_grouped_numbers_round_trip_through_python_formatting(x):
    # reference writer: Python's format-spec mini-language (',' groups thousands)
    written = f"{x:,.2f}"
    expected = float(x)
    tol = 1e-9 * max(1.0, abs(expected))
    assert parse_number("$" + written) == pytest.approx(expected, rel=0, abs=tol)
    # the same number as a decimal-comma export writes it: swap the two marks
    european = written.replace(",", "_").replace(".", ",").replace("_", ".")
    assert parse_number(european + " €", decimal=",") == pytest.approx(expected, rel=0, abs=tol)


# --- dates -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "order", "expected", "form"),
    [
        # expected dates written by hand from the text
        ("2024-03-05", "ISO", dt.datetime(2024, 3, 5), "iso"),
        ("2024/03/05", "ISO", dt.datetime(2024, 3, 5), "iso"),
        ("2024-03-05T00:00:00", "ISO", dt.datetime(2024, 3, 5), "iso"),
        ("2024-03-05T14:30:00Z", "ISO", dt.datetime(2024, 3, 5, 14, 30), "iso"),
        ("20240305", "ISO", dt.datetime(2024, 3, 5), "iso"),
        ("05/03/2024", "DMY", dt.datetime(2024, 3, 5), "ambiguous"),
        ("05/03/2024", "MDY", dt.datetime(2024, 5, 3), "ambiguous"),
        ("5.3.2024", "DMY", dt.datetime(2024, 3, 5), "ambiguous"),
        ("13/04/2024", "ISO", dt.datetime(2024, 4, 13), "day_first"),
        ("13/04/2024", "MDY", dt.datetime(2024, 4, 13), "day_first"),  # caller rejects the clash
        ("04/13/2024", "ISO", dt.datetime(2024, 4, 13), "month_first"),
        ("07/07/2024", "ISO", dt.datetime(2024, 7, 7), "iso"),  # day = month: no ambiguity
        ("5 Mar 2024", "ISO", dt.datetime(2024, 3, 5), "named"),
        ("March 5, 2024", "ISO", dt.datetime(2024, 3, 5), "named"),
        ("05-Mar-2024", "ISO", dt.datetime(2024, 3, 5), "named"),
        ("03/04/2024 2:30 PM", "MDY", dt.datetime(2024, 3, 4, 14, 30), "ambiguous"),
    ],
)
def test_date_texts(text, order, expected, form):
    reading = parse_date(text, order=order)
    assert reading.value == expected
    assert reading.form == form


def test_an_ambiguous_date_under_iso_has_no_value():
    reading = parse_date("05/03/2024", order="ISO")
    assert reading.form == "ambiguous" and reading.value is None


@pytest.mark.parametrize(
    ("text", "reason"),
    [
        ("31/02/2024", "not a date"),
        ("13/13/2024", "not a date"),
        ("2024-02-30", "not a date"),
        ("05/03/24", "two-digit year"),
        ("0024-03-05", "outside the years"),
        ("soon", "not a date"),
        ("2024-03-05T25:00", "not a date"),
    ],
)
def test_date_texts_that_are_not_dates(text, reason):
    with pytest.raises(ValueError, match=reason):
        parse_date(text, order="DMY")


def test_typed_dates_and_spreadsheet_serials():
    assert parse_date(dt.date(2024, 3, 5)).value == dt.datetime(2024, 3, 5)
    assert parse_date(np.datetime64("2024-03-05")).value == dt.datetime(2024, 3, 5)
    with pytest.raises(ValueError, match="number, not a date"):
        parse_date(45356)
    # 45356 is 2024-03-05 in the 1900 date system: days since 1899-12-30 (stdlib arithmetic)
    expected = dt.datetime(1899, 12, 30) + dt.timedelta(days=45356)
    assert parse_date(45356, serial_ok=True).value == expected == dt.datetime(2024, 3, 5)
    assert excel_serial_to_datetime(45356.5) == dt.datetime(2024, 3, 5, 12)


@given(st.dates(min_value=dt.date(1700, 1, 1), max_value=dt.date(2200, 12, 31)))
def test_dates_round_trip_through_strftime(d):
    # reference writer: the standard library's strftime in each order
    expected = dt.datetime(d.year, d.month, d.day)
    assert parse_date(d.isoformat(), order="ISO").value == expected
    assert parse_date(d.strftime("%d/%m/%Y"), order="DMY").value == expected
    assert parse_date(d.strftime("%m/%d/%Y"), order="MDY").value == expected
    assert parse_date(d.strftime("%d %B %Y"), order="ISO").value == expected


# --- flags, text, missing ---------------------------------------------------------------


@pytest.mark.parametrize(
    "text", ["Yes", "y", "TRUE", "t", "1", "Arm's Length", "arms-length", "arm’s length sale"]
)
def test_flags_meaning_arms_length(text):
    assert parse_flag(text) is True


@pytest.mark.parametrize(
    "text",
    [
        "No",
        "n",
        "false",
        "0",
        "Non-Arm's Length",
        "not arm’s length",
        "NAL",
        "Foreclosure",
        "family transfer",
        "related party",
    ],
)
def test_flags_meaning_not_arms_length(text):
    assert parse_flag(text) is False


@pytest.mark.parametrize("text", ["maybe", "2", "arm's length?? unknown", "x"])
def test_unknown_flags_are_refused_not_taken_as_yes(text):
    with pytest.raises(ValueError, match="is not yes or no"):
        parse_flag(text)


@pytest.mark.parametrize(
    "value", ["", "  ", "N/A", "na", "#N/A", "-", "--", "null", "None", "?", None, float("nan")]
)
def test_missing_markers(value):
    assert is_missing(value)


@pytest.mark.parametrize("value", ["0", "no", "n", "S-0107", 0, 0.0, dt.date(2024, 1, 1)])
def test_values_that_are_not_missing(value):
    assert not is_missing(value)


def test_clean_text_of_typed_values():
    assert clean_text("  Quarry Bend ") == "Quarry Bend"
    assert clean_text(107.0) == "107"  # an id typed as a number in a spreadsheet
    assert clean_text(dt.datetime(2024, 3, 5)) == "2024-03-05"


@pytest.mark.parametrize(
    ("text", "unit"),
    [
        ("1,850 sq ft", "ft2"),
        ("1850 sqft", "ft2"),
        ("95 m²", "m2"),
        ("95 sq m", "m2"),
        ("95", None),
    ],
)
def test_area_unit_suffixes(text, unit):
    assert area_unit_of(text) == unit
