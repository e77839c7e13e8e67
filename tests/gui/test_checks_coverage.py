"""The Checks tab shows the coverage of the leave-one-out intervals by segment."""

from __future__ import annotations

from conftest import WAIT_MS, open_and_wait


def test_checks_tab_lists_coverage_by_segment(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    qtbot.waitUntil(lambda: s.diagnostics is not None, timeout=WAIT_MS)
    window.centre_tabs.setCurrentWidget(window.diagnostics_view)
    qtbot.waitUntil(
        lambda: "Coverage by segment" in window.diagnostics_view.tests_text.toPlainText(),
        timeout=WAIT_MS,
    )
    text = window.diagnostics_view.tests_text.toPlainText()
    assert "Modelled spread" in text
    for seg in s.diagnostics.coverage.segments:
        assert seg.label in text
    assert "Old Mill" in text and "1 of 5 (lowest)" in text


def test_the_user_picks_a_term_to_split_the_coverage_by(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    view = window.diagnostics_view
    assert view.coverage_box.findText("region") >= 0  # roles are offered
    with qtbot.waitSignal(s.diagnosticsChanged, timeout=WAIT_MS):
        view.coverage_box.setCurrentText("age")  # a derived variable of the sample model
        view.apply_settings()
    qtbot.waitUntil(lambda: s.diagnostics is not None, timeout=WAIT_MS)
    assert s.diagnostic_settings.coverage_term == "age"
    assert any(seg.by == "age" for seg in s.diagnostics.coverage.segments)
