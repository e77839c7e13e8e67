"""Starting the desktop app: without a display it says so in one line; with one it opens.

The no-display checks run the real command in a child process with the display
variables removed, so nothing in this test process can mask a Qt crash.
"""

from __future__ import annotations

import os
import subprocess
import sys

import pytest
from conftest import SAMPLE, WAIT_MS
from PySide6.QtCore import QSettings, QTimer
from PySide6.QtWidgets import QApplication

from appraise.cli import main
from appraise.gui.app import NO_DISPLAY_MESSAGE, open_sample
from appraise.gui.main_window import MainWindow


def _without_display() -> dict[str, str]:
    env = {
        k: v
        for k, v in os.environ.items()
        if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM")
    }
    env["PYTHONFAULTHANDLER"] = "1"  # a crash would show as a traceback, not pass as exit 2
    return env


@pytest.mark.skipif(
    not sys.platform.startswith("linux"), reason="display variables are X11/Wayland"
)
def test_no_display_is_one_line_and_exit_2():
    """Plain ``appraise`` in a fresh process: no Qt abort, one line, exit 2."""
    done = subprocess.run(
        [sys.executable, "-m", "appraise"],
        env=_without_display(),
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr.splitlines() == [NO_DISPLAY_MESSAGE]
    assert "appraise --help" in NO_DISPLAY_MESSAGE


@pytest.mark.skipif(
    not sys.platform.startswith("linux"), reason="display variables are X11/Wayland"
)
def test_open_file_without_display_says_the_same(monkeypatch, capsys):
    for name in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"):
        monkeypatch.delenv(name, raising=False)
    assert main(["open", str(SAMPLE / "ashcombe_sales.csv")]) == 2
    out, err = capsys.readouterr()
    assert out == "" and err.splitlines() == [NO_DISPLAY_MESSAGE]


def test_open_sample_runs_the_window_with_the_sample(qtbot, tmp_path):
    """``open_sample()`` (what ``appraise demo`` calls) shows the sample valued, then exits 0."""
    QSettings.setPath(QSettings.Format.NativeFormat, QSettings.Scope.UserScope, str(tmp_path))
    seen: dict = {}

    def look() -> None:
        windows = [
            w for w in QApplication.topLevelWidgets() if isinstance(w, MainWindow) and w.isVisible()
        ]
        s = windows[0].session if windows else None
        if s is None or s.valuation is None or s.pending_tasks:
            QTimer.singleShot(20, look)
            return
        w = windows[0]
        seen.update(
            n=s.fit.n,
            title=w.windowTitle(),
            features=len(s.spec.features),
            estimate=w.subject_view.estimate.text(),
        )
        w.setWindowModified(False)
        w.close()  # the last window: Qt ends the event loop of run() by itself

    QTimer.singleShot(0, look)
    watchdog = QTimer()
    watchdog.setSingleShot(True)
    watchdog.timeout.connect(QApplication.quit)  # never hang the suite
    watchdog.start(WAIT_MS)
    code = open_sample([])
    watchdog.stop()
    assert code == 0
    assert seen["n"] == 598  # sample_data/README.md
    assert seen["features"] == 10  # sample_data/ashcombe_model.toml
    assert seen["title"].startswith("ashcombe_sales.csv")
    assert seen["estimate"].startswith("$")
