"""The model assistant in the window: the same ranked changes as the engine, applied with
one click and taken back with Undo; the whole search with progress, cancel and apply.

References: the engine's own ranking and search (``appraise.engine.suggest``) run directly
on the window's fit, which the command line also prints.
"""

from __future__ import annotations

import shutil

from conftest import SAMPLE, WAIT_MS, open_and_wait
from numpy.testing import assert_allclose

from appraise.engine.modelspec import parse_model
from appraise.engine.suggest.search import (
    SearchSettings,
    build_problem,
    rank_moves,
    spec_after,
    suggest,
)

NAIVE = 'target = "price"\nresponse = "log"\nfeatures = ["log(living_area)", "onehot(region)", "bedrooms"]\n'


def _naive_window(qtbot, window, tmp_path):
    folder = tmp_path / "naive"
    folder.mkdir()
    shutil.copy(SAMPLE / "ashcombe_sales.csv", folder / "ashcombe_sales.csv")
    open_and_wait(qtbot, window, folder / "ashcombe_sales.csv")
    s = window.session
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        s.set_model(parse_model(NAIVE))
    qtbot.waitUntil(lambda: s.fit_current, timeout=WAIT_MS)
    return s


def _open(qtbot, window):
    window.model_editor.open_suggest()
    dialog = window.model_editor.suggest_dialog
    qtbot.waitUntil(lambda: dialog.ranking is not None, timeout=WAIT_MS)
    return dialog


def test_ranked_changes_are_the_engines_and_apply_undoes(qtbot, window, tmp_path):
    s = _naive_window(qtbot, window, tmp_path)
    dialog = _open(qtbot, window)
    expected = rank_moves(build_problem(s.fit), SearchSettings())
    assert dialog.table.rowCount() == len(expected)
    shown = [dialog.table.item(i, 0).text() for i in range(dialog.table.rowCount())]
    assert shown == [m.text() for m in expected]
    assert_allclose([m.gain for m in dialog.ranking.moves], [m.gain for m in expected], rtol=1e-12)
    before = s.spec
    best = expected[0]
    assert best.gain > 0
    wanted = spec_after(before, dialog.ranking.problem, best)
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        dialog.table.selectRow(0)
        dialog.apply_button.click()
    assert s.spec == wanted
    qtbot.waitUntil(lambda: dialog.ranking is not None, timeout=WAIT_MS)  # measured again
    assert dialog.ranking.fit is s.fit
    window.undo_action.trigger()
    assert s.spec == before


def test_whole_search_matches_the_engine_and_is_applied(qtbot, window, tmp_path):
    s = _naive_window(qtbot, window, tmp_path)
    dialog = _open(qtbot, window)
    fit = s.fit
    expected = suggest(fit, SearchSettings())
    dialog.search_button.click()
    qtbot.waitUntil(lambda: dialog.result is not None, timeout=WAIT_MS)
    assert dialog.progress.value() == 100
    assert dialog.result.proposed.features == expected.proposed.features
    text = dialog.report.toPlainText()
    assert "Honest estimate:" in text and "fair-lending" in text and "not an appraisal" in text
    before = s.spec
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        dialog.apply_search_button.click()
    assert s.spec == expected.proposed
    window.undo_action.trigger()
    assert s.spec == before


def test_cancel_stops_the_search_and_changes_nothing(qtbot, window, tmp_path):
    s = _naive_window(qtbot, window, tmp_path)
    dialog = _open(qtbot, window)
    before = s.spec
    dialog.search_button.click()
    assert dialog.cancel_button.isEnabled()
    dialog.cancel_button.click()
    qtbot.waitUntil(lambda: not dialog._searching, timeout=WAIT_MS)
    assert dialog.result is None
    assert "cancelled" in dialog.report.toPlainText()
    assert s.spec == before


def test_editor_button_and_model_menu_open_the_assistant(qtbot, window, tmp_path):
    from PySide6.QtWidgets import QPushButton

    _naive_window(qtbot, window, tmp_path)
    buttons = [b for b in window.model_editor.findChildren(QPushButton) if b.text() == "S&uggest…"]
    assert len(buttons) == 1
    menu_actions = [
        a for m in window.menuBar().actions() for a in m.menu().actions() if m.menu() is not None
    ]
    action = next(a for a in menu_actions if a.text() == "&Suggest changes…")
    action.trigger()
    dialog = window.model_editor.suggest_dialog
    assert dialog.isVisible()
    qtbot.waitUntil(lambda: dialog.ranking is not None, timeout=WAIT_MS)
    assert dialog.table.rowCount() > 0
    assert dialog.wait()


def test_editor_warns_of_a_protected_column_added_by_hand(qtbot, window, tmp_path):
    import pandas as pd

    folder = tmp_path / "planted"
    folder.mkdir()
    df = pd.read_csv(SAMPLE / "ashcombe_sales.csv")
    df["Tract minority share"] = [((i * 37) % 100) / 100 for i in range(len(df))]
    df.to_csv(folder / "sales.csv", index=False)
    open_and_wait(qtbot, window, folder / "sales.csv")
    s = window.session
    spec = parse_model(NAIVE.replace('"bedrooms"', '"bedrooms", "`Tract minority share`"'))
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        s.set_model(spec)
    text = window.model_editor.levels_label.text()
    assert "Tract minority share" in text and "fair-lending guard" in text
