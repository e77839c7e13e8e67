"""Starting the desktop workbench: the application object, the window, the event loop."""

from __future__ import annotations

import sys
from collections.abc import Sequence
from pathlib import Path

from appraise.qtrender.qtapp import has_display

NO_DISPLAY_MESSAGE = (
    "appraise: no display found; the desktop app needs one. "
    "Try 'appraise demo' or 'appraise --help' for the command line."
)
ORGANISATION = "appraise"
APPLICATION = "appraise"


def run(
    argv: Sequence[str] | None = None, path: str | Path | None = None, *, sample: bool = False
) -> int:
    """Open the main window and run until it is closed; returns the exit code.

    ``path`` (a sales file or a workfile) is opened at start; with ``sample`` the
    invented sample town is opened with its model and subject. Without a display
    this prints one line pointing to the command line and returns 2, before Qt is
    started (Qt would abort the process).
    """
    if not has_display():
        print(NO_DISPLAY_MESSAGE, file=sys.stderr)
        return 2
    from pyqtgraph.util.garbage_collector import GarbageCollector
    from PySide6.QtCore import QSettings
    from PySide6.QtWidgets import QApplication

    from .main_window import MainWindow
    from .preferences import Preferences
    from .session import Session

    app = QApplication.instance() or QApplication(list(argv) if argv else ["appraise"])
    app.setOrganizationName(ORGANISATION)
    app.setApplicationName(APPLICATION)
    app.setApplicationDisplayName("appraise")
    # Python's cycle collector may run on whichever thread allocates; a Qt object
    # collected on a pool thread can crash the process. Collect on the UI thread only.
    collector = GarbageCollector(interval=1.0)
    prefs = Preferences(QSettings(ORGANISATION, APPLICATION))
    session = Session(import_settings=prefs.import_settings())
    window = MainWindow(session, prefs)
    window.show()
    if sample:
        window.open_sample()
    elif path is not None:
        window.open_path(path)
    try:
        return int(app.exec())
    finally:
        collector.timer.stop()


def open_sample(argv: Sequence[str] | None = None) -> int:
    """Open the workbench with the sample sales, model and subject loaded (``appraise demo``)."""
    return run(argv, sample=True)
