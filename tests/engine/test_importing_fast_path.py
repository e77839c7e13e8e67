"""The importer's vectorised paths (the C parser for regular CSV files, typed Parquet
number columns taken as they are, numbers, ISO dates and missing markers decided at once)
change nothing: on every file the table, the exclusion log and the notes equal those of
the row-by-row, cell-by-cell reading, which is the reference (its rules are checked against
written-out examples in test_importing*.py)."""

from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pandas.testing import assert_frame_equal

from appraise.engine import importing
from appraise.engine.cells import is_missing

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"


def _nothing_decided(values, *args):
    n = len(values)
    return np.full(n, np.nan), np.zeros(n, dtype=bool)


def _no_dates_decided(values):
    n = len(values)
    return np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]"), np.zeros(n, dtype=bool)


def _per_cell_blank(values):
    return np.array(
        [
            v is None or (isinstance(v, float) and v != v) or (isinstance(v, str) and not v.strip())
            for v in values
        ],
        dtype=bool,
    )


def _reference(monkeypatch, path: Path, **kw):
    """load_sales with every fast path switched off: the row-by-row, per-cell reading."""
    with monkeypatch.context() as m:
        m.setattr(importing, "_read_csv_columns", lambda text, delimiter: None)
        m.setattr(importing, "fast_numbers", _nothing_decided)
        m.setattr(importing, "fast_iso_dates", _no_dates_decided)
        m.setattr(importing, "missing_mask", lambda v: np.array([is_missing(x) for x in v], bool))
        m.setattr(importing, "blank_mask", _per_cell_blank)
        read_parquet = importing._read_parquet

        def as_lists(p):
            raw = read_parquet(p)
            raw.columns = [
                [None if isinstance(x, float) and x != x else x for x in c.tolist()]
                if isinstance(c, np.ndarray)
                else c
                for c in raw.columns
            ]
            return raw

        m.setattr(importing, "_read_parquet", as_lists)
        return importing.load_sales(path, **kw)


def _same(a, b) -> None:
    assert_frame_equal(a.frame, b.frame, check_exact=True)
    assert a.excluded == b.excluded
    assert a.notes == b.notes
    assert a.roles == b.roles


def test_the_sample_reads_the_same(monkeypatch):
    path = SAMPLE / "ashcombe_sales.csv"
    _same(importing.load_sales(path), _reference(monkeypatch, path))


PRICES = [
    "$412,500",
    "412500",
    "412 500",
    "(1,200)",
    "N/A",
    "",
    "abc",
    "-5",
    "0",
    "$1,021,000.50",
    "1.2e5",
    "EUR 300.000",
    "  $99,000 ",
    "12,34",
    "$4l2,000",
]
DATES = [
    "2024-03-05",
    "2024-02-30",
    "2024-3-5",
    "5 Mar 2024",
    "March 5, 2024",
    "",
    "n/a",
    "1677-12-31",
    "20240305",
    " 2025-11-30 ",
    "2024/03/05",
    "yesterday",
]
AREAS = ["1,234", "1,234 sq ft", "95 m²", "", "-", "2100", "2,100.5", "big", "0"]
TEXTS = [
    "Old Mill",
    " Heronmoor ",
    "",
    "N/A",
    "Copper Hill",
    "Saltmarsh, End",
    'say "hi"',
    "two\nlines",
    "007",
]
FLAGS = ["Yes", "No", "", "family transfer", "maybe", "Y"]


@st.composite
def exports(draw):
    n = draw(st.integers(2, 25))
    rows = [
        [
            "Sale ID",
            "Sale Price",
            "Sale Date",
            "Living Area",
            "Neighbourhood",
            "Arms Length",
            "Notes",
        ]
    ]
    for i in range(n):
        if draw(st.integers(0, 12)) == 0:
            rows.append([])  # a blank line among the sales
            continue
        row = [
            draw(st.sampled_from([f"S-{i}", f"S-{i // 2}", "", " S-1 "])),
            draw(st.sampled_from(PRICES)),
            draw(st.sampled_from(DATES)),
            draw(st.sampled_from(AREAS)),
            draw(st.sampled_from(TEXTS)),
            draw(st.sampled_from(FLAGS)),
            draw(st.sampled_from(TEXTS + ["12", "3.5"])),
        ]
        rows.append(row[: draw(st.integers(5, 7))])  # short rows too
    rows += [[]] * draw(st.integers(0, 2)) + ([["", " "]] if draw(st.booleans()) else [])
    delimiter = draw(st.sampled_from([",", ";"]))
    buf = io.StringIO()
    csv.writer(
        buf, delimiter=delimiter, lineterminator=draw(st.sampled_from(["\n", "\r\n"]))
    ).writerows(rows)
    return buf.getvalue()


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(exports())
def test_messy_exports_read_the_same(monkeypatch, tmp_path, text):
    path = tmp_path / "export.csv"
    path.write_text(text, encoding="utf-8")
    try:
        fast = importing.load_sales(path)
    except importing.DataError as exc:
        with pytest.raises(type(exc)) as ref:
            _reference(monkeypatch, path)
        assert str(ref.value) == str(exc)
        return
    _same(fast, _reference(monkeypatch, path))


def test_typed_parquet_reads_as_the_cells_would(monkeypatch, tmp_path):
    rng = np.random.default_rng(3)
    n = 300
    frame = pd.DataFrame(
        {
            "Sale ID": [f"P-{i}" for i in range(n)],
            "Sale Price": np.where(rng.random(n) < 0.05, np.nan, rng.lognormal(12.8, 0.3, n)),
            "Sale Date": pd.Timestamp("2024-01-01") + pd.to_timedelta(rng.integers(0, 700, n), "D"),
            "Living Area": np.where(rng.random(n) < 0.05, np.inf, rng.integers(600, 4000, n)),
            "Beds": rng.integers(1, 6, n),
            "Region": rng.choice(["North", "South", None], n),
        }
    )
    frame.loc[3, "Sale Price"] = -10.0
    path = tmp_path / "sales.parquet"
    frame.to_parquet(path)
    fast = importing.load_sales(path)
    _same(fast, _reference(monkeypatch, path))
    assert len(fast.excluded) >= 1


def test_a_long_row_is_read_row_by_row(tmp_path):
    path = tmp_path / "long.csv"
    path.write_text('Sale ID,Sale Price\nA,"$1,000"\nB,2000,extra\n', encoding="utf-8")
    assert importing._read_csv_columns(path.read_text(), ",") is None
    table = importing.load_sales(path)
    assert [e.reason.split(":")[0] for e in table.excluded] == ["too many values"]
