"""Undo and redo of every change to the model, roles, exclusions and subject.

References: the fits after an undo are compared with statsmodels OLS run directly on the
design the engine built (the estimator of record), and with the fit before the change.
"""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from conftest import WAIT_MS, open_and_wait
from numpy.testing import assert_allclose
from PySide6.QtCore import Qt
from PySide6.QtGui import QKeySequence

from appraise.engine.roles import RoleMap


def _settle(qtbot, s) -> None:
    qtbot.waitUntil(
        lambda: s.pending_tasks == 0 and not s.is_busy and s.fit_current, timeout=WAIT_MS
    )


def _coefs(fit) -> np.ndarray:
    return np.array([t.coef for t in fit.terms])


def test_edit_menu_has_undo_and_redo_with_the_usual_keys(window):
    undo, redo = window.undo_action, window.redo_action
    assert QKeySequence("Ctrl+Z") in undo.shortcuts()
    assert QKeySequence("Ctrl+Shift+Z") in redo.shortcuts()
    edit = next(a.menu() for a in window.menuBar().actions() if a.text() == "&Edit")
    assert undo in edit.actions() and redo in edit.actions()
    assert not undo.isEnabled() and not redo.isEnabled()  # nothing done yet


def test_deleting_a_feature_is_undone_and_the_fit_comes_back(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    _settle(qtbot, s)
    original_spec, original = s.spec, _coefs(s.fit)
    assert not window.undo_action.isEnabled()  # opening a file is not an undoable step
    rows = window.model_editor.features.rows
    gone = rows[5].expression  # log(lot_area)
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.mouseClick(rows[5].remove, Qt.MouseButton.LeftButton)
    _settle(qtbot, s)
    assert gone not in s.spec.features
    assert window.undo_action.text() == f"&Undo remove feature {gone}"
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        window.undo_action.trigger()
    _settle(qtbot, s)
    assert s.spec == original_spec
    assert [r.expression for r in window.model_editor.features.rows] == list(original_spec.features)
    assert_allclose(_coefs(s.fit), original, rtol=1e-12, atol=0)
    # the estimator of record on the same design gives the same numbers
    ref = sm.OLS(s.fit.y, s.fit.X).fit()
    assert_allclose(_coefs(s.fit), ref.params, rtol=1e-8, atol=0)
    assert window.redo_action.isEnabled()
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        window.redo_action.trigger()
    _settle(qtbot, s)
    assert gone not in s.spec.features
    assert gone not in [r.expression for r in window.model_editor.features.rows]


def test_exclusion_and_subject_edits_undo_in_order(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    _settle(qtbot, s)
    row = int(s.fit.rows[3])
    s.exclude_sale(row, "sold to a neighbour")
    _settle(qtbot, s)
    assert [e.row for e in s.user_exclusions] == [row]
    # typing a new living area letter by letter is one step
    editor = window.subject_view.editors["living_area"]
    old_area = s.subject["living_area"]
    editor.clear()
    for ch in "2100":
        qtbot.keyClicks(editor, ch)
    _settle(qtbot, s)
    assert s.subject["living_area"] == "2100"
    assert window.undo_action.text() == "&Undo change the subject's living area"
    window.undo_action.trigger()
    _settle(qtbot, s)
    assert s.subject["living_area"] == old_area
    assert editor.text() == str(old_area)
    assert [e.row for e in s.user_exclusions] == [row]  # the older step is still in place
    assert window.undo_action.text() == f"&Undo exclude the sale at row {row}"
    window.undo_action.trigger()
    _settle(qtbot, s)
    assert s.user_exclusions == ()
    assert row in set(int(r) for r in s.fit.rows)
    window.redo_action.trigger()
    _settle(qtbot, s)
    assert [e.row for e in s.user_exclusions] == [row]
    assert row not in set(int(r) for r in s.fit.rows)


def test_a_role_change_is_undone_by_reading_the_file_again(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    _settle(qtbot, s)
    before = dict(s.sales.roles.columns)
    assert "bedrooms" in before
    changed = RoleMap({r: c for r, c in before.items() if r != "bedrooms"})
    with qtbot.waitSignal(s.loadFinished, timeout=WAIT_MS):
        s.set_roles(changed)
    _settle(qtbot, s)
    assert s.sales.roles.column("bedrooms") is None
    assert window.undo_action.text().startswith("&Undo change the column role")
    with qtbot.waitSignal(s.loadFinished, timeout=WAIT_MS):
        window.undo_action.trigger()
    _settle(qtbot, s)
    assert dict(s.sales.roles.columns) == before
    assert window.roles_view.role_map().column("bedrooms") == before["bedrooms"]
    assert window.redo_action.isEnabled() and not window.history._expect


def test_opening_another_file_starts_a_new_history(qtbot, window, sample_copy, tmp_path):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    _settle(qtbot, s)
    s.exclude_sale(int(s.fit.rows[0]), "duplicate listing")
    _settle(qtbot, s)
    assert window.undo_action.isEnabled()
    other = tmp_path / "other_sales.csv"
    other.write_bytes(sample_copy.read_bytes())
    open_and_wait(qtbot, window, other, companions=False)
    assert not window.undo_action.isEnabled()
    assert window.history.stack.count() == 0
