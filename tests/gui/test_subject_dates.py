"""The subject form asks for the effective date of value, never a sale date, and the date
typed there is the one the model's time terms use."""

from __future__ import annotations

from conftest import WAIT_MS, open_and_wait

from appraise.gui.subject_view import subject_fields


def test_no_sale_date_field_and_the_effective_date_is_used(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)  # subject.json has both dates
    s = window.session
    fields = subject_fields(s)
    assert "effective_date" in fields and "sale_date" not in fields
    assert s.sales.roles.column("sale_date") not in fields
    before = s.valuation.estimate
    editor = window.subject_view.editors["effective_date"]
    with qtbot.waitSignal(
        s.valuationChanged, timeout=WAIT_MS, check_params_cb=lambda v: v is not None
    ):
        editor.setText("2025-06-30")  # a year earlier: the market index is lower then
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    assert s.valuation.estimate < before
