"""The window's own behaviour: menus, keys, the sales table, helpers, drops, preferences.

References: the sample workbook sample_data/ashcombe_sales.xlsx read with pandas alone
(sorting and filtering the 600 used rows), sample_data/README.md (six neighbourhoods),
scikit-learn's PolynomialFeatures (the columns a degree-2 polynomial adds).
"""

from __future__ import annotations

import shutil

import numpy as np
import pandas as pd
import pytest
from conftest import SAMPLE, WAIT_MS, open_and_wait
from numpy.testing import assert_allclose
from PySide6.QtCore import QMimeData, QPoint, QPointF, QSettings, Qt, QTimer, QUrl
from PySide6.QtGui import QDragEnterEvent, QDropEvent
from PySide6.QtWidgets import QApplication, QComboBox, QDialog, QInputDialog, QMenu
from sklearn.preprocessing import PolynomialFeatures

from appraise.gui.model_editor import (
    indicator_expression,
    interaction_expression,
    poly_expression,
    ratio_expression,
)
from appraise.gui.preferences import DEFAULTS, MAX_RECENT, Preferences
from appraise.gui.results_view import effect_text
from appraise.gui.settings_dialog import SettingsDialog
from appraise.report.numbers import number


def _workbook() -> pd.DataFrame:
    return pd.read_excel(SAMPLE / "ashcombe_sales.xlsx", sheet_name="Sales")


def _when_modal(callback) -> None:
    """Run ``callback(dialog)`` on the next modal dialog once it is up."""

    def poll() -> None:
        dlg = QApplication.activeModalWidget()
        if dlg is None:
            QTimer.singleShot(10, poll)
        else:
            callback(dlg)

    QTimer.singleShot(0, poll)


# --- menus and keys ------------------------------------------------------------------
def test_every_menu_command_has_a_mnemonic_and_every_action_a_menu(window):
    seen = set()

    def walk(menu: QMenu) -> None:
        for action in menu.actions():
            if action.isSeparator():
                continue
            assert "&" in action.text(), action.text()
            seen.add(action)
            if action.menu() is not None:
                walk(action.menu())

    for top in window.menuBar().actions():
        assert "&" in top.text()
        walk(top.menu())
    named = {v for v in vars(window.actions_).values() if hasattr(v, "triggered")}
    assert named <= seen


def test_standard_shortcuts(window):
    a = window.actions_
    assert not a.open.shortcut().isEmpty()
    assert not a.save.shortcut().isEmpty()
    assert not a.save_as.shortcut().isEmpty()
    assert not a.print.shortcut().isEmpty()
    assert not a.quit.shortcut().isEmpty()
    assert a.exclude.shortcut().toString() == "Ctrl+E"
    assert a.find.shortcut().toString() == "Ctrl+F"


def test_find_focuses_the_filter_and_filters_like_pandas(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    window.data_tabs.setCurrentWidget(window.roles_view)
    window.actions_.find.trigger()
    view = window.sales_view
    assert window.data_tabs.currentWidget() is view
    assert window.focusWidget() is view.filter_edit
    qtbot.keyClicks(view.filter_edit, "HERONmoor")
    wb = _workbook()
    expected = int((wb["Neighbourhood"] == "Heronmoor").sum())
    qtbot.waitUntil(lambda: view.model.rowCount() == expected, timeout=WAIT_MS)
    assert f"{expected:,} of 606 shown" == view.count_label.text()
    view.filter_edit.clear()
    qtbot.waitUntil(lambda: view.model.rowCount() == 606, timeout=WAIT_MS)


def test_sorting_by_price_matches_pandas(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    model = window.sales_view.model
    headers = [
        model.headerData(c, Qt.Orientation.Horizontal, Qt.ItemDataRole.DisplayRole)
        for c in range(model.columnCount())
    ]
    window.sales_view.table.sortByColumn(headers.index("Sale Price"), Qt.SortOrder.DescendingOrder)
    id_col = headers.index("Sale ID")
    shown = [model.data(model.index(i, id_col)) for i in range(600)]
    wb = _workbook().sort_values("Sale Price", ascending=False, kind="stable")
    assert shown == wb["Sale ID"].tolist()
    # the six rows the importer left out have no price: they come last, greyed, with a reason
    tail = range(600, 606)
    assert all(model.data(model.index(i, 1)) for i in tail)
    assert all(model.data(model.index(i, 0), Qt.ItemDataRole.ForegroundRole) for i in tail)


def test_selection_follows_the_session_both_ways(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    table = window.sales_view.table
    model = window.sales_view.model
    window.session.select_sale(50)
    assert model.row_at(table.currentIndex().row()) == 50
    table.selectRow(model.position_of(77))
    assert window.session.selection == 77


def test_exclude_by_keyboard_then_use_again(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s.select_sale(20)
    asked: list[str] = []

    def reply(dlg) -> None:
        assert isinstance(dlg, QInputDialog)
        asked.append(dlg.labelText())
        dlg.setTextValue("duplicate record of another sale")
        dlg.accept()

    _when_modal(reply)
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        window.actions_.exclude.trigger()
    assert "row 20" in asked[0]
    assert s.exclusion_for(20).reason == "duplicate record of another sale"
    assert window.actions_.include.isEnabled()
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        window.actions_.include.trigger()
    assert s.exclusion_for(20) is None
    assert s.fit.n == 598


def test_cancelled_reason_excludes_nothing(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s.select_sale(20)
    _when_modal(lambda dlg: dlg.reject())
    window.actions_.exclude.trigger()
    assert s.user_exclusions == ()
    assert not s.is_fitting


# --- model helpers -----------------------------------------------------------------------
def test_helper_expressions_quote_awkward_names():
    assert poly_expression(["age"], 2) == "poly(age, degree=2)"
    assert interaction_expression("living_area", "Lot Size") == "living_area * `Lot Size`"
    assert ratio_expression("lot_area", "living_area") == "lot_area / living_area"
    assert indicator_expression("region", "O'Neil Park") == "onehot(region, ref='O\\'Neil Park')"


def test_polynomial_and_indicator_helpers_through_their_dialogs(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=False)
    editor = window.model_editor

    def pick(values: list[str], degree: int | None = None):
        def fill(dlg: QDialog) -> None:
            for combo, value in zip(dlg.findChildren(QComboBox), values, strict=True):
                combo.setCurrentText(value)
            if degree is not None:
                dlg.degree.setValue(degree)
            dlg.accept()

        return fill

    _when_modal(pick(["year_built"], 2))
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        editor.insert_polynomial()
    assert s.spec.features[-1] == "poly(year_built, degree=2)"
    # scikit-learn's PolynomialFeatures: degree 2 of one input adds x and x^2
    fit = s.fit
    year = fit.frame["Year Built"].to_numpy(float).reshape(-1, 1)
    ref = PolynomialFeatures(degree=2, include_bias=False).fit_transform(year)
    assert fit.p == 1 + 1 + ref.shape[1]
    assert_allclose(fit.X[:, 2:], ref, rtol=1e-12)

    _when_modal(pick(["Heronmoor"]))
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        editor.insert_indicators()
    assert s.spec.features[-1] == "onehot(region, ref='Heronmoor')"
    # sample_data/README.md: six neighbourhoods, so five indicators beside the reference
    assert s.fit.p == 4 + 5
    assert not any("Heronmoor" in t.name for t in s.fit.terms)


# --- drag and drop --------------------------------------------------------------------------
def _drop(window, path) -> tuple[bool, QDropEvent, QMimeData]:
    """Drag ``path`` over the window; the drop event to send and its data (kept alive)."""
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(path))])
    enter = QDragEnterEvent(  # PySide6 6.12 flags this, the only constructor it has, deprecated
        QPoint(20, 20),
        Qt.DropAction.CopyAction,
        mime,
        Qt.MouseButton.LeftButton,
        Qt.KeyboardModifier.NoModifier,
    )
    QApplication.sendEvent(window, enter)
    drop = QDropEvent(
        QPointF(20, 20),
        Qt.DropAction.CopyAction,
        mime,
        Qt.MouseButton.LeftButton,
        Qt.KeyboardModifier.NoModifier,
    )
    return enter.isAccepted(), drop, mime


@pytest.mark.filterwarnings("ignore:Function.*QDragEnterEvent:DeprecationWarning")
def test_dropping_a_sales_file_opens_it(qtbot, window, tmp_path):
    path = tmp_path / "town.csv"  # no model or subject beside it: nothing to ask
    shutil.copy(SAMPLE / "ashcombe_sales.csv", path)
    accepted, drop, _mime = _drop(window, path)
    assert accepted
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished], timeout=WAIT_MS):
        QApplication.sendEvent(window, drop)
    assert s.sales_path == path
    assert s.spec.features == ("living_area",)
    assert window.prefs.recent_files()[0] == str(path.resolve())
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)


@pytest.mark.filterwarnings("ignore:Function.*QDragEnterEvent:DeprecationWarning")
def test_other_files_are_refused_at_the_door(window, tmp_path):
    path = tmp_path / "notes.docx"
    path.write_text("not sales", encoding="utf-8")
    accepted, _drop_event, _mime = _drop(window, path)
    assert not accepted


# --- preferences -----------------------------------------------------------------------------
def test_preferences_persist_and_fall_back_to_defaults(tmp_path):
    file = str(tmp_path / "p.ini")
    first = Preferences(QSettings(file, QSettings.Format.IniFormat))
    assert first.values() == dict(DEFAULTS)
    first.update({"currency_symbol": "€", "area_unit": "m2", "embed_sales": False})
    again = Preferences(QSettings(file, QSettings.Format.IniFormat))
    assert again.get("currency_symbol") == "€"
    assert again.get("area_unit") == "m2"
    assert again.get("embed_sales") is False
    store = QSettings(file, QSettings.Format.IniFormat)
    store.setValue("date_order", "YMD-ish")  # not a choice: read as the default
    store.sync()
    assert Preferences(QSettings(file, QSettings.Format.IniFormat)).get("date_order") == "ISO"
    for i in range(MAX_RECENT + 3):
        again.add_recent(f"/tmp/file{i}.csv")
    again.add_recent("/tmp/file4.csv")
    recent = Preferences(QSettings(file, QSettings.Format.IniFormat)).recent_files()
    assert len(recent) == MAX_RECENT
    assert recent[0] == "/tmp/file4.csv" and recent.count("/tmp/file4.csv") == 1


def test_settings_dialog_changes_how_sales_are_read(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    dlg = SettingsDialog(window.prefs, window)
    dlg.editors["currency_symbol"].setText("£")
    combo = dlg.editors["date_order"]
    combo.setCurrentIndex(combo.findData("DMY"))
    dlg.accept()
    assert window.prefs.get("currency_symbol") == "£"
    with qtbot.waitSignals([s.salesChanged, s.valuationChanged], timeout=WAIT_MS):
        window.apply_preferences()
    assert s.import_settings.date_order == "DMY"
    assert s.import_settings.currency_symbol == "£"
    assert window.subject_view.estimate.text().startswith("£")
    # the sample writes every date year first, so the order changes nothing it reads
    assert s.fit.n == 598
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    dlg2 = SettingsDialog(window.prefs, window)
    dlg2.restore_defaults()
    assert dlg2.values() == dict(DEFAULTS)
    dlg2.reject()
    assert window.prefs.get("currency_symbol") == "£"


def test_recent_files_menu_lists_and_clears(qtbot, window, prefs, sample_copy):
    prefs.add_recent(str(sample_copy))
    texts = [a.text() for a in window.recent_menu.actions() if not a.isSeparator()]
    assert texts[0] == "&1 ashcombe_sales.csv"
    window.actions_.clear_recent.trigger()
    assert prefs.recent_files() == []
    assert not window.actions_.clear_recent.isEnabled()


def test_status_bar_names_counts_fit_and_caution(qtbot, window, sample_copy):
    assert window.rows_label.text() == "No sales loaded"
    open_and_wait(qtbot, window, sample_copy, companions=True)
    fit = window.session.fit
    assert window.rows_label.text() == "598 sales used · 8 left out"  # sample_data/README.md
    # never "σ=7.521e+04": four significant digits written out
    assert window.fit_label.text() == f"n=598  R²={fit.r2:.3f}  σ={number(fit.sigma, 4)}"
    assert "e+" not in window.fit_label.text() and "e-" not in window.fit_label.text()
    assert window.caution_label.text() == "Statistical estimate — not an appraisal"
    assert np.isfinite(fit.r2)


def test_effect_column_reads_log_coefficients(qtbot, window, sample_copy):
    # 100 (e^b - 1): an indicator with coefficient b changes price by that percent
    # (Halvorsen and Palmquist 1980, Am. Econ. Rev. 70(3), recalled from memory)
    open_and_wait(qtbot, window, sample_copy, companions=True)
    fit, view = window.session.fit, window.results_view
    model = view.model
    header = [model.headerData(j, Qt.Orientation.Horizontal) for j in range(model.columnCount())]
    assert header[-1] == "Effect on price" and header[5:7] == ["95% low", "95% high"]
    shown = {
        model.item(i, 0).text(): model.item(i, len(header) - 1).text()
        for i in range(model.rowCount())
    }
    coef = {t.name: t.coef for t in fit.terms}
    assert (
        shown["region: Heronmoor"]
        == f"{100 * np.expm1(coef['region[Heronmoor]']):+.1f}% vs Old Mill"
    )
    assert shown["months"] == "+0.40% per month"  # never "+0.00% per unit"
    assert shown["Intercept"] == ""
    assert effect_text(fit) == [shown[model.item(i, 0).text()] for i in range(model.rowCount())]
    assert view.stats["p"].text() == str(fit.p) and f"{fit.p} coefficients" in view.state.text()


def test_context_menu_excludes_with_a_reason(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    table, model = window.sales_view.table, window.sales_view.model
    rect = table.visualRect(model.index(model.position_of(30), 2))

    def choose_exclude() -> None:
        menu = QApplication.activePopupWidget()
        if menu is None:
            QTimer.singleShot(10, choose_exclude)
            return
        texts = [a.text() for a in menu.actions()]
        assert texts == ["E&xclude this sale…", "&Use this sale again"]
        assert not menu.actions()[1].isEnabled()  # it is not left out yet
        _when_modal(lambda dlg: (dlg.setTextValue("sold with furniture"), dlg.accept()))
        menu.actions()[0].trigger()
        menu.close()

    QTimer.singleShot(0, choose_exclude)
    with qtbot.waitSignal(s.fitFinished, timeout=WAIT_MS):
        table.customContextMenuRequested.emit(rect.center())
    assert s.exclusion_for(30).reason == "sold with furniture"
    assert s.exclusion_for(30).source == "user"
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
