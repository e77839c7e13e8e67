"""The first screen: what to open, recent files, the sample town; and the F1 help window.

References: sample_data/README.md (the sample town has 600 usable sales); the help's
content is checked against the engine's own tables of functions and roles.
"""

from __future__ import annotations

import shutil

from conftest import SAMPLE, WAIT_MS
from PySide6.QtCore import Qt

from appraise.engine.functions import FUNCTIONS
from appraise.engine.roles import ROLES
from appraise.gui.start_page import NEXT_STEPS


def test_an_empty_window_opens_on_the_start_page(window):
    assert window.centre_stack.currentWidget() is window.start_page
    assert not window.data_dock.isVisible() and not window.subject_dock.isVisible()
    page = window.start_page
    for button in (page.open_sales_button, page.open_workfile_button, page.sample_button):
        assert button.isVisible() and button.isEnabled()
    text = page.next_steps.text()
    assert len(NEXT_STEPS) == 2 and all(line in text for line in NEXT_STEPS)


def test_the_sample_button_leads_to_a_fitted_model(qtbot, window):
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished, s.valuationChanged], timeout=WAIT_MS):
        qtbot.mouseClick(window.start_page.sample_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    assert window.centre_stack.currentWidget() is window.centre_tabs
    assert window.data_dock.isVisible() and window.subject_dock.isVisible()
    # sample_data/README.md: 600 usable sales
    assert s.sales.n_used == 600
    assert s.fit is not None and s.valuation is not None


def test_recent_files_are_listed_and_open_on_activation(qtbot, window, prefs, tmp_path):
    alone = tmp_path / "alone"
    alone.mkdir()
    sample_copy = alone / "ashcombe_sales.csv"  # no model or subject beside it: no question
    shutil.copy(SAMPLE / "ashcombe_sales.csv", sample_copy)
    gone = alone / "moved_away.csv"
    prefs.add_recent(str(gone))
    prefs.add_recent(str(sample_copy))
    page = window.start_page
    assert page.recent.count() == 2
    first, second = page.recent.item(0), page.recent.item(1)
    assert first.data(Qt.ItemDataRole.UserRole) == str(sample_copy)
    assert first.flags() & Qt.ItemFlag.ItemIsEnabled
    assert "(missing)" in second.text()
    assert not second.flags() & Qt.ItemFlag.ItemIsEnabled
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished], timeout=WAIT_MS):
        window.start_page.recent.itemActivated.emit(first)  # what a double-click or Enter does
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    assert s.sales_path.resolve() == sample_copy.resolve()
    assert window.centre_stack.currentWidget() is window.centre_tabs


def test_f1_opens_the_help_with_syntax_roles_and_glossary(qtbot, window):
    keys = {k.toString() for k in window.actions_.help.shortcuts()}
    assert "F1" in keys
    window.actions_.help.trigger()
    view = window.help_view
    assert view is not None and view.isVisible()
    text = view.text.toPlainText()
    for info in FUNCTIONS.values():
        assert info.signature in text
    for role in ROLES:
        assert role in text
    for term in ("COD", "PRD", "PRB", "Leverage", "Cook's distance", "Prediction interval"):
        assert term in text
    view.search.setText("smearing")  # not in the help: nothing to find
    assert not view.find_next()
    view.search.setText("backquotes")
    assert view.find_next()
    view.close()
