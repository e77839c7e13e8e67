"""The importer's vectorised paths (the C parser for regular CSV files, typed Parquet
number columns taken as they are, numbers, ISO dates and missing markers decided at once)
change nothing: on every file the table, the exclusion log and the notes equal those of
the row-by-row, cell-by-cell reading, which is the reference (its rules are checked against
written-out examples in test_importing*.py)."""

from __future__ import annotations

import csv
import datetime as dt
import io
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from pandas.testing import assert_frame_equal

from appraise.engine import csv_reading, importing
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
        m.setattr(csv_reading, "_read_csv_columns", lambda *args: None)
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
    opener = lambda: open(path, "rb")  # noqa: E731, SIM115
    scan = csv_reading.scan_csv(opener, str(path))
    assert csv_reading._read_csv_columns(opener, scan, ",", lambda f, r: None) is None
    table = importing.load_sales(path)
    assert [e.reason.split(":")[0] for e in table.excluded] == ["too many values"]


# --- reading in chunks -----------------------------------------------------------------
# The file is parsed and coded CHUNK_ROWS rows at a time (appraise/engine/csv_reading.py).
# The reference is the same file read in one chunk: cutting it anywhere changes nothing,
# on the C parser's path and on the row-by-row path alike.


def _in_chunks(monkeypatch, path: Path, rows: int, *, row_by_row: bool = False):
    with monkeypatch.context() as m:
        m.setattr(csv_reading, "CHUNK_ROWS", rows)
        if row_by_row:
            m.setattr(csv_reading, "_read_csv_columns", lambda *args: None)
        return importing.load_sales(path)


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(exports(), st.integers(1, 4))
def test_chunks_of_any_size_read_the_same(monkeypatch, tmp_path, text, rows):
    path = tmp_path / "export.csv"
    path.write_text(text, encoding="utf-8")
    try:
        whole = importing.load_sales(path)
    except importing.DataError as exc:
        for row_by_row in (False, True):
            with pytest.raises(type(exc)) as cut:
                _in_chunks(monkeypatch, path, rows, row_by_row=row_by_row)
            assert str(cut.value) == str(exc)
        return
    _same(_in_chunks(monkeypatch, path, rows), whole)
    _same(_in_chunks(monkeypatch, path, rows, row_by_row=True), whole)


def test_a_long_row_after_the_first_chunks_is_found(monkeypatch, tmp_path):
    lines = ["Sale ID,Sale Price"] + [f"S-{i},{300000 + i}" for i in range(50)]
    lines[41] += ",extra"  # file row 42: one value too many, in the ninth chunk of five rows
    path = tmp_path / "late.csv"
    path.write_text("\n".join(lines) + "\n\n\n", encoding="utf-8")
    table = _in_chunks(monkeypatch, path, 5)
    assert [(e.row, e.reason.split(":")[0]) for e in table.excluded] == [(42, "too many values")]
    assert table.n_used == 49
    assert "2 blank rows after the last sale ignored" in table.notes


def test_the_first_bad_byte_is_found_however_the_file_is_cut(monkeypatch, tmp_path):
    body = "".join(f"S-{i},{300000 + i},Old Mill\n" for i in range(3000))
    data = ("\ufeffSale ID,Sale Price,Neighbourhood\n" + body).encode("utf-8")
    data += "S-x,310000,Caf\xe9 Row\n".encode("cp1252")  # one Windows-1252 byte near the end
    path = tmp_path / "mixed.csv"
    path.write_bytes(data)
    try:  # the reference: Python's own codec on the bytes after the byte-order mark
        data[3:].decode("utf-8")
    except UnicodeDecodeError as exc:
        expected = exc.start
    for block in (7, 4096, 1 << 22):  # scanning blocks smaller than a row, and the default
        with monkeypatch.context() as m:
            m.setattr(csv_reading, "_BLOCK", block)
            table = importing.load_sales(path)
        assert f"file is not UTF-8 (byte {expected}); read as Windows-1252 (cp1252) text" in (
            table.notes
        )
        assert table.frame["Neighbourhood"].iloc[-1] == "Caf\xe9 Row"
        assert table.n_used == 3001


def test_utf16_files_stream_too(tmp_path):
    text = "Sale ID,Sale Price\n" + "".join(f"S-{i},{300000 + i}\n" for i in range(500))
    path = tmp_path / "wide.csv"
    path.write_bytes(text.encode("utf-16"))  # with its byte-order mark
    table = importing.load_sales(path)
    assert "file is UTF-16 text" in table.notes
    assert table.n_used == 500 and table.frame["Sale Price"].iloc[-1] == 300499


def test_reading_reports_progress_as_the_bytes_are_read(monkeypatch, tmp_path):
    path = tmp_path / "sales.csv"
    path.write_text(
        "Sale ID,Sale Price\n" + "".join(f"S-{i},{300000 + i}\n" for i in range(1000)),
        encoding="utf-8",
    )
    seen: list[tuple[float, str]] = []
    with monkeypatch.context() as m:
        m.setattr(csv_reading, "CHUNK_ROWS", 100)
        importing.load_sales(path, progress=lambda f, msg: seen.append((f, msg)))
    reading = [(f, msg) for f, msg in seen if msg.startswith("reading rows")]
    assert len(reading) >= 10  # one report a chunk
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0
    assert reading[-1][1] == "reading rows (1,000 so far)"


def test_memory_is_set_by_a_chunk_not_by_the_file(monkeypatch, tmp_path):
    """A 25 MiB file (200,000 rows, long remarks): a reader that holds the file's bytes
    or its decoded text passes 40 MiB; streamed and coded a chunk at a time the whole read
    stays under 30 MiB (16 MiB when this test was written)."""
    import tracemalloc

    rng = np.random.default_rng(11)
    n = 200_000
    frame = pd.DataFrame(
        {
            "Sale ID": [f"S-{i % 5000}" for i in range(n)],  # repeated: no duplicate checks
            "Sale Price": rng.choice(["$412,500", "$388,000", "299000"], n),
            "Sale Date": rng.choice(["2024-03-05", "2025-01-20"], n),
            "Living Area": rng.choice(["1,850", "2,100", "1,400 sq ft"], n),
            "Neighbourhood": rng.choice(["Old Mill", "Heronmoor"], n),
            "Notes": rng.choice(
                ["seller to leave white goods, garden shed and the workshop lathe; " * 3, ""], n
            ),
        }
    )
    path = tmp_path / "big.csv"
    frame.to_csv(path, index=False)
    with monkeypatch.context() as m:
        m.setattr(csv_reading, "CHUNK_ROWS", 10_000)
        tracemalloc.start()
        try:
            raw = importing._read_csv(path, None)
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
    assert raw.n_rows == n and path.stat().st_size > 25 * 2**20
    assert all(isinstance(c, importing.CodedCells) for c in raw.columns)
    assert peak < 30 * 2**20, f"reading peaked at {peak / 2**20:.1f} MiB"


@settings(max_examples=200, deadline=None)
@given(st.lists(st.text(alphabet="abcé ", max_size=3), max_size=60), st.integers(1, 6))
def test_the_most_frequent_levels_are_those_of_a_full_sort(values, k):
    """A column's most frequent values (the summary of ``appraise data``) equal the first
    ``k`` of all its distinct values sorted by count, then by value."""
    from appraise.engine.sales import _most_frequent

    counts = pd.Series(values, dtype="str").value_counts(sort=False)
    full = sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))[:k]
    assert _most_frequent(counts, k) == full


def test_parquet_text_and_date_columns_read_as_codes_like_python_values(monkeypatch, tmp_path):
    # Text, dates, flags and integers with gaps come out of Arrow as codes into their
    # distinct cells (only those become Python objects); over several row groups the
    # table must read exactly as the same file converted cell by cell with to_pylist.
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(11)
    n = 900
    days = rng.integers(0, 900, n)
    table = pa.table(
        {
            "Sale ID": pa.array([f"Q-{i}" if i % 97 else None for i in range(n)]),
            "Sale Price": pa.array(rng.lognormal(12.8, 0.3, n)),
            "Sale Date": pa.array(
                [None if d % 50 == 0 else dt.date(2023, 1, 1) + dt.timedelta(int(d)) for d in days]
            ),
            "Living Area": pa.array([None if i % 31 == 0 else int(900 + i) for i in range(n)]),
            "Pool": pa.array([None if i % 7 == 0 else bool(i % 2) for i in range(n)]),
            "Region": pa.array(rng.choice(["North", "South", "  Old  Town "], n).tolist()),
        }
    )
    path = tmp_path / "groups.parquet"
    pq.write_table(table, path, row_group_size=128)  # seven row groups: chunked columns
    fast = importing.load_sales(path)
    with monkeypatch.context() as m:
        m.setattr(importing, "_parquet_coded", lambda column: column.to_pylist())
        by_cell = importing.load_sales(path)
    _same(fast, by_cell)
    assert fast.n_used + len(fast.excluded) == n


@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.integers(min_value=-1, max_value=4), max_size=14),
    st.integers(min_value=1, max_value=5),
)
def test_coded_cells_factorise_as_pandas_does(codes, k):
    # Reference: pandas.factorize of the cells themselves (codes by first appearance,
    # only the distinct cells that occur, -1 for a missing cell), whether or not the
    # codes were in that order already (the shortcut) or a cell was blanked.
    from appraise.engine.coded_cells import CodedCells

    codes = [min(c, k - 1) for c in codes]
    uniques = np.array([f"v{i}" for i in range(k)], dtype=object)
    cells = CodedCells(np.array(codes, dtype=np.int32), uniques)
    got_codes, got_uniques = cells.factorized()
    values = np.empty(len(codes), dtype=object)
    values[:] = [None if c < 0 else uniques[c] for c in codes]
    want_codes, want_uniques = pd.factorize(values, use_na_sentinel=True)
    assert got_codes.tolist() == want_codes.tolist()
    assert list(got_uniques) == list(want_uniques)
