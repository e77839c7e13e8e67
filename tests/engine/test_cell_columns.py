"""The vectorised fast path of cell reading agrees with the per-cell parsers of cells.py on
every cell it decides, and decides the common export forms. The per-cell parsers are the
reference (their own tests check them against written-out examples)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from appraise.engine.cell_columns import (
    blank_mask,
    fast_iso_dates,
    fast_numbers,
    missing_mask,
    strip_texts,
)
from appraise.engine.cells import is_missing, parse_date, parse_number

_PIECES = ["$", "-", ",", ".", " ", "0", "1", "7", "9", "e", "(", ")", "€", "\u00a0", "'"]
cell_texts = st.lists(st.sampled_from(_PIECES), min_size=0, max_size=14).map("".join)


def _reference_number(text: str, decimal: str) -> float | None:
    try:
        return parse_number(text, decimal=decimal)
    except ValueError:
        return None


@settings(max_examples=400, deadline=None)
@given(st.lists(cell_texts, min_size=1, max_size=30), st.sampled_from([".", ","]))
def test_fast_numbers_agree_with_parse_number(texts, decimal):
    values = np.array(texts, dtype=object)
    numbers, decided = fast_numbers(values, decimal)
    for text, v, d in zip(texts, numbers, decided, strict=True):
        if d:
            ref = _reference_number(text, decimal)
            assert ref is not None, text
            assert v == ref and np.signbit(v) == np.signbit(ref), text


def test_common_export_forms_are_decided():
    values = np.array(
        ["$412,500", "412500", " 1,234.5 ", "-$1,200", "0012", "12.", "$1,234,567.89"],
        dtype=object,
    )
    numbers, decided = fast_numbers(values, ".")
    assert decided.all()
    assert numbers.tolist() == [412500.0, 412500.0, 1234.5, -1200.0, 12.0, 12.0, 1234567.89]
    # Left to the per-cell parser: grouping by spaces, units, parentheses, bad grouping.
    hard = np.array(["412 500", "1,234 sq ft", "(1,200)", "12,34", "1.2e5", "N/A"], dtype=object)
    assert not fast_numbers(hard, ".")[1].any()
    comma = np.array(["412.500,00", "12,5", "1.234"], dtype=object)
    n, d = fast_numbers(comma, ",")
    assert d.all() and n.tolist() == [412500.0, 12.5, 1234.0]


def test_typed_numbers_are_taken_as_they_are():
    values = np.array([1.5, 3, np.inf, None, True], dtype=object)
    n, d = fast_numbers(values)
    assert d.tolist() == [True, True, False, False, False]  # inf and bool: the per-cell rules
    assert n[:2].tolist() == [1.5, 3.0]
    floats = np.array([1.0, np.nan, -np.inf])
    assert fast_numbers(floats)[1].tolist() == [True, False, False]


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(1000, 2400), st.integers(0, 13), st.integers(0, 32)).map(
            lambda t: f"{t[0]:04d}-{t[1]:02d}-{t[2]:02d}"
        )
        | st.sampled_from(["2024-3-5", "05/03/2024", "", "2024-02-30", " 2024-02-29 "]),
        min_size=1,
        max_size=20,
    )
)
def test_fast_iso_dates_agree_with_parse_date(texts):
    values, decided = fast_iso_dates(np.array(texts, dtype=object))
    for text, v, d in zip(texts, values, decided, strict=True):
        if d:
            reading = parse_date(text)
            assert reading.form == "iso"
            assert v == np.datetime64(reading.value, "ns"), text


def test_missing_and_blank_masks_agree_with_the_cell_rules():
    cells = ["", "  ", "N/A", " na ", "#N/A", "-", "?", "0", "x", None, np.nan, 3.0, "None"]
    values = np.array(cells, dtype=object)
    assert missing_mask(values).tolist() == [is_missing(c) for c in cells]
    blank = [
        c is None or (isinstance(c, float) and c != c) or (isinstance(c, str) and not c.strip())
        for c in cells
    ]
    assert blank_mask(values).tolist() == blank
    assert missing_mask(np.array([1.0, np.nan])).tolist() == [False, True]
    assert pd.Series(missing_mask(np.array([], dtype=object))).empty


@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.text(alphabet=" \t\n\r\x0b\x0c\x1c\x1f\xa0\u2003ab1,$", max_size=8), max_size=20)
)
def test_strip_texts_is_str_strip(texts):
    values = np.array(texts, dtype=object)
    assert strip_texts(values).tolist() == [t.strip() for t in texts]
