"""The Comparables tab on the sample: the grid appears (built off the UI thread), the
user swaps a comparable, edits weights and the effective date, and the choices survive
a workfile round trip. Numbers are checked against pipeline.grid run directly."""

from __future__ import annotations

import pytest

from appraise import pipeline
from appraise.engine.comparables import ComparablesChoice
from appraise.gui.comparables_view import ComparablesView

WAIT_MS = 60_000


@pytest.fixture
def view(qtbot, session, sample_copy):
    v = ComparablesView(session)
    qtbot.addWidget(v)
    v.show()
    with qtbot.waitSignal(session.gridChanged, timeout=WAIT_MS):
        session.load_with_companions(sample_copy)
    qtbot.waitUntil(lambda: session.pending_tasks == 0 and v.grid is not None, timeout=WAIT_MS)
    return v


def _update(qtbot, v, action):
    with qtbot.waitSignal(v.session.gridChanged, timeout=WAIT_MS):
        action()
    qtbot.waitUntil(lambda: v.session.pending_tasks == 0, timeout=WAIT_MS)


def test_grid_appears_and_matches_the_pipeline(view, session):
    g = view.grid
    assert g is not None and len(g.comparables) == 4
    ref, _ = pipeline.grid(session.fit, pipeline.filled(dict(session.subject)))
    assert [c.sale_id for c in g.comparables] == [c.sale_id for c in ref.comparables]
    assert g.reconciliation.value == pytest.approx(ref.reconciliation.value, rel=1e-12)
    assert view.grid_table.columnCount() == 4
    assert "standard error" in view.grid_table.item(3, 0).toolTip()
    assert view.candidates.rowCount() > 4
    assert "Reconciled value" in view.reconciliation.text()


def test_swap_comparable_weights_and_effective_date(qtbot, view, session):
    first = [c.sale_id for c in view.grid.comparables]
    other = next(
        view.candidates.item(r, 1).text()
        for r in range(view.candidates.rowCount())
        if view.candidates.item(r, 1).text() not in first
    )
    swapped = (*first[:3], other)
    _update(qtbot, view, lambda: session.set_comparables(ComparablesChoice(chosen=swapped)))
    assert [c.sale_id for c in view.grid.comparables] == list(swapped)
    # edit the weight row: 40/20/20/20
    last = view.grid_table.rowCount() - 1
    view._filling = True
    for j, w in enumerate(("40%", "20%", "20%")):
        view.grid_table.item(last, j).setText(w)
    view._filling = False
    _update(qtbot, view, lambda: view.grid_table.item(last, 3).setText("20%"))
    assert view.grid.reconciliation.weights == pytest.approx((0.4, 0.2, 0.2, 0.2))
    assert view.grid.reconciliation.weights_from == "user"
    before = view.grid.comparables[0].adjustments[0].amount
    # a later date of value: an earlier one would make the sales after it (plus a month)
    # implausible, and the comparable chosen above may be one of them
    view.effective.setText("2026-09-30")
    _update(qtbot, view, view.effective.editingFinished.emit)
    assert str(view.grid.effective_date)[:10] == "2026-09-30"
    # one date of value per analysis: it is the subject's, so the value uses it too
    assert session.subject["effective_date"] == "2026-09-30"
    assert session.comparables.effective_date is None
    assert view.grid.comparables[0].adjustments[0].amount != pytest.approx(before)


def test_choices_kept_in_the_workfile(qtbot, view, session, tmp_path):
    choice = ComparablesChoice(effective_date="2026-03-31", pinned=("AV-0001",), weights=None)
    _update(qtbot, view, lambda: session.set_comparables(choice))
    assert view.grid.comparables[0].sale_id == "AV-0001"
    path = session.save_workfile(tmp_path / "w.appraise")
    from appraise.gui.session import Session

    other = Session()
    try:
        v2 = ComparablesView(other)
        qtbot.addWidget(v2)
        with qtbot.waitSignal(other.gridChanged, timeout=WAIT_MS):
            other.open_workfile(path)
        qtbot.waitUntil(lambda: other.pending_tasks == 0 and v2.grid is not None, timeout=WAIT_MS)
        assert other.comparables == choice
        assert v2.effective.text() == "2026-03-31"
        assert [c.sale_id for c in v2.grid.comparables] == [
            c.sale_id for c in view.grid.comparables
        ]
    finally:
        other.shutdown()
