"""The model editor shows the sales per level of each onehot term after a fit, and its
Interval spread control switches between the even and the modelled spread."""

from __future__ import annotations

from conftest import WAIT_MS, open_and_wait


def test_sales_per_level_beside_the_terms(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    text = window.model_editor.levels_label.text()
    fit = window.session.fit
    lines = text.split("<br>")
    terms = [g.expression for g in fit.design.groups if g.kind == "onehot"]
    assert len(lines) == len(terms) == 2
    for line, term in zip(lines, terms, strict=True):
        assert f"Sales per level of {term}: " in line
        levels = [c for c in fit.levels if c.term == term]
        assert sum(c.count for c in levels) == fit.n
        for c in levels:
            assert f"{c.level} {c.count:,}" in line
    assert "(reference)" in text


def test_interval_spread_control_refits_with_the_chosen_spread(qtbot, window, sample_copy):
    open_and_wait(qtbot, window, sample_copy, companions=True)
    s = window.session
    assert s.spec.spread == "modelled" and s.fit.spread is not None
    before = (s.valuation.low, s.valuation.high)
    editor = window.model_editor
    with qtbot.waitSignals([s.fitFinished, s.valuationChanged], timeout=WAIT_MS):
        editor.spread.setCurrentIndex(editor.spread.findData("constant"))
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
    assert s.spec.spread == "constant" and s.fit.spread is None
    assert (s.valuation.low, s.valuation.high) != before
