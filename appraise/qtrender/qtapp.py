"""One place that makes sure a Qt application object exists, headless if need be."""

from __future__ import annotations

import os
import sys

_keep: list = []  # holds the application object created here so it is not collected


def _no_display() -> bool:
    if sys.platform.startswith("linux") or "bsd" in sys.platform:
        return not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))
    return False


def has_display() -> bool:
    """Whether a Qt window can be shown: a display server, or an explicit Qt platform.

    Imports no Qt, so the command line can ask before deciding to open the window.
    """
    if os.environ.get("QT_QPA_PLATFORM"):
        return True
    return not _no_display()  # Windows and macOS always have a window system


def ensure_app():
    """Return the running ``QApplication``, creating one if there is none.

    pyqtgraph's exporters need a ``QApplication`` (not only a ``QGuiApplication``).
    When no display is present (Linux/BSD without ``DISPLAY`` or
    ``WAYLAND_DISPLAY``) the off-screen platform is selected first, unless the
    caller already chose a platform.
    """
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is not None:
        if not isinstance(app, QApplication):
            from ..engine.errors import ReportError

            raise ReportError(
                "a QGuiApplication is running; rendering figures needs a QApplication"
            )
        return app
    if _no_display():
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    app = QApplication(sys.argv[:1] or ["appraise"])
    _keep.append(app)
    return app
