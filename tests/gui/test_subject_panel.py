"""The subject panel: sales' medians filled in on request and marked as assumed, messages
in the form's labels, the status bar and the "out of date" mark.

References: the medians are pandas' own median of the sample's used sales
(sample_data/ashcombe_sales.csv as read); the value with the medians filled in is the
one prediction path's (appraise.pipeline.value) for the same subject.
"""

from __future__ import annotations

from conftest import WAIT_MS, open_and_wait
from numpy.testing import assert_allclose
from PySide6.QtCore import Qt

from appraise import pipeline
from appraise.gui.main_window import NOT_VALUED
from appraise.report.html import render_html
from appraise.report.worksheet import build_worksheet


def _settle(qtbot, s):
    qtbot.waitUntil(lambda: s.pending_tasks == 0 and not s.is_busy, timeout=WAIT_MS)


def _without(s, *names):
    return {k: v for k, v in s.subject.items() if k not in names}


def test_medians_fill_the_empty_fields_and_are_marked_assumed(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    view = window.subject_view
    s.set_subject(_without(s, "lot_area", "bathrooms"))
    _settle(qtbot, s)
    assert s.valuation is None  # lot area and bathrooms are missing
    assert "Lot Size (sq ft)" not in view.warnings.text()
    assert "Lot area" in view.warnings.text()
    assert window.statusBar().currentMessage().startswith(NOT_VALUED)
    assert view.fill_button.isEnabled()
    frame = s.sales.frame
    expected = {
        "lot_area": float(frame["Lot Size (sq ft)"].median()),
        "bathrooms": float(frame["Baths"].median()),
    }
    qtbot.mouseClick(view.fill_button, Qt.MouseButton.LeftButton)
    assert window.subject_view.stale.text().startswith("Out of date") or s.valuation is None
    _settle(qtbot, s)
    assert_allclose(float(s.subject["lot_area"]), expected["lot_area"], rtol=1e-12, atol=0)
    assert_allclose(float(s.subject["bathrooms"]), expected["bathrooms"], rtol=1e-12, atol=0)
    val = s.valuation
    assert val is not None
    assert val.warnings[0].startswith("assumed, not known: Lot area, Bathrooms")
    assert "assumed, not known" in view.warnings.text()
    assert not window.statusBar().currentMessage().startswith(NOT_VALUED)
    assert view.stale.text() == ""
    # the same value as the one prediction path gives for these attributes
    again = pipeline.value(s.fit, s.subject, s.import_settings)
    assert_allclose(val.estimate, again.estimate, rtol=1e-12, atol=0)
    # the worksheet carries the mark with the value
    html = render_html(build_worksheet(s.fit, val))
    assert "assumed, not known: Lot area, Bathrooms" in html
    # typing the subject's own figure takes it off the assumed list
    editor = view.editors["lot_area"]
    editor.setText("8000")
    _settle(qtbot, s)
    assert s.subject[pipeline.ASSUMED_KEY] == "Bathrooms"
    assert s.valuation.warnings[0].startswith("assumed, not known: Bathrooms ")
    assert "assumed" not in view.editors  # the mark is not a field of the form


def test_an_edit_marks_the_value_out_of_date_until_the_refit(qtbot, window, sample_copy):
    s = window.session
    open_and_wait(qtbot, window, sample_copy, companions=True)
    _settle(qtbot, s)
    view = window.subject_view
    assert view.stale.text() == ""
    shown = view.estimate.text()
    view.editors["living_area"].setText("2400")
    assert view.stale.text().startswith("Out of date")
    assert view.estimate.text() == shown  # the old value stays, greyed, until the new one
    _settle(qtbot, s)
    assert view.stale.text() == ""
    assert view.estimate.text() != shown
