"""The subject form and the worksheet's subject section use the same labels
(one table, appraise/report/labels.py), and the window's coefficient and check tables
show no print-out headings."""

from __future__ import annotations

from conftest import open_and_wait
from PySide6.QtCore import Qt

from appraise.report.worksheet import build_worksheet


def test_form_labels_are_the_worksheet_labels(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    form = window.subject_view.form
    shown = [
        form.itemAt(i, form.ItemRole.LabelRole).widget().text() for i in range(form.rowCount())
    ]
    assert shown[0] == "Address"
    assert "Bedrooms" in shown and "Effective date" in shown and "Living area (sq ft)" in shown
    (facts,) = build_worksheet(s.fit, s.valuation).section("subject").blocks
    printed = [label for label, _ in facts.rows]
    assert set(printed) <= set(shown)


def test_check_tables_use_the_tools_headings(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    qtbot.waitUntil(lambda: s.diagnostics is not None, timeout=30_000)
    terms = window.diagnostics_view.terms_model
    heads = [terms.headerData(j, Qt.Orientation.Horizontal) for j in range(terms.columnCount())]
    assert "GVIF^(1/(2 df))" not in heads and "Std. error inflation (×)" in heads
    assert "(G)VIF" not in heads and "Variance inflation" in heads


def test_influence_plot_draws_every_sale_alike_with_plain_axis_titles(qtbot, window, sample_copy):
    from appraise.gui.diagnostics_plots import influence_figure

    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    qtbot.waitUntil(lambda: s.diagnostics is not None, timeout=30_000)
    sp = influence_figure(s.diagnostics)
    sizes = set()
    for scatter in sp.scatters:
        sizes.update(float(x) for x in scatter.data["size"])
    assert len(sizes) == 1  # not sized by Cook's distance
    bottom = sp.plot.getAxis("bottom").labelText
    left = sp.plot.getAxis("left").labelText
    assert bottom.startswith("How unusual") and "(leverage)" in bottom
    assert left.startswith("Price gap") and "studentized residual" in left
