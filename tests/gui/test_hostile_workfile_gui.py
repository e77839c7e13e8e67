"""A tampered workfile opened in the window: refused with the loader's one-line message,
and the session exactly as it was (nothing half-loaded)."""

from __future__ import annotations

import json
import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest
from conftest import WAIT_MS

from appraise.engine.errors import WorkfileError
from appraise.engine.workfile import load_workfile


def _load(qtbot, session, path) -> None:
    with qtbot.waitSignals([session.fitFinished, session.valuationChanged], timeout=WAIT_MS):
        session.load_with_companions(path)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)


TAMPERED = [
    (lambda d: d["settings"].update(checks=[1, 2]), "settings.checks"),
    (lambda d: d["import_settings"].update(decimal=5), "import_settings.decimal"),
    (lambda d: d["import_settings"].update(area_unit="acres"), "import_settings.area_unit"),
    (lambda d: d["sales"]["embedded"].update(name="sales.exe"), None),
    (lambda d: d.update(comparables={"weights": ["heavy"]}), "comparables"),
]


@pytest.mark.parametrize(("edit", "key"), TAMPERED)
def test_a_tampered_workfile_leaves_the_session_as_it_was(
    qtbot, session, sample_copy, tmp_path, edit, key
):
    _load(qtbot, session, sample_copy)
    path = tmp_path / "w.appraise.json"
    session.save_workfile(path, embed=True)
    doc = json.loads(path.read_text(encoding="utf-8"))
    edit(doc)
    if key is None:  # a name reduced to a safe one still opens; make the hash wrong instead
        doc["sales"]["sha256"] = "0" * 64
        doc["sales"]["path"] = doc["sales"]["absolute_path"] = None
    bad = tmp_path / "bad.appraise.json"
    bad.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(WorkfileError) as info:
        load_workfile(bad)
    expected = str(info.value)

    before = (session.sales, session.spec, dict(session.subject), session.sales_path)
    with qtbot.waitSignal(session.loadFailed, timeout=WAIT_MS) as failed:
        session.open_workfile(bad)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    assert expected in failed.args[0]
    if key is not None:
        assert key in failed.args[0]
    after = (session.sales, session.spec, dict(session.subject), session.sales_path)
    assert after[0] is before[0] and after[1] is before[1]
    assert after[2:] == before[2:]


def test_opening_says_what_an_interrupted_save_left(qtbot, session, sample_copy, tmp_path):
    _load(qtbot, session, sample_copy)
    path = tmp_path / "w.appraise.json"
    session.save_workfile(path, embed=True)
    complete = tmp_path / f".{path.name}.999999999.x.tmp"  # a dead writer's finished file
    complete.write_bytes(path.read_bytes())
    notices: list[str] = []
    session.notice.connect(notices.append)
    with qtbot.waitSignal(session.fitFinished, timeout=WAIT_MS):
        session.open_workfile(path)
    qtbot.waitUntil(lambda: session.pending_tasks == 0, timeout=WAIT_MS)
    assert any("kept as w.appraise.recovered-1.json" in n for n in notices), notices
    assert (tmp_path / "w.appraise.recovered-1.json").is_file() and not complete.exists()
