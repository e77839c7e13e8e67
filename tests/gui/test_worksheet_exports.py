"""The worksheet tab's exports: every table to one workbook or CSVs, the sales with
their results, and the paper of the user's locale."""

from __future__ import annotations

import openpyxl
from conftest import open_and_wait

from appraise.report.paper import default_page_size


def test_exports_from_the_window(qtbot, window, sample_copy, tmp_path):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    qtbot.waitUntil(lambda: s.diagnostics is not None, timeout=30_000)
    view = window.worksheet_view
    assert view.page_size.currentText() == default_page_size()
    view.refresh()
    assert view.sales_button.isEnabled()
    (book,) = view.export_tables(tmp_path / "tables.xlsx")
    names = openpyxl.load_workbook(book).sheetnames
    for key in ("coefficients", "fit", "ratio_study", "exclusions", "sales"):
        assert key in names
    written = view.export_tables(tmp_path / "csv")
    assert {p.stem for p in written} >= {"coefficients", "sales"}
    path = view.export_sales(tmp_path / "sales.xlsx")
    ws = openpyxl.load_workbook(path)["sales"]
    assert ws.max_row - 1 == s.sales.source.rows_in_file
