"""A workfile saved from the desktop app reopens to the same numbers, or says why it cannot.

References: the counts of the invented sample in sample_data/README.md; every other
expected number is the one the first session computed (reopening must give the same
bits on the same machine), and SHA-256 digests are recomputed here with hashlib.
"""

from __future__ import annotations

import hashlib
import json
import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pytest
from conftest import WAIT_MS
from PySide6.QtWidgets import QMessageBox

from appraise.engine.workfile import SCHEMA_VERSION
from appraise.gui.plots import PlotsView
from appraise.gui.session import Session


def _load(qtbot, session, path) -> None:
    with qtbot.waitSignals([session.fitFinished, session.valuationChanged], timeout=WAIT_MS):
        session.load_with_companions(path)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)


def _open(qtbot, session, path) -> list[str]:
    """Open a workfile in ``session``; the notices it gave on the way."""
    notices: list[str] = []
    session.notice.connect(notices.append)
    with qtbot.waitSignals([session.fitFinished, session.valuationChanged], timeout=WAIT_MS):
        session.open_workfile(path)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    return notices


@pytest.fixture
def saved(qtbot, session, sample_copy, tmp_path):
    """The sample valued with one sale excluded by the user, saved as a workfile."""
    _load(qtbot, session, sample_copy)
    with qtbot.waitSignal(session.fitFinished, timeout=WAIT_MS):
        session.exclude_sale(150, "renovated after the sale")
        session.refit_now()
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: session.results_current, timeout=WAIT_MS)
    path = tmp_path / "ashcombe.appraise.json"
    session.save_workfile(path, settings={"currency": "$"}, embed=False)
    return path, session


def test_reopened_workfile_gives_the_same_numbers_and_plots(qtbot, saved):
    path, first = saved
    second = Session()
    try:
        view = PlotsView(second)
        qtbot.addWidget(view)
        view.show()
        notices = _open(qtbot, second, path)
        assert "reopened workfile: the saved results were reproduced exactly" in notices
        assert np.array_equal(second.fit.params, first.fit.params)
        assert second.fit.n == first.fit.n == 597  # README: 598 fitted, less one excluded here
        v1, v2 = first.valuation, second.valuation
        assert (v2.estimate, v2.low, v2.high) == (v1.estimate, v1.low, v1.high)
        assert [(e.row, e.reason) for e in second.user_exclusions] == [
            (150, "renovated after the sale")
        ]
        # the plots show the user's exclusion after reopening
        qtbot.waitUntil(lambda: len(view.figures) == 4 and bool(view.figures[0].scatters))
        hollow = {
            int(r)
            for s in view.figures[0].scatters
            if s.opts["brush"].style().name == "NoBrush"
            for r in s.data["data"]
        }
        assert 150 in hollow
    finally:
        second.shutdown()


def test_a_doctored_saved_result_is_announced(qtbot, saved):
    path, _ = saved
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["last_results"]["valuation"]["estimate"] += 1.0
    path.write_text(json.dumps(doc), encoding="utf-8")
    second = Session()
    try:
        notices = _open(qtbot, second, path)
        hit = [n for n in notices if "differ from the saved results" in n]
        assert len(hit) == 1
        assert "valuation.estimate" in hit[0]
    finally:
        second.shutdown()


def _error_box_text(qtbot, window) -> str:
    qtbot.waitUntil(lambda: window.findChild(QMessageBox, "errorBox") is not None, timeout=WAIT_MS)
    box = window.findChild(QMessageBox, "errorBox")
    text = box.text()
    box.close()
    return text


def test_the_window_explains_a_workfile_from_a_newer_version(qtbot, window, saved):
    path, _ = saved
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["schema_version"] = SCHEMA_VERSION + 1
    path.write_text(json.dumps(doc), encoding="utf-8")
    with qtbot.waitSignal(window.session.loadFailed, timeout=WAIT_MS):
        window.open_path(path)
    text = _error_box_text(qtbot, window)
    assert "newer version of appraise" in text
    assert f"schema {SCHEMA_VERSION + 1}" in text


def test_the_window_names_both_hashes_when_the_sales_changed(qtbot, window, saved, sample_copy):
    path, _ = saved
    before = hashlib.sha256(sample_copy.read_bytes()).hexdigest()
    with sample_copy.open("a", encoding="utf-8") as fh:
        fh.write(
            'AV-9999,"$300,000",2026-01-05,1500,"6,000",1990,3,2,44.04,-71.30,Old Mill,good,Yes\n'
        )
    after = hashlib.sha256(sample_copy.read_bytes()).hexdigest()
    with qtbot.waitSignal(window.session.loadFailed, timeout=WAIT_MS):
        window.open_path(path)
    text = _error_box_text(qtbot, window)
    assert before in text and after in text


def test_check_settings_travel_with_the_workfile(qtbot, session, sample_copy, tmp_path):
    from appraise.engine.diagnostics import DiagnosticSettings

    _load(qtbot, session, sample_copy)
    chosen = DiagnosticSettings(trim=True, folds=5, seed=42)
    session.set_diagnostic_settings(chosen)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    path = tmp_path / "checks.appraise.json"
    session.save_workfile(path, settings={"currency": "$"}, embed=False)
    stored = json.loads(path.read_text(encoding="utf-8"))["settings"]
    assert stored["checks"]["trim"] is True and stored["checks"]["folds"] == 5
    assert stored["currency"] == "$"
    second = Session()
    try:
        _open(qtbot, second, path)
        assert second.diagnostic_settings == chosen
        qtbot.waitUntil(lambda: second.diagnostics is not None, timeout=WAIT_MS)
        assert second.diagnostics.settings == chosen
    finally:
        second.shutdown()
