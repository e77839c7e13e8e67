"""The sales table with 50,000 sales: lazy cells, sorting and filtering by whole columns.

The expected rows and cells come from pandas on the same Parquet file (sort_values with a
stable sort, str.contains), not from the table model's own code. The sales are invented
(a table test, no estimate is checked).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from conftest import WAIT_MS
from PySide6.QtCore import Qt

from appraise.gui.sales_view import SalesTableModel
from appraise.report.numbers import MISSING

N = 50_000
REGIONS = np.array(["Old Mill", "Heronmoor", "copper Hill", "Saltmarsh End"], dtype=object)
NO_PRICE = (17, 4_000, 31_337)  # positions in the file whose price is blank
DISPLAY, USER = Qt.ItemDataRole.DisplayRole, Qt.ItemDataRole.UserRole


def _frame() -> pd.DataFrame:
    rng = np.random.default_rng(11)
    price = np.round(rng.lognormal(12.4, 0.35, N), -2)
    price[list(NO_PRICE)] = np.nan
    return pd.DataFrame(
        {
            "Sale ID": [f"L-{i:06d}" for i in range(N)],
            "Sale Price": price,
            "Sale Date": pd.Timestamp("2024-01-01") + pd.to_timedelta(rng.integers(0, 700, N), "D"),
            "Living Area (sq ft)": rng.uniform(600, 4200, N).round(),
            "Year Built": rng.integers(1890, 2024, N),
            "Neighbourhood": REGIONS[rng.integers(0, len(REGIONS), N)],
        }
    )


@pytest.fixture(scope="module")
def sales_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("large") / "large_sales.parquet"
    _frame().to_parquet(path, index=False)
    return path


@pytest.fixture
def loaded(qtbot, session, sales_file):
    with qtbot.waitSignal(session.loadFinished, timeout=WAIT_MS):
        session.load_sales(sales_file)
    model = SalesTableModel(session)
    yield session, model
    model.wait_for_index()


def _column(model: SalesTableModel, name: str) -> int:
    headers = [model.headerData(c, Qt.Orientation.Horizontal, DISPLAY) for c in range(2 + 6)]
    return headers.index(name)


def _ids(model: SalesTableModel, positions) -> list:
    col = _column(model, "Sale ID")
    return [model.data(model.index(int(p), col), DISPLAY) for p in positions]


def test_cells_are_formatted_when_asked_and_columns_stay_typed(loaded):
    session, model = loaded
    frame = _frame()
    assert model.rowCount() == N
    # nothing per row was made on load: the typed columns are the file's arrays
    assert [str(c.cells.dtype) for c in model._columns[1:3]] == ["float64", "datetime64[ns]"]
    assert model._reason_codes.dtype == np.int32
    position = 29_876  # ordered by file row: file row 29,878 is shown here
    assert model.data(model.index(position, 0), USER) == position + 2
    row = frame.iloc[position]
    cells = [model.data(model.index(position, c), DISPLAY) for c in range(8)]
    assert cells[0] == str(position + 2)
    assert cells[1] == ""
    assert cells[2] == row["Sale ID"]
    assert cells[3] == f"{int(row['Sale Price']):,}"
    assert cells[4] == row["Sale Date"].date().isoformat()
    assert cells[5] == str(int(row["Living Area (sq ft)"]))  # no area reaches 10,000
    assert cells[6] == str(int(row["Year Built"]))
    assert cells[7] == row["Neighbourhood"]
    right = int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    assert model.data(model.index(position, 3), Qt.ItemDataRole.TextAlignmentRole) == right
    assert model.data(model.index(position, 7), Qt.ItemDataRole.TextAlignmentRole) is None


def test_left_out_sales_show_their_reason_grey(loaded):
    session, model = loaded
    for p in NO_PRICE:
        pos = model.position_of(p + 2)
        reason = model.data(model.index(pos, 1), DISPLAY)
        assert reason == "price is missing (import)"
        assert model.data(model.index(pos, 0), Qt.ItemDataRole.ForegroundRole) is not None
        assert model.data(model.index(pos, 1), Qt.ItemDataRole.ToolTipRole) == f"Left out: {reason}"
        # the importer keeps a left-out sale's id, and nothing else of it
        assert _ids(model, [pos]) == [f"L-{p:06d}"]
        assert model.data(model.index(pos, 3), DISPLAY) == ""
    used = model.position_of(1_002)
    assert model.data(model.index(used, 1), DISPLAY) == ""
    assert model.data(model.index(used, 0), Qt.ItemDataRole.ForegroundRole) is None
    # a sale the user leaves out gets its reason, marked as the user's
    session.exclude_sale(1_002, "sold with the farm next door")
    model.refresh_reasons()
    assert model.data(model.index(used, 1), DISPLAY) == "sold with the farm next door (you)"
    assert model.data(model.index(used, 2), Qt.ItemDataRole.ForegroundRole) is not None


@pytest.mark.parametrize(
    ("name", "descending"),
    [("Sale Price", True), ("Sale Date", False), ("Neighbourhood", False), ("Year Built", True)],
)
def test_sorting_gives_the_rows_pandas_gives(loaded, name, descending):
    _session, model = loaded
    frame = _frame()
    model.sort(
        _column(model, name),
        Qt.SortOrder.DescendingOrder if descending else Qt.SortOrder.AscendingOrder,
    )
    # the importer's left-out rows (no price) have only their id: they sort last
    used = frame.drop(index=list(NO_PRICE))
    keys = used[name].str.lower() if name == "Neighbourhood" else used[name]
    expected = used.loc[keys.sort_values(ascending=not descending, kind="stable").index, "Sale ID"]
    expected = [*expected, *(f"L-{p:06d}" for p in NO_PRICE)]
    positions = np.r_[0:50, 20_000:20_050, N - 60 : N]
    assert _ids(model, positions) == [expected[p] for p in positions]
    assert model.rowCount() == N


def test_sorting_by_reason_puts_the_left_out_first_or_last(loaded):
    _session, model = loaded
    model.sort(1, Qt.SortOrder.AscendingOrder)
    assert [model.row_at(p) for p in range(3)] == [p + 2 for p in NO_PRICE]
    assert model.data(model.index(3, 1), DISPLAY) == ""
    model.sort(1, Qt.SortOrder.DescendingOrder)  # missing (used sales) still last
    assert [model.row_at(p) for p in range(3)] == [p + 2 for p in NO_PRICE]


def test_filter_finds_the_rows_pandas_finds(loaded):
    _session, model = loaded
    frame = _frame().drop(index=list(NO_PRICE))  # a left-out sale keeps only its id
    model.sort(_column(model, "Sale Price"), Qt.SortOrder.AscendingOrder)
    model.set_filter("HERONmoor")
    expected = frame["Neighbourhood"].str.contains("heronmoor", case=False)
    assert model.rowCount() == int(expected.sum())
    shown = {model.row_at(p) for p in range(model.rowCount())}
    assert shown == {int(i) + 2 for i in frame.index[expected]}
    prices = [model.data(model.index(p, 3), DISPLAY) for p in range(model.rowCount())]
    numbers = [float(t.replace(",", "")) for t in prices if t not in ("", MISSING)]
    assert numbers == sorted(numbers)  # still sorted by price
    model.set_filter("l-031337")  # a left-out sale is found by its id and its reason
    assert [model.row_at(p) for p in range(model.rowCount())] == [31_337 + 2]
    model.set_filter("price is missing")
    assert sorted(model.row_at(p) for p in range(model.rowCount())) == [p + 2 for p in NO_PRICE]
    model.set_filter("")
    assert model.rowCount() == N


def test_a_large_table_searches_on_the_pool(qtbot, loaded, monkeypatch):
    session, _model = loaded
    monkeypatch.setattr(SalesTableModel, "BACKGROUND_FROM", 10_000)  # 50,000 counts as large
    model = SalesTableModel(session)
    frame = _frame().drop(index=list(NO_PRICE))  # a left-out sale keeps only its id
    qtbot.waitUntil(lambda: not model.indexing, timeout=WAIT_MS)
    expected = int(frame["Neighbourhood"].str.contains("hill", case=False).sum())
    with qtbot.waitSignal(model.filterApplied, timeout=WAIT_MS):
        model.set_filter("hill")
        assert model.searching  # set_filter returned before the search ran
    assert model.rowCount() == expected
    # a longer text narrows the rows found: they stand in until its own search lands
    with qtbot.waitSignal(model.filterApplied, timeout=WAIT_MS):
        model.set_filter("copper hill")
        assert model.rowCount() == expected
    assert model.rowCount() == expected  # every "hill" here is Copper Hill
    with qtbot.waitSignal(model.filterApplied, timeout=WAIT_MS):
        model.set_filter("old mill")
        assert model.rowCount() == N  # not a narrowing: every row until the search lands
    assert model.rowCount() == int((frame["Neighbourhood"] == "Old Mill").sum())
    model.wait_for_index()


@pytest.mark.parametrize("descending", [False, True])
@pytest.mark.parametrize("kind", ["float", "int", "int at its minimum", "text", "dates"])
def test_stable_sort_gives_the_positions_pandas_gives(kind, descending):
    from appraise.gui.table_sorting import stable_sort

    rng = np.random.default_rng(3)
    n = 20_000
    keys = {
        "float": pd.Series(np.where(rng.random(n) < 0.05, np.nan, rng.integers(0, 300, n) / 4)),
        "int": pd.Series(rng.integers(-50, 50, n)),
        "int at its minimum": pd.Series(np.r_[np.iinfo(np.int64).min, rng.integers(-5, 5, n - 1)]),
        "text": pd.Series(rng.choice(["b", "a", None, "c"], n), dtype=object),
        "dates": pd.Series(pd.to_datetime(rng.integers(0, 40, n), unit="D")).where(
            rng.random(n) > 0.1
        ),
    }[kind]
    # ties (few distinct keys) keep their original order; missing values last
    expected = keys.sort_values(ascending=not descending, kind="stable", na_position="last")
    got = stable_sort(keys, descending)
    assert got.tolist() == expected.index.tolist()


def test_search_index_is_every_cell_as_shown_lower_cased(loaded):
    """The index line of each row equals formatting its cells one by one with plain()."""
    from appraise.gui.sales_view import SalesColumn, search_index
    from appraise.report.numbers import plain

    _session, model = loaded
    got = search_index(model._rows, model._reason_codes, model._reason_texts, model._columns)
    shown = [0, 17, 4_000, 29_876, N - 1]  # in file order; 17 and 4,000 are left out
    for p in shown:
        i = int(model._by_row[p])
        cells = [str(model._rows[i]), model.reason_at(i)]
        cells += [
            plain(c.cell(i)) if c.cell(i) is not None else plain(None) for c in model._columns
        ]
        assert got[i].as_py() == "\t".join(cells).lower()
    # a text column with letters Arrow and Python lower-case differently, and blanks
    text = pd.Series(["İzmir Row", "ÉCOLE", "", None, "Old Mill"], dtype="str")
    column = SalesColumn(text, np.array(["AV-9", None], dtype=object))
    lines = search_index(np.arange(7), np.full(7, -1), [], [column]).to_pylist()
    missing = plain(None).lower()
    assert lines == [  # the row, an empty reason, the cell
        f"0\t\t{'İzmir Row'.lower()}",
        "1\t\técole",
        f"2\t\t{missing}",
        f"3\t\t{missing}",
        "4\t\told mill",
        "5\t\tav-9",
        f"6\t\t{missing}",
    ]


def test_a_header_click_sorts_once(qtbot, loaded, monkeypatch):
    from PySide6.QtWidgets import QTableView

    import appraise.gui.sales_view as sales_view

    _session, model = loaded
    table = QTableView()
    qtbot.addWidget(table)
    table.setModel(model)
    table.setSortingEnabled(True)
    calls: list[bool] = []
    real = sales_view.stable_sort
    monkeypatch.setattr(sales_view, "stable_sort", lambda k, d: calls.append(d) or real(k, d))
    table.sortByColumn(_column(model, "Sale Price"), Qt.SortOrder.DescendingOrder)
    assert calls == [True]  # Qt asks twice (the view, then the header's indicator)
    first = model.data(model.index(0, _column(model, "Sale Price")), DISPLAY)
    assert first == f"{int(_frame()['Sale Price'].max()):,}"
    table.sortByColumn(_column(model, "Sale Price"), Qt.SortOrder.AscendingOrder)
    assert calls == [True, False]
