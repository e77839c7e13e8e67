"""Qt runs off-screen for every GUI test; fixtures give each test its own preferences file."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import gc  # noqa: E402
import shutil  # noqa: E402
from pathlib import Path  # noqa: E402

import pytest  # noqa: E402
from PySide6.QtCore import QSettings  # noqa: E402

from appraise.gui.main_window import MainWindow  # noqa: E402
from appraise.gui.preferences import Preferences  # noqa: E402
from appraise.gui.session import Session  # noqa: E402

SAMPLE = Path(__file__).resolve().parents[2] / "sample_data"
WAIT_MS = 20_000  # generous: a loaded CI machine must not fail a correct test


@pytest.fixture(autouse=True)
def _collect_on_the_gui_thread(qapp):
    """No cycle collection while a test runs; one on this (the GUI) thread after it.

    Python's collector runs on whichever thread allocates: a pool thread reading a file
    could otherwise destroy a window left over from an earlier test and crash Qt (the
    app does the same with pyqtgraph's GarbageCollector). What survives is frozen, so
    each collection only looks at the objects of one test (a full one takes 0.2 s).
    """
    gc.disable()
    yield
    gc.collect()
    gc.freeze()
    gc.enable()


@pytest.fixture
def prefs(tmp_path) -> Preferences:
    """Preferences in a file of this test's own (never the user's settings)."""
    return Preferences(QSettings(str(tmp_path / "prefs.ini"), QSettings.Format.IniFormat))


@pytest.fixture
def sample_copy(tmp_path) -> Path:
    """The sample sales with their model and subject, copied to a folder of this test."""
    folder = tmp_path / "sample"
    folder.mkdir()
    for name in ("ashcombe_sales.csv", "ashcombe_model.toml", "subject.json"):
        shutil.copy(SAMPLE / name, folder / name)
    return folder / "ashcombe_sales.csv"


@pytest.fixture
def session(qtbot):
    s = Session()
    yield s
    s.shutdown()


@pytest.fixture
def make_window(qtbot, prefs):
    """Build main windows; each is closed at teardown without the save question."""
    made = []

    def make(session: Session | None = None) -> MainWindow:
        w = MainWindow(session or Session(), prefs)
        w.show()
        made.append(w)
        return w

    yield make
    for w in made:
        w.setWindowModified(False)  # teardown must not wait for an answer to "save?"
        w.close()
        w.stop_background_work()
        w.deleteLater()


@pytest.fixture
def window(make_window, session):
    return make_window(session)


def open_and_wait(qtbot, window, path, **kw) -> None:
    """Open ``path`` in ``window`` and wait until its fit and valuation are in."""
    s = window.session
    with qtbot.waitSignals([s.loadFinished, s.fitFinished, s.valuationChanged], timeout=WAIT_MS):
        window.open_path(path, **kw)
    qtbot.waitUntil(lambda: s.pending_tasks == 0, timeout=WAIT_MS)
