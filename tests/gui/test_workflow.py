"""The whole job as a user does it in the window, checked against outside references.

References:
- sample_data/README.md: the counts of the invented sample (606 rows, 6 left out at
  import, 2 more by the model's missing inputs, 598 fitted).
- statsmodels OLS run directly on sample_data/ashcombe_sales.xlsx, the workbook of
  the 600 importable rows as typed cells, read here with pandas alone (so the
  app's importer is not part of the reference).
- Duan (1983) smearing for the log-response estimate: exp(x0'b) * mean(exp(e)).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from conftest import SAMPLE, WAIT_MS, open_and_wait
from numpy.testing import assert_allclose
from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import QApplication, QInputDialog

from appraise.gui.model_editor import ExpressionRow
from appraise.report.numbers import money


def _workbook() -> pd.DataFrame:
    """The 600 importable sample rows as typed cells (pandas only)."""
    return pd.read_excel(SAMPLE / "ashcombe_sales.xlsx", sheet_name="Sales")


def _row(editor, expression: str) -> ExpressionRow:
    return next(r for r in editor.features.rows if r.expression == expression)


def _answer_next_dialog(qtbot, text: str) -> list[str]:
    """Type ``text`` into the next modal input dialog and press OK, once it is up."""
    seen: list[str] = []

    def answer() -> None:
        dlg = QApplication.activeModalWidget()
        if not isinstance(dlg, QInputDialog):
            QTimer.singleShot(10, answer)
            return
        seen.append(dlg.labelText())
        dlg.setTextValue(text)
        dlg.accept()

    QTimer.singleShot(0, answer)
    return seen


def test_sample_opens_with_model_subject_and_documented_counts(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    # sample_data/README.md, "Expected counts"
    assert s.sales.source.rows_in_file == 606
    assert s.sales.n_used == 600
    assert len(s.sales.excluded) == 6
    assert s.fit.n == 598
    assert window.sales_view.model.rowCount() == 606
    assert window.exclusion_log.model.rowCount() == 8
    assert len(window.model_editor.features.rows) == len(s.spec.features) == 10
    assert s.valuation is not None
    assert window.subject_view.estimate.text() == money(s.valuation.estimate)
    assert "598 sales used" in window.rows_label.text()
    assert "not an appraisal" in window.caution_label.text()


def test_exclusion_log_exports_every_left_out_sale(qtbot, window, sample_copy, tmp_path):
    # sample_data/README.md: 6 rows left out at import and 2 by the model; read back with csv.
    import csv

    open_and_wait(qtbot, window, sample_copy, companions=True)
    out = window.exclusion_log.export(tmp_path / "left_out.csv")
    with out.open(newline="", encoding="utf-8-sig") as fh:  # written with a BOM for Excel
        rows = list(csv.DictReader(fh))
    assert len(rows) == 8
    assert {r["row"] for r in rows} >= {"162", "301", "440", "588"}
    assert sorted({r["source"] for r in rows}) == ["import", "model"]
    xlsx = window.exclusion_log.export(tmp_path / "left_out.xlsx")
    assert xlsx.stat().st_size > 0


def test_edit_model_refits_and_matches_statsmodels(qtbot, window, sample_copy):
    """Start from the starter model, add a term by typing, value the subject, go log."""
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=False)
    assert s.spec.features == ("living_area",)
    editor = window.model_editor

    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.keyClicks(editor.new_feature, "bathrooms")
        qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    assert [r.expression for r in editor.features.rows] == ["living_area", "bathrooms"]

    wb = _workbook().dropna(subset=["Living Area (sq ft)", "Baths"])
    X = sm.add_constant(wb[["Living Area (sq ft)", "Baths"]].to_numpy(float))
    price = wb["Sale Price"].to_numpy(float)
    ref = sm.OLS(price, X).fit()
    fit = s.fit
    assert fit.n == len(wb) == 599  # README: one used row lacks living area
    assert_allclose(fit.params, ref.params, rtol=1e-9)
    assert_allclose(fit.r2, ref.rsquared, rtol=1e-12)
    # the table on screen shows those numbers
    assert window.results_view.stats["r2"].text() == f"{ref.rsquared:,.4f}"
    assert window.results_view.model.rowCount() == 3

    # the even-spread interval is the one statsmodels computes: choose it in the editor
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        editor.spread.setCurrentIndex(editor.spread.findData("constant"))
    assert s.spec.spread == "constant"

    # value a subject typed into the form
    subj = window.subject_view
    with qtbot.waitSignal(
        s.valuationChanged, timeout=WAIT_MS, check_params_cb=lambda v: v is not None
    ):
        qtbot.keyClicks(subj.editors["living_area"], "1840")
        qtbot.keyClicks(subj.editors["bathrooms"], "2")
    pred = ref.get_prediction(np.array([[1.0, 1840.0, 2.0]])).summary_frame(alpha=0.10)
    val = s.valuation
    assert_allclose(val.estimate, pred["mean"].iloc[0], rtol=1e-9)
    assert_allclose(
        [val.low, val.high], [pred["obs_ci_lower"].iloc[0], pred["obs_ci_upper"].iloc[0]], rtol=1e-9
    )
    assert subj.estimate.text() == money(val.estimate)

    # log response: statsmodels on log price, then Duan's smearing for the mean
    with qtbot.waitSignal(
        s.valuationChanged,
        timeout=WAIT_MS,
        check_params_cb=lambda v: v is not None and v.response == "log",
    ):
        editor.response.setCurrentIndex(editor.response.findData("log"))
    ref_log = sm.OLS(np.log(price), X).fit()
    assert_allclose(s.fit.params, ref_log.params, rtol=1e-9)
    x0 = np.array([1.0, 1840.0, 2.0])
    duan = np.exp(x0 @ ref_log.params) * np.mean(np.exp(ref_log.resid))
    assert_allclose(s.valuation.estimate, duan, rtol=1e-9)


def test_remove_and_add_a_term_gives_back_the_same_fit(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    before = s.fit
    editor = window.model_editor
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.mouseClick(_row(editor, "bathrooms").remove, Qt.MouseButton.LeftButton)
    assert "bathrooms" not in s.spec.features
    assert "bathrooms" not in [t.name for t in s.fit.terms]
    assert s.fit.p == before.p - 1
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.keyClicks(editor.new_feature, "bathrooms")
        qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    # the same terms in another order: the same estimates, term by term
    after = {t.name: t.coef for t in s.fit.terms}
    for t in before.terms:
        assert after[t.name] == pytest.approx(t.coef, rel=1e-9)
    assert s.fit.r2 == pytest.approx(before.r2, rel=1e-12)


def test_invalid_row_is_flagged_and_not_fitted(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    spec = s.spec
    editor = window.model_editor
    started: list[int] = []
    s.fitStarted.connect(lambda: started.append(1))
    qtbot.keyClicks(editor.new_feature, "log(living_area")
    qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    row = editor.features.rows[-1]
    assert row.expression == "log(living_area"
    assert row.error  # shown beside the row
    assert row.error in row.status.toolTip()
    qtbot.keyClicks(editor.new_feature, "bedroomz")
    qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    assert "bedroomz" in editor.features.rows[-1].error
    assert s.spec == spec
    assert not s.is_fitting and started == []
    assert "need attention" in editor.summary.text()


def test_fit_error_is_shown_in_place_and_edit_is_kept(qtbot, window, sample_copy):
    """A term that parses but duplicates another exactly: the fit fails, the row stays."""
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    editor = window.model_editor
    with qtbot.waitSignal(s.fitFailed, timeout=WAIT_MS) as failed:
        qtbot.keyClicks(editor.new_feature, "bathrooms * 2")
        qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    assert "collinear" in failed.args[0]
    assert s.fit is None and s.valuation is None
    assert "bathrooms * 2" in s.spec.features  # the user's edit is kept
    assert _row(editor, "bathrooms * 2").error is None  # it is a valid expression
    assert "could not be fitted" in window.results_view.state.text()
    assert "could not be fitted" in editor.fit_status.text()
    assert window.fit_label.text() == "fit failed"
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.mouseClick(_row(editor, "bathrooms * 2").remove, Qt.MouseButton.LeftButton)
    assert editor.fit_status.text() == ""
    assert s.fit.n == 598


def test_map_a_role_the_headers_do_not_reveal(qtbot, window, sample_copy):
    """An export calls living area 'HSF': the model fails until the role is mapped."""
    text = sample_copy.read_text(encoding="utf-8")
    sample_copy.write_text(text.replace("Living Area (sq ft)", "HSF", 1), encoding="utf-8")
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFailed], timeout=WAIT_MS):
        window.open_path(sample_copy, companions=True)
    assert s.sales.roles.column("living_area") is None
    assert "living_area" in s.fit_error
    roles = window.roles_view
    combo = roles.combos["living_area"]
    assert not roles.apply_button.isEnabled()
    combo.setCurrentIndex(combo.findData("HSF"))
    assert roles.apply_button.isEnabled()
    with qtbot.waitSignals([s.salesChanged, s.fitFinished], timeout=WAIT_MS):
        qtbot.mouseClick(roles.apply_button, Qt.MouseButton.LeftButton)
    assert s.sales.roles.column("living_area") == "HSF"
    assert s.fit.n == 598  # sample_data/README.md
    assert not roles.apply_button.isEnabled()


def test_exclude_from_table_save_reopen_identical(qtbot, window, make_window, sample_copy, prefs):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    n0 = s.fit.n
    table = window.sales_view.table
    model = window.sales_view.model
    # pick the sale in file row 10 by clicking it in the table
    pos = model.position_of(10)
    rect = table.visualRect(model.index(pos, 2))
    qtbot.mouseClick(table.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert s.selection == 10
    assert window.actions_.exclude.isEnabled()

    prompts = _answer_next_dialog(qtbot, "checked with the agent: two parcels sold together")
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        table.setFocus()
        qtbot.keyClick(table, Qt.Key.Key_Delete)
    assert prompts and "AV-0009" in prompts[0]
    assert s.fit.n == n0 - 1
    log = window.exclusion_log.model
    mine = [e for e in log.entries if e.source == "user"]
    assert [(e.row, e.sale_id) for e in mine] == [(10, "AV-0009")]
    assert log.rowCount() == 9
    # the table greys the row and names the reason
    index = model.index(model.position_of(10), 1)
    assert "two parcels" in model.data(index)
    assert model.data(index, Qt.ItemDataRole.ForegroundRole) is not None
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)

    path = sample_copy.parent / "valuation.appraise.json"
    assert window.save_to(path)
    assert not window.isWindowModified()
    assert prefs.recent_files()[0] == str(path.resolve())

    other = make_window()
    notices: list[str] = []
    other.session.notice.connect(notices.append)
    open_and_wait(qtbot, other, path)
    a, b = s.fit, other.session.fit
    assert b.n == a.n
    np.testing.assert_array_equal(b.params, a.params)
    np.testing.assert_array_equal(b.rows, a.rows)
    assert other.session.valuation.estimate == s.valuation.estimate
    assert (other.session.valuation.low, other.session.valuation.high) == (
        s.valuation.low,
        s.valuation.high,
    )
    assert other.session.user_exclusions == s.user_exclusions
    assert any("reproduced exactly" in n for n in notices)
    assert other.subject_view.estimate.text() == window.subject_view.estimate.text()

    # use the sale again from the log, then Save writes to the same workfile
    other.session.select_sale(10)
    other.exclusion_log.table.selectRow(
        next(i for i, e in enumerate(other.exclusion_log.model.entries) if e.row == 10)
    )
    with qtbot.waitSignal(other.session.fitFinished, timeout=WAIT_MS):
        qtbot.mouseClick(other.exclusion_log.use_again, Qt.MouseButton.LeftButton)
    assert other.session.fit.n == n0
    qtbot.waitUntil(lambda: other.session.pending_tasks == 0, timeout=WAIT_MS)
    assert other.save()
    assert '"user_exclusions": []' in path.read_text(encoding="utf-8")


def test_derived_variable_is_checked_and_usable(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=False)
    editor = window.model_editor
    row = editor.derived.add("", "")
    qtbot.keyClicks(row.name_edit, "2nd")
    assert "plain word" in row.error  # not an identifier
    row.name_edit.clear()
    qtbot.keyClicks(row.name_edit, "years_old")
    qtbot.keyClicks(row.edit, "2026 - year_built")
    assert row.error is None
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        qtbot.keyClicks(editor.new_feature, "years_old")
        qtbot.keyClick(editor.new_feature, Qt.Key.Key_Return)
    assert dict(s.spec.derived) == {"years_old": "2026 - year_built"}
    # statsmodels on the workbook: price ~ living area + (2026 - year built)
    wb = _workbook().dropna(subset=["Living Area (sq ft)"])
    X = sm.add_constant(
        np.column_stack([wb["Living Area (sq ft)"], 2026 - wb["Year Built"]]).astype(float)
    )
    ref = sm.OLS(wb["Sale Price"].to_numpy(float), X).fit()
    assert_allclose(s.fit.params, ref.params, rtol=1e-9)
    assert [t.name for t in s.fit.terms][-1] == "years_old"
