"""Number formatting of the worksheet: the strings the tests later look for in the PDF."""

from __future__ import annotations

import math

import pytest

from appraise.report.numbers import (
    MISSING,
    money,
    money_rate,
    number,
    p_phrase,
    percent,
    plain,
    pvalue,
    signed_percent,
    whole_units,
)


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
    assert pvalue(0.00002) == "< 0.0001"
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


@pytest.mark.parametrize(
    ("value", "digits", "expected"),
    [
        # Hand-written positional forms of the values seen in print in scientific notation.
        (-1.26986e-05, 6, "-0.0000126986"),
        (-1.26986e-05, 4, "-0.0000127"),
        (1.031e04, 6, "10,310"),
        (7.521e04, 4, "75,210"),
        (8.57e-11, 3, "0.0000000000857"),
        (1e20, 6, "100,000,000,000,000,000,000"),
        (123456789.0, 4, "123,456,789"),  # whole units are never rounded away
        (-19315.123, 4, "-19,315"),
        (9.99999, 4, "10"),
        (0.1 + 0.2, 6, "0.3"),
        (1e-16, 6, "0"),
    ],
)
def test_number_is_never_in_scientific_notation(value, digits, expected):
    text = number(value, digits)
    assert text == expected
    assert "e" not in text.lower()


def test_numbers_over_many_magnitudes_read_back_to_the_rounded_value():
    # Every printed number, separators removed, equals the value rounded to the digits
    # asked for (Python's own correctly rounded %e format is the reference).
    import numpy as np

    rng = np.random.default_rng(7)
    values = rng.standard_normal(400) * 10.0 ** rng.integers(-12, 16, 400)
    for v in values:
        text = number(v, 5)
        assert "e" not in text.lower()
        expected = float(f"{v:.4e}") if abs(v) < 1e4 else round(v)
        np.testing.assert_allclose(float(text.replace(",", "")), expected, rtol=1e-12, atol=0)


def test_p_values_in_a_sentence():
    assert p_phrase(8.57e-11) == "p < 0.0001"
    assert p_phrase(0.71934) == "p = 0.7193"
    assert p_phrase(None) == f"p = {MISSING}"


@pytest.mark.parametrize(
    ("points", "expected"),
    [
        (10.517, "+10.5%"),
        (0.397, "+0.40%"),  # never "+0.00%": two significant digits at least
        (-0.00127, "-0.0013%"),
        (-0.0049999, "-0.0050%"),
        (0.0, "0%"),
    ],
)
def test_signed_percent_keeps_small_effects_visible(points, expected):
    assert signed_percent(points) == expected


def test_money_per_unit_keeps_cents_for_small_amounts():
    assert money_rate(123.456) == "$123"
    assert money_rate(12.345) == "$12.35"
    assert money_rate(-0.0123) == "-$0.012"


def test_a_column_prints_its_whole_numbers_alike():
    from appraise.report.numbers import column_format

    prices = column_format([13981.0, 8822.0, None, 412500.5])
    assert [prices(v) for v in (13981.0, 8822.0, 412500.5)] == ["13,981", "8,822", "412,500"]
    years = column_format([1964.0, 2021.0])
    assert years(1964.0) == "1964"  # a year never gets a separator
    assert column_format(["Old Mill", "Heronmoor"])("Old Mill") == "Old Mill"


def test_messages_built_elsewhere_lose_their_scientific_notation():
    from appraise.report.numbers import unscientific

    # format(4 / 100_000, ".3g") is "4e-05" (Python's format spec): a Cook's limit at n = 100,000
    assert format(4 / 100_000, ".3g") == "4e-05"
    assert unscientific("Cook's distance 0.0156 > 4e-05") == "Cook's distance 0.0156 > 0.00004"
    assert unscientific("VIF 1.2e+04 > 10; 3.5E+06.") == "VIF 12,000 > 10; 3,500,000."
    assert unscientific("(-1.5e-06)") == "(-0.0000015)"
    assert unscientific("sale AV-1e5 and hash 3dd249c2e7") == "sale AV-1e5 and hash 3dd249c2e7"
