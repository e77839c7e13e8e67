"""Tampered workfiles the first window tests lacked: each was opened and failed later (the
grid's pool thread raised DateParseError on a comparables date; a forbidden expression or
an infinite subject value failed in the fit or the valuation after the session had taken
the workfile's sales). Each must now be refused on opening, the session as it was."""

from __future__ import annotations

import json
import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest
from conftest import WAIT_MS

TAMPERED = [
    (
        lambda d: d.update(comparables={"effective_date": "9999-99-99"}),
        "comparables.effective_date",
    ),
    (lambda d: d["model"].update(features=["__import__('os').system('id')"]), "model it holds"),
    (lambda d: d["subject"].update(living_area=float("inf")), "subject it holds"),
]


@pytest.mark.parametrize(("edit", "key"), TAMPERED)
def test_refused_on_opening_and_the_session_unchanged(
    qtbot, session, sample_copy, tmp_path, edit, key
):
    with qtbot.waitSignals([session.fitFinished, session.valuationChanged], timeout=WAIT_MS):
        session.load_with_companions(sample_copy)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    path = tmp_path / "w.appraise.json"
    session.save_workfile(path, embed=True)
    doc = json.loads(path.read_text(encoding="utf-8"))
    edit(doc)
    bad = tmp_path / "bad.appraise.json"
    bad.write_text(json.dumps(doc, allow_nan=True), encoding="utf-8")
    before = (session.sales, session.spec, dict(session.subject), session.sales_path)
    late: list[str] = []
    for signal in (session.fitFailed, session.valuationFailed, session.gridFailed):
        signal.connect(late.append)
    with qtbot.waitSignal(session.loadFailed, timeout=WAIT_MS) as failed:
        session.open_workfile(bad)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    assert str(bad) in failed.args[0] and key in failed.args[0]
    after = (session.sales, session.spec, dict(session.subject), session.sales_path)
    assert after[0] is before[0] and after[1] is before[1]
    assert after[2:] == before[2:]
    assert late == []
