"""One place that makes sure a Qt application object exists, headless if need be,
and that the Qt binding cannot bring the interpreter down (see :func:`guard_none_refcount`)."""

from __future__ import annotations

import ctypes
import os
import sys

_keep: list = []  # holds the application object created here so it is not collected
_guard: dict[str, bool] = {}  # whether guard_none_refcount() ran, and what it found

NONE_REFCOUNT_RESERVE = 1 << 40
"""References added to ``None``, ``True`` and ``False`` when the binding is found to leak them: at one per
Qt call, more than any process will ever make."""


def _no_display() -> bool:
    if sys.platform.startswith("linux") or "bsd" in sys.platform:
        return not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))
    return False


def guard_none_refcount() -> bool:
    """Protect the process from a Qt binding that drops references to ``None``.

    With PySide6 6.12 on CPython 3.11, every call of a Qt method that returns
    nothing (``setPen``, ``setText``, ``drawLine``...) takes one reference away
    from ``None`` without having added it. After some tens of thousands of calls --
    a few dozen charts, or a while of repainting -- the count reaches zero and
    CPython aborts with "none_dealloc: deallocating None". From Python 3.12,
    ``None`` is immortal (PEP 683) and the defect is harmless.

    This probes for the defect (64 calls of ``QObject.setObjectName``) and, if
    found, raises the reference counts of ``None``, ``True`` and ``False`` (pyqtgraph's
    drawing was seen losing references to ``True`` too) by
    :data:`NONE_REFCOUNT_RESERVE`, which is what Python 3.12 does for immortal objects. The count is the first field of
    every object in a release build of CPython 3.11 (``ob_refcnt``); builds that
    put other fields first (``Py_TRACE_REFS``) are left alone. Runs once per process;
    returns whether the reserve was added.
    """
    if "applied" in _guard:
        return _guard["applied"]
    _guard["applied"] = False
    if sys.version_info >= (3, 12) or hasattr(sys, "getobjects"):
        return False
    from PySide6.QtCore import QObject

    probe = QObject()
    before = sys.getrefcount(None)
    for _ in range(64):
        probe.setObjectName("probe")
    if before - sys.getrefcount(None) < 64:
        return False  # this binding keeps its references
    applied = True
    for singleton in (None, True, False):  # drawing code loses references to True as well
        start = sys.getrefcount(singleton)
        ctypes.c_ssize_t.from_address(id(singleton)).value += NONE_REFCOUNT_RESERVE
        applied &= sys.getrefcount(singleton) - start >= NONE_REFCOUNT_RESERVE - 1000
    _guard["applied"] = applied
    return applied


def ensure_app():
    """Return the running ``QApplication``, creating one if there is none.

    pyqtgraph's exporters need a ``QApplication`` (not only a ``QGuiApplication``).
    When no display is present (Linux/BSD without ``DISPLAY`` or
    ``WAYLAND_DISPLAY``) the off-screen platform is selected first, unless the
    caller already chose a platform. Also applies :func:`guard_none_refcount`.
    """
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is not None:
        if not isinstance(app, QApplication):
            from ..engine.errors import ReportError

            raise ReportError(
                "a QGuiApplication is running; rendering figures needs a QApplication"
            )
        guard_none_refcount()
        return app
    if _no_display():
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    app = QApplication(sys.argv[:1] or ["appraise"])
    _keep.append(app)
    guard_none_refcount()
    return app
