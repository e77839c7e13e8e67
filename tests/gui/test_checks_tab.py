"""The Checks tab in a reviewer's words: axis labels, advice naming the window's controls,
the condition number explained, and tables that keep room for their rows.

References: a simulation with known truth (errors whose spread grows with x, so the
studentized Breusch-Pagan test must find uneven spread) for the advice; the engine's own
check-up of the sample town for the rest.
"""

from __future__ import annotations

import numpy as np
from conftest import open_and_wait

from appraise.engine.diagnostics.residual_tests import residual_tests
from appraise.gui.diagnostics_tables import condition_meaning, window_wording
from appraise.gui.diagnostics_view import TABLES_MIN_HEIGHT


def test_spread_advice_names_the_controls_in_the_window():
    rng = np.random.default_rng(14)
    x = rng.uniform(1.0, 10.0, 400)
    X = np.column_stack([np.ones_like(x), x])
    resid = rng.normal(0.0, 0.2 * x)  # spread proportional to x: uneven by construction
    rt = residual_tests(resid, X, cov_type="classical", response="linear")
    assert rt.heteroskedastic
    assert any("model file" in t for t in rt.suggestions)  # the command line's wording
    shown = [window_wording(t) for t in rt.suggestions]
    assert not any("model file" in t or "cov_type" in t for t in shown)
    assert any("choose HC3 in Standard errors" in t for t in shown)
    assert any("choose log price in Response" in t for t in shown)


def test_condition_number_says_what_it_means_for_the_value():
    assert "What helps" in condition_meaning(True)
    assert "value" in condition_meaning(True)
    assert "What helps" not in condition_meaning(False)


def test_checks_tab_reads_plainly_and_its_tables_keep_their_rows(qtbot, window, sample_copy):
    window.resize(1366, 768)
    open_and_wait(qtbot, window, sample_copy, companions=True)
    view = window.diagnostics_view
    window.centre_tabs.setCurrentWidget(view)
    qtbot.waitUntil(lambda: bool(view.figures), timeout=20_000)
    bottom = [f.plot.getAxis("bottom").labelText for f in view.figures]
    left = [f.plot.getAxis("left").labelText for f in view.figures]
    for text in bottom + left:
        assert "½" not in text and "LOO" not in text, text
    cond = view.condition_label.text()
    exceeds = window.session.diagnostics.collinearity.condition.exceeds
    assert ("What helps" in cond) == exceeds
    assert ("distinct enough" in cond) == (not exceeds)
    # the plots and tables share a movable split that neither side can close
    assert not view.split.childrenCollapsible()
    assert view.tabs.height() >= TABLES_MIN_HEIGHT
    table = view.flagged_table
    rows_visible = table.viewport().height() // table.verticalHeader().defaultSectionSize()
    assert rows_visible >= 8
    # the side panels still keep their width (the tab scrolls instead)
    assert window.width() <= 1366


def test_a_county_size_check_up_fills_its_tables_in_the_next_turn(
    qtbot, window, sample_copy, monkeypatch
):
    # From DEFER_TABLES_FROM sales the plots are drawn first and the tables a turn of the
    # event loop later, so the window never holds still for both; the tables still come.
    from appraise.gui import diagnostics_view

    monkeypatch.setattr(diagnostics_view, "DEFER_TABLES_FROM", 1)
    open_and_wait(qtbot, window, sample_copy, companions=True)
    view = window.diagnostics_view
    qtbot.waitUntil(lambda: window.session.diagnostics is not None, timeout=20_000)
    view.figures = []  # force a redraw of the same check-up
    view.sales_model.set_diagnostics(None)
    view.refresh()
    assert view.figures and view.sales_model.rowCount() == 0  # plots now, tables not yet
    d = window.session.diagnostics
    qtbot.waitUntil(lambda: view.sales_model.rowCount() == d.n, timeout=20_000)
