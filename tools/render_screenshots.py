"""Render the README screenshots of the desktop workbench from the invented sample town.

Usage (from the repository root; works without a display)::

    QT_QPA_PLATFORM=offscreen python3 tools/render_screenshots.py [--out resources/screenshots]

The window is opened the way ``appraise demo`` opens it (``appraise.gui.app.run``
with the sample sales, model and subject), the script waits for the fit, the
valuation and the checks, then shows each centre tab in turn and saves the
window with ``QWidget.grab()`` as ``<out>/<tab>.png``. One sale is selected first,
so the plots show the selection ring. Preferences go to a temporary folder: the
user's own settings and recent-file list are not touched.

Images are written as 8-bit palette PNGs; each should stay below 300 KB (the
script says so when one does not).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_OUT = ROOT / "resources" / "screenshots"
SIZE_LIMIT = 300 * 1024
WINDOW_SIZES = {"": (1366, 768), "_1920": (1920, 1080)}
"""File-name suffix -> window size: a small laptop screen (the README's) and a desktop one."""
SELECTED_ROW = 212  # a sale of the sample, ringed in the plots
WAIT_MS = 60_000

TABS = {  # centre-tab text (without '&') -> file name
    "Model": "model.png",
    "Plots": "plots.png",
    "Checks": "checks.png",
    "Comparables": "comparables.png",
    "Neighbourhoods": "neighbourhoods.png",
    "Worksheet": "worksheet.png",
}


def _settle(app, ms: int) -> None:
    """Let the event loop run for ``ms`` milliseconds (layout, deferred redraws, rendering)."""
    from PySide6.QtCore import QEventLoop, QTimer

    loop = QEventLoop()
    QTimer.singleShot(ms, loop.quit)
    loop.exec()
    app.processEvents()


def _wait_for(app, signals, what: str) -> None:
    """Run the event loop until every signal in ``signals`` has fired once."""
    from PySide6.QtCore import QEventLoop, QTimer

    pending = set(range(len(signals)))
    loop = QEventLoop()

    def done(k: int) -> None:
        pending.discard(k)
        if not pending:
            loop.quit()

    for k, sig in enumerate(signals):
        sig.connect(lambda *_a, k=k: done(k))
    timer = QTimer()
    timer.setSingleShot(True)
    timer.timeout.connect(loop.quit)
    timer.start(WAIT_MS)
    loop.exec()
    if pending:
        raise SystemExit(f"render_screenshots: gave up waiting for {what}")


def _palette_image(image):
    """``image`` with at most 256 colours: its own most frequent ones.

    A window is mostly flat colour; the 256 commonest colours cover nearly every
    pixel (97 % of a plot-heavy window, more of the others), and every other pixel
    takes the nearest of them. The PNG shrinks to about a third.
    """
    import numpy as np
    from PySide6.QtCore import Qt
    from PySide6.QtGui import QImage

    rgb = image.convertToFormat(QImage.Format.Format_RGB32)
    w, h = rgb.width(), rgb.height()
    words = np.frombuffer(rgb.constBits(), dtype=np.uint32).reshape(h, rgb.bytesPerLine() // 4)
    values, counts = np.unique(words[:, :w], return_counts=True)
    table = [int(v) for v in values[np.argsort(counts, kind="stable")[::-1][:256]]]
    return rgb.convertToFormat(
        QImage.Format.Format_Indexed8, table, Qt.ImageConversionFlag.ThresholdDither
    )


def _shoot(app, out: Path, size: tuple[int, int], suffix: str) -> list[Path]:
    from appraise.gui.main_window import MainWindow

    window = next(w for w in app.topLevelWidgets() if isinstance(w, MainWindow))
    window.resize(*size)
    s = window.session
    if s.valuation is None or s.pending_tasks:
        _wait_for(app, [s.valuationChanged, s.diagnosticsChanged], "the sample's fit")
    while s.pending_tasks:
        _settle(app, 100)
    s.select_sale(SELECTED_ROW)
    written = []
    tabs = window.centre_tabs
    for k in range(tabs.count()):
        name = TABS.get(tabs.tabText(k).replace("&", ""))
        if name is None:
            continue
        tabs.setCurrentIndex(k)
        _settle(app, 2500)  # the worksheet renders its charts when first shown
        image = _palette_image(window.grab().toImage())
        path = out / name.replace(".png", f"{suffix}.png")
        if not image.save(str(path), "PNG", 9):
            raise SystemExit(f"render_screenshots: could not write {path}")
        size = path.stat().st_size
        flag = "" if size < SIZE_LIMIT else "  (over 300 KB: shrink the window or the content)"
        print(
            f"{path.relative_to(ROOT) if path.is_relative_to(ROOT) else path}: "
            f"{image.width()}x{image.height()}, {size / 1024:.0f} KB{flag}"
        )
        written.append(path)
    window.setWindowModified(False)  # nothing to save: close without asking
    return written


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT, help="folder for the PNGs")
    args = parser.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    if not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")):
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

    with tempfile.TemporaryDirectory(prefix="appraise-shots-") as prefs_dir:
        os.environ["XDG_CONFIG_HOME"] = prefs_dir  # QSettings' user folder on Linux
        from PySide6.QtCore import QSettings, QTimer
        from PySide6.QtWidgets import QApplication

        from appraise.gui import app as gui_app

        for fmt in (QSettings.Format.NativeFormat, QSettings.Format.IniFormat):
            QSettings.setPath(fmt, QSettings.Scope.UserScope, prefs_dir)
        qapp = QApplication.instance() or QApplication(["appraise"])
        outcome: dict[str, object] = {}

        def drive() -> None:
            try:
                outcome["files"] = [
                    p
                    for suffix, size in WINDOW_SIZES.items()
                    for p in _shoot(qapp, args.out, size, suffix)
                ]
            except BaseException as exc:  # noqa: BLE001 - reported after the loop ends
                outcome["error"] = exc
            finally:
                for w in qapp.topLevelWidgets():
                    w.close()
                qapp.quit()

        QTimer.singleShot(0, drive)
        code = gui_app.run(["appraise"], sample=True)
    if "error" in outcome:
        raise outcome["error"]  # type: ignore[misc]
    return code


if __name__ == "__main__":
    sys.exit(main())
