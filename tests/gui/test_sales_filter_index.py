"""The sales filter's search index: the same lines as formatting every cell one by one,
and for a large table built on a pool thread, a filter typed meanwhile applying when it is
ready (the expected counts come from pandas on the sample export)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from conftest import WAIT_MS, open_and_wait

from appraise.gui.sales_view import SalesTableModel, search_text
from appraise.report.numbers import plain

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"


def _one_by_one(rows, reasons, values) -> list[str]:
    """The index the straightforward way: every cell through plain(), joined, lower-cased."""
    out = []
    for i, r in enumerate(rows):
        cells = [str(r), reasons[i], *(plain(v[i]) for v in values)]
        out.append("\t".join(cells).lower())
    return out


def test_index_equals_formatting_each_cell():
    rng = np.random.default_rng(4)
    n = 500
    values = [
        rng.normal(44.04, 0.03, n).round(6).astype(object),
        np.array(rng.choice(["Old Mill", "HERONMOOR", None], n), dtype=object),
        pd.Series(
            pd.Timestamp("2024-01-01") + pd.to_timedelta(rng.integers(0, 400, n), "D")
        ).to_numpy(dtype=object),
        np.round(rng.lognormal(12, 0.3, n), -2).astype(object),
        np.array([1.5, np.nan, 2.0, 12345.0, 0.000012] * (n // 5), dtype=object),
    ]
    rows = np.arange(2, n + 2)
    reasons = ["" if i % 9 else "Price is missing (import)" for i in range(n)]
    assert search_text(rows, reasons, values).to_pylist() == _one_by_one(rows, reasons, values)


def test_large_table_filter_waits_for_the_index(qtbot, window, sample_copy, monkeypatch):
    monkeypatch.setattr(SalesTableModel, "BACKGROUND_FROM", 10)  # the sample counts as large
    open_and_wait(qtbot, window, sample_copy, companions=True)
    view = window.sales_view
    model = view.model
    model.wait_for_index()
    qtbot.waitUntil(lambda: not model.indexing, timeout=WAIT_MS)
    # the sample's workbook holds the same sales as its CSV export (see test_window.py)
    wb = pd.read_excel(SAMPLE / "ashcombe_sales.xlsx", sheet_name="Sales")
    expected = int((wb["Neighbourhood"] == "Heronmoor").sum())
    qtbot.keyClicks(view.filter_edit, "heronMOOR")
    qtbot.waitUntil(lambda: model.rowCount() == expected, timeout=WAIT_MS)
    # reasons change (a refit): the index is rebuilt on the pool and the filter re-applied
    model.refresh_reasons()
    qtbot.waitUntil(lambda: not model.indexing and model.rowCount() == expected, timeout=WAIT_MS)
    assert view.count_label.text().startswith(f"{expected:,} of ")
    view.filter_edit.clear()
    qtbot.waitUntil(
        lambda: model.rowCount() == window.session.sales.source.rows_in_file, timeout=WAIT_MS
    )


def test_number_columns_factorised_by_arrow_read_as_pandas_would():
    # A typed number column is hashed by Arrow (the interpreter lock stays free); each
    # row must still map to its own value, NaN to missing, as pandas.factorize gives it.
    from appraise.gui.sales_view import SalesColumn

    rng = np.random.default_rng(8)
    n = 2_000
    columns = [
        pd.Series(np.where(rng.random(n) < 0.1, np.nan, rng.normal(0, 1e5, n).round(1))),
        pd.Series(rng.integers(-3, 40, n)),
        pd.Series(rng.random(n) < 0.5),
        pd.Series(np.array([0.0, np.inf, -np.inf, np.nan, 1e-7] * (n // 5))),
    ]
    for series in columns:
        col = SalesColumn(series, np.array([None, 7], dtype=object))
        codes, uniques = col.factorized()
        got = [None if c < 0 else uniques[c] for c in codes]
        want = [None if pd.isna(v) else v for v in [*series.tolist(), None, 7]]
        assert [plain(v) for v in got] == [plain(v) for v in want]
        ref_codes, _ = pd.factorize(series.to_numpy(), use_na_sentinel=True)
        assert np.array_equal(codes[:n], ref_codes)  # numbered by first appearance, too
