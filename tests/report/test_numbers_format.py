"""Number formatting of the worksheet: the strings the tests later look for in the PDF."""

from __future__ import annotations

import math

import pytest

from appraise.report.numbers import MISSING, money, number, percent, plain, pvalue, whole_units


@pytest.mark.parametrize(
    ("value", "symbol", "expected"),
    [
        # Hand arithmetic: rounded to whole units, comma every three digits.
        (412500.4, "$", "$412,500"),
        (412499.5, "$", "$412,500"),  # half rounds away from zero, as on a calculator
        (1234567.89, "$", "$1,234,568"),
        (-1200.0, "$", "-$1,200"),
        (999.49, "EUR ", "EUR 999"),
        (0.0, "$", "$0"),
    ],
)
def test_money_prints_whole_units_with_separators(value, symbol, expected):
    assert money(value, symbol) == expected


@pytest.mark.parametrize("bad", [None, math.nan, math.inf, "abc"])
def test_money_prints_a_dash_for_missing_values(bad):
    assert money(bad) == MISSING


def test_whole_units_differs_from_bankers_rounding():
    # Python's round() rounds half to even (language reference, built-in round):
    # round(2.5) == 2; a printed valuation rounds half away from zero instead.
    assert round(2.5) == 2
    assert whole_units(2.5) == 3
    assert whole_units(-2.5) == -3
    assert whole_units(2.4999) == 2


def test_pvalue_and_percent_and_number():
    assert pvalue(0.00002) == "<0.0001"
    assert pvalue(0.04567) == "0.0457"
    assert percent(0.9) == "90%"
    assert number(0.0020677123) == "0.00206771"  # 6 significant digits
    assert number(-19315.123) == "-19,315.1"


def test_plain_values():
    import pandas as pd

    assert plain(2150.0) == "2150"
    assert plain(125000.0) == "125,000"
    assert plain(pd.Timestamp("2026-03-01")) == "2026-03-01"
    assert plain(True) == "yes"
    assert plain(pd.NA) == MISSING
    assert plain("") == MISSING
